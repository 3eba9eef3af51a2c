"""Networks: upload a typed boundary network, list it, get its derived plates, predict over it.

A network is checked at upload (422 with every problem and its position); its plates are built
on demand: a prediction over a network whose plates are not all built starts (or joins) one
build job and answers 202 with the job; once every plate is built, predictions are answered at
once, with a ``plate`` column naming the plate under each point.
"""

from __future__ import annotations

import json

import numpy as np
from flask import Blueprint, current_app, jsonify, request, url_for
from stressmap_api import network_store, requests
from stressmap_api.auth import require_token
from stressmap_api.blueprints.models import predict_region
from stressmap_api.jobs import get_jobs
from stressmap_api.limits import run_limited
from stressmap_api.network_store import build_network_job, get_network_store
from stressmap_api.render import output_meta, render, respond
from stressmap_api.store import get_store

from stressmap.errors import InputError, NotFoundError, problem
from stressmap.formats.network_geojson import plates_geojson
from stressmap.io.networkdir import derive
from stressmap.model.network_predict import predict_network_grid, predict_network_points
from stressmap.model.preflight import uniform_mesh_nodes

__all__ = ["bp", "init_app", "MAX_NETWORK_VERTICES"]

bp = Blueprint("networks", __name__)

#: Most line positions accepted in an uploaded network (checked before it is parsed).
MAX_NETWORK_VERTICES = 50_000
_DEFAULT_EDGE_KM = 50.0


def init_app(app) -> None:
    network_store.init_app(app)


def _links(network_id: str) -> dict:
    return {"self": url_for("networks.get_network", network_id=network_id),
            "plates": url_for("networks.get_plates", network_id=network_id),
            "build": url_for("networks.build", network_id=network_id),
            "predict": url_for("networks.predict", network_id=network_id)}


def _check_upload(document) -> None:
    """Size limits first, then every problem of the network and of its plates (422)."""
    if not isinstance(document, dict):
        raise InputError("the request body must be a network document (a JSON object)",
                         [problem(f"got {type(document).__name__}", field="(body)")])
    n = requests.line_vertex_count(document.get("lines") if isinstance(document, dict)
                                   else None)
    if n > MAX_NETWORK_VERTICES:
        raise InputError("the network has too many line positions",
                         [problem(f"{n:,} positions; this service takes at most "
                                  f"{MAX_NETWORK_VERTICES:,} (simplify the lines)",
                                  field="lines.features")])
    net, docs, _ = derive(document)
    area = {f.name: f.area_km2 for f in net.faces if f.name is not None}
    limit = int(current_app.config.get("MAX_MESH_NODES") or 0)
    probs = []
    for name, doc in docs.items():
        ridge = doc.get("ridge_push") or {}
        if "age_grid" in ridge or ridge.get("age_source") == "grid":
            probs.append(problem("the service reads no server files named in a document; give "
                                 "ages with age_source 'provinces' or 'ridge_distance'",
                                 field=f"plates.{name}.ridge_push.age_grid"))
        edge = float((doc.get("mesh") or {}).get("edge_km") or _DEFAULT_EDGE_KM)
        est = uniform_mesh_nodes(area[name], edge)
        if limit and est > limit:
            probs.append(problem(f"plate {name!r}: mesh.edge_km {edge:g} km would give about "
                                 f"{est:,.0f} mesh nodes; this service builds at most {limit:,} "
                                 "per plate (use a larger edge_km)",
                                 field=f"plates.{name}.mesh.edge_km"))
    if probs:
        raise InputError("the network cannot be built by this service", probs)


@bp.post("/networks")
@require_token
def create_network():
    document = requests.json_body(request)
    _check_upload(document)
    network_id = get_network_store().add(document)
    meta = get_network_store().meta(network_id)
    meta["links"] = _links(network_id)
    resp = jsonify(meta)
    resp.status_code = 201
    resp.headers["Location"] = meta["links"]["self"]
    return resp


@bp.get("/networks")
def list_networks():
    return jsonify({"networks": get_network_store().list()})


@bp.get("/networks/<network_id>")
def get_network(network_id: str):
    meta = get_network_store().meta(network_id)
    meta["links"] = _links(network_id)
    return jsonify(meta)


@bp.delete("/networks/<network_id>")
@require_token
def delete_network(network_id: str):
    get_network_store().delete(network_id)
    return "", 204


@bp.get("/networks/<network_id>/plates")
def get_plates(network_id: str):
    store = get_network_store()
    meta = store.meta(network_id)
    document = json.loads((store.path(network_id) / "network.json").read_text(encoding="utf-8"))
    net, docs, keys = run_limited(derive, document)
    fc = plates_geojson(net, docs, keys)
    built = {p["name"] for p in meta["plates"] if p["built"]}
    for f in fc["features"]:
        f["properties"]["built"] = f["properties"]["plate"] in built
    out = {"type": "FeatureCollection", "network_id": network_id, "network_name": meta["name"],
           "features": fc["features"]}
    return current_app.response_class(current_app.json.dumps(out), status=200,
                                      content_type="application/geo+json")


def _build_job(network_id: str) -> dict:
    """The job building the network's missing plates: the one under way, or a new one."""
    nstore = get_network_store()
    meta = nstore.meta(network_id)
    jobs = get_store()
    if meta.get("build_job"):
        try:
            job = jobs.job(meta["build_job"])
            if job["status"] in ("queued", "running"):
                return job
        except NotFoundError:
            pass
    data_dir = str(jobs.data_dir)
    job_id = get_jobs().submit("network-build", build_network_job, data_dir, network_id)
    nstore.set_build_job(network_id, job_id)
    return jobs.job(job_id)


def _accepted(network_id: str, job: dict):
    job = dict(job)
    job["network_id"] = network_id
    job["links"] = {"job": url_for("jobs.get_job", job_id=job["id"]),
                    "network": url_for("networks.get_network", network_id=network_id)}
    resp = jsonify(job)
    resp.status_code = 202
    resp.headers["Location"] = job["links"]["job"]
    return resp


@bp.post("/networks/<network_id>/build")
@require_token
def build(network_id: str):
    meta = get_network_store().meta(network_id)
    if meta["status"] == "ready":
        meta["links"] = _links(network_id)
        return jsonify(meta)
    return _accepted(network_id, _build_job(network_id))


def _points(model, lon, lat, weights):
    return predict_network_points(model, lon, lat, weights=weights)


def _region(model, bbox, spacing, polygon, weights):
    ds = predict_region(model, bbox, spacing, polygon, weights, grid=predict_network_grid)
    ds["plate"] = (("lat", "lon"), np.where(ds["inside"].values, ds["plate"].values,
                                            "").astype(object),
                   {"long_name": "plate the grid node lies on (empty: on no plate)"})
    return ds


@bp.post("/networks/<network_id>/predict")
def predict(network_id: str):
    nstore = get_network_store()
    meta = nstore.meta(network_id)  # 404 first
    body = requests.object_body(request, {"points", "region", "spacing_km", "weights", "format"})
    fmt = requests.parse_format(body.get("format"))
    weights = requests.parse_weights(body.get("weights"))
    cfg = current_app.config
    target = requests.parse_target(body, int(cfg.get("MAX_POINTS") or 0),
                                   int(cfg.get("MAX_GRID_POINTS") or 0))
    if meta["status"] != "ready":
        return _accepted(network_id, _build_job(network_id))
    model = nstore.load(network_id)
    grid = target.grid
    if grid:
        ds = run_limited(_region, model, target.bbox, target.spacing_km, target.polygon, weights)
    else:
        ds = run_limited(_points, model, target.lon, target.lat, weights)
    out_meta = output_meta({"id": network_id, "name": meta["name"],
                            "build_time": model.summary.get("build_time")}, weights)
    stem = f"stressmap-network-{network_id[:8]}-{'grid' if grid else 'points'}"
    payload = run_limited(render, ds, fmt, out_meta, grid=grid, model=model,
                          extra_properties=target.properties, stem=stem)
    return respond(payload, fmt, stem=stem, meta=out_meta)
