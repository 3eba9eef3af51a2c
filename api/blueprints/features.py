"""OGC API - Features (Part 1: Core, GeoJSON, OpenAPI 3.0) over the ready models.

Under ``/api/v1/features``: the landing page, the conformance declaration, the collections and
their items. Each ready model offers the collections

- ``<model_id>-outline``: the plate (one Polygon);
- ``<model_id>-boundary``: boundary segments with kind, group and applied edge force;
- ``<model_id>-field``: predicted SHmax azimuth, regime and magnitudes at the nodes of a regular
  lon/lat grid over the plate, every ``FEATURES_FIELD_SPACING_KM`` km (default 100; the
  collection's description and ``spacing_km`` member say which);
- ``<model_id>-indicators``: where stored (``PUT /models/{id}/indicators``), the indicators with
  their predicted SHmax and misfit at the document's weights.

Items take ``bbox`` (W,S,E,N in CRS84; W > E crosses the antimeridian), ``limit`` (default 100,
at most 10000) and ``offset``, and link ``next``/``prev`` pages. Collections are built once per
model build and kept in a small cache; a prediction request never passes through here.
"""

from __future__ import annotations

import json
import threading
from collections import OrderedDict

import numpy as np
from flask import Blueprint, current_app, request, url_for
from stressmap_api import queries
from stressmap_api.auth import require_token
from stressmap_api.boundary import boundary_forces
from stressmap_api.jsonio import to_jsonable
from stressmap_api.limits import run_limited
from stressmap_api.problems import ApiProblem
from stressmap_api.render import output_meta
from stressmap_api.store import check_id, get_store

from stressmap.analyses.compare import COMPARISON_COLUMNS, compare
from stressmap.analyses.indicators import CONVERT_COLUMNS
from stressmap.constants import CAUTION
from stressmap.errors import InputError, NotFoundError, problem
from stressmap.formats.features import (
    feature_bboxes,
    field_features,
    indicators_features,
    outline_features,
    plate_bbox,
    select,
    with_ids,
)
from stressmap.formats.indicators import (
    indicators_from_csv_text,
    indicators_from_geojson,
    indicators_geojson,
)
from stressmap.io.files import write_atomic
from stressmap.model import predict_grid

__all__ = ["bp", "KINDS", "CONFORMANCE", "DEFAULT_LIMIT", "MAX_LIMIT"]

bp = Blueprint("features", __name__)

#: Collection kinds per model, in listing order.
KINDS = ("outline", "boundary", "field", "indicators")
CONFORMANCE = [
    "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/core",
    "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/geojson",
    "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/oas30",
]
CRS84 = "http://www.opengis.net/def/crs/OGC/1.3/CRS84"
DEFAULT_LIMIT, MAX_LIMIT = 100, 10000
DEFAULT_FIELD_SPACING_KM = 100.0
INDICATORS_FILE = "indicators.geojson"
GEOJSON, JSON = "application/geo+json", "application/json"
_ITEM_PARAMS = {"bbox", "limit", "offset", "f", "datetime"}

_TITLES = {
    "outline": "plate outline",
    "boundary": "boundary segments (kind, group, applied edge force)",
    "field": "predicted stress field (SHmax azimuth, regime, magnitudes)",
    "indicators": "stress indicators with predicted SHmax and misfit",
}


class _Cache:
    """Built collections keyed by (model id, build time, kind); least recently used dropped."""

    def __init__(self, size: int = 32):
        self.size, self.items, self.lock = size, OrderedDict(), threading.Lock()

    def get(self, key, build):
        with self.lock:
            if key in self.items:
                self.items.move_to_end(key)
                return self.items[key]
        value = build()
        with self.lock:
            self.items[key] = value
            while len(self.items) > self.size:
                self.items.popitem(last=False)
        return value


def _cache() -> _Cache:
    return current_app.extensions.setdefault("stressmap_features", _Cache())


def _json(doc, status: int = 200, mimetype: str = JSON):
    return current_app.response_class(current_app.json.dumps(doc), status=status, mimetype=mimetype)


def _bad_request(message: str, field: str):
    """OGC API - Features answers invalid query parameters with 400."""
    return ApiProblem(400, "Bad Request", message, [problem(message, field=field)])


def _link(href, rel, type_=JSON, title=None) -> dict:
    out = {"href": href, "rel": rel, "type": type_}
    if title:
        out["title"] = title
    return out


def _spacing_km() -> float:
    return float(current_app.config.get("FEATURES_FIELD_SPACING_KM") or DEFAULT_FIELD_SPACING_KM)


def _split_id(collection_id: str) -> tuple[str, str]:
    model_id, _, kind = collection_id.rpartition("-")
    if kind not in KINDS or not model_id:
        raise NotFoundError(f"no collection {collection_id!r}")
    check_id(model_id)
    return model_id, kind


def _ready(store, model_id: str) -> dict:
    meta = store.meta(model_id)
    if meta.get("status") != "ready":
        raise NotFoundError(f"no collection for model {model_id!r}: it is {meta.get('status')}")
    return meta


def _indicators_path(store, model_id: str):
    return store.model_dir(model_id) / INDICATORS_FILE


def _build(store, model_id: str, kind: str) -> tuple[list, np.ndarray, dict]:
    """(features, bboxes, extra collection members) of one collection."""
    model = store.load(model_id)
    ring_lon = np.asarray(model.fields["ring_lon"].values, dtype=float)
    ring_lat = np.asarray(model.fields["ring_lat"].values, dtype=float)
    extra = {"bbox": plate_bbox(ring_lon, ring_lat)}
    if kind == "outline":
        summary = model.summary or {}
        feats = outline_features(ring_lon, ring_lat, {
            "name": summary.get("name") or model.definition.get("name"),
            "model_id": model_id, "area_km2": (summary.get("mesh") or {}).get("exact_area_km2")})
    elif kind == "boundary":
        feats = with_ids(run_limited(boundary_forces, model)["features"], "segment")
    elif kind == "field":
        spacing = _spacing_km()
        grid = run_limited(predict_grid, model, extra["bbox"], spacing)
        feats = field_features(grid)
        extra["spacing_km"] = spacing
    else:
        path = _indicators_path(store, model_id)
        if not path.is_file():
            raise NotFoundError(f"model {model_id!r} has no stored indicators")
        feats = indicators_features(json.loads(path.read_text(encoding="utf-8")))
    return feats, feature_bboxes(feats), extra


def _collection(model_id: str, kind: str):
    store = get_store()
    meta = _ready(store, model_id)
    key = (model_id, meta.get("build_time"), kind,
           _spacing_km() if kind == "field" else None,
           _indicators_path(store, model_id).stat().st_mtime_ns
           if kind == "indicators" and _indicators_path(store, model_id).is_file() else None)
    feats, boxes, extra = _cache().get(key, lambda: _build(store, model_id, kind))
    return meta, feats, boxes, extra


def _describe(model_id: str, kind: str, meta: dict, extra: dict) -> dict:
    cid = f"{model_id}-{kind}"
    description = f"{meta.get('name')}: {_TITLES[kind]}."
    if kind == "field":
        description += (f" Grid nodes every {extra['spacing_km']:g} km along meridians (and along "
                        "the parallel through the middle of the plate), inside the plate only; "
                        "document weights.")
    description += " " + CAUTION
    items = url_for("features.items", collection_id=cid, _external=True)
    out = {
        "id": cid,
        "title": f"{meta.get('name')} - {_TITLES[kind]}",
        "description": description,
        "extent": {"spatial": {"bbox": [list(extra["bbox"])], "crs": CRS84}},
        "itemType": "feature",
        "crs": [CRS84],
        "links": [
            _link(url_for("features.collection", collection_id=cid, _external=True), "self",
                  JSON, "this collection"),
            _link(items, "items", GEOJSON, "the features"),
        ],
    }
    if kind == "field":
        out["spacing_km"] = extra["spacing_km"]
    return out


def _model_collections(model_id: str) -> list[dict]:
    store = get_store()
    out = []
    for kind in KINDS:
        if kind == "indicators" and not _indicators_path(store, model_id).is_file():
            continue
        meta, _, _, extra = _collection(model_id, kind)
        out.append(_describe(model_id, kind, meta, extra))
    return out


@bp.get("/features")
def landing():
    links = [
        _link(url_for("features.landing", _external=True), "self", JSON, "this document"),
        _link(url_for("meta.openapi", _external=True), "service-desc",
              "application/vnd.oai.openapi+json;version=3.1", "the API definition"),
        _link(url_for("docs.docs_page", _external=True), "service-doc", "text/html",
              "the API documentation"),
        _link(url_for("features.conformance", _external=True), "conformance", JSON,
              "OGC API conformance classes implemented"),
        _link(url_for("features.collections", _external=True), "data", JSON,
              "the feature collections"),
    ]
    return _json({"title": "stressmap features",
                  "description": "Plate outlines, boundary segments, predicted stress fields and "
                                 "stress indicators of the ready models, as OGC API - Features. "
                                 + CAUTION,
                  "caution": CAUTION, "links": links})


@bp.get("/features/conformance")
def conformance():
    return _json({"conformsTo": CONFORMANCE})


@bp.get("/features/collections")
def collections():
    cols = []
    for entry in get_store().list_models():
        if entry.get("status") == "ready":
            cols += _model_collections(entry["id"])
    return _json({"links": [_link(url_for("features.collections", _external=True), "self", JSON)],
                  "collections": cols})


@bp.get("/features/collections/<collection_id>")
def collection(collection_id: str):
    model_id, kind = _split_id(collection_id)
    meta, _, _, extra = _collection(model_id, kind)
    return _json(_describe(model_id, kind, meta, extra))


def _int_param(name: str, default: int, low: int, high: int | None = None) -> int:
    text = request.args.get(name)
    if text is None:
        return default
    try:
        value = int(text)
    except ValueError:
        raise _bad_request(f"{name} must be an integer, got {text[:40]!r}", name) from None
    if value < low:
        raise _bad_request(f"{name} must be at least {low}, got {value}", name)
    return min(value, high) if high is not None else value


def _bbox_param():
    text = request.args.get("bbox")
    if text is None:
        return None
    try:
        return queries.parse_bbox_text(text)
    except InputError as exc:
        raise ApiProblem(400, "Bad Request", exc.message, exc.problems) from None


@bp.get("/features/collections/<collection_id>/items")
def items(collection_id: str):
    unknown = sorted(set(request.args) - _ITEM_PARAMS)
    if unknown:
        raise _bad_request(f"unknown query parameter(s): {', '.join(unknown)} (use bbox, limit, "
                           "offset, f)", unknown[0])
    fmt = request.args.get("f")
    if fmt is not None and fmt not in ("json", "geojson"):
        raise _bad_request(f"f must be json or geojson, got {fmt[:40]!r}", "f")
    limit = _int_param("limit", DEFAULT_LIMIT, 1, MAX_LIMIT)
    offset = _int_param("offset", 0, 0)
    bbox = _bbox_param()
    model_id, kind = _split_id(collection_id)
    meta, feats, boxes, _ = _collection(model_id, kind)
    hits = select(boxes, bbox)
    page = hits[offset: offset + limit]
    base = {k: v for k, v in request.args.items() if k not in ("offset", "limit")}
    here = lambda off: url_for("features.items", collection_id=collection_id, _external=True,  # noqa: E731
                               **base, limit=limit, offset=off)
    links = [_link(here(offset), "self", GEOJSON, "this page"),
             _link(url_for("features.collection", collection_id=collection_id, _external=True),
                   "collection", JSON)]
    if offset + limit < hits.size:
        links.append(_link(here(offset + limit), "next", GEOJSON, "next page"))
    if offset > 0:
        links.append(_link(here(max(offset - limit, 0)), "prev", GEOJSON, "previous page"))
    doc = {"type": "FeatureCollection", "name": collection_id, **output_meta(meta),
           "numberMatched": int(hits.size), "numberReturned": int(page.size),
           "timeStamp": _now(), "links": links,
           "features": [feats[i] for i in page.tolist()]}
    return _json(doc, mimetype=GEOJSON)


@bp.get("/features/collections/<collection_id>/items/<feature_id>")
def item(collection_id: str, feature_id: str):
    model_id, kind = _split_id(collection_id)
    meta, feats, _, _ = _collection(model_id, kind)
    found = next((f for f in feats if str(f.get("id")) == feature_id), None)
    if found is None:
        raise NotFoundError(f"no feature {feature_id!r} in collection {collection_id!r}")
    doc = dict(found, **output_meta(meta), links=[
        _link(url_for("features.item", collection_id=collection_id, feature_id=feature_id,
                      _external=True), "self", GEOJSON),
        _link(url_for("features.collection", collection_id=collection_id, _external=True),
              "collection", JSON)])
    return _json(doc, mimetype=GEOJSON)


def _now() -> str:
    from datetime import datetime, timezone

    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _stored_indicators(model, model_id: str, gdf, meta: dict) -> dict:
    """The indicators compared with the model at its document's weights, as GeoJSON."""
    table, summary = compare(model, gdf)
    flat = table.reset_index(drop=True)
    lead = list(CONVERT_COLUMNS) + list(COMPARISON_COLUMNS)
    cols = [c for c in lead if c in flat.columns] + [
        c for c in flat.columns if c not in lead and c not in ("geometry", "shmax_span_deg")]
    return indicators_geojson(flat, cols, to_jsonable(output_meta(meta) | {"summary": summary}),
                              name=f"{model_id}-indicators")


@bp.put("/models/<model_id>/indicators")
@require_token
def put_indicators(model_id: str):
    """Store indicators for a ready model (replacing any stored before); they are served, with
    their misfit, as the collection ``<model_id>-indicators``."""
    store = get_store()
    meta = _ready(store, model_id)
    body = queries.json_body(request)
    if not isinstance(body, dict) or ("indicators" in body) == ("indicators_csv" in body):
        raise InputError("give exactly one of indicators (GeoJSON) and indicators_csv (CSV text)",
                         [problem("exactly one of indicators and indicators_csv is needed",
                                  field="indicators")])
    unknown = sorted(set(body) - {"indicators", "indicators_csv", "skip_bad"})
    if unknown:
        raise InputError("unknown members in the request",
                         [problem(f"unknown member {k!r}", field=k) for k in unknown])
    skip_bad = body.get("skip_bad", False) is True
    if "indicators_csv" in body:
        if not isinstance(body["indicators_csv"], str):
            raise InputError("indicators_csv must be CSV text",
                             [problem("expected a string", field="indicators_csv")])
        gdf = indicators_from_csv_text(body["indicators_csv"], skip_bad=skip_bad,
                                       name="indicators_csv")
    else:
        gdf = indicators_from_geojson(body["indicators"], skip_bad=skip_bad, field="indicators")
    model = store.load(model_id)
    doc = run_limited(_stored_indicators, model, model_id, gdf, meta)
    write_atomic(_indicators_path(store, model_id),
                 json.dumps(doc, allow_nan=False, ensure_ascii=False))
    cid = f"{model_id}-indicators"
    resp = _json({"collection": cid, "count": len(doc["features"]),
                  "skipped": gdf.attrs.get("skipped") or [],
                  "links": {"collection": url_for("features.collection", collection_id=cid),
                            "items": url_for("features.items", collection_id=cid)}})
    resp.headers["Location"] = url_for("features.collection", collection_id=cid)
    return resp
