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
import math
from pathlib import Path

import numpy as np
import xarray as xr
from flask import Blueprint, current_app, request, url_for
from stressmap_api import requests
from stressmap_api.auth import require_token
from stressmap_api.jobs import get_jobs
from stressmap_api.limits import run_isolated, run_limited
from stressmap_api.problems import ApiProblem
from stressmap_api.render import output_meta, picture_text, respond
from stressmap_api.store import check_id, get_store, new_id
from stressmap_api.tasks import ENSEMBLE_FILE, ensemble_links, run_ensemble_job

from stressmap.analyses.calibrate import calibrate
from stressmap.analyses.ensemble import (
    DEFAULT_PERCENTILES,
    flatten_percentiles,
    validate_distributions,
)
from stressmap.errors import InputError, problem
from stressmap.formats import export
from stressmap.formats.hdf5lock import NETCDF_LOCK
from stressmap.model import plate_outline
from stressmap.plot.ensemble import ensemble_png
from stressmap.plot.maps import ensemble_regime_png

__all__ = ["ENSEMBLE_FILE", "bp", "run_calibration"]

bp = Blueprint("analysis", __name__)

_PROPS_FILE = "properties.json"
_CAL_KEYS = {"indicators", "indicators_csv", "bounds", "reference", "n_bootstrap", "n_random", "n_starts",
             "confidence", "seed", "skip_bad"}
_ENS_KEYS = {"points", "region", "spacing_km", "members", "distributions", "seed", "percentiles"}
_SEED_MAX = 2**63 - 1


def run_calibration(model, indicators, options: dict) -> dict:
    """Calibrate and serialise (runs in a compute process that ends at the time limit)."""

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
    body = requests.object_body(request, _CAL_KEYS)
    skip_bad = requests.flag(body.get("skip_bad"), "skip_bad")
    bounds = dict(current_app.config.get("CALIBRATION_BOUNDS") or {})
    bounds.update(requests.parse_bounds(body.get("bounds")))
    reference = body.get("reference")
    if reference is not None and not isinstance(reference, str):
        raise InputError("reference must be a load group name",
                         [problem(f"got {type(reference).__name__}", field="reference")])
    confidence = body.get("confidence", 0.95)
    if isinstance(confidence, bool) or not isinstance(confidence, (int, float)) \
            or not 0 < confidence < 1:
        raise InputError("confidence must be a number strictly between 0 and 1",
                         [problem(f"got {confidence!r}"[:80], field="confidence")])
    options = {
        "bounds": bounds, "reference": reference, "confidence": float(confidence),
        "n_bootstrap": requests.count(body.get("n_bootstrap"), "n_bootstrap", 200, 0, 2000),
        "n_random": requests.count(body.get("n_random"), "n_random", 100, 0, 2000),
        "n_starts": requests.count(body.get("n_starts"), "n_starts", 8, 1, 64),
        "seed": requests.count(body.get("seed"), "seed", 0, 0, _SEED_MAX),
    }
    indicators = requests.parse_indicators(body, skip_bad,
                                           int(current_app.config.get("MAX_POINTS") or 0))
    store = get_store()
    model = store.load(model_id)
    meta = store.meta(model_id)
    out = run_isolated(run_calibration, model, indicators, options)
    out["skipped"] = indicators.attrs.get("skipped") or []
    out.update(output_meta(meta))
    return respond(out, "json")


# ----------------------------------------------------------------------------- ensembles

@bp.post("/models/<model_id>/ensembles")
@require_token
def create_ensemble(model_id: str):

    check_id(model_id)
    body = requests.object_body(request, _ENS_KEYS)
    cfg = current_app.config
    if "members" not in body:
        raise InputError("members is required", [problem("number of ensemble members",
                                                         field="members")])
    members = requests.count(body.get("members"), "members", 1000, 1,
                             int(cfg.get("MAX_ENSEMBLE_MEMBERS") or 10_000))
    spec: dict = {"members": members,
                  "seed": requests.count(body.get("seed"), "seed", 0, 0, _SEED_MAX)}
    target = requests.parse_target(body, int(cfg.get("MAX_POINTS") or 0),
                                   int(cfg.get("MAX_GRID_POINTS") or 0), "an ensemble")
    props = target.properties
    if target.grid:
        spec.update(bbox=list(target.bbox), spacing_km=target.spacing_km,
                    polygon_wkt=target.polygon.wkt if target.polygon is not None else None)
    else:
        spec["points"] = [target.lon.tolist(), target.lat.tolist()]
    n_points = target.size
    work_limit = int(cfg.get("MAX_ENSEMBLE_WORK") or 2_000_000_000)
    if members * n_points > work_limit:
        raise InputError(f"the ensemble is too large: {members:,} members x {n_points:,} points",
                         [problem(f"members x points must not exceed {work_limit:,}",
                                  field="members")])
    spec["percentiles"] = requests.parse_percentiles(body.get("percentiles"),
                                                     DEFAULT_PERCENTILES)
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
    job["links"] = ensemble_links(model_id, job_id, prefix)
    return respond(job, "json", status=202, headers={"Location": job["links"]["job"]})


def _load_result(path: Path):
    with NETCDF_LOCK, xr.open_dataset(path) as ds:
        ds = ds.load()
    ds["inside"] = ds["inside"].astype(bool)
    if "regime" in ds:
        ds["regime"] = ds["regime"].fillna("").astype(str)
    return ds


#: PNG pictures of an ensemble: the SHmax spread map, or the regime-probability maps.
ENSEMBLE_PICTURES = ("spread", "regime")


def render_ensemble(path: Path, fmt: str, meta: dict, model, props, picture: str = "spread"):
    """Payload of a stored ensemble in ``fmt`` (runs on the compute pool)."""

    if fmt == "netcdf":
        return path.read_bytes()
    ds = _load_result(path)
    extra = {"members": int(ds.attrs.get("members", 0)), "seed": int(ds.attrs.get("seed", 0)),
             "distributions": json.loads(ds.attrs.get("distributions") or "{}")}
    if fmt == "png":
        caption = (f"Model {meta['model_id']} - {picture_text(meta.get('model_name'), 80)} - "
                   f"built {meta.get('build_time')}; {extra['members']} members, "
                   f"seed {extra['seed']}")
        draw = ensemble_regime_png if picture == "regime" else ensemble_png
        return draw(ds, plate_outline(model), caption=caption)
    flat = flatten_percentiles(ds)
    doc_meta = {**meta, **extra}
    if "point" in flat.dims:
        return export.points_geojson(flat, extra_properties=props, meta=doc_meta)
    return export.grid_geojson(flat, meta=doc_meta)


@bp.get("/models/<model_id>/ensembles/<ensemble_id>")
def get_ensemble(model_id: str, ensemble_id: str):
    check_id(model_id)
    check_id(ensemble_id, "ensemble")
    fmt = requests.choice(request.args.get("format"), ("geojson", "netcdf", "png"), "format")
    picture = requests.choice(request.args.get("picture"), ENSEMBLE_PICTURES, "picture")
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
    payload = run_limited(render_ensemble, path, fmt, meta, model, props, picture)
    stem = f"stressmap-{model_id[:8]}-ensemble" + ("-regime" if fmt == "png"
                                                   and picture == "regime" else "")
    return respond(payload, fmt, stem=stem)
