"""Reservoir and well screening: ``POST /wells/{analysis}`` (profile, tendency-net, stress-path,
stability, window, breakout).

Thin view: validate (:func:`stressmap.analyses.wells.parse_well_request`), load the model by id
when one is named, run the analysis within the request time limit, answer JSON, CSV or PNG in
the units asked for. Nothing is stored, so no token is needed. Every answer carries the caution.
"""

from __future__ import annotations

from flask import Blueprint, request
from stressmap_api import requests
from stressmap_api.limits import run_limited
from stressmap_api.render import picture_text, respond
from stressmap_api.store import check_id, get_store

from stressmap.analyses import wells
from stressmap.errors import InputError, NotFoundError, problem
from stressmap.formats.screening import decode_geojson_parts
from stressmap.formats.wells import csv_table, json_document
from stressmap.plot import wells as plot_wells

__all__ = ["ANALYSES", "FORMATS", "bp"]

bp = Blueprint("wells", __name__)

ANALYSES = {"profile": wells.run_profile, "tendency-net": wells.run_net,
            "stress-path": wells.run_stress_path, "stability": wells.run_stability,
            "window": wells.run_window, "breakout": wells.run_breakout}
PICTURES = {"profile": plot_wells.profile_png, "tendency-net": plot_wells.net_png,
            "stress-path": plot_wells.path_png, "window": plot_wells.window_png}
FORMATS = ("json", "csv", "png")


def _format(body: dict, analysis: str) -> str:
    value = body.pop("format", None) or request.args.get("format") or "json"
    return requests.choice(value, FORMATS if analysis in PICTURES else FORMATS[:2], "format")


def _model(body: dict):
    model_id = body.pop("model_id", None)
    if model_id is None:
        return None, None
    check_id(requests.parse_model_id(model_id))
    store = get_store()
    model = store.load(model_id)
    meta = store.meta(model_id)
    return model, {"id": model_id, "name": meta.get("name"), "build_time": meta.get("build_time")}


def _run(analysis, req, model, info, fmt):
    if fmt == "png" and info:  # a stored name drawn into a picture: bounded plain text
        info = dict(info, name=picture_text(info.get("name"), 80))
    result = ANALYSES[analysis](req, model, info)
    if fmt == "csv":
        return csv_table(result)
    doc = json_document(result)
    return PICTURES[analysis](doc) if fmt == "png" else doc


@bp.post("/wells/<analysis>")
def run(analysis: str):
    if analysis not in ANALYSES:
        raise NotFoundError(f"no well analysis {analysis!r}; use one of {', '.join(ANALYSES)}")
    body = dict(requests.object_body(request))
    fmt = _format(body, analysis)
    model, info = _model(body)
    body, problems = decode_geojson_parts(body)
    try:
        req = wells.parse_well_request(body)
    except InputError as exc:
        raise InputError(exc.args[0] if not problems else
                         f"{len(problems) + len(exc.problems)} problems with the request",
                         problems + exc.problems) from None
    if problems:
        raise InputError(f"{len(problems)} problem(s) with the request's GeoJSON", problems)
    if analysis == "profile" and req.site.samples > 0:
        if req.site.samples > 20000:
            raise InputError("too many samples for a profile (at most 20000)",
                             [problem("use fewer samples", field="uncertainty.samples")])
    payload = run_limited(_run, analysis, req, model, info, fmt)
    return respond(payload, fmt, stem=f"stressmap-well-{analysis}", caution_header=fmt != "json")
