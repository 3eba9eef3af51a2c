"""Site and fault screening: ``POST /screen`` (stress at depth, fault reactivation tendencies).

Thin view: validate (:func:`stressmap.formats.screening.parse_request_json`), load the model by id from the
store when one is named, run the screening within the request time limit, serialise as JSON,
GeoJSON (planes and trace segments), CSV or PNG (Mohr diagram, stress polygon or fault map).
Every answer carries the caution.
"""

from __future__ import annotations

import json

from flask import Blueprint, Response, current_app, jsonify, request
from stressmap_api import queries
from stressmap_api.limits import run_limited
from stressmap_api.store import check_id, get_store

from stressmap.analyses.sitescreen import screen as run_screening
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats.screening import parse_request_json as parse_request
from stressmap.formats.screening import (
    LAYERS,
    result_geojson,
    result_json,
    screen_csv,
    screen_layers,
    screen_meta,
)
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


def _choice(value, options, field):
    if value is None:
        return options[0]
    if not isinstance(value, str) or value.lower() not in options:
        raise InputError(f"{field} must be one of {', '.join(options)}",
                         [problem(f"unknown {field} {value!r}; use {', '.join(options)}",
                                  field=field)])
    return value.lower()


def _run(req, model, model_info, fmt, picture, layer=None):

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

    body = queries.json_body(request)
    if not isinstance(body, dict):
        raise InputError("the request body must be a JSON object",
                         [problem(f"expected an object, got {type(body).__name__}",
                                  field="(body)")])
    fmt = _choice(body.get("format", request.args.get("format")), FORMATS, "format")
    picture = _choice(body.get("picture", request.args.get("picture")), tuple(PICTURES),
                      "picture")
    layer = body.get("layer", request.args.get("layer"))
    if layer is not None:
        layer = _choice(layer, LAYERS, "layer")
        body = {k: v for k, v in body.items() if k != "layer"}
    req = parse_request(body)
    n_planes = req.plane_strike_deg.size + (
        sum(len(a) for a in req.traces["lines"]) if req.traces else 0)
    max_points = int(current_app.config.get("MAX_POINTS") or 0)
    if max_points and n_planes > max_points:
        raise InputError(f"too many planes and trace vertices ({n_planes}); the limit is "
                         f"{max_points}", [problem("split the request", field="faults")])
    if n_planes * max(req.samples, 1) > MAX_PLANE_SAMPLES:
        raise InputError(f"planes x samples = {n_planes * req.samples} exceeds "
                         f"{MAX_PLANE_SAMPLES}",
                         [problem("use fewer samples or fewer planes",
                                  field="uncertainty.samples")])
    model = model_info = None
    if body.get("model_id") is not None:
        model_id = body["model_id"]
        if not isinstance(model_id, str):
            raise InputError("model_id must be a string",
                             [problem("expected a model id", field="model_id")])
        check_id(model_id)
        store = get_store()
        model = store.load(model_id)
        meta = store.meta(model_id)
        model_info = {"id": model_id, "name": meta.get("name"),
                      "build_time": meta.get("build_time")}
    kind, payload = run_limited(_run, req, model, model_info, fmt, picture, layer)
    if kind == "json":
        return jsonify(payload)
    if kind == "geojson":
        return Response(current_app.json.dumps(payload), status=200,
                        content_type="application/geo+json")
    stem = "stressmap-screen"
    if kind == "csv":
        text, headers = payload
        headers["Content-Disposition"] = f'attachment; filename="{stem}.csv"'
        return Response(text, status=200, content_type="text/csv; charset=utf-8", headers=headers)

    return Response(payload, status=200, content_type="image/png",
                    headers={"Content-Disposition": f'inline; filename="{stem}-{picture}.png"',
                             "X-Stressmap-Caution": json.dumps(CAUTION)[1:-1]})
