"""Calibration of load-group weights against indicators, and ensembles of force magnitudes.

``POST /models/{id}/calibrate`` answers at once (within the request time limit);
``POST /models/{id}/ensembles`` queues a job (progress at ``/jobs/{job_id}``) whose result is
fetched as GeoJSON, netCDF or PNG from ``GET /models/{id}/ensembles/{ensemble_id}`` (the ensemble
id is the job id). Configuration: ``CALIBRATION_BOUNDS`` (group -> [low, high]) and
``ENSEMBLE_DISTRIBUTIONS`` (group -> spec) give service-wide defaults that requests override;
``MAX_ENSEMBLE_MEMBERS`` and ``MAX_ENSEMBLE_WORK`` (members x points) bound the work of one
request; ``DASK_SCHEDULER`` (an address) runs ensembles on a Dask cluster instead of local threads.
"""

from __future__ import annotations

import json
import logging
import math
import os
from pathlib import Path

import numpy as np
from flask import Blueprint, current_app, jsonify, request, url_for
from stressmap_api import queries
from stressmap_api.auth import require_token
from stressmap_api.jobs import get_jobs
from stressmap_api.limits import run_limited
from stressmap_api.problems import ApiProblem
from stressmap_api.render import MIMETYPES, output_meta
from stressmap_api.store import Store, check_id, get_store, new_id

from stressmap.analyses.calibrate import calibrate
from stressmap.analyses.ensemble import (
    DEFAULT_PERCENTILES,
    ensemble_grid,
    ensemble_points,
    flatten_percentiles,
    validate_distributions,
)
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats import export
from stressmap.formats.indicators import (
    indicators_from_csv_text,
    indicators_from_geojson,
)
from stressmap.model import plate_outline
from stressmap.plot.ensemble import ensemble_png
from stressmap.plot.maps import ensemble_regime_png

__all__ = ["bp", "run_calibration", "run_ensemble_job", "ENSEMBLE_FILE"]

_log = logging.getLogger(__name__)

bp = Blueprint("analysis", __name__)

ENSEMBLE_FILE = "ensemble.nc"
_PROPS_FILE = "properties.json"
_CAL_KEYS = {"indicators", "indicators_csv", "bounds", "reference", "n_bootstrap", "n_random", "n_starts",
             "confidence", "seed", "skip_bad"}
_ENS_KEYS = {"points", "region", "spacing_km", "members", "distributions", "seed", "percentiles"}
_COUNT_LIMITS = {"n_bootstrap": (0, 2000), "n_random": (0, 2000), "n_starts": (1, 64),
                 "members": (1, None), "seed": (0, 2**63 - 1)}


def _object_body() -> dict:
    body = queries.json_body(request)
    if not isinstance(body, dict):
        raise InputError("the request body must be a JSON object",
                         [problem(f"expected an object, got {type(body).__name__}",
                                  field="(body)")])
    return body


def _unknown(body: dict, allowed: set) -> None:
    extra = sorted(set(body) - allowed)
    if extra:
        raise InputError("unknown members in the request",
                         [problem(f"unknown member {k!r}; expected one of "
                                  f"{', '.join(sorted(allowed))}", field=k) for k in extra])


def _count(body: dict, key: str, default: int, upper: int | None = None) -> int:
    value = body.get(key, default)
    lo, hi = _COUNT_LIMITS[key]
    hi = upper if upper is not None else hi
    if isinstance(value, bool) or not isinstance(value, int) or value < lo or (
            hi is not None and value > hi):
        span = f"{lo} to {hi}" if hi is not None else f"at least {lo}"
        raise InputError(f"{key} must be a whole number, {span}",
                         [problem(f"got {value!r}", field=key)])
    return int(value)


def _indicators(body: dict, skip_bad: bool):
    """The request's indicators: ``indicators`` (GeoJSON) or ``indicators_csv`` (CSV text), as
    ``POST /models/{id}/compare`` takes them."""

    if ("indicators" in body) == ("indicators_csv" in body):
        raise InputError("give exactly one of indicators and indicators_csv",
                         [problem("indicators (a GeoJSON FeatureCollection) or indicators_csv "
                                  "(CSV text)", field="indicators")])
    if "indicators_csv" in body:
        text = body["indicators_csv"]
        if not isinstance(text, str):
            raise InputError("indicators_csv must be CSV text",
                             [problem(f"got {type(text).__name__}", field="indicators_csv")])
        return indicators_from_csv_text(text, skip_bad=skip_bad, name="indicators_csv")
    value = body["indicators"]
    if not isinstance(value, dict):
        raise InputError("indicators must be a GeoJSON FeatureCollection",
                         [problem(f"got {type(value).__name__}; CSV text goes in indicators_csv",
                                  field="indicators")])
    return indicators_from_geojson(value, skip_bad=skip_bad, field="indicators")


def run_calibration(model, indicators, options: dict) -> dict:
    """Calibrate and serialise (runs on the compute pool)."""

    result = calibrate(model, indicators, **options)
    out = result.to_dict()
    ids = (indicators["id"].astype(str).tolist() if "id" in indicators.columns
           else [str(i + 1) for i in range(len(indicators))])
    rows = indicators.index.to_numpy()
    out["indicators"] = [
        {"id": ids[i], "row": int(rows[i]) if np.issubdtype(rows.dtype, np.integer) else i + 1,
         "lon": float(indicators.geometry.x.iloc[i]), "lat": float(indicators.geometry.y.iloc[i]),
         "observed_azimuth_deg": float(indicators["shmax_azimuth_deg"].iloc[i]),
         "predicted_azimuth_deg": _num(result.predicted_deg[i]),
         "residual_deg": _num(result.residuals_deg[i])}
        for i in range(len(indicators))
    ]
    return out


def _num(value):
    value = float(value)
    return value if math.isfinite(value) else None


@bp.post("/models/<model_id>/calibrate")
def calibrate_model(model_id: str):
    check_id(model_id)
    body = _object_body()
    _unknown(body, _CAL_KEYS)
    skip_bad = body.get("skip_bad", False)
    if not isinstance(skip_bad, bool):
        raise InputError("skip_bad must be true or false", [problem(f"got {skip_bad!r}",
                                                                    field="skip_bad")])
    bounds = dict(current_app.config.get("CALIBRATION_BOUNDS") or {})
    req_bounds = body.get("bounds") or {}
    if not isinstance(req_bounds, dict):
        raise InputError("bounds must be an object of group -> [low, high]",
                         [problem(f"got {type(req_bounds).__name__}", field="bounds")])
    bounds.update(req_bounds)
    reference = body.get("reference")
    if reference is not None and not isinstance(reference, str):
        raise InputError("reference must be a load group name", [problem(f"got {reference!r}",
                                                                         field="reference")])
    confidence = body.get("confidence", 0.95)
    if isinstance(confidence, bool) or not isinstance(confidence, (int, float)) \
            or not 0 < confidence < 1:
        raise InputError("confidence must be a number strictly between 0 and 1",
                         [problem(f"got {confidence!r}", field="confidence")])
    options = {
        "bounds": bounds, "reference": reference, "confidence": float(confidence),
        "n_bootstrap": _count(body, "n_bootstrap", 200),
        "n_random": _count(body, "n_random", 100),
        "n_starts": _count(body, "n_starts", 8),
        "seed": _count(body, "seed", 0),
    }
    indicators = _indicators(body, skip_bad)
    max_points = int(current_app.config.get("MAX_POINTS") or 0)
    if max_points and len(indicators) > max_points:
        raise InputError(f"too many indicators: {len(indicators):,} (limit {max_points:,})",
                         [problem("split the request", field="indicators")])
    store = get_store()
    model = store.load(model_id)
    meta = store.meta(model_id)
    out = run_limited(run_calibration, model, indicators, options)
    out["skipped"] = indicators.attrs.get("skipped") or []
    out.update(output_meta(meta))
    return jsonify(out)


# ----------------------------------------------------------------------------- ensembles

def _ensemble_links(model_id: str, ensemble_id: str, prefix: str) -> dict:
    base = f"{prefix}/models/{model_id}/ensembles/{ensemble_id}"
    return {"job": f"{prefix}/jobs/{ensemble_id}", "geojson": f"{base}?format=geojson",
            "netcdf": f"{base}?format=netcdf", "png": f"{base}?format=png"}


def run_ensemble_job(data_dir: str, model_id: str, job_id: str, spec: dict, progress=None,
                     scheduler: str | None = None, prefix: str = "/api/v1") -> dict:
    """The ensemble job (module level, so a worker process can run it): compute, store, report.

    Writes ``<data_dir>/jobs/<job_id>/ensemble.nc`` atomically (temporary file, fsync, rename)
    and returns a JSON-able summary with the links of the result.
    """

    store = Store(data_dir, cache_size=0)
    model = store.load(model_id)
    meta = store.meta(model_id)
    kwargs = dict(members=spec["members"], distributions=spec["distributions"],
                  seed=spec["seed"], percentiles=spec["percentiles"], progress=progress,
                  scheduler=scheduler)
    if "points" in spec:
        ds = ensemble_points(model, np.asarray(spec["points"][0]), np.asarray(spec["points"][1]),
                             **kwargs)
    else:
        ds = ensemble_grid(model, spec["bbox"], spec["spacing_km"], **kwargs)
        if spec.get("polygon_wkt"):
            ds = _mask_outside(ds, spec["polygon_wkt"])
    out_dir = store.job_dir(job_id)
    attrs = {"caution": CAUTION, "model_id": model_id, "model_name": meta.get("name") or "",
             "build_time": meta.get("build_time") or ""}
    data = export.netcdf_bytes(ds, attrs)
    tmp = out_dir / (ENSEMBLE_FILE + ".tmp")
    with open(tmp, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, out_dir / ENSEMBLE_FILE)
    inside = np.asarray(ds["inside"].values).astype(bool)
    return {
        "model_id": model_id,
        "ensemble_id": job_id,
        "members": int(spec["members"]),
        "seed": int(spec["seed"]),
        "points": int(inside.size),
        "points_inside": int(inside.sum()),
        "mean_shmax_std_deg": _num(np.nanmean(np.where(inside, ds["shmax_std_deg"].values, np.nan))
                                   if inside.any() else float("nan")),
        "links": _ensemble_links(model_id, job_id, prefix),
        "caution": CAUTION,
    }


def _mask_outside(ds, polygon_wkt: str):
    """Grid nodes outside the request polygon: inside = 0 and NaN / "" statistics."""
    import shapely

    poly = shapely.from_wkt(polygon_wkt)
    lon2, lat2 = np.meshgrid(ds["lon"].values, ds["lat"].values)
    keep = shapely.contains_xy(poly, np.mod(lon2 + 180.0, 360.0) - 180.0, lat2) | \
        shapely.contains_xy(poly, lon2, lat2)
    out = ds.copy()
    for name, var in ds.data_vars.items():
        if var.dims[:2] != ("lat", "lon"):
            continue
        mask = keep.reshape(keep.shape + (1,) * (var.ndim - 2))
        if name == "inside":
            out[name] = (var.dims, np.where(mask, var.values, 0).astype(var.dtype), var.attrs)
        elif var.dtype.kind in "USO":
            out[name] = (var.dims, np.where(mask, var.values, ""), var.attrs)
        else:
            out[name] = (var.dims, np.where(mask, var.values, np.nan), var.attrs)
    return out


@bp.post("/models/<model_id>/ensembles")
@require_token
def create_ensemble(model_id: str):

    check_id(model_id)
    body = _object_body()
    _unknown(body, _ENS_KEYS)
    cfg = current_app.config
    if "members" not in body:
        raise InputError("members is required", [problem("number of ensemble members",
                                                         field="members")])
    members = _count(body, "members", 1000, int(cfg.get("MAX_ENSEMBLE_MEMBERS") or 10_000))
    if ("points" in body) == ("region" in body):
        raise InputError("give exactly one of points and region",
                         [problem("an ensemble needs either points or region", field="points")])
    spec: dict = {"members": members, "seed": _count(body, "seed", 0)}
    props = None
    if "points" in body:
        if body.get("spacing_km") is not None:
            raise InputError("spacing_km goes with region, not points",
                             [problem("remove spacing_km or use region", field="spacing_km")])
        lon, lat, props = queries.parse_points(body["points"], int(cfg.get("MAX_POINTS") or 0))
        spec["points"] = [lon.tolist(), lat.tolist()]
        n_points = lon.size
    else:
        bbox, spacing, polygon = queries.parse_region(body["region"], body.get("spacing_km"),
                                                      int(cfg.get("MAX_GRID_POINTS") or 0))
        spec.update(bbox=list(bbox), spacing_km=spacing,
                    polygon_wkt=polygon.wkt if polygon is not None else None)
        n_points = queries.grid_size(bbox, spacing)
    work_limit = int(cfg.get("MAX_ENSEMBLE_WORK") or 2_000_000_000)
    if members * n_points > work_limit:
        raise InputError(f"the ensemble is too large: {members:,} members x {n_points:,} points",
                         [problem(f"members x points must not exceed {work_limit:,}",
                                  field="members")])
    percentiles = body.get("percentiles", list(DEFAULT_PERCENTILES))
    if not (isinstance(percentiles, list) and 0 < len(percentiles) <= 20 and all(
            queries._is_number(q) and 0 <= q <= 100 for q in percentiles)):
        raise InputError("percentiles must be a list of 1 to 20 numbers between 0 and 100",
                         [problem(f"got {percentiles!r}"[:80], field="percentiles")])
    spec["percentiles"] = [float(q) for q in percentiles]
    distributions = dict(cfg.get("ENSEMBLE_DISTRIBUTIONS") or {})
    req = body.get("distributions") or {}
    if not isinstance(req, dict):
        raise InputError("distributions must be an object of group -> spec",
                         [problem(f"got {type(req).__name__}", field="distributions")])
    distributions.update(req)
    store = get_store()
    model = store.load(model_id)
    validate_distributions(distributions, model.groups)
    spec["distributions"] = distributions
    job_id = new_id()
    prefix = url_for("analysis.create_ensemble", model_id=model_id).split("/models/")[0]
    get_jobs().submit_as(job_id, "ensemble", run_ensemble_job, str(store.data_dir), model_id,
                         job_id, spec, scheduler=cfg.get("DASK_SCHEDULER") or None, prefix=prefix)
    if props is not None:
        (store.job_dir(job_id) / _PROPS_FILE).write_text(json.dumps(props), encoding="utf-8")
    job = store.job(job_id)
    job["model_id"] = model_id
    job["ensemble_id"] = job_id
    job["links"] = _ensemble_links(model_id, job_id, prefix)
    resp = jsonify(job)
    resp.status_code = 202
    resp.headers["Location"] = job["links"]["job"]
    return resp


def _load_result(path: Path):
    import xarray as xr

    with xr.open_dataset(path) as ds:
        ds = ds.load()
    ds["inside"] = ds["inside"].astype(bool)
    if "regime" in ds:
        ds["regime"] = ds["regime"].fillna("").astype(str)
    return ds


#: PNG pictures of an ensemble: the SHmax spread map, or the regime-probability maps.
ENSEMBLE_PICTURES = ("spread", "regime")


def render_ensemble(path: Path, fmt: str, meta: dict, model, props,
                    picture: str = "spread") -> tuple[bytes, dict]:
    """Body and headers of a stored ensemble in ``fmt`` (runs on the compute pool)."""

    stem = f"stressmap-{meta['model_id'][:8]}-ensemble"
    if fmt == "netcdf":
        return path.read_bytes(), {"Content-Disposition": f'attachment; filename="{stem}.nc"'}
    ds = _load_result(path)
    extra = {"members": int(ds.attrs.get("members", 0)), "seed": int(ds.attrs.get("seed", 0)),
             "distributions": json.loads(ds.attrs.get("distributions") or "{}")}
    if fmt == "png":
        caption = (f"Model {meta['model_id']} - {meta.get('model_name')} - built "
                   f"{meta.get('build_time')}; {extra['members']} members, seed {extra['seed']}")
        if picture == "regime":
            png = ensemble_regime_png(ds, plate_outline(model), caption=caption)
            stem += "-regime"
        else:
            png = ensemble_png(ds, plate_outline(model), caption=caption)
        return png, {"Content-Disposition": f'inline; filename="{stem}.png"'}
    flat = flatten_percentiles(ds)
    doc_meta = {**meta, **extra}
    if "point" in flat.dims:
        doc = export.points_geojson(flat, extra_properties=props, meta=doc_meta)
    else:
        doc = export.grid_geojson(flat, meta=doc_meta)
    return current_app.json.dumps(doc).encode("utf-8"), {}


@bp.get("/models/<model_id>/ensembles/<ensemble_id>")
def get_ensemble(model_id: str, ensemble_id: str):
    check_id(model_id)
    check_id(ensemble_id, "ensemble")
    fmt = request.args.get("format", "geojson").lower()
    if fmt not in ("geojson", "netcdf", "png"):
        raise InputError("format must be one of geojson, netcdf, png",
                         [problem(f"unknown format {fmt[:20]!r}", field="format")])
    picture = request.args.get("picture", "spread").lower()
    if picture not in ENSEMBLE_PICTURES:
        raise InputError("picture must be one of " + ", ".join(ENSEMBLE_PICTURES),
                         [problem(f"unknown picture {picture[:20]!r}", field="picture")])
    store = get_store()
    job = store.job(ensemble_id)
    result = job.get("result") or {}
    if job["kind"] != "ensemble" or (job["status"] == "done"
                                     and result.get("model_id") != model_id):
        raise ApiProblem(404, "Not Found",
                         f"model {model_id} has no ensemble {ensemble_id}")
    if job["status"] in ("queued", "running"):
        raise ApiProblem(409, "Ensemble not finished",
                         f"the ensemble is {job['status']} ({100 * job['progress']:.0f}% done); "
                         f"follow /jobs/{ensemble_id}", headers={"Retry-After": "2"})
    if job["status"] == "failed":
        error = job.get("error") or {}
        raise ApiProblem(409, "Ensemble failed", error.get("reason", "the job failed"),
                         error.get("errors"))
    path = store.jobs_dir / ensemble_id / ENSEMBLE_FILE
    if not path.is_file():
        raise ApiProblem(404, "Not Found", f"the result of ensemble {ensemble_id} is gone")
    props_path = store.jobs_dir / ensemble_id / _PROPS_FILE
    props = json.loads(props_path.read_text(encoding="utf-8")) if props_path.is_file() else None
    model = store.load(model_id) if fmt == "png" else None
    meta = output_meta(store.meta(model_id))
    body, headers = run_limited(render_ensemble, path, fmt, meta, model, props, picture)
    return current_app.response_class(body, status=200, content_type=MIMETYPES[fmt],
                                      headers=headers)
