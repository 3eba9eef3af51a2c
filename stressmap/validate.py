"""The one field validator: numbers, ranges, enumerations, positions, boxes, flags and text.

Every reader of user input (plate documents, site-screening requests, fault files, the service's
query parsing, the CLI's option parsers) checks its fields with these functions, so the same bad
value gets the same message wherever it is given.

The pattern is *collect, then raise*: each checker takes the value, the ``field`` it came from
(a JSON-pointer-like path such as ``sheet.poisson``, a column name, or a CLI option), and a
``problems`` list. It returns the cleaned value, or ``None`` after appending one
:func:`stressmap.errors.problem` naming the field (and the 1-based ``row`` when given). The caller
checks every field, then calls :func:`raise_problems` once, so the user sees every defect at once.

>>> problems = []
>>> number(0.6, "sheet.poisson", problems, low=0, high=0.5, high_inclusive=False)
>>> number("3", "sheet.thickness_km", problems, low=0)
>>> [p["message"] for p in problems]
['poisson must be < 0.5, got 0.6', "thickness_km must be a number, got the string '3'"]

Messages start with the field's last name (``poisson`` for ``sheet.poisson``, ``dip_deg`` for a
column) unless ``name=`` says otherwise, and end with the value that was given.

Layer: base (imports only the standard library, numpy and :mod:`stressmap.errors`).
"""

from __future__ import annotations

import json
import math
import re
import sys
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from stressmap.errors import InputError, problem

__all__ = [
    "MISSING",
    "LON_RANGE",
    "WRAPPED_LON_RANGE",
    "cell",
    "describe",
    "leaf",
    "number",
    "number_pair",
    "choice",
    "boolean",
    "text",
    "position",
    "positions",
    "lonlat_arrays",
    "bbox",
    "bbox_width_deg",
    "weights",
    "weights_text",
    "unknown_fields",
    "raise_problems",
]


class _Missing:
    """Marker for a field that is absent (as opposed to given as null)."""

    def __repr__(self) -> str:
        return "MISSING"

    def __bool__(self) -> bool:
        return False


#: Pass ``mapping.get(key, MISSING)`` to a checker to tell an absent field from a null one.
MISSING = _Missing()

#: Longitudes of positions, degrees.
LON_RANGE = (-180.0, 180.0)
#: Longitudes accepted for box edges: -180..180 or 0..360 (see :func:`bbox`).
WRAPPED_LON_RANGE = (-180.0, 360.0)
#: Smallest positive normal float; anything nonzero below it is a subnormal (denormal) number.
_TINY = sys.float_info.min


def cell(value):
    """A table cell or optional property: null, blank text and NaN (pandas' empty cell) become
    :data:`MISSING`; anything else is returned unchanged.

    Examples
    --------
    >>> cell(None), cell("  "), cell(float("nan")), cell(np.float64("nan")), cell("0"), cell(0.0)
    (MISSING, MISSING, MISSING, MISSING, '0', 0.0)
    """
    if value is None or (isinstance(value, str) and not value.strip()):
        return MISSING
    if isinstance(value, (float, np.floating)) and math.isnan(value):
        return MISSING
    return value


def describe(value) -> str:
    """A short description of a JSON value for messages (never the whole value).

    Examples
    --------
    >>> describe(None), describe(True), describe("x" * 50), describe([1]), describe({}), describe(2.5)
    ('null', 'a boolean', "the string 'xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...'", 'an array', 'an object', '2.5')
    """
    if value is None or value is MISSING:
        return "null"
    if isinstance(value, (bool, np.bool_)):
        return "a boolean"
    if isinstance(value, str):
        s = value if len(value) <= 40 else value[:37] + "..."
        return f"the string {s!r}"
    if isinstance(value, dict):
        return "an object"
    if isinstance(value, (list, tuple)):
        return "an array"
    if isinstance(value, (int, float, np.integer, np.floating)):
        return _fmt(value)
    return type(value).__name__


def leaf(field: str | None) -> str:
    """The name a message uses for ``field``: its last dotted part, without list indices.

    Examples
    --------
    >>> leaf("boundary.features[3].properties.age_myr"), leaf("--weights"), leaf("points[2]")
    ('age_myr', '--weights', 'points')
    >>> leaf(None)
    'value'
    """
    if not field:
        return "value"
    last = str(field).rsplit(".", 1)[-1]
    return re.sub(r"\[\d*\]$", "", last) or str(field)


def _fmt(v) -> str:
    """A number as it reads best: integers plainly, floats with up to 6 significant digits."""
    try:
        if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
            s = str(int(v))
            return s if len(s) <= 20 else f"an integer of {len(s)} digits"
        return f"{float(v):g}"
    except (OverflowError, ValueError, TypeError):
        return repr(v)


def _missing(what: str, required) -> str:
    return f"missing {what!r}" + (f" ({required})" if isinstance(required, str) else "")


def _short(value) -> str:
    """A value as JSON-like text of at most 60 characters (arrays shown, not described).

    Examples
    --------
    >>> _short([1.0, float("nan"), True]), len(_short("x" * 70)), _short({1})
    ('[1.0, NaN, true]', 60, 'set')
    """
    if isinstance(value, (list, tuple)):
        try:
            text = json.dumps(list(value))
        except (TypeError, ValueError):
            text = describe(value)
    elif isinstance(value, str):
        text = repr(value)
    else:
        text = describe(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _add(problems: list, message: str, field, row) -> None:
    problems.append(problem(message, field=field, row=row))


# ---------------------------------------------------------------------------------------- numbers


def number(value, field: str | None, problems: list, *, name: str | None = None,
           row: int | None = None, low: float | None = None, high: float | None = None,
           low_inclusive: bool = True, high_inclusive: bool = True, integer: bool = False,
           required: bool | str = False, nullable: bool = False, text: bool = False,
           subnormal: bool = False) -> float | int | None:
    """Check one number; return it as float (int when ``integer``) or None (problem recorded).

    Parameters
    ----------
    value
        The given value: a JSON number (int/float, numpy scalars too; booleans are refused),
        :data:`MISSING` when absent, or text when ``text=True`` (CSV cells, query strings, CLI
        options: ``" 2.5 "`` reads as 2.5).
    field, problems, row
        Where the value came from and the list that collects problems.
    name
        Name used in the message (default: :func:`leaf` of ``field``).
    low, high, low_inclusive, high_inclusive
        Allowed range; ``None`` leaves a side open. Bounds are inclusive by default.
    integer
        Require a whole number (3.0 is accepted and returned as 3).
    required
        When the value is :data:`MISSING` (or empty text): record "missing 'NAME'" (a string
        is added as the explanation, ``required="depth in km"`` gives "missing 'NAME' (depth
        in km)"). When false, return None
        silently.
    nullable
        Accept ``None`` (JSON null) as "not given" and return None silently; otherwise null is
        "not a number".
    subnormal
        Accept subnormal (denormal) numbers such as 5e-324; by default they are refused because
        no physical quantity is given that way and dividing by one overflows.

    Examples
    --------
    >>> p = []
    >>> number(2, "mesh.edge_km", p, low=1), number(3.0, "samples", p, integer=True)
    (2.0, 3)
    >>> number(MISSING, "depth_km", p), number(None, "age_myr", p, nullable=True), p
    (None, None, [])
    >>> for v in (True, float("nan"), 10**400, 5e-324, 2.5, -1):
    ...     _ = number(v, "x.count", p, low=0, low_inclusive=False, integer=True)
    >>> for q in p: print(q["message"])
    count must be a number, got a boolean
    count must be finite, got nan
    count is too large: an integer of 401 digits does not fit a 64-bit float
    count 5e-324 is a subnormal number, too small to compute with; give 0 or a magnitude of at least 2.22507e-308
    count must be a whole number, got 2.5
    count must be > 0, got -1
    >>> p = []
    >>> number(" 7.5 ", "dip_deg", p, text=True, row=3, high=90), number("", "dip_deg", p, text=True, required=True, row=4)
    (7.5, None)
    >>> p
    [{'message': "missing 'dip_deg'", 'field': 'dip_deg', 'row': 4}]
    """
    what = name or leaf(field)
    if value is MISSING or (text and isinstance(value, str) and not value.strip()) or (
            value is None and (nullable or (required and text))):
        if required and not (value is None and nullable):
            _add(problems, _missing(what, required), field, row)
        return None
    v, why = _as_float(value, text)
    if why is None and not subnormal and v != 0.0 and abs(v) < _TINY:
        why = (f"{v:g} is a subnormal number, too small to compute with; give 0 or a magnitude "
               f"of at least {_TINY:g}")
    if why is None and integer and v != math.floor(v):
        why = f"must be a whole number, got {v:g}"
    if why is None:
        why = _outside(v, low, high, low_inclusive, high_inclusive)
    if why is not None:
        _add(problems, f"{what} {why}", field, row)
        return None
    return int(v) if integer else v


def _as_float(value, text: bool) -> tuple[float, str | None]:
    """(value as a finite float, None) or (nan, why not) -- the message without the name."""
    if text and isinstance(value, str):
        try:
            v = float(value.strip())
        except ValueError:
            return math.nan, f"must be a number, got {describe(value)}"
    elif isinstance(value, (bool, np.bool_)) or not isinstance(
            value, (int, float, np.integer, np.floating)):
        return math.nan, f"must be a number, got {describe(value)}"
    else:
        try:
            v = float(value)
        except OverflowError:
            return math.nan, f"is too large: {_fmt(value)} does not fit a 64-bit float"
    return (v, None) if math.isfinite(v) else (v, f"must be finite, got {v}")


def _outside(v: float, low, high, low_inclusive: bool, high_inclusive: bool) -> str | None:
    """Why ``v`` lies outside the range (naming the side broken), or None."""
    if low is not None and (v < low or (v == low and not low_inclusive)):
        return f"must be {'>=' if low_inclusive else '>'} {_fmt(low)}, got {_fmt(v)}"
    if high is not None and (v > high or (v == high and not high_inclusive)):
        return f"must be {'<=' if high_inclusive else '<'} {_fmt(high)}, got {_fmt(v)}"
    return None


def number_pair(value, field: str | None, problems: list, *, name: str | None = None,
                row: int | None = None, low: float | None = None, high: float | None = None,
                required: bool | str = False, text: str | None = None
                ) -> tuple[float, float] | None:
    """A ``[low, high]`` interval of finite numbers within ``[low, high]`` (inclusive).

    ``text`` is a separator: with ``text=","`` the string ``"0.5,0.8"`` reads as a pair too.

    Examples
    --------
    >>> p = []
    >>> number_pair([0.4, 0.8], "uncertainty.friction_range", p, low=0, high=2)
    (0.4, 0.8)
    >>> number_pair([0.8, 0.4], "uncertainty.friction_range", p)
    >>> number_pair([0.1, 3], "uncertainty.friction_range", p, low=0, high=2)
    >>> number_pair("0.1,0.2", "uncertainty.friction_range", p)
    >>> number_pair("0.1,x", "--friction-range", p, text=",")
    >>> for q in p: print(q["message"])
    friction_range low 0.8 exceeds high 0.4
    friction_range must lie within [0, 2], got [0.1, 3]
    friction_range must be a pair [low, high] of finite numbers, got the string '0.1,0.2'
    --friction-range must be a pair LOW,HIGH of finite numbers, got the string '0.1,x'
    >>> number_pair(" 1 , 2", "--friction-range", p, text=",")
    (1.0, 2.0)
    """
    what = name or leaf(field)
    if value is MISSING or value is None:
        if required:
            _add(problems, _missing(what, required), field, row)
        return None
    given = value
    if text and isinstance(value, str):
        value = value.split(text)
    inner: list = []
    if isinstance(value, (list, tuple)) and len(value) == 2:
        inner = [number(v, field, inner, name=what, text=bool(text)) for v in value]
    if len(value if isinstance(value, (list, tuple)) else ()) != 2 or any(
            v is None for v in inner):
        _add(problems, f"{what} must be a pair {'LOW' + text + 'HIGH' if text else '[low, high]'}"
             f" of finite numbers, got {describe(given)}", field, row)
        return None
    a, b = inner
    if a > b:
        _add(problems, f"{what} low {_fmt(a)} exceeds high {_fmt(b)}", field, row)
        return None
    if (low is not None and a < low) or (high is not None and b > high):
        lo = "-inf" if low is None else _fmt(low)
        hi = "inf" if high is None else _fmt(high)
        _add(problems, f"{what} must lie within [{lo}, {hi}], got [{_fmt(a)}, {_fmt(b)}]",
             field, row)
        return None
    return a, b


# ----------------------------------------------------------------------- enumerations, flags, text


def choice(value, options: Sequence[str], field: str | None, problems: list, *,
           name: str | None = None, row: int | None = None, casefold: bool = False,
           required: bool | str = False) -> str | None:
    """One of ``options``; with ``casefold`` the match ignores case and surrounding spaces and
    the option's own spelling is returned.

    Examples
    --------
    >>> p = []
    >>> choice("ridge", ("ridge", "free"), "kind", p), choice(" CSV", ("geojson", "csv"), "format", p, casefold=True)
    ('ridge', 'csv')
    >>> choice("ridgee", ("ridge", "free"), "boundary.features[3].properties.kind", p)
    >>> choice(3, ("a", "b"), "mode", p, name="ridge-push mode")
    >>> choice(MISSING, ("oceanic", "continental"), "lithosphere", p, required=True)
    >>> for q in p: print(q["message"])
    unknown kind 'ridgee'; expected one of ridge, free
    unknown ridge-push mode 3; expected one of a, b
    missing 'lithosphere'; expected one of oceanic, continental
    """
    what = name or leaf(field)
    if value is MISSING:
        if required:
            _add(problems, f"missing {what!r}; expected one of {', '.join(options)}", field, row)
        return None
    if isinstance(value, str):
        if value in options:
            return value
        if casefold:
            folded = {o.casefold(): o for o in options}
            hit = folded.get(value.strip().casefold())
            if hit is not None:
                return hit
        shown = repr(value if len(value) <= 40 else value[:37] + "...")
    else:
        shown = describe(value)
    _add(problems, f"unknown {what} {shown}; expected one of {', '.join(options)}", field, row)
    return None


_TRUE = ("true", "yes", "1", "on")
_FALSE = ("false", "no", "0", "off")


def boolean(value, field: str | None, problems: list, *, name: str | None = None,
            row: int | None = None, text: bool = False) -> bool | None:
    """A JSON boolean; with ``text`` also true/false, yes/no, 1/0, on/off (any case).

    Examples
    --------
    >>> p = []
    >>> boolean(True, "x", p), boolean("Yes", "x", p, text=True), boolean(1, "refine", p), p
    (True, True, None, [{'message': 'refine must be true or false, got 1', 'field': 'refine'}])
    """
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if text and isinstance(value, str):
        key = value.strip().lower()
        if key in _TRUE or key in _FALSE:
            return key in _TRUE
    _add(problems, f"{name or leaf(field)} must be true or false, got {describe(value)}", field,
         row)
    return None


def text(value, field: str | None, problems: list, *, name: str | None = None,
         row: int | None = None, max_length: int | None = 10_000, empty: bool = False,
         strip: bool = True) -> str | None:
    """A string of at most ``max_length`` characters (after stripping spaces when ``strip``);
    empty strings are refused unless ``empty``.

    Examples
    --------
    >>> p = []
    >>> text("  Meridia ", "name", p), text("", "name", p), text(7, "description", p, empty=True)
    ('Meridia', None, None)
    >>> text("x" * 300, "group", p, max_length=200)
    >>> for q in p: print(q["message"])
    name must be a non-empty string, got the string ''
    description must be a string, got 7
    group is 300 characters long; the limit is 200
    """
    what = name or leaf(field)
    if not isinstance(value, str):
        _add(problems, f"{what} must be a {'' if empty else 'non-empty '}string, got "
             f"{describe(value)}", field, row)
        return None
    out = value.strip() if strip else value
    if not out and not empty:
        _add(problems, f"{what} must be a non-empty string, got {describe(value)}", field, row)
        return None
    if max_length is not None and len(out) > max_length:
        _add(problems, f"{what} is {len(out):,} characters long; the limit is {max_length:,}",
             field, row)
        return None
    return out


# ------------------------------------------------------------------------------- positions, boxes


def _lonlat_problem(lon: float, lat: float, lon_range) -> str | None:
    bad = []
    if lon_range is not None and not lon_range[0] <= lon <= lon_range[1]:
        bad.append(f"longitude {lon:g} outside [{lon_range[0]:g}, {lon_range[1]:g}]")
    if not -90.0 <= lat <= 90.0:
        bad.append(f"latitude {lat:g} outside [-90, 90]")
    return "coordinates out of range: " + " and ".join(bad) if bad else None


def position(value, field: str | None, problems: list, *, row: int | None = None,
             lon_range: tuple[float, float] | None = LON_RANGE, altitude: bool = True,
             text: bool = False, mapping: bool = False) -> tuple[float, float] | None:
    """One position ``[lon, lat]`` in degrees (GeoJSON order; ``[lon, lat, alt]`` when
    ``altitude``), also ``"LON,LAT"`` text with ``text`` and ``{"lon": .., "lat": ..}`` with
    ``mapping``. ``lon_range=None`` accepts any finite longitude (the caller wraps it).

    Examples
    --------
    >>> p = []
    >>> position([10, -5], "site", p), position("-15, -20.5", "site", p, text=True)
    ((10.0, -5.0), (-15.0, -20.5))
    >>> position({"lon": 3, "lat": 4}, "site", p, mapping=True), p
    ((3.0, 4.0), [])
    >>> position([200, -95], "coordinates[1]", p), position([1, "a"], "point", p)
    (None, None)
    >>> position([float("nan"), 0], "point", p), position([1], "point", p)
    (None, None)
    >>> for q in p: print(q["message"])
    coordinates out of range: longitude 200 outside [-180, 180] and latitude -95 outside [-90, 90]
    longitude and latitude must be numbers
    coordinates must be finite (no NaN or infinity), got [nan, 0.0]
    a position must be [lon, lat], got an array of length 1
    """
    if text and isinstance(value, str):
        parts = value.split(",")
        try:
            if len(parts) != 2:
                raise ValueError
            value = [float(parts[0]), float(parts[1])]
        except ValueError:
            _add(problems, f"a position must be LON,LAT in degrees, got {describe(value)}",
                 field, row)
            return None
    elif mapping and isinstance(value, dict):
        if set(value) - {"lon", "lat", "alt"} or not {"lon", "lat"} <= set(value):
            _add(problems, "a position object must have exactly 'lon' and 'lat'", field, row)
            return None
        value = [value["lon"], value["lat"]]
    top = 3 if altitude else 2
    if not isinstance(value, (list, tuple)) or not 2 <= len(value) <= top:
        _add(problems, f"a position must be [lon, lat], got {describe(value)}"
             + (f" of length {len(value)}" if isinstance(value, (list, tuple)) else ""),
             field, row)
        return None
    inner: list = []
    lon = number(value[0], field, inner, subnormal=True)
    lat = number(value[1], field, inner, subnormal=True)
    if lon is None or lat is None:
        if any("finite" in q["message"] for q in inner) and not any(
                "a number" in q["message"] for q in inner):
            _add(problems, f"coordinates must be finite (no NaN or infinity), got "
                 f"[{float(value[0])}, {float(value[1])}]", field, row)
        else:
            _add(problems, "longitude and latitude must be numbers", field, row)
        return None
    bad = _lonlat_problem(lon, lat, lon_range)
    if bad:
        _add(problems, bad, field, row)
        return None
    return lon, lat


def positions(value, field: str, problems: list, *, min_count: int = 1,
              lon_range: tuple[float, float] | None = LON_RANGE) -> np.ndarray | None:
    """A list of positions -> (n, 2) float array (lon, lat), each bad position named by index.

    Examples
    --------
    >>> p = []
    >>> positions([[0, 0], [1, 1]], "geometry.coordinates", p, min_count=2).tolist()
    [[0.0, 0.0], [1.0, 1.0]]
    >>> positions([[0, 0]], "geometry.coordinates", p, min_count=2), p[-1]["message"]
    (None, 'needs at least 2 positions, got 1')
    >>> positions([[0, 0], [0, 91]], "c", p), p[-1]["field"]
    (None, 'c[1]')
    """
    if not isinstance(value, (list, tuple)):
        _add(problems, f"coordinates must be an array of [lon, lat] positions, got "
             f"{describe(value)}", field, None)
        return None
    n0 = len(problems)
    out = [position(v, f"{field}[{k}]", problems, lon_range=lon_range) for k, v in enumerate(value)]
    if len(problems) > n0:
        return None
    if len(out) < min_count:
        _add(problems, f"needs at least {min_count} positions, got {len(out)}", field, None)
        return None
    return np.asarray(out, dtype=float).reshape(-1, 2)


def lonlat_arrays(lon, lat, field_of, problems: list, *,
                  lon_range: tuple[float, float] | None = LON_RANGE, first_row: int = 1,
                  max_listed: int = 20) -> bool:
    """Check coordinate arrays at once (vectorised): NaN/infinity and out-of-range values, one
    problem per bad row and axis (at most ``max_listed`` each, then one counting the rest).
    Returns True when all are good.

    ``field_of`` names the field of row i: a function ``i -> str`` (``points[i]``) or a pair of
    column names ``("lon", "lat")``. Rows are numbered from ``first_row``.

    Examples
    --------
    >>> p = []
    >>> lonlat_arrays([0, 10, 400], [0, 95, 0], lambda i: f"points[{i}]", p, lon_range=(-360, 360))
    False
    >>> for q in p: print(q["field"], q["row"], q["message"])
    points[1] 2 latitude 95 is outside [-90, 90]
    points[2] 3 longitude 400 is outside [-360, 360]
    >>> p = []
    >>> lonlat_arrays([np.nan, 1, 2], [0, 0, 0], ("lon", "lat"), p, max_listed=0)
    False
    >>> p
    [{'message': '1 more rows with bad longitude', 'field': 'lon'}]
    """
    lon = np.asarray(lon, dtype=float)
    lat = np.asarray(lat, dtype=float)
    n0 = len(problems)
    axes = (("latitude", lat, (-90.0, 90.0), 1), ("longitude", lon, lon_range, 0))
    for word, values, rng, k in axes:
        name = field_of if callable(field_of) else (lambda i, k=k: field_of[k])
        finite = np.isfinite(values)
        bad = ~finite if rng is None else ~(finite & (values >= rng[0]) & (values <= rng[1]))
        rows = np.flatnonzero(bad)
        for i in rows[:max_listed].tolist():
            why = (f"must be a finite number, got {values[i]}" if not finite[i] else
                   f"{values[i]:g} is outside [{rng[0]:g}, {rng[1]:g}]")
            _add(problems, f"{word} {why}", name(i), i + first_row)
        if rows.size > max_listed:
            _add(problems, f"{rows.size - max_listed} more rows with bad {word}",
                 None if callable(field_of) else field_of[k], None)
    return len(problems) == n0


def bbox_width_deg(west: float, east: float) -> float:
    """Longitude span of a box, degrees, read eastward from ``west`` to ``east``.

    The one antimeridian rule: a box runs east from W to E; when E < W it crosses the
    antimeridian (E counts as E + 360). W == E is refused by :func:`bbox` (a box of no width,
    not the whole globe: give -180, 180 for that).

    Examples
    --------
    >>> bbox_width_deg(-10, 20), bbox_width_deg(170, -170), bbox_width_deg(350, 10), bbox_width_deg(-180, 180)
    (30.0, 20.0, 20.0, 360.0)
    """
    return float(east - west if east > west else east - west + 360.0)


def bbox(value, field: str | None, problems: list, *, row: int | None = None,
         text: bool = False) -> tuple[float, float, float, float] | None:
    """A box ``(W, S, E, N)`` in degrees, from four numbers (or ``"W,S,E,N"`` with ``text``).

    Rules (one for the whole package): ``-90 <= S < N <= 90``; W and E lie in -180..360 (so
    boxes may be written in -180..180 or 0..360 longitudes) and differ; the box runs east from
    W to E, so W > E crosses the antimeridian (see :func:`bbox_width_deg`); it spans at most
    360 degrees of longitude.

    Examples
    --------
    >>> p = []
    >>> bbox([-20, -30, 0, -10], "region.bbox", p), bbox("170,-10,-170,10", "bbox", p, text=True)
    ((-20.0, -30.0, 0.0, -10.0), (170.0, -10.0, -170.0, 10.0))
    >>> bbox([350, 0, 370, 5], "bbox", p), bbox([5, 0, 5, 10], "bbox", p), bbox([0, 10, 5, 5], "bbox", p)
    (None, None, None)
    >>> bbox([-180, 0, 360, 1], "bbox", p), bbox("1,2,3", "--bbox", p, text=True)
    (None, None)
    >>> for q in p: print(q["message"])
    west 350 and east 370 must lie within [-180, 360] (west > east means the box crosses the antimeridian)
    west 5 and east 5 must differ: the box has no width (-180, ..., 180, ... is the whole globe)
    south 10 must be below north 5, both within [-90, 90]
    west -180 and east 360 span 540 degrees of longitude; at most 360
    expected four finite numbers [W, S, E, N] in degrees (W,S,E,N in text), got [1.0, 2.0, 3.0]
    """
    values = value
    if text and isinstance(value, str):
        try:
            values = [float(v) for v in value.split(",")]
        except ValueError:
            values = None
    inner: list = []
    if not (isinstance(values, (list, tuple)) and len(values) == 4):
        nums = None
    else:
        nums = [number(v, field, inner) for v in values]
    if nums is None or any(v is None for v in nums):
        shown = _short(values if isinstance(values, (list, tuple)) else value)
        _add(problems, f"expected four finite numbers [W, S, E, N] in degrees"
             f"{' (W,S,E,N in text)' if text else ''}, got {shown}", field, row)
        return None
    w, s, e, n = nums
    n0 = len(problems)
    if not -90.0 <= s < n <= 90.0:
        _add(problems, f"south {s:g} must be below north {n:g}, both within [-90, 90]", field, row)
    lo, hi = WRAPPED_LON_RANGE
    if not (lo <= w <= hi and lo <= e <= hi):
        _add(problems, f"west {w:g} and east {e:g} must lie within [{lo:g}, {hi:g}] (west > east "
             "means the box crosses the antimeridian)", field, row)
    elif w == e:
        _add(problems, f"west {w:g} and east {e:g} must differ: the box has no width (-180, ..., "
             "180, ... is the whole globe)", field, row)
    elif bbox_width_deg(w, e) > 360.0:
        _add(problems, f"west {w:g} and east {e:g} span {bbox_width_deg(w, e):g} degrees of "
             "longitude; at most 360", field, row)
    return (w, s, e, n) if len(problems) == n0 else None


# --------------------------------------------------------------------------- weights, mappings


def weights(value, field: str, problems: list, *, nullable: bool = True) -> dict | None:
    """Load-group weights: an object of group name -> finite number (null: no weights).

    Examples
    --------
    >>> p = []
    >>> weights({"ridge": 1.5, "slab": 2}, "weights", p), weights(None, "weights", p)
    ({'ridge': 1.5, 'slab': 2.0}, None)
    >>> weights({"ridge": "x"}, "weights", p), weights([1], "weights", p)
    (None, None)
    >>> for q in p: print(q["field"], q["message"])
    weights.ridge ridge must be a number, got the string 'x'
    weights weights must be an object of load group -> number, got an array
    """
    if value is None or value is MISSING:
        if not nullable:
            _add(problems, _missing(leaf(field), True), field, None)
        return None
    if not isinstance(value, dict):
        _add(problems, f"{leaf(field)} must be an object of load group -> number, got "
             f"{describe(value)}", field, None)
        return None
    n0 = len(problems)
    out = {str(k): number(v, f"{field}.{k}", problems, name=str(k)) for k, v in value.items()}
    return out if len(problems) == n0 else None


def weights_text(value: str | None, field: str, problems: list,
                 separators: str = "=:") -> dict | None:
    """``group=value,group=value`` (any of ``separators`` between name and value) -> dict;
    empty text -> None.

    Examples
    --------
    >>> p = []
    >>> weights_text("ridge=1.5, subduction:0.5", "--weights", p), weights_text("", "--weights", p)
    ({'ridge': 1.5, 'subduction': 0.5}, None)
    >>> weights_text("ridge=abc,slab", "--weights", p)
    >>> for q in p: print(q["message"])
    cannot read 'ridge=abc' as group=value (value must be a finite number)
    cannot read 'slab' as group=value (value must be a finite number)
    """
    if not value:
        return None
    out: dict = {}
    n0 = len(problems)
    for item in value.split(","):
        cut = min((i for i in (item.find(s) for s in separators) if i >= 0), default=-1)
        name, raw = (item[:cut].strip(), item[cut + 1:]) if cut >= 0 else ("", "")
        got = number(raw, field, [], text=True, required=True) if name else None
        if got is None:
            item = item.strip()
            _add(problems, f"cannot read {item[:60]!r} as group{separators[0]}value (value must "
                 "be a finite number)", field, None)
            continue
        out[name] = got
    return out if len(problems) == n0 else None


def unknown_fields(mapping: Mapping, known: Iterable[str], problems: list, *,
                   prefix: str = "", row: int | None = None) -> list[str]:
    """Record one problem per key of ``mapping`` not in ``known``; returns those keys.

    Examples
    --------
    >>> p = []
    >>> unknown_fields({"edge_km": 1, "edgekm": 2}, ("edge_km", "grading"), p, prefix="mesh")
    ['edgekm']
    >>> p
    [{'message': "unknown field 'edgekm'; expected one of edge_km, grading", 'field': 'mesh.edgekm'}]
    """
    known = tuple(known)
    extra = [k for k in mapping if k not in known]
    for k in extra:
        _add(problems, f"unknown field {k!r}; expected one of {', '.join(known)}",
             f"{prefix}.{k}" if prefix else str(k), row)
    return extra


def raise_problems(problems: list, summary: str | None = None,
                   error: type[InputError] = InputError, limit: int | None = None) -> None:
    """Raise ``error`` listing every collected problem; do nothing when there are none.

    ``summary`` defaults to the only problem's message, or "N problems". With ``limit``, at
    most that many problems are listed and one more entry counts the rest.

    Examples
    --------
    >>> raise_problems([])
    >>> p = []
    >>> _ = number(-1, "depth_km", p, low=0)
    >>> raise_problems(p)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: depth_km must be >= 0, got -1
    >>> try:
    ...     raise_problems([problem("a")] * 5, "bad request", limit=2)
    ... except InputError as err:
    ...     print([q["message"] for q in err.problems])
    ['a', 'a', '... and 3 more problems']
    """
    if not problems:
        return
    shown = list(problems)
    if limit is not None and len(shown) > limit:
        shown = shown[:limit] + [problem(f"... and {len(problems) - limit} more problems")]
    if summary is None:
        summary = (problems[0]["message"] if len(problems) == 1
                   else f"{len(problems)} problems")
    raise error(summary, shown)
