"""Reading requests: the one place where the service checks what a client sent.

JSON bodies (:func:`json_body`, :func:`object_body`: well-formed, bounded nesting, valid Unicode,
no unknown members), scalar members (:func:`choice`, :func:`flag`, :func:`number`, :func:`count`),
points, regions, weights and formats, indicator sets and plate documents. Every function raises
:class:`stressmap.errors.InputError` with one ``problem`` per bad field or row (``row`` is
1-based), which the service answers as a 422 problem document; a body that is not JSON at all is
a 400 (:class:`~stressmap_api.problems.ApiProblem`).
"""

from __future__ import annotations

import json
import math
import sys
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import shape
from stressmap_api.grids import check_references
from stressmap_api.problems import ApiProblem
from stressmap_api.store import document_digest

from stressmap import validate
from stressmap.errors import InputError, problem
from stressmap.formats.indicators import (
    indicators_from_csv_text,
    indicators_from_geojson,
)
from stressmap.geo import grid
from stressmap.model.plate import parse_plate
from stressmap.model.preflight import check_solvable, estimate_mesh_nodes

__all__ = [
    "FORMATS",
    "MAX_JSON_DEPTH",
    "MAX_NAME_CHARS",
    "Target",
    "check_plane_work",
    "choice",
    "count",
    "flag",
    "grid_size",
    "json_body",
    "number",
    "object_body",
    "parse_bbox_text",
    "parse_format",
    "parse_indicators",
    "parse_model_document",
    "parse_points",
    "parse_region",
    "parse_target",
    "parse_weights",
    "parse_weights_text",
]

FORMATS = ("geojson", "csv", "netcdf", "png")
_MAX_ERRORS = 20  # problems listed per request (the count of the rest is given)
#: Deepest nesting of arrays/objects read from a body (a GeoJSON MultiPolygon needs 4 inside its
#: geometry; requests wrap it in at most a few more). Deeper bodies are refused before any use.
MAX_JSON_DEPTH = 64
#: Largest magnitude of a load-group weight or calibration bound (weights are dimensionless
#: multipliers of the documented forces; far beyond this the stress arithmetic overflows).
MAX_BOUND = 1e6
#: Longest model name (characters); names appear in captions, file names and listings.
MAX_NAME_CHARS = 200


def json_body(request) -> object:
    """The request body parsed as JSON, or a 400 problem naming where the JSON breaks."""

    raw = request.get_data(cache=True)  # enforces MAX_CONTENT_LENGTH (413)
    if not raw.strip():
        raise ApiProblem(400, "Malformed JSON", "the request body is empty; send a JSON document",
                         [problem("empty body", field="(body)")])
    try:
        doc = json.loads(raw, parse_constant=_refuse_constant, parse_int=_parse_int)
    except UnicodeDecodeError:
        raise ApiProblem(400, "Malformed JSON", "the request body is not UTF-8 text",
                         [problem("not UTF-8", field="(body)")]) from None
    except json.JSONDecodeError as exc:
        raise ApiProblem(400, "Malformed JSON",
                         f"the request body is not valid JSON: {exc.msg} at line {exc.lineno} "
                         f"column {exc.colno}",
                         [problem(exc.msg, field="(body)", line=exc.lineno, column=exc.colno)]
                         ) from None
    except RecursionError:  # json.loads recurses per nesting level
        raise ApiProblem(400, "Malformed JSON", "the request body is nested too deeply to read",
                         [problem("too many nested arrays/objects", field="(body)")]) from None
    except ValueError as exc:  # NaN/Infinity (RFC 8259 has none), integers over 4300 digits
        raise ApiProblem(400, "Malformed JSON", f"the request body is not valid JSON: {exc}",
                         [problem(str(exc), field="(body)")]) from None
    _check_tree(doc)
    return doc


def _bad_text(text: str) -> bool:
    """Whether ``text`` holds a lone surrogate (a ``\\ud800`` escape: not Unicode text)."""
    if text.isascii():
        return False
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return True
    return False


def _check_tree(doc) -> None:
    """Refuse a parsed body nested deeper than :data:`MAX_JSON_DEPTH` or holding a string (or
    member name) that is not Unicode text, naming where; iterative, so depth cannot recurse."""
    stack = [(doc, "(body)", 0)]
    while stack:
        value, where, depth = stack.pop()
        if isinstance(value, str):
            if _bad_text(value):
                raise ApiProblem(400, "Malformed JSON",
                                 f"{where} holds a lone UTF-16 surrogate escape, which is not "
                                 "Unicode text (RFC 8259 section 8.2)",
                                 [problem("lone surrogate escape in a string", field=where)])
            continue
        if not isinstance(value, (dict, list)):
            continue
        if depth >= MAX_JSON_DEPTH:
            raise ApiProblem(400, "Malformed JSON",
                             f"the request body is nested too deeply to read (more than "
                             f"{MAX_JSON_DEPTH} levels of arrays/objects)",
                             [problem("too many nested arrays/objects", field=where)])
        if isinstance(value, dict):
            for key, item in value.items():
                if _bad_text(key):
                    raise ApiProblem(400, "Malformed JSON",
                                     f"a member name in {where} holds a lone UTF-16 surrogate "
                                     "escape, which is not Unicode text (RFC 8259 section 8.2)",
                                     [problem("lone surrogate escape in a member name",
                                              field=where)])
                stack.append((item, f"{where}.{key}" if where != "(body)" else key, depth + 1))
        else:
            stack.extend((item, f"{where}[{i}]", depth + 1) for i, item in enumerate(value))


def _parse_int(text: str) -> int:
    """A JSON integer, refused when no float can hold it (every number is used as a float)."""
    value = int(text)
    if abs(value) > sys.float_info.max:
        raise ValueError(f"the integer {text[:12]}... ({len(text)} digits) is too large; numbers "
                         "must fit a 64-bit float")
    return value


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not a JSON number (RFC 8259 section 6); send null or a "
                     "finite number")


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _check_lonlat(lon: np.ndarray, lat: np.ndarray, field_of, probs: list) -> None:
    bad = np.flatnonzero((lat < -90.0) | (lat > 90.0))
    for i in bad[:_MAX_ERRORS]:
        probs.append(problem(f"latitude {lat[i]:g} is outside [-90, 90]", field=field_of(i),
                             row=int(i) + 1))
    bad = np.flatnonzero((lon < -360.0) | (lon > 360.0))
    for i in bad[:_MAX_ERRORS]:
        probs.append(problem(f"longitude {lon[i]:g} is outside [-360, 360]", field=field_of(i),
                             row=int(i) + 1))


def _raise(summary: str, probs: list, total: int | None = None):
    if total is not None and total > len(probs):
        probs.append(problem(f"... and {total - len(probs)} more problems"))
    raise InputError(summary, probs)


def parse_points(value, max_points: int) -> tuple[np.ndarray, np.ndarray, list[dict] | None]:
    """``points`` as a list of [lon, lat] or a GeoJSON FeatureCollection of Points.

    Returns lon (n,), lat (n,) in degrees and the features' properties (or None for plain pairs).

    Examples
    --------
    >>> lon, lat, props = parse_points([[10, 50], [11.5, 51]], 10)
    >>> lon.tolist(), lat.tolist(), props
    ([10.0, 11.5], [50.0, 51.0], None)
    >>> parse_points([[10, 50], [11, "x"]], 10)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: points: 1 of 2 points cannot be read
      - row 2, field points[1]: expected [lon, lat] as two finite numbers, got [11, "x"]
    """
    if isinstance(value, dict):
        return _parse_feature_points(value, max_points)
    if not isinstance(value, list):
        raise InputError("points must be a list of [lon, lat] pairs or a GeoJSON FeatureCollection",
                         [problem(f"expected a list or a FeatureCollection, got "
                                  f"{type(value).__name__}", field="points")])
    _check_count(len(value), max_points)
    if not value:
        raise InputError("points is empty", [problem("give at least one [lon, lat] pair",
                                                     field="points")])
    try:
        arr = np.asarray(value, dtype=float)
        ok = arr.ndim == 2 and arr.shape[1] == 2 and bool(np.isfinite(arr).all()) and not any(
            isinstance(v, bool) for pair in value for v in pair)
    except (TypeError, ValueError):
        ok = False
    if not ok:
        probs = []
        bad = 0
        for i, pair in enumerate(value):
            if not (isinstance(pair, list) and len(pair) == 2 and all(_is_number(v) for v in pair)):
                bad += 1
                if len(probs) < _MAX_ERRORS:
                    probs.append(problem(f"expected [lon, lat] as two finite numbers, got "
                                         f"{_short(pair)}", field=f"points[{i}]", row=i + 1))
        _raise(f"points: {bad} of {len(value)} points cannot be read", probs)
    lon, lat = arr[:, 0].copy(), arr[:, 1].copy()
    probs: list = []
    _check_lonlat(lon, lat, lambda i: f"points[{i}]", probs)
    if probs:
        _raise("points: some coordinates are out of range", probs)
    return lon, lat, None


def _short(value) -> str:
    text = json.dumps(value) if not isinstance(value, str) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _check_count(n: int, max_points: int) -> None:
    if max_points and n > max_points:
        raise InputError(f"too many points: {n:,} given, this service answers at most "
                         f"{int(max_points):,} per request",
                         [problem(f"{n:,} points exceed the limit of {int(max_points):,}; split "
                                  "the request", field="points")])


def _parse_feature_points(fc: dict, max_points: int):
    if fc.get("type") != "FeatureCollection" or not isinstance(fc.get("features"), list):
        raise InputError("points given as an object must be a GeoJSON FeatureCollection",
                         [problem("expected {\"type\": \"FeatureCollection\", \"features\": [...]}",
                                  field="points")])
    feats = fc["features"]
    _check_count(len(feats), max_points)
    if not feats:
        raise InputError("points has no features", [problem("give at least one Point feature",
                                                            field="points.features")])
    lon = np.empty(len(feats))
    lat = np.empty(len(feats))
    props: list[dict] = []
    probs: list = []
    bad = 0
    for i, feat in enumerate(feats):
        where = f"points.features[{i}]"
        geom = feat.get("geometry") if isinstance(feat, dict) else None
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        if not isinstance(feat, dict) or feat.get("type") != "Feature":
            msg, field = "expected a GeoJSON Feature", where
        elif not isinstance(geom, dict) or geom.get("type") != "Point":
            msg = f"geometry must be a Point, got {_short(geom.get('type') if isinstance(geom, dict) else geom)}"
            field = f"{where}.geometry"
        elif not (isinstance(coords, list) and len(coords) in (2, 3)
                  and all(_is_number(v) for v in coords)):
            msg, field = f"coordinates must be [lon, lat], got {_short(coords)}", f"{where}.geometry.coordinates"
        else:
            lon[i], lat[i] = coords[0], coords[1]
            p = feat.get("properties")
            props.append(dict(p) if isinstance(p, dict) else {})
            continue
        bad += 1
        props.append({})
        if len(probs) < _MAX_ERRORS:
            probs.append(problem(msg, field=field, row=i + 1))
    if bad:
        _raise(f"points: {bad} of {len(feats)} features cannot be read", probs)
    _check_lonlat(lon, lat, lambda i: f"points.features[{i}].geometry.coordinates", probs)
    if probs:
        _raise("points: some coordinates are out of range", probs)
    return lon, lat, props


def _parse_bbox(value, field: str) -> tuple[float, float, float, float]:
    probs: list = []
    box = validate.bbox(value, field, probs)
    validate.raise_problems(probs, f"{field} is not a valid bounding box")
    return box


def parse_bbox_text(text: str | None, field: str = "bbox") -> tuple[float, float, float, float]:
    """``W,S,E,N`` from a query string.

    Examples
    --------
    >>> parse_bbox_text("-20,-30,0,-10")
    (-20.0, -30.0, 0.0, -10.0)
    """
    if not text:
        raise InputError(f"{field} is required: W,S,E,N in degrees",
                         [problem("missing; give W,S,E,N in degrees", field=field)])
    probs: list = []
    box = validate.bbox(text, field, probs, text=True)
    validate.raise_problems(probs, f"{field} is not a valid bounding box")
    return box


#: Smallest grid spacing accepted (km); below it the node count overflows (5e-324 km: 1/0).
MIN_SPACING_KM = 0.001


def parse_spacing(value, field: str) -> float:
    """A grid spacing in km, at least :data:`MIN_SPACING_KM` (finer overflows the node count)."""
    probs: list = []
    spacing = validate.number(value, field, probs, low=MIN_SPACING_KM)
    validate.raise_problems(probs)
    return float(spacing)


def grid_size(bbox, spacing_km: float) -> int:
    """Number of grid nodes over ``bbox`` at ``spacing_km`` (the one grid rule,
    :func:`stressmap.geo.grid.grid_size`, as :func:`stressmap.model.predict_grid` lays them out).

    Examples
    --------
    >>> grid_size((0.0, 0.0, 1.0, 1.0), 111.19)
    4
    >>> grid_size((170.0, 0.0, -170.0, 1.0), 111.19)  # across the antimeridian
    42
    """
    return grid.grid_size(bbox, spacing_km)


def _polygon(value, field: str):
    """A shapely (Multi)Polygon from a GeoJSON geometry, Feature or FeatureCollection."""

    geom = value
    if isinstance(value, dict) and value.get("type") == "Feature":
        geom = value.get("geometry")
    elif isinstance(value, dict) and value.get("type") == "FeatureCollection":
        feats = value.get("features") or []
        geom = feats[0].get("geometry") if len(feats) == 1 and isinstance(feats[0], dict) else None
        if geom is None:
            raise InputError(f"{field} must hold exactly one polygon feature",
                             [problem("expected one Polygon or MultiPolygon", field=field)])
    if not isinstance(geom, dict) or geom.get("type") not in ("Polygon", "MultiPolygon"):
        raise InputError(f"{field} must be a GeoJSON Polygon or MultiPolygon",
                         [problem(f"expected a Polygon or MultiPolygon geometry, got "
                                  f"{_short(geom.get('type') if isinstance(geom, dict) else geom)}",
                                  field=field)])
    try:
        poly = shape(geom)
    except (ValueError, TypeError, AttributeError, IndexError, KeyError,
            shapely.errors.ShapelyError) as exc:
        raise InputError(f"{field} cannot be read as a polygon",
                         [problem(f"invalid coordinates: {exc}", field=f"{field}.coordinates")]
                         ) from None
    w, s, e, n = (float(v) for v in poly.bounds) if not poly.is_empty else (0.0,) * 4
    if not (-360.0 <= w <= e <= 360.0 and -90.0 <= s <= n <= 90.0):
        raise InputError(f"{field} lies outside the globe",
                         [problem(f"its bounds {_short([w, s, e, n])} must lie within "
                                  "longitude [-360, 360] and latitude [-90, 90]",
                                  field=f"{field}.coordinates")])
    if poly.is_empty or not poly.is_valid:
        reason = shapely.is_valid_reason(poly) if not poly.is_empty else "empty"
        raise InputError(f"{field} is not a valid polygon",
                         [problem(f"invalid polygon: {reason}", field=f"{field}.coordinates")])
    return poly


def parse_region(value, top_spacing, max_grid_points: int):
    """``region``: ``{"bbox": [W,S,E,N] | "polygon": GeoJSON, "spacing_km": K}``.

    ``spacing_km`` may also be given at the top level of the request (not both). Returns
    ``(bbox, spacing_km, polygon or None)``.
    """
    if not isinstance(value, dict):
        raise InputError("region must be an object with bbox or polygon, and spacing_km",
                         [problem(f"expected an object, got {type(value).__name__}", field="region")])
    has_bbox, has_poly = "bbox" in value, "polygon" in value
    if has_bbox == has_poly:
        raise InputError("region needs exactly one of bbox and polygon",
                         [problem("give either bbox [W, S, E, N] or polygon (GeoJSON)",
                                  field="region")])
    inner = value.get("spacing_km")
    if inner is not None and top_spacing is not None:
        raise InputError("spacing_km given twice",
                         [problem("give spacing_km either in region or at the top level",
                                  field="region.spacing_km")])
    if inner is None and top_spacing is None:
        raise InputError("spacing_km is required with region",
                         [problem("missing; grid spacing in km", field="region.spacing_km")])
    field = "region.spacing_km" if inner is not None else "spacing_km"
    spacing = parse_spacing(inner if inner is not None else top_spacing, field)
    polygon = None
    if has_bbox:
        bbox = _parse_bbox(value["bbox"], "region.bbox")
    else:
        polygon = _polygon(value["polygon"], "region.polygon")
        bbox = tuple(float(v) for v in polygon.bounds)
    check_grid(bbox, spacing, max_grid_points, field)
    return bbox, spacing, polygon


def check_grid(bbox, spacing_km: float, max_grid_points: int, field: str = "spacing_km") -> None:
    n = grid_size(bbox, spacing_km)
    if max_grid_points and n > max_grid_points:
        raise InputError(f"too many grid points: about {n:,} at {spacing_km:g} km spacing, this "
                         f"service answers at most {int(max_grid_points):,} per request",
                         [problem(f"about {n:,} grid nodes exceed the limit of "
                                  f"{int(max_grid_points):,}; use a larger spacing_km or a "
                                  "smaller region", field=field)])


def parse_spacing_text(text: str | None, field: str = "spacing_km") -> float:
    if text is None or text == "":
        raise InputError(f"{field} is required", [problem("missing; grid spacing in km",
                                                          field=field)])
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not math.isfinite(value):
        raise InputError(f"{field} must be a positive number of km",
                         [problem(f"cannot read {text[:40]!r} as a number", field=field)])
    return parse_spacing(value, field)


def parse_weights(value) -> dict | None:
    """``weights``: null or an object of load group -> finite number within +-MAX_BOUND."""
    probs: list = []
    out = validate.weights(value, "weights", probs)
    for k, v in (out or {}).items():
        validate.number(v, f"weights.{k}"[:120], probs, name=k[:60], low=-MAX_BOUND,
                        high=MAX_BOUND)
    validate.raise_problems(probs, None if len(probs) == 1 else "weights must be finite numbers")
    return out


def parse_weights_text(text: str | None) -> dict | None:
    """``group:value,group:value`` (``=`` works too) from a query string.

    Examples
    --------
    >>> parse_weights_text("ridge:1.5,subduction=0.5")
    {'ridge': 1.5, 'subduction': 0.5}
    >>> parse_weights_text("") is None
    True
    """
    if not text:
        return None
    probs: list = []
    out = validate.weights_text(text, "weights", probs)
    for k, v in (out or {}).items():
        validate.number(v, "weights", probs, name=k[:60], low=-MAX_BOUND, high=MAX_BOUND)
    validate.raise_problems(probs, "weights must read group:value,group:value")
    return out


def parse_format(value) -> str:
    """Output format: geojson (default), csv, netcdf or png."""
    if value is None:
        return "geojson"
    if not isinstance(value, str) or value.lower() not in FORMATS:
        raise InputError(f"format must be one of {', '.join(FORMATS)}",
                         [problem(f"unknown format {_short(value)}; use {', '.join(FORMATS)}",
                                  field="format")])
    return value.lower()


# ----------------------------------------------------------------------------- bodies and members

def object_body(request, allowed: set | None = None) -> dict:
    """The body as a JSON object; with ``allowed``, members not in it are refused by name."""
    body = json_body(request)
    if not isinstance(body, dict):
        raise InputError("the request body must be a JSON object",
                         [problem(f"expected an object, got {type(body).__name__}",
                                  field="(body)")])
    if allowed is not None:
        extra = sorted(set(body) - set(allowed))
        if extra:
            raise InputError("unknown members in the request",
                             [problem(f"unknown member {_short(k)}; expected one of "
                                      f"{', '.join(sorted(allowed))}", field=k[:100])
                              for k in extra[:_MAX_ERRORS]])
    return body


def choice(value, options, field: str) -> str:
    """One of ``options`` (case-insensitive); None gives the first (the default)."""
    if value is None:
        return options[0]
    probs: list = []
    out = validate.choice(value, tuple(options), field, probs, casefold=True)
    validate.raise_problems(probs)
    return out


def flag(value, field: str) -> bool:
    """true or false (None: false)."""
    if value is None:
        return False
    probs: list = []
    out = validate.boolean(value, field, probs)
    validate.raise_problems(probs)
    return out


def number(value, field: str, default=None, *, low: float | None = None,
           high: float | None = None, positive: bool = False) -> float:
    """A finite number within [low, high] (strictly above 0 with ``positive``); None gives
    ``default`` when one is set."""
    if value is None and default is not None:
        return default
    probs: list = []
    if positive and (low is None or low <= 0):
        out = validate.number(value, field, probs, low=0.0, low_inclusive=False, high=high)
    else:
        out = validate.number(value, field, probs, low=low, high=high)
    validate.raise_problems(probs)
    return float(out)


def count(value, field: str, default: int, low: int = 0, high: int | None = None) -> int:
    """A whole number in [low, high] (None gives ``default``)."""
    if value is None:
        value = default
    probs: list = []
    out = validate.number(value, field, probs, low=low, high=high, integer=True)
    validate.raise_problems(probs)
    return int(out)


def parse_model_id(value, field: str = "model_id") -> str:
    """A model id given in a body (32 lowercase hex digits; unknown ids are a 404 later)."""
    if not isinstance(value, str):
        raise InputError(f"{field} must be a string",
                         [problem(f"expected a model id, got {_short(value)}", field=field)])
    return value


# ----------------------------------------------------------------------------- where to predict

@dataclass(frozen=True)
class Target:
    """Where a request asks for results: points (``lon``, ``lat`` arrays, ``properties`` of
    GeoJSON features or None) or a grid (``bbox``, ``spacing_km``, optional ``polygon``)."""

    lon: np.ndarray | None = None
    lat: np.ndarray | None = None
    properties: list | None = None
    bbox: tuple | None = None
    spacing_km: float | None = None
    polygon: object = None

    @property
    def grid(self) -> bool:
        return self.bbox is not None

    @property
    def size(self) -> int:
        """Points, or nodes of the grid."""
        return grid_size(self.bbox, self.spacing_km) if self.grid else int(self.lon.size)


def parse_target(body: dict, max_points: int, max_grid_points: int, what: str = "a prediction"):
    """Exactly one of ``points`` and ``region`` (``spacing_km`` at the top level or in region,
    only with region)."""
    if ("points" in body) == ("region" in body):
        raise InputError("give exactly one of points and region",
                         [problem(f"{what} needs either points or region", field="points")])
    if "points" in body:
        if body.get("spacing_km") is not None:
            raise InputError("spacing_km goes with region, not points",
                             [problem("remove spacing_km or use region", field="spacing_km")])
        lon, lat, props = parse_points(body["points"], max_points)
        return Target(lon=lon, lat=lat, properties=props)
    bbox, spacing, polygon = parse_region(body["region"], body.get("spacing_km"), max_grid_points)
    return Target(bbox=bbox, spacing_km=spacing, polygon=polygon)


def check_plane_work(req, max_planes: int, max_plane_samples: int) -> None:
    """Bound the work of a screening request (:class:`stressmap.analyses.sitescreen` request):
    planes plus trace vertices at most ``max_planes``, times samples at most
    ``max_plane_samples``."""
    n_planes = req.plane_strike_deg.size + (
        sum(len(a) for a in req.traces["lines"]) if req.traces else 0)
    if max_planes and n_planes > max_planes:
        raise InputError(f"too many planes and trace vertices ({n_planes}); the limit is "
                         f"{max_planes}", [problem("split the request", field="faults")])
    if n_planes * max(req.samples, 1) > max_plane_samples:
        raise InputError(f"planes x samples = {n_planes * req.samples} exceeds "
                         f"{max_plane_samples}",
                         [problem("use fewer samples or fewer planes",
                                  field="uncertainty.samples")])


# ----------------------------------------------------------------------------- indicator sets

def parse_indicators(body: dict, skip_bad: bool, max_points: int):
    """The request's indicators: ``indicators`` (a GeoJSON FeatureCollection) or
    ``indicators_csv`` (CSV text), exactly one; at most ``max_points`` of them."""
    if ("indicators" in body) == ("indicators_csv" in body):
        raise InputError("give exactly one of indicators (GeoJSON) and indicators_csv (CSV text)",
                         [problem("indicators (a GeoJSON FeatureCollection) or indicators_csv "
                                  "(CSV text)", field="indicators")])
    if "indicators_csv" in body:
        text = body["indicators_csv"]
        if not isinstance(text, str):
            raise InputError("indicators_csv must be CSV text",
                             [problem(f"expected a string, got {type(text).__name__}",
                                      field="indicators_csv")])
        gdf = indicators_from_csv_text(text, skip_bad=skip_bad, name="indicators_csv")
    else:
        value = body["indicators"]
        if not isinstance(value, dict):
            raise InputError("indicators must be a GeoJSON FeatureCollection",
                             [problem(f"got {type(value).__name__}; CSV text goes in "
                                      "indicators_csv", field="indicators")])
        gdf = indicators_from_geojson(value, skip_bad=skip_bad, field="indicators")
    if max_points and len(gdf) > max_points:
        raise InputError(f"too many indicators ({len(gdf):,}); the limit is {int(max_points):,}",
                         [problem("split the request", field="indicators")])
    return gdf


# ----------------------------------------------------------------------------- plate documents

#: Most boundary vertices accepted in an uploaded document (checked before it is parsed).
MAX_BOUNDARY_VERTICES = 20_000


def line_vertex_count(collection) -> int:
    """Positions in a FeatureCollection's LineStrings (0 where the structure is not as
    expected): counted before a document is parsed, to refuse oversized uploads cheaply."""
    feats = collection.get("features") if isinstance(collection, dict) else None
    total = 0
    for feat in feats if isinstance(feats, list) else []:
        geom = feat.get("geometry") if isinstance(feat, dict) else None
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        total += len(coords) if isinstance(coords, list) else 0
    return total


def parse_model_document(document, max_mesh_nodes: int, data_dir=None) -> dict:
    """Validate a plate model document before its build is accepted.

    Returns ``{"name", "digest", "estimated_nodes"}``. Raises
    :class:`~stressmap.errors.ModelValidationError` (every problem of the document) or
    :class:`~stressmap.errors.InputError` (a grid that is not an uploaded grid of ``data_dir``,
    server paths, too many vertices, a name over
    :data:`MAX_NAME_CHARS`, a mesh estimate over ``max_mesh_nodes`` counting refinements,
    degenerate sheet or drag values).
    """
    # Grids are uploaded resources named by id; a path or URL would make the service open any
    # file it can reach, so it is refused (stressmap_api.grids.check_references).
    check_references(document, data_dir)
    name = document.get("name") if isinstance(document, dict) else None
    if isinstance(name, str) and len(name) > MAX_NAME_CHARS:
        raise InputError("the model's name is too long",
                         [problem(f"{len(name):,} characters; at most {MAX_NAME_CHARS} (put "
                                  "longer text in description)", field="name")])
    vertices = line_vertex_count(document.get("boundary") if isinstance(document, dict)
                                 else None)
    if vertices > MAX_BOUNDARY_VERTICES:
        # Checked before parsing: validation and meshing grow with the vertex count.
        raise InputError("the model's boundary has too many vertices",
                         [problem(f"{vertices:,} boundary vertices; this service takes at most "
                                  f"{MAX_BOUNDARY_VERTICES:,} (simplify the outline)",
                                  field="boundary.features")])
    plate = parse_plate(document)  # its ModelValidationError lists every problem
    check_solvable(plate)
    estimate = estimate_mesh_nodes(plate)
    if max_mesh_nodes and estimate > max_mesh_nodes:
        edge_km = float(plate.mesh.get("edge_km") or 50.0)
        refined = " and its refinements" if plate.mesh.get("refinement") else ""
        field = "mesh.refinement" if refined else "mesh.edge_km"
        msg = (f"mesh.edge_km {edge_km:g} km{refined} would give about {estimate:,.0f} mesh "
               f"nodes for a plate of {plate.area_km2:,.0f} km^2; this service builds at most "
               f"{int(max_mesh_nodes):,} (use a larger edge_km, or smaller or coarser "
               "refinements)")
        raise InputError("the model's mesh would be too large", [problem(msg, field=field)])
    return {"name": plate.name, "digest": document_digest(document), "estimated_nodes": estimate}


def parse_smooth_bbox(value, field: str = "bbox") -> list[float]:
    """``[west, south, east, north]`` of the observed-field grid: four finite numbers (the
    observed-field module checks their order and ranges)."""
    if not (isinstance(value, list) and len(value) == 4 and all(_is_number(v) for v in value)):
        raise InputError(f"{field} must be [west, south, east, north] in degrees",
                         [problem(f"expected four finite numbers, got {_short(value)}",
                                  field=field)])
    return [float(v) for v in value]



def parse_bounds(value, field: str = "bounds") -> dict:
    """``bounds``: null or an object of load group -> [low, high], finite, low <= high, each
    within +-:data:`MAX_BOUND`."""
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise InputError(f"{field} must be an object of group -> [low, high]",
                         [problem(f"got {type(value).__name__}", field=field)])
    probs = []
    for key, pair in value.items():
        ok = (isinstance(pair, list) and len(pair) == 2 and all(_is_number(v) for v in pair)
              and pair[0] <= pair[1] and all(abs(v) <= MAX_BOUND for v in pair))
        if not ok:
            probs.append(problem(f"expected [low, high] with low <= high, both within "
                                 f"+-{MAX_BOUND:g}, got {_short(pair)}",
                                 field=f"{field}.{key}"[:120]))
    if probs:
        raise InputError(f"{field} must map each group to [low, high]", probs[:_MAX_ERRORS])
    return {str(k): [float(v) for v in pair] for k, pair in value.items()}


def parse_percentiles(value, default) -> list[float]:
    """``percentiles``: 1 to 20 distinct numbers in [0, 100] (kept in the order given)."""
    if value is None:
        value = list(default)
    if not (isinstance(value, list) and 0 < len(value) <= 20
            and all(_is_number(q) and 0 <= q <= 100 for q in value)):
        raise InputError("percentiles must be a list of 1 to 20 numbers between 0 and 100",
                         [problem(f"got {_short(value)}", field="percentiles")])
    if len(set(float(q) for q in value)) != len(value):
        raise InputError("percentiles must not repeat",
                         [problem(f"got {_short(value)}; give each percentile once",
                                  field="percentiles")])
    return [float(q) for q in value]
