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

from stressmap import validate
from stressmap.errors import InputError, problem

__all__ = ["COMPASS_POINTS", "KNOWN_PROPERTIES", "FaultInput", "restore_property_names", "faults_from_geojson", "faults_from_records",
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


#: Property names a fault reader knows, and the 10-character stems a shapefile (dBASE) cuts them
#: to: a field written as ``dip_direction_deg`` comes back as ``dip_direct``.
KNOWN_PROPERTIES = ("name", "id", "strike_deg", "dip_deg", "dip_direction_deg", "dip_direction")
_DBF_NAME_LENGTH = 10
_TRUNCATED = {k[:_DBF_NAME_LENGTH]: k for k in reversed(KNOWN_PROPERTIES)
              if len(k) > _DBF_NAME_LENGTH}


def restore_property_names(props: dict) -> dict:
    """Properties with names matched case-insensitively and shapefile-truncated names restored.

    Examples
    --------
    >>> restore_property_names({"DIP_DEG": 60, "dip_direct": "NE", "Name": "A"})
    {'dip_deg': 60, 'dip_direction_deg': 'NE', 'name': 'A'}
    """
    out = {}
    for key, value in props.items():
        low = str(key).strip().lower()
        full = _TRUNCATED.get(low, low) if low not in KNOWN_PROPERTIES else low
        out.setdefault(full, value)
    return out


def _cell(props: dict, key: str, *aliases: str):
    """A property value, or :data:`validate.MISSING` when absent, null, empty or NaN (CSV)."""
    for k in (key, *aliases):
        value = validate.cell(props.get(k))
        if value is not validate.MISSING:
            return value
    return validate.MISSING


def _dip(props: dict, row: int, problems: list) -> float:
    value = validate.number(_cell(props, "dip_deg"), "dip_deg", problems, row=row, text=True,
                            required=True, low=0.0, high=90.0)
    return math.nan if value is None else value


def _trace_lines(geom: dict, gtype: str, row: int, problems: list) -> list | None:
    """The (k, 2) lon/lat vertex arrays of a LineString or MultiLineString, or None."""
    coords = geom.get("coordinates")
    parts = [coords] if gtype == "LineString" else coords
    if not isinstance(parts, list) or not parts:
        parts = [None]
    lines = []
    for part in parts:
        found: list = []
        arr = validate.positions(part, "coordinates", found, min_count=2, lon_range=None)
        if arr is None:
            detail = found[0]["message"] if found else "no vertices"
            where = found[0].get("field", "coordinates") if found else "coordinates"
            problems.append(problem(f"a trace needs two or more [lon, lat] vertices with "
                                    f"latitudes in [-90, 90]; {where}: {detail}",
                                    field="geometry", row=row))
            return None
        lines.append(arr)
    return lines


def _add_trace(traces: dict, props: dict, geom: dict, gtype: str, i: int, name: str,
               problems: list) -> None:
    lines = _trace_lines(geom, gtype, i, problems)
    dip = _dip(props, i, problems)
    raw_dd = _cell(props, "dip_direction_deg", "dip_direction")
    try:
        dd = parse_dip_direction(None if raw_dd is validate.MISSING else raw_dd)
    except (TypeError, ValueError):
        problems.append(problem(f"dip_direction_deg must be degrees or a compass point, "
                                f"got {raw_dd!r}", field="dip_direction_deg", row=i))
        dd = math.nan
    for arr in lines or ():
        traces["lines"].append(arr)
        traces["dip_deg"].append(dip)
        traces["dip_direction_deg"].append(dd)
        traces["name"].append(name)
        traces["feature"].append(i - 1)


def _add_plane(planes: dict, props: dict, geom: dict, gtype, i: int, name: str,
               problems: list) -> None:
    strike = validate.number(_cell(props, "strike_deg"), "strike_deg", problems, row=i,
                             text=True, required=True)
    dip = _dip(props, i, problems)
    xy = None
    if gtype == "Point" and geom.get("coordinates") is not None:
        xy = validate.position(geom.get("coordinates"), "geometry", problems, row=i,
                               lon_range=None)
    planes["strike_deg"].append(math.nan if strike is None else strike)
    planes["dip_deg"].append(dip)
    planes["name"].append(name)
    planes["lon"].append(xy[0] if xy else math.nan)
    planes["lat"].append(xy[1] if xy else math.nan)
    planes["feature"].append(i - 1)


def faults_from_geojson(collection: dict, field: str = "faults") -> FaultInput:
    """Split a GeoJSON FeatureCollection into strike/dip planes and line traces.

    Numbers and positions are checked by :mod:`stressmap.validate` (the same messages as every
    other reader); CSV cells may hold numbers as text.

    Raises
    ------
    InputError
        One problem per bad field of a feature (row = 1-based feature number).

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
    >>> fc["features"][1]["properties"]["dip_deg"] = 95
    >>> faults_from_geojson(fc)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: faults: 1 problem(s) with the fault features
      - row 2, field dip_deg: dip_deg must be <= 90, got 95
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
        if isinstance(props, dict):
            props = restore_property_names(props)
        geom = feat.get("geometry") or {}
        if not isinstance(props, dict):
            problems.append(problem("properties must be an object", field="properties", row=i))
            continue
        gtype = geom.get("type") if isinstance(geom, dict) else None
        name = str(props.get("name", props.get("id", f"fault {i}")))
        if gtype in ("LineString", "MultiLineString"):
            _add_trace(traces, props, geom, gtype, i, name, problems)
        elif gtype in ("Point", None):
            _add_plane(planes, props, geom if isinstance(geom, dict) else {}, gtype, i, name,
                       problems)
        else:
            problems.append(problem(f"geometry type {gtype!r} is not a fault: use LineString, "
                                    "MultiLineString or Point", field="geometry", row=i))
    validate.raise_problems(problems, f"{field}: {len(problems)} problem(s) with the fault features")
    if not planes["strike_deg"] and not traces["lines"]:
        raise InputError(f"{field} holds no faults", [problem("no features", field=field)])
    return FaultInput(planes=planes, traces=traces)


def faults_from_records(records, field: str = "faults") -> FaultInput:
    """Strike/dip planes from table rows (dicts with ``strike_deg``, ``dip_deg`` and optionally
    ``name``, ``lon``, ``lat``; NaN cells count as empty), row numbers from 1."""
    features = []
    for i, rec in enumerate(records):
        lon, lat = _cell(rec, "lon"), _cell(rec, "lat")
        geom = None  # a plane without a place; half a place is an error the parser reports
        if lon is not validate.MISSING or lat is not validate.MISSING:
            geom = {"type": "Point", "coordinates": [_plain(lon), _plain(lat)]}
        props = {k: (None if isinstance(v, float) and math.isnan(v) else v)
                 for k, v in rec.items()}
        props.setdefault("name", f"plane {i + 1}")
        features.append({"type": "Feature", "properties": props, "geometry": geom})
    return faults_from_geojson({"type": "FeatureCollection", "features": features},
                               field=field)


def _plain(value):
    """A CSV cell as a JSON value (numpy scalars to Python, absent to null)."""
    if value is validate.MISSING:
        return None
    return value.item() if hasattr(value, "item") else value
