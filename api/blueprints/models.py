"""Models: build (as a job), list, describe, delete, boundary forces, predictions and fields."""

from __future__ import annotations

import numpy as np
from flask import Blueprint, current_app, jsonify, request, url_for
from stressmap_api import queries
from stressmap_api.auth import require_token
from stressmap_api.boundary import boundary_forces
from stressmap_api.builds import build_and_store, check_document
from stressmap_api.jobs import get_jobs
from stressmap_api.limits import run_limited
from stressmap_api.render import output_meta, render
from stressmap_api.store import get_store, new_id

from stressmap.errors import InputError, problem
from stressmap.model import predict_grid, predict_points

__all__ = ["bp", "predict_region", "segment_forces"]

bp = Blueprint("models", __name__)


def _model_links(model_id: str) -> dict:
    return {
        "self": url_for("models.get_model", model_id=model_id),
        "boundary": url_for("models.get_boundary", model_id=model_id),
        "predict": url_for("models.predict", model_id=model_id),
        "field": url_for("models.get_field", model_id=model_id),
    }


@bp.post("/models")
@require_token
def create_model():
    document = queries.json_body(request)
    store = get_store()
    checked = check_document(document, int(current_app.config.get("MAX_MESH_NODES") or 0),
                             data_dir=store.data_dir)
    job_id = new_id()
    model_id = store.add_model(checked["name"], job_id, checked["digest"])
    try:
        get_jobs().submit_as(job_id, "build", build_and_store, str(store.data_dir), model_id,
                             document, int(current_app.config.get("MAX_MESH_NODES") or 0))
    except Exception:
        store.set_model_status(model_id, "failed", "the build could not be queued")
        raise
    job = store.job(job_id)
    job["model_id"] = model_id
    job["links"] = {"job": url_for("jobs.get_job", job_id=job_id), "model": url_for(
        "models.get_model", model_id=model_id)}
    resp = jsonify(job)
    resp.status_code = 202
    resp.headers["Location"] = job["links"]["job"]
    return resp


@bp.get("/models")
def list_models():
    return jsonify({"models": get_store().list_models()})


@bp.get("/models/<model_id>")
def get_model(model_id: str):
    meta = get_store().meta(model_id, with_summary=True)
    meta["links"] = _model_links(model_id)
    return jsonify(meta)


@bp.delete("/models/<model_id>")
@require_token
def delete_model(model_id: str):
    get_store().delete_model(model_id)
    return "", 204


def segment_forces(model, weights=None) -> dict:
    """Boundary segments with kinds and applied edge forces (see :mod:`stressmap_api.boundary`)."""

    return boundary_forces(model, weights)


@bp.get("/models/<model_id>/boundary")
def get_boundary(model_id: str):
    store = get_store()
    model = store.load(model_id)
    meta = store.meta(model_id)
    weights = queries.parse_weights_text(request.args.get("weights"))
    fc = run_limited(segment_forces, model, weights)
    out = {"type": "FeatureCollection", **output_meta(meta, weights)}
    out.update({k: v for k, v in fc.items() if k not in ("type", "features")})
    out["features"] = fc["features"]
    return current_app.response_class(current_app.json.dumps(out), status=200,
                                      content_type="application/geo+json")


def predict_region(model, bbox, spacing_km, polygon=None, weights=None):
    """Grid prediction over a bbox; nodes outside ``polygon`` (if given) are masked."""

    ds = predict_grid(model, bbox=bbox, spacing_km=spacing_km, weights=weights)
    if polygon is not None:
        import shapely

        lon2, lat2 = np.meshgrid(ds["lon"].values, ds["lat"].values)
        ds = _mask_grid(ds, shapely.contains_xy(polygon, lon2, lat2))
    return ds


def _mask_grid(ds, keep_lat_lon: np.ndarray):
    """Set every variable on (lat, lon) outside ``keep`` to NaN ('' for text) and inside False."""
    import xarray as xr

    keep = xr.DataArray(keep_lat_lon, dims=("lat", "lon"),
                        coords={"lat": ds["lat"], "lon": ds["lon"]})
    out = ds.copy()
    for name, var in ds.data_vars.items():
        if not {"lat", "lon"} <= set(var.dims):
            continue
        if var.dtype == bool:
            out[name] = var & keep
        elif var.dtype.kind in ("U", "S", "O"):
            out[name] = var.where(keep, "")
        else:
            out[name] = var.where(keep)
        out[name].attrs = var.attrs
    return out


def _predict_points(model, lon, lat, weights):

    return predict_points(model, lon, lat, weights=weights)


@bp.post("/models/<model_id>/predict")
def predict(model_id: str):
    store = get_store()
    meta = store.meta(model_id)  # 404 for an unknown or malformed id, before reading the body
    body = queries.json_body(request)
    if not isinstance(body, dict):
        raise InputError("the request body must be a JSON object",
                         [problem(f"expected an object with points or region, got "
                                  f"{type(body).__name__}", field="(body)")])
    unknown = sorted(set(body) - {"points", "region", "spacing_km", "weights", "format"})
    if unknown:
        raise InputError("unknown members in the request",
                         [problem(f"unknown member {k!r} (use points or region, spacing_km, "
                                  "weights, format)", field=k) for k in unknown])
    if ("points" in body) == ("region" in body):
        raise InputError("give exactly one of points and region",
                         [problem("a prediction needs either points or region", field="points")])
    fmt = queries.parse_format(body.get("format"))
    weights = queries.parse_weights(body.get("weights"))
    cfg = current_app.config
    if "points" in body:
        if body.get("spacing_km") is not None:
            raise InputError("spacing_km goes with region, not points",
                             [problem("remove spacing_km or use region", field="spacing_km")])
        lon, lat, props = queries.parse_points(body["points"], int(cfg.get("MAX_POINTS") or 0))
        grid, args = False, (lon, lat)
    else:
        bbox, spacing, polygon = queries.parse_region(body["region"], body.get("spacing_km"),
                                                      int(cfg.get("MAX_GRID_POINTS") or 0))
        props, grid = None, True
    model = store.load(model_id)  # 409 unless ready
    if grid:
        ds = run_limited(predict_region, model, bbox, spacing, polygon, weights)
    else:
        ds = run_limited(_predict_points, model, *args, weights)
    stem = f"stressmap-{model_id[:8]}-{'grid' if grid else 'points'}"
    return run_limited(render, ds, fmt, output_meta(meta, weights), grid=grid, model=model,
                       extra_properties=props, stem=stem)


@bp.get("/models/<model_id>/field")
def get_field(model_id: str):
    store = get_store()
    meta = store.meta(model_id)
    cfg = current_app.config
    bbox = queries.parse_bbox_text(request.args.get("bbox"))
    spacing = queries.parse_spacing_text(request.args.get("spacing_km"))
    queries.check_grid(bbox, spacing, int(cfg.get("MAX_GRID_POINTS") or 0))
    fmt = queries.parse_format(request.args.get("format"))
    weights = queries.parse_weights_text(request.args.get("weights"))
    model = store.load(model_id)
    ds = run_limited(predict_region, model, bbox, spacing, None, weights)
    return run_limited(render, ds, fmt, output_meta(meta, weights), grid=True, model=model,
                       stem=f"stressmap-{model_id[:8]}-field")
