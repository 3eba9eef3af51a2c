"""Stress indicators: model-data comparison and the gridded observed field.

``POST /models/{model_id}/compare`` -- indicators (a GeoJSON FeatureCollection in ``indicators``
or CSV text in ``indicators_csv``) compared with a stored model: per-indicator predicted SHmax,
misfit and regime agreement, and the summary. Answers as JSON (default), GeoJSON, CSV or PNG
(``picture``: map or rose).

``POST /indicators/smooth`` -- the observed SHmax field on a grid (``bbox``, ``radius_km``,
optional ``spacing_km``, ``min_count``, ``max_halfwidth_deg``) as GeoJSON (default) or CF
netCDF.

Views are thin: validate, call the core (:mod:`stressmap.analyses.indicators`, :mod:`stressmap.analyses.compare`,
:mod:`stressmap.analyses.observed`) within the request time limit, serialise. Every answer carries the
caution; rows skipped with ``skip_bad`` are listed in ``skipped``.
"""

from __future__ import annotations

from flask import Blueprint, current_app, request
from stressmap_api import requests
from stressmap_api.jsonio import to_jsonable
from stressmap_api.limits import run_limited
from stressmap_api.render import respond
from stressmap_api.store import check_id, get_store

from stressmap.analyses.compare import COMPARISON_COLUMNS, compare
from stressmap.analyses.indicators import CONVERT_COLUMNS
from stressmap.analyses.observed import (
    DEFAULT_MAX_HALFWIDTH_DEG,
    DEFAULT_MIN_COUNT,
    observed_grid,
)
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats.indicators import indicators_csv, indicators_geojson
from stressmap.formats.observed import observed_geojson, observed_netcdf_bytes
from stressmap.plot.indicators import comparison_map_png, rose_png

__all__ = ["COMPARE_FORMATS", "SMOOTH_FORMATS", "bp"]

bp = Blueprint("indicators", __name__)

COMPARE_FORMATS = ("json", "geojson", "csv", "png")
SMOOTH_FORMATS = ("geojson", "netcdf")
PICTURES = ("map", "rose")
_COMPARE_MEMBERS = {"indicators", "indicators_csv", "weights", "skip_bad", "format", "picture"}
_SMOOTH_MEMBERS = {"indicators", "indicators_csv", "skip_bad", "bbox", "radius_km", "spacing_km",
                   "min_count", "max_halfwidth_deg", "format"}


def _indicators(body):
    """The indicators of a request (exactly one of ``indicators`` and ``indicators_csv``)."""
    return requests.parse_indicators(body, requests.flag(body.get("skip_bad"), "skip_bad"),
                                     int(current_app.config.get("MAX_POINTS") or 0))


def _compare_columns(table):

    lead = CONVERT_COLUMNS + COMPARISON_COLUMNS
    return lead + [c for c in table.columns if c not in lead and c not in ("geometry", "shmax_span_deg")]


def _run_compare(model, gdf, weights, fmt, picture, meta):

    table, summary = compare(model, gdf, weights=weights)
    summary["model_id"] = meta["model_id"]
    flat = table.reset_index(drop=True)
    cols = _compare_columns(flat)
    if fmt == "png":

        caption = f"Model {meta['model_id']}, built {meta.get('build_time') or ''}"
        if picture == "map":
            return comparison_map_png(model, table, caption=caption)
        inside = table["inside"].to_numpy(bool)
        return rose_png(table["shmax_azimuth_deg"].to_numpy(float)[inside],
                        table["predicted_shmax_azimuth_deg"].to_numpy(float)[inside],
                        table["weight"].to_numpy(float)[inside], caption=caption)
    if fmt == "csv":
        return indicators_csv(flat, cols, meta)
    if fmt == "geojson":
        return indicators_geojson(flat, cols, to_jsonable(meta | {"summary": summary}))
    return {"caution": CAUTION, "model_id": meta["model_id"], "summary": summary,
            "indicators": indicators_geojson(flat, cols)}


@bp.post("/models/<model_id>/compare")
def compare_model(model_id: str):
    check_id(model_id)
    body = requests.object_body(request, _COMPARE_MEMBERS)
    fmt = requests.choice(body.get("format", request.args.get("format")), COMPARE_FORMATS,
                          "format")
    picture = requests.choice(body.get("picture", request.args.get("picture")), PICTURES,
                              "picture")
    weights = requests.parse_weights(body.get("weights"))
    store = get_store()
    model = store.load(model_id)
    info = store.meta(model_id)
    gdf = _indicators(body)
    skipped = gdf.attrs.get("skipped") or []
    meta = {"caution": CAUTION, "model_id": model_id, "build_time": info.get("build_time") or ""}
    result = run_limited(_run_compare, model, gdf, weights, fmt, picture, meta)
    stem = f"compare-{model_id[:8]}"
    if fmt == "csv":  # a plain table: the caution and the skipped rows travel in headers
        return respond(result, fmt, stem=stem, meta=meta | {"skipped": [
            f"row {p.get('row')}, {p.get('field')}: {p['message']}" for p in skipped]})
    if fmt != "png":
        result["skipped"] = skipped
    return respond(result, fmt, stem=stem)


def _run_smooth(gdf, bbox, radius_km, spacing_km, min_count, max_halfwidth_deg, max_nodes, fmt):

    ds = observed_grid(gdf, bbox=bbox, radius_km=radius_km, spacing_km=spacing_km, min_count=min_count,
                       max_halfwidth_deg=max_halfwidth_deg, max_nodes=max_nodes)
    return observed_netcdf_bytes(ds) if fmt == "netcdf" else observed_geojson(ds)


@bp.post("/indicators/smooth")
def smooth():
    body = requests.object_body(request, _SMOOTH_MEMBERS)
    fmt = requests.choice(body.get("format", request.args.get("format")), SMOOTH_FORMATS,
                          "format")
    bbox = requests.parse_smooth_bbox(body.get("bbox"))
    if "radius_km" not in body:
        raise InputError("radius_km is required", [problem("missing", field="radius_km")])
    radius = requests.number(body.get("radius_km"), "radius_km", positive=True)
    spacing = (None if body.get("spacing_km") is None
               else requests.parse_spacing(body["spacing_km"], "spacing_km"))
    min_count = requests.count(body.get("min_count"), "min_count", DEFAULT_MIN_COUNT, low=1)
    max_half = requests.number(body.get("max_halfwidth_deg"), "max_halfwidth_deg",
                               DEFAULT_MAX_HALFWIDTH_DEG, positive=True)
    gdf = _indicators(body)
    max_nodes = int(current_app.config.get("MAX_GRID_POINTS") or 0) or 1_000_000
    result = run_limited(_run_smooth, gdf, bbox, radius, spacing, min_count, max_half, max_nodes, fmt)
    if fmt != "netcdf":
        result["skipped"] = gdf.attrs.get("skipped") or []
    return respond(result, fmt, stem="observed-shmax")
