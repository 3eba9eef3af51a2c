"""Models: build (as a job), list, describe, delete, boundary forces, predictions and fields."""

from __future__ import annotations

from flask import Blueprint, current_app, jsonify, request, url_for
from stressmap_api import requests
from stressmap_api.auth import require_token
from stressmap_api.jobs import get_jobs
from stressmap_api.limits import run_limited
from stressmap_api.render import output_meta, render, respond
from stressmap_api.store import get_store, new_id
from stressmap_api.tasks import build_and_store

from stressmap.formats.boundary import boundary_geojson
from stressmap.geo.grid import mask_dataset, polygon_mask
from stressmap.model import predict_grid, predict_points
from stressmap.model.boundary import segment_forces

__all__ = ["bp", "predict_region"]

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
    document = requests.json_body(request)
    store = get_store()
    checked = requests.parse_model_document(document,
                                            int(current_app.config.get("MAX_MESH_NODES") or 0),
                                            data_dir=store.data_dir)
    job_id = new_id()
    model_id = store.add_model(checked["name"], job_id, checked["digest"])
    try:
        get_jobs().submit_as(job_id, "build", build_and_store, str(store.data_dir), model_id,
                             document, int(current_app.config.get("MAX_MESH_NODES") or 0))
    except BaseException:
        store.forget_model(model_id)  # a build never queued leaves no row behind
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


@bp.get("/models/<model_id>/boundary")
def get_boundary(model_id: str):
    store = get_store()
    model = store.load(model_id)
    meta = store.meta(model_id)
    weights = requests.parse_weights_text(request.args.get("weights"))
    segments = run_limited(segment_forces, model, weights)
    return respond(boundary_geojson(segments, output_meta(meta, weights)), "geojson")


def predict_region(model, bbox, spacing_km, polygon=None, weights=None, grid=predict_grid):
    """Grid prediction over a bbox (by ``grid``, e.g. a network's, which adds the plate);
    nodes outside ``polygon`` (if given) are masked."""

    ds = grid(model, bbox, spacing_km, weights)
    if polygon is not None:
        ds = mask_dataset(ds, polygon_mask(ds["lon"].values[None, :], ds["lat"].values[:, None],
                                           polygon))
    return ds


def _predict_points(model, lon, lat, weights):

    return predict_points(model, lon, lat, weights=weights)


@bp.post("/models/<model_id>/predict")
def predict(model_id: str):
    store = get_store()
    meta = store.meta(model_id)  # 404 for an unknown or malformed id, before reading the body
    body = requests.object_body(request, {"points", "region", "spacing_km", "weights", "format"})
    fmt = requests.parse_format(body.get("format"))
    weights = requests.parse_weights(body.get("weights"))
    cfg = current_app.config
    target = requests.parse_target(body, int(cfg.get("MAX_POINTS") or 0),
                                   int(cfg.get("MAX_GRID_POINTS") or 0))
    grid, props = target.grid, target.properties
    model = store.load(model_id)  # 409 unless ready
    if grid:
        ds = run_limited(predict_region, model, target.bbox, target.spacing_km, target.polygon,
                         weights)
    else:
        ds = run_limited(_predict_points, model, target.lon, target.lat, weights)
    stem = f"stressmap-{model_id[:8]}-{'grid' if grid else 'points'}"
    out_meta = output_meta(meta, weights)
    payload = run_limited(render, ds, fmt, out_meta, grid=grid, model=model,
                          extra_properties=props, stem=stem)
    return respond(payload, fmt, stem=stem, meta=out_meta)


@bp.get("/models/<model_id>/field")
def get_field(model_id: str):
    store = get_store()
    meta = store.meta(model_id)
    cfg = current_app.config
    bbox = requests.parse_bbox_text(request.args.get("bbox"))
    spacing = requests.parse_spacing_text(request.args.get("spacing_km"))
    requests.check_grid(bbox, spacing, int(cfg.get("MAX_GRID_POINTS") or 0))
    fmt = requests.parse_format(request.args.get("format"))
    weights = requests.parse_weights_text(request.args.get("weights"))
    model = store.load(model_id)
    ds = run_limited(predict_region, model, bbox, spacing, None, weights)
    out_meta, stem = output_meta(meta, weights), f"stressmap-{model_id[:8]}-field"
    payload = run_limited(render, ds, fmt, out_meta, grid=True, model=model, stem=stem)
    return respond(payload, fmt, stem=stem, meta=out_meta)
