"""Site and fault screening: ``POST /screen`` (stress at depth, fault reactivation tendencies).

Thin view: validate (:func:`stressmap.formats.screening.parse_request_json`), load the model by id from the
store when one is named, run the screening within the request time limit, serialise as JSON,
GeoJSON (planes and trace segments), CSV or PNG (Mohr diagram, stress polygon or fault map).
Every answer carries the caution.
"""

from __future__ import annotations

from flask import Blueprint, current_app, request
from stressmap_api import requests
from stressmap_api.limits import run_limited
from stressmap_api.render import picture_text, respond
from stressmap_api.store import check_id, get_store

from stressmap.analyses.sitescreen import screen as run_screening
from stressmap.formats.screening import (
    LAYERS,
    result_geojson,
    result_json,
    screen_csv,
    screen_layers,
    screen_meta,
)
from stressmap.formats.screening import parse_request_json as parse_request
from stressmap.formats.table import metadata_headers
from stressmap.plot import margins as plot_margins
from stressmap.plot import screening as plot_screening

__all__ = ["bp", "FORMATS", "PICTURES", "MAX_PLANE_SAMPLES"]

bp = Blueprint("screen", __name__)

FORMATS = ("json", "geojson", "csv", "png")
PICTURES = {"mohr": "mohr_png", "polygon": "polygon_png", "map": "fault_map_png",
            "margins": "margin_curves_png"}
#: Upper bound of planes x samples evaluated in one request (memory and time).
MAX_PLANE_SAMPLES = 5_000_000


def _run(req, model, model_info, fmt, picture, layer=None):

    if fmt == "png" and model_info:  # a stored name drawn into a picture: bounded plain text
        model_info = dict(model_info, name=picture_text(model_info.get("name"), 80))
    result = run_screening(req, model, model_info)
    if fmt == "json":
        return "json", result_json(result)
    if fmt == "geojson":
        if layer:  # one geometry kind per answer, for GIS clients
            return "geojson", screen_layers(result)[layer]
        return "geojson", result_geojson(result)
    if fmt == "csv":
        return "csv", (screen_csv(result), metadata_headers(screen_meta(result)))

    pictures = plot_margins if picture == "margins" else plot_screening
    return "png", getattr(pictures, PICTURES[picture])(result)


@bp.post("/screen")
def screen():

    body = requests.object_body(request)
    fmt = requests.choice(body.get("format", request.args.get("format")), FORMATS, "format")
    picture = requests.choice(body.get("picture", request.args.get("picture")), tuple(PICTURES),
                              "picture")
    layer = body.get("layer", request.args.get("layer"))
    if layer is not None:
        layer = requests.choice(layer, LAYERS, "layer")
        body = {k: v for k, v in body.items() if k != "layer"}
    req = parse_request(body)
    requests.check_plane_work(req, int(current_app.config.get("MAX_POINTS") or 0),
                              MAX_PLANE_SAMPLES)
    model = model_info = None
    if body.get("model_id") is not None:
        model_id = check_id(requests.parse_model_id(body["model_id"]))
        store = get_store()
        model = store.load(model_id)
        meta = store.meta(model_id)
        model_info = {"id": model_id, "name": meta.get("name"),
                      "build_time": meta.get("build_time")}
    kind, payload = run_limited(_run, req, model, model_info, fmt, picture, layer)
    stem = "stressmap-screen" + (f"-{picture}" if kind == "png" else "")
    if kind == "csv":  # a plain table; the caution and site values travel in headers
        text, headers = payload
        return respond(text, kind, stem=stem, headers=headers)
    return respond(payload, kind, stem=stem)
