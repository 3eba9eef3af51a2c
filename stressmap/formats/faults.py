"""Fault collections: GeoJSON FeatureCollections and CSV records parsed into plane sets (no paths).

Accepted inputs (one parser for the CLI and the HTTP service; files are opened by :mod:`stressmap.io.faults`):

- GeoJSON ``FeatureCollection`` (a dict, or any file geopandas/pyogrio can read: GeoJSON,
  GeoPackage, shapefile) whose features are

  * ``LineString`` / ``MultiLineString`` traces with properties ``dip_deg`` and
    ``dip_direction_deg`` (degrees clockwise from north, or a compass point such as ``"NE"``;
    optional -- without it the plane dips to the right of the digitised direction), or
  * ``Point`` features (or features without geometry) with ``strike_deg`` and ``dip_deg``
    (right-hand rule);

  and optionally ``name``;
- CSV tables with columns ``strike_deg``, ``dip_deg`` and optionally ``name``, ``lon``, ``lat``.

Errors name the feature or row (1-based) and the field.
"""

from __future__ import annotations

import math

import numpy as np

from stressmap.errors import InputError, problem

__all__ = ["COMPASS_POINTS", "FaultInput", "faults_from_geojson", "faults_from_records",
           "parse_dip_direction"]

#: 16-point compass names and their azimuths in degrees.
COMPASS_POINTS = {name: i * 22.5 for i, name in enumerate(
    "N NNE NE ENE E ESE SE SSE S SSW SW WSW W WNW NW NNW".split())}


def parse_dip_direction(value):
    """A dip direction as degrees clockwise from north (NaN when absent).

    Examples
    --------
    >>> parse_dip_direction("SW"), parse_dip_direction(" 95 "), parse_dip_direction(400)
    (225.0, 95.0, 40.0)
    >>> import math; math.isnan(parse_dip_direction(None))
    True
    """
    if value is None or (isinstance(value, float) and math.isnan(value)) or value == "":
        return math.nan
    if isinstance(value, str):
        key = value.strip().upper()
        if key in COMPASS_POINTS:
            return COMPASS_POINTS[key]
        value = float(key)  # ValueError for anything else; callers report it
    value = float(value)
    if not math.isfinite(value):
        raise ValueError("not finite")
    return value % 360.0


class FaultInput(dict):
    """Parsed fault input: a plain dict of lists/arrays.

    Keys: ``planes`` -> dict(strike_deg, dip_deg, name, lon, lat, feature) for strike/dip
    features; ``traces`` -> dict(lines (list of (k, 2) arrays), dip_deg, dip_direction_deg, name,
    feature); ``feature`` is the 0-based feature number in the collection.
    """


def _num(props, key, where, problems, required=True):
    value = props.get(key)
    if value is None or value == "":
        if required:
            problems.append(problem(f"{key} is required", field=key, row=where))
        return math.nan
    try:
        out = float(value)
    except (TypeError, ValueError):
        problems.append(problem(f"{key} must be a number, got {value!r}", field=key, row=where))
        return math.nan
    if not math.isfinite(out):
        problems.append(problem(f"{key} must be finite", field=key, row=where))
    return out


def faults_from_geojson(collection: dict, field: str = "faults") -> FaultInput:
    """Split a GeoJSON FeatureCollection into strike/dip planes and line traces.

    Raises
    ------
    InputError
        One problem per bad feature (row = 1-based feature number).

    Examples
    --------
    >>> fc = {"type": "FeatureCollection", "features": [
    ...   {"type": "Feature", "properties": {"name": "A", "dip_deg": 60, "dip_direction_deg": "E"},
    ...    "geometry": {"type": "LineString", "coordinates": [[0, 0], [0, 0.1]]}},
    ...   {"type": "Feature", "properties": {"strike_deg": 30, "dip_deg": 80},
    ...    "geometry": {"type": "Point", "coordinates": [0.05, 0.05]}}]}
    >>> out = faults_from_geojson(fc)
    >>> out["traces"]["name"], out["traces"]["dip_direction_deg"], out["planes"]["strike_deg"]
    (['A'], [90.0], [30.0])
    """
    if not isinstance(collection, dict) or collection.get("type") != "FeatureCollection":
        raise InputError(f"{field} must be a GeoJSON FeatureCollection",
                         [problem("expected an object with type FeatureCollection", field=field)])
    features = collection.get("features")
    if not isinstance(features, list):
        raise InputError(f"{field}.features must be a list", [problem("not a list",
                                                                       field=f"{field}.features")])
    planes = {"strike_deg": [], "dip_deg": [], "name": [], "lon": [], "lat": [], "feature": []}
    traces = {"lines": [], "dip_deg": [], "dip_direction_deg": [], "name": [], "feature": []}
    problems: list[dict] = []
    for i, feat in enumerate(features, start=1):  # parsing at the edge; numerics are vectorised
        if not isinstance(feat, dict):
            problems.append(problem("feature is not an object", field=field, row=i))
            continue
        props = feat.get("properties") or {}
        geom = feat.get("geometry") or {}
        gtype = geom.get("type") if isinstance(geom, dict) else None
        name = str(props.get("name", props.get("id", f"fault {i}")))
        if gtype in ("LineString", "MultiLineString"):
            coords = geom.get("coordinates") or []
            parts = [coords] if gtype == "LineString" else coords
            lines = []
            for part in parts:
                try:
                    arr = np.asarray(part, dtype=float)
                    if arr.ndim != 2 or arr.shape[0] < 2 or arr.shape[1] < 2:
                        raise ValueError
                    arr = arr[:, :2]
                    if not (np.isfinite(arr).all() and (np.abs(arr[:, 1]) <= 90).all()):
                        raise ValueError
                except (TypeError, ValueError):
                    problems.append(problem("a trace needs two or more [lon, lat] vertices with "
                                            "latitudes in [-90, 90]", field="geometry", row=i))
                    lines = None
                    break
                lines.append(arr)
            dip = _num(props, "dip_deg", i, problems)
            if math.isfinite(dip) and not 0.0 <= dip <= 90.0:
                problems.append(problem(f"dip_deg must be between 0 and 90, got {dip}",
                                        field="dip_deg", row=i))
            raw_dd = props.get("dip_direction_deg", props.get("dip_direction"))
            try:
                dd = parse_dip_direction(raw_dd)
            except (TypeError, ValueError):
                problems.append(problem(f"dip_direction_deg must be degrees or a compass point, "
                                        f"got {raw_dd!r}", field="dip_direction_deg", row=i))
                dd = math.nan
            if lines:
                for arr in lines:
                    traces["lines"].append(arr)
                    traces["dip_deg"].append(dip)
                    traces["dip_direction_deg"].append(dd)
                    traces["name"].append(name)
                    traces["feature"].append(i - 1)
        elif gtype in ("Point", None):
            strike = _num(props, "strike_deg", i, problems)
            dip = _num(props, "dip_deg", i, problems)
            if math.isfinite(dip) and not 0.0 <= dip <= 90.0:
                problems.append(problem(f"dip_deg must be between 0 and 90, got {dip}",
                                        field="dip_deg", row=i))
            xy = geom.get("coordinates") if gtype == "Point" else None
            if xy is not None:
                try:
                    xy = [float(xy[0]), float(xy[1])]
                    if not (math.isfinite(xy[0]) and math.isfinite(xy[1]) and abs(xy[1]) <= 90):
                        raise ValueError
                except (TypeError, ValueError, IndexError, KeyError):
                    problems.append(problem("a point needs [lon, lat] with latitude in "
                                            "[-90, 90]", field="geometry", row=i))
                    xy = None
            planes["strike_deg"].append(strike)
            planes["dip_deg"].append(dip)
            planes["name"].append(name)
            planes["lon"].append(xy[0] if xy else math.nan)
            planes["lat"].append(xy[1] if xy else math.nan)
            planes["feature"].append(i - 1)
        else:
            problems.append(problem(f"geometry type {gtype!r} is not a fault: use LineString, "
                                    "MultiLineString or Point", field="geometry", row=i))
    if problems:
        raise InputError(f"{field}: {len(problems)} problem(s) with the fault features", problems)
    if not planes["strike_deg"] and not traces["lines"]:
        raise InputError(f"{field} holds no faults", [problem("no features", field=field)])
    return FaultInput(planes=planes, traces=traces)


def faults_from_records(records: list[dict], field: str = "faults") -> FaultInput:
    """Strike/dip planes from table rows (dicts with ``strike_deg``, ``dip_deg`` and optionally
    ``name``, ``lon``, ``lat``; NaN cells count as empty), row numbers from 1."""
    records = list(records)
    features = []
    for i, rec in enumerate(records):
        geom = None
        if "lon" in rec and "lat" in rec and np.isfinite([rec["lon"], rec["lat"]]).all():
            geom = {"type": "Point", "coordinates": [rec["lon"], rec["lat"]]}
        props = {k: (None if isinstance(v, float) and math.isnan(v) else v)
                 for k, v in rec.items()}
        props.setdefault("name", f"plane {i + 1}")
        features.append({"type": "Feature", "properties": props, "geometry": geom})
    return faults_from_geojson({"type": "FeatureCollection", "features": features},
                               field=field)
