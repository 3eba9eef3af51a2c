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

import json

import numpy as np
from flask import Blueprint, Response, current_app, jsonify, request
from stressmap_api import queries
from stressmap_api.jsonio import to_jsonable
from stressmap_api.limits import run_limited
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
from stressmap.formats.indicators import (
    indicators_csv,
    indicators_from_csv_text,
    indicators_from_geojson,
    indicators_geojson,
)
from stressmap.formats.observed import observed_geojson, observed_netcdf_bytes
from stressmap.formats.table import metadata_headers
from stressmap.plot.indicators import comparison_map_png, rose_png

__all__ = ["bp", "COMPARE_FORMATS", "SMOOTH_FORMATS"]

bp = Blueprint("indicators", __name__)

COMPARE_FORMATS = ("json", "geojson", "csv", "png")
SMOOTH_FORMATS = ("geojson", "netcdf")
PICTURES = ("map", "rose")
_COMPARE_MEMBERS = {"indicators", "indicators_csv", "weights", "skip_bad", "format", "picture"}
_SMOOTH_MEMBERS = {"indicators", "indicators_csv", "skip_bad", "bbox", "radius_km", "spacing_km",
                   "min_count", "max_halfwidth_deg", "format"}


def _object_body(allowed: set) -> dict:
    body = queries.json_body(request)
    if not isinstance(body, dict):
        raise InputError("the request body must be a JSON object",
                         [problem(f"expected an object, got {type(body).__name__}", field="(body)")])
    unknown = sorted(set(body) - allowed)
    if unknown:
        raise InputError("unknown members in the request",
                         [problem(f"unknown member {k!r}; allowed: {', '.join(sorted(allowed))}",
                                  field=k) for k in unknown])
    return body


def _choice(value, options, field):
    if value is None:
        return options[0]
    if not isinstance(value, str) or value.lower() not in options:
        raise InputError(f"{field} must be one of {', '.join(options)}",
                         [problem(f"unknown {field} {value!r}; use {', '.join(options)}", field=field)])
    return value.lower()


def _flag(value, field):
    if value is None:
        return False
    if not isinstance(value, bool):
        raise InputError(f"{field} must be true or false",
                         [problem(f"expected a boolean, got {value!r}", field=field)])
    return value


def _number(value, field, default=None, integer=False):
    if value is None and default is not None:
        return default
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(float(value)) \
            or (integer and float(value) != int(value)):
        kind = "a whole number" if integer else "a finite number"
        raise InputError(f"{field} must be {kind}", [problem(f"expected {kind}, got {value!r}", field=field)])
    return int(value) if integer else float(value)


def _indicators(body):
    """Parse the indicators of a request (exactly one of ``indicators`` and ``indicators_csv``)."""

    skip_bad = _flag(body.get("skip_bad"), "skip_bad")
    has_fc, has_csv = "indicators" in body, "indicators_csv" in body
    if has_fc == has_csv:
        raise InputError("give exactly one of indicators (GeoJSON) and indicators_csv (CSV text)",
                         [problem("exactly one of indicators and indicators_csv is needed",
                                  field="indicators")])
    if has_csv:
        if not isinstance(body["indicators_csv"], str):
            raise InputError("indicators_csv must be CSV text",
                             [problem("expected a string", field="indicators_csv")])
        gdf = indicators_from_csv_text(body["indicators_csv"], skip_bad=skip_bad, name="indicators_csv")
    else:
        gdf = indicators_from_geojson(body["indicators"], skip_bad=skip_bad, field="indicators")
    limit = int(current_app.config.get("MAX_POINTS") or 0)
    if limit and len(gdf) > limit:
        raise InputError(f"too many indicators ({len(gdf)}); the limit is {limit}",
                         [problem("split the request", field="indicators")])
    return gdf


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
    body = _object_body(_COMPARE_MEMBERS)
    fmt = _choice(body.get("format", request.args.get("format")), COMPARE_FORMATS, "format")
    picture = _choice(body.get("picture", request.args.get("picture")), PICTURES, "picture")
    weights = queries.parse_weights(body.get("weights"))
    store = get_store()
    model = store.load(model_id)
    info = store.meta(model_id)
    gdf = _indicators(body)
    skipped = gdf.attrs.get("skipped") or []
    meta = {"caution": CAUTION, "model_id": model_id, "build_time": info.get("build_time") or ""}
    result = run_limited(_run_compare, model, gdf, weights, fmt, picture, meta)
    if fmt == "png":
        return Response(result, mimetype="image/png")
    if fmt == "csv":  # a plain table: the caution and the skipped rows travel in headers
        headers = metadata_headers(meta | {"skipped": [
            f"row {p.get('row')}, {p.get('field')}: {p['message']}" for p in skipped]})
        headers["Content-Disposition"] = f'attachment; filename="compare-{model_id[:8]}.csv"'
        return Response(result, mimetype="text/csv", headers=headers)
    result["skipped"] = skipped
    if fmt == "geojson":
        return Response(json.dumps(to_jsonable(result), allow_nan=False), mimetype="application/geo+json")
    return jsonify(result)


def _run_smooth(gdf, bbox, radius_km, spacing_km, min_count, max_halfwidth_deg, max_nodes, fmt):

    ds = observed_grid(gdf, bbox=bbox, radius_km=radius_km, spacing_km=spacing_km, min_count=min_count,
                       max_halfwidth_deg=max_halfwidth_deg, max_nodes=max_nodes)
    return observed_netcdf_bytes(ds) if fmt == "netcdf" else observed_geojson(ds)


@bp.post("/indicators/smooth")
def smooth():
    body = _object_body(_SMOOTH_MEMBERS)
    fmt = _choice(body.get("format", request.args.get("format")), SMOOTH_FORMATS, "format")
    bbox = body.get("bbox")
    if not (isinstance(bbox, list) and len(bbox) == 4
            and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in bbox)):
        raise InputError("bbox must be [west, south, east, north] in degrees",
                         [problem(f"expected four numbers, got {bbox!r}", field="bbox")])
    if "radius_km" not in body:
        raise InputError("radius_km is required", [problem("missing", field="radius_km")])
    radius = _number(body.get("radius_km"), "radius_km")
    spacing = None if body.get("spacing_km") is None else _number(body["spacing_km"], "spacing_km")
    min_count = _number(body.get("min_count"), "min_count", default=DEFAULT_MIN_COUNT, integer=True)
    max_half = _number(body.get("max_halfwidth_deg"), "max_halfwidth_deg",
                       default=DEFAULT_MAX_HALFWIDTH_DEG)
    gdf = _indicators(body)
    max_nodes = int(current_app.config.get("MAX_GRID_POINTS") or 0) or 1_000_000
    result = run_limited(_run_smooth, gdf, bbox, radius, spacing, min_count, max_half, max_nodes, fmt)
    if fmt == "netcdf":
        return Response(result, mimetype="application/x-netcdf",
                        headers={"Content-Disposition": 'attachment; filename="observed-shmax.nc"'})
    result["skipped"] = gdf.attrs.get("skipped") or []
    return Response(json.dumps(to_jsonable(result), allow_nan=False), mimetype="application/geo+json")
