"""The plate model document: validation, normalisation and the :class:`PlateModel` it yields.

A plate model document is a JSON object (README "Plate model document")::

    {"name": ..., "description": ...,
     "boundary": {"type": "FeatureCollection", "features": [LineString features with
                  properties kind, group, force_n_per_m and kind-specific parameters]},
     "provinces": {"type": "FeatureCollection", "features": [Polygon features with
                   properties lithosphere, age_myr, stiffness, name]},
     "ridge_push": {"mode": ...}, "drag": {...}, "sheet": {...}, "mesh": {...}}

:func:`parse_plate` checks everything, collects one problem per defect (never only the first)
and raises :class:`stressmap.errors.ModelValidationError` listing them all; no other exception
escapes it, whatever JSON value it is given.

Geometry rules (stated in the README):

* boundary arcs between consecutive vertices are great circles;
* segment ends join within 1 km into one closed ring, in any order and either direction;
* on a sphere a ring bounds two regions: the plate is the *smaller* one, unless ``region`` is
  ``"left"``: then it is the region on the left walking boundary feature 0 from its first to its
  last position (how plates larger than a hemisphere are given; network plates always say so);
  the ring is stored counter-clockwise seen from outside the sphere (plate interior on the left);
* the plate must lie within :data:`MAX_EXTENT_DEG` degrees of arc of its centre (area
  centroid): any plate short of nearly the whole sphere (the mesher's stereographic plane about
  the centre stays finite).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import ModelValidationError, problem
from stressmap.geo import arcs, sphere
from stressmap.io.plate_files import load_plate_files as _load
from stressmap.physics.forces import load_defaults

__all__ = [
    "KINDS",
    "LITHOSPHERES",
    "MAX_EXTENT_DEG",
    "REGIONS",
    "JOIN_TOLERANCE_KM",
    "MAX_MESH_NODES",
    "Segment",
    "Province",
    "PlateModel",
    "parse_plate",
    "load_plate_files",
    "plate_defaults",
]

#: Boundary segment kinds (README "Conventions").
KINDS = ("ridge", "subduction", "overriding", "collision", "transform", "free", "fixed")
LITHOSPHERES = ("oceanic", "continental")
#: Every point of the ring must lie within this angle (degrees of arc) of the plate centre.
MAX_EXTENT_DEG = 165.0
#: Which of the two regions a ring bounds is the plate (``region`` field).
REGIONS = ("smaller", "left")
#: Segment ends closer than this join into the ring.
JOIN_TOLERANCE_KM = 1.0
#: Vertices closer than this (km) within one segment are duplicates.
DUPLICATE_TOLERANCE_KM = 1e-3
#: Largest mesh the document may ask for (estimated nodes).
MAX_MESH_NODES = 3_000_000

_TOP_FIELDS = ("name", "description", "region", "boundary", "provinces", "ridge_push", "drag",
               "sheet", "mesh")

#: Kind-specific parameters: (name, low, high, low_inclusive) for numbers; the low/high bounds
#: are physical plausibility limits (common practice), not model limits.
_NUMERIC_PARAMS = {
    "age_myr": (0.0, 400.0, False),
    "half_rate_mm_yr": (0.0, 300.0, False),
    "slab_age_myr": (0.0, 400.0, False),
    "slab_depth_km": (0.0, 2900.0, False),
    "pull_fraction": (0.0, 1.0, True),
}
_SENSES = ("dextral", "sinistral")

#: Fields of the document tables whose defaults come from stressmap/data/defaults.toml (the
#: tables of the same names, where each value's source is given).
_DEFAULT_FIELDS = {
    "sheet": ("thickness_km", "young_gpa", "poisson"),
    "drag": ("closure", "viscosity_pa_s", "channel_km"),
    "mesh": ("edge_km", "grading"),
    "ridge_push": ("mode",),
}


def plate_defaults() -> dict:
    """Defaults for the ``sheet``, ``drag``, ``mesh`` and ``ridge_push`` tables of a document.

    Read from the tables of the same names in ``stressmap/data/defaults.toml`` (via
    ``stressmap.physics.forces.load_defaults``), so the force calculator and plate models agree.

    Examples
    --------
    >>> d = plate_defaults()
    >>> sorted(d)
    ['drag', 'mesh', 'ridge_push', 'sheet']
    >>> d["drag"]["closure"], d["ridge_push"]["mode"]
    ('torque_balance', 'edge')
    """

    loaded = load_defaults()
    return {table: {k: loaded[table][k] for k in keys} for table, keys in _DEFAULT_FIELDS.items()}


@dataclass(frozen=True)
class Segment:
    """One boundary segment of the ring.

    ``index`` is the feature's position in ``boundary.features`` (and in
    ``PlateModel.segments``); ``start`` .. ``stop`` are ring vertex indices (the segment covers
    arcs start, start+1, ..., stop-1, wrapping around the ring).
    """

    index: int
    kind: str
    group: str
    properties: Mapping[str, Any]
    start: int
    stop: int


@dataclass(frozen=True)
class Province:
    """A region of the plate with its own lithosphere type, age (Myr) and relative stiffness."""

    polygon_lonlat: np.ndarray
    lithosphere: str
    age_myr: float | None
    stiffness: float
    name: str


@dataclass(frozen=True)
class PlateModel:
    """A validated plate (see :func:`parse_plate`).

    Attributes
    ----------
    name : str
    document : dict
        The normalised document (defaults filled), JSON-able.
    ring_lonlat, ring_xyz : ndarray (n, 2), (n, 3)
        Ring vertices, counter-clockwise seen from outside (interior on the left), not closed.
    segments : tuple of Segment
        In document order.
    provinces : tuple of Province
    ridge_push, drag, sheet, mesh : dict
        Document tables with defaults filled.
    arc_segment : ndarray (n,) int64
        Segment (position in ``segments``) of the arc from ring vertex i to i + 1.
    centre_xyz : ndarray (3,)
        Unit vector to the plate's area centroid.
    area_km2 : float
        Exact area of the spherical polygon (great-circle arcs).
    """

    name: str
    document: dict
    ring_lonlat: np.ndarray
    ring_xyz: np.ndarray
    segments: tuple
    provinces: tuple
    ridge_push: dict
    drag: dict
    sheet: dict
    mesh: dict
    arc_segment: np.ndarray = field(repr=False)
    centre_xyz: np.ndarray = field(repr=False)
    area_km2: float = 0.0

    @property
    def groups(self) -> list[str]:
        """Load group names of the segments, in order of first appearance."""
        return list(dict.fromkeys(s.group for s in self.segments))


# --------------------------------------------------------------------------------------------
# small checkers


class _Problems:
    def __init__(self):
        self.items: list[dict] = []

    def add(self, message: str, field: str | None = None) -> None:
        self.items.append(problem(message, field=field))

    def __len__(self):
        return len(self.items)


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _fmt(lon: float, lat: float) -> str:
    return f"(lon {lon:.4f}, lat {lat:.4f})"


def _number(value, where: str, probs: _Problems, low=None, high=None, low_inclusive=False,
            high_inclusive=True, what="") -> float | None:
    """Check one numeric value; return it as float or None (problem recorded)."""
    if not _is_number(value):
        probs.add(f"{what or 'value'} must be a number, got {_describe(value)}", where)
        return None
    v = float(value)
    if not math.isfinite(v):
        probs.add(f"{what or 'value'} must be finite, got {v}", where)
        return None
    if low is not None and (v < low or (v == low and not low_inclusive)):
        op = ">=" if low_inclusive else ">"
        probs.add(f"{what or 'value'} must be {op} {low:g}, got {v:g}", where)
        return None
    if high is not None and (v > high or (v == high and not high_inclusive)):
        op = "<=" if high_inclusive else "<"
        probs.add(f"{what or 'value'} must be {op} {high:g}, got {v:g}", where)
        return None
    return v


def _describe(value) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, str):
        s = value if len(value) <= 40 else value[:37] + "..."
        return f"the string {s!r}"
    if isinstance(value, dict):
        return "an object"
    if isinstance(value, (list, tuple)):
        return "an array"
    return type(value).__name__


def _choice(value, choices, where: str, probs: _Problems, what: str) -> str | None:
    if not isinstance(value, str) or value not in choices:
        probs.add(f"unknown {what} {_describe(value) if not isinstance(value, str) else repr(value)}; "
                  f"expected one of {', '.join(choices)}", where)
        return None
    return value


def _position(pos, where: str, probs: _Problems) -> tuple[float, float] | None:
    """One GeoJSON position [lon, lat(, alt)] in degrees."""
    if not isinstance(pos, (list, tuple)) or len(pos) < 2 or len(pos) > 3:
        probs.add(f"a position must be [lon, lat], got {_describe(pos)}"
                  + (f" of length {len(pos)}" if isinstance(pos, (list, tuple)) else ""), where)
        return None
    lon, lat = pos[0], pos[1]
    if not (_is_number(lon) and _is_number(lat)):
        probs.add("longitude and latitude must be numbers", where)
        return None
    lon, lat = float(lon), float(lat)
    if not (math.isfinite(lon) and math.isfinite(lat)):
        probs.add(f"coordinates must be finite (no NaN or infinity), got [{lon}, {lat}]", where)
        return None
    bad = []
    if not -180.0 <= lon <= 180.0:
        bad.append(f"longitude {lon:g} outside [-180, 180]")
    if not -90.0 <= lat <= 90.0:
        bad.append(f"latitude {lat:g} outside [-90, 90]")
    if bad:
        probs.add("coordinates out of range: " + " and ".join(bad), where)
        return None
    return lon, lat


def _positions(coords, where: str, probs: _Problems, min_count: int) -> np.ndarray | None:
    if not isinstance(coords, (list, tuple)):
        probs.add(f"coordinates must be an array of [lon, lat] positions, got {_describe(coords)}",
                  where)
        return None
    n_before = len(probs)
    out = [_position(p, f"{where}[{k}]", probs) for k, p in enumerate(coords)]
    if len(probs) > n_before:
        return None
    if len(out) < min_count:
        probs.add(f"needs at least {min_count} positions, got {len(out)}", where)
        return None
    return np.asarray(out, dtype=float).reshape(-1, 2)


def _table(doc: dict, key: str, defaults: dict, spec: dict, probs: _Problems) -> dict:
    """Validate a flat parameter table; spec maps field -> checker(value, where) -> value|None."""
    raw = doc.get(key, {})
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        probs.add(f"must be an object, got {_describe(raw)}", key)
        return dict(defaults)
    out = dict(defaults)
    for name, value in raw.items():
        where = f"{key}.{name}"
        if name not in spec:
            probs.add(f"unknown field {name!r}; expected one of {', '.join(spec)}", where)
            continue
        got = spec[name](value, where)
        if got is not None:
            out[name] = got
    return out


# --------------------------------------------------------------------------------------------
# boundary


def _check_segment(i: int, feat, probs: _Problems, ridge_mode: str | None):
    """Validate one boundary feature; returns (coords (k, 2) or None, normalised feature)."""
    base = f"boundary.features[{i}]"
    if not isinstance(feat, dict):
        probs.add(f"each boundary feature must be a GeoJSON Feature object, got {_describe(feat)}",
                  base)
        return None, None
    if feat.get("type") != "Feature":
        probs.add(f"'type' must be 'Feature', got {_describe(feat.get('type'))}", f"{base}.type")
    props = feat.get("properties")
    geom = feat.get("geometry")
    coords = None
    if not isinstance(geom, dict):
        probs.add(f"geometry must be a LineString object, got {_describe(geom)}", f"{base}.geometry")
    elif geom.get("type") != "LineString":
        probs.add(f"geometry type must be 'LineString', got {_describe(geom.get('type'))}"
                  + (" (split MultiLineStrings into one feature per line)"
                     if geom.get("type") == "MultiLineString" else ""), f"{base}.geometry.type")
    else:
        coords = _positions(geom.get("coordinates"), f"{base}.geometry.coordinates", probs, 2)
        if coords is not None:
            xyz = sphere.lonlat_to_xyz(coords[:, 0], coords[:, 1])
            arc_km = EARTH_RADIUS_KM * sphere.angle_between(xyz[:-1], xyz[1:])
            if arc_km.sum() < DUPLICATE_TOLERANCE_KM:
                probs.add("zero-length segment: all its vertices coincide", f"{base}.geometry.coordinates")
                coords = None
            else:
                dup = np.flatnonzero(arc_km < DUPLICATE_TOLERANCE_KM)
                for k in dup[:5]:
                    probs.add(f"duplicate vertex: position {k + 1} repeats position {k} at "
                              f"{_fmt(*coords[k])}", f"{base}.geometry.coordinates[{k + 1}]")
                longarc = np.flatnonzero(arc_km > EARTH_RADIUS_KM * np.radians(170.0))
                for k in longarc[:5]:
                    probs.add(f"the arc from position {k} to {k + 1} spans "
                              f"{np.degrees(arc_km[k] / EARTH_RADIUS_KM):.1f} degrees; nearly "
                              "antipodal vertices do not define a great circle, add vertices",
                              f"{base}.geometry.coordinates[{k + 1}]")
                if len(dup) or len(longarc):
                    coords = None
    if not isinstance(props, dict):
        probs.add(f"properties must be an object with at least 'kind', got {_describe(props)}",
                  f"{base}.properties")
        return coords, None
    pbase = f"{base}.properties"
    out = dict(props)
    kind = props.get("kind")
    if kind is None:
        probs.add(f"missing 'kind'; expected one of {', '.join(KINDS)}", f"{pbase}.kind")
    else:
        kind = _choice(kind, KINDS, f"{pbase}.kind", probs, "kind")
    group = props.get("group", kind)
    if "group" in props and (not isinstance(group, str) or not group.strip()):
        probs.add(f"group must be a non-empty string, got {_describe(group)}", f"{pbase}.group")
    elif isinstance(group, str):
        out["group"] = group.strip()
    has_force = "force_n_per_m" in props and props["force_n_per_m"] is not None
    if has_force:
        _number(props["force_n_per_m"], f"{pbase}.force_n_per_m", probs, low=-1e14, high=1e14,
                low_inclusive=True, what="force_n_per_m")
    for name, (low, high, incl) in _NUMERIC_PARAMS.items():
        if name in props and props[name] is not None:
            _number(props[name], f"{pbase}.{name}", probs, low=low, high=high, low_inclusive=incl,
                    what=name)
    if "sense" in props and props["sense"] is not None:
        _choice(props["sense"], _SENSES, f"{pbase}.sense", probs, "transform sense")
    given = {k for k, v in props.items() if v is not None}
    if kind == "ridge":
        if ridge_mode == "distributed_ridge_distance" and "half_rate_mm_yr" not in given:
            probs.add("missing parameter: ridges need 'half_rate_mm_yr' when ridge_push.mode is "
                      "'distributed' with ages from distance to the ridge", f"{pbase}.half_rate_mm_yr")
        elif not has_force and not given & {"age_myr", "half_rate_mm_yr"}:
            probs.add("missing parameter: a ridge needs 'age_myr' (age of the plate's lithosphere "
                      "driving ridge push) or 'half_rate_mm_yr', or an explicit 'force_n_per_m'",
                      f"{pbase}.age_myr")
    elif kind == "subduction" and not has_force:
        for name in ("slab_age_myr", "slab_depth_km", "pull_fraction"):
            if name not in given:
                probs.add(f"missing parameter: a subduction segment needs '{name}' (or an explicit "
                          "'force_n_per_m')", f"{pbase}.{name}")
    elif kind == "transform" and "sense" not in given:
        probs.add("missing parameter: a transform needs 'sense' (dextral or sinistral)",
                  f"{pbase}.sense")
    feat_out = {"type": "Feature", "properties": out,
                "geometry": {"type": "LineString",
                             "coordinates": coords.tolist() if coords is not None else None}}
    return coords, feat_out


def _join_ring(seg_coords: list[np.ndarray], probs: _Problems):
    """Chain segments into one ring. Returns list of (segment, forward) in ring order or None."""
    from scipy.spatial import cKDTree

    m = len(seg_coords)
    ends_ll = np.array([[c[0], c[-1]] for c in seg_coords]).reshape(-1, 2)  # (2m, 2)
    ends = sphere.lonlat_to_xyz(ends_ll[:, 0], ends_ll[:, 1])
    tol = 2.0 * np.sin(JOIN_TOLERANCE_KM / EARTH_RADIUS_KM / 2.0)  # chord
    tree = cKDTree(ends)
    pairs = tree.query_pairs(tol, output_type="ndarray")
    if m > 1:
        pairs = pairs[pairs[:, 0] // 2 != pairs[:, 1] // 2]
    partners: list[list[int]] = [[] for _ in range(2 * m)]
    for p, q in pairs.tolist():
        partners[p].append(q)
        partners[q].append(p)
    endname = ("start", "end")
    ok = True
    reported_gaps = set()
    k = min(2 * m, 4)
    dist, idx = tree.query(ends, k=k)
    dist = np.atleast_2d(dist)
    idx = np.atleast_2d(idx)
    for p in range(2 * m):
        seg = p // 2
        where = f"boundary.features[{seg}].geometry.coordinates"
        if len(partners[p]) == 0:
            ok = False
            cand = [(d, q) for d, q in zip(dist[p], idx[p]) if q < 2 * m and (q // 2 != seg or m == 1)
                    and q != p]
            if not cand:
                probs.add(f"ring not closed: the {endname[p % 2]} of segment {seg} at "
                          f"{_fmt(*ends_ll[p])} joins no other segment end", where)
                continue
            d, q = cand[0]
            key = (min(p, q), max(p, q))
            if key in reported_gaps:
                continue
            reported_gaps.add(key)
            gap_km = EARTH_RADIUS_KM * float(sphere.angle_between(ends[p], ends[q]))
            probs.add(f"ring not closed: gap of {gap_km:.1f} km between the {endname[p % 2]} of "
                      f"segment {seg} at {_fmt(*ends_ll[p])} and the {endname[q % 2]} of segment "
                      f"{q // 2} at {_fmt(*ends_ll[q])}; segment ends must join within "
                      f"{JOIN_TOLERANCE_KM:g} km", where)
        elif len(partners[p]) > 1:
            ok = False
            others = ", ".join(f"{endname[q % 2]} of segment {q // 2}" for q in partners[p])
            probs.add(f"the boundary branches: the {endname[p % 2]} of segment {seg} at "
                      f"{_fmt(*ends_ll[p])} meets {len(partners[p])} other segment ends ({others}); "
                      "the boundary must be one simple ring", where)
    if not ok:
        return None
    order = [(0, True)]
    visited = {0}
    cur = 1  # the end of segment 0
    for _ in range(m):
        q = partners[cur][0]
        seg = q // 2
        if seg == 0:
            break
        if seg in visited:  # pragma: no cover - impossible with one partner per end
            break
        visited.add(seg)
        order.append((seg, q % 2 == 0))
        cur = q ^ 1
    if len(visited) < m:
        rest = sorted(set(range(m)) - visited)
        shown = ", ".join(map(str, rest[:20])) + (" ..." if len(rest) > 20 else "")
        probs.add(f"the boundary forms more than one closed ring: segments {shown} are not "
                  "connected to the ring through segment 0; a plate has exactly one ring",
                  "boundary.features")
        return None
    return order


def _build_ring(order, seg_coords):
    parts, starts, lengths = [], {}, {}
    offset = 0
    for seg, fwd in order:
        c = seg_coords[seg] if fwd else seg_coords[seg][::-1]
        parts.append(c[:-1])
        starts[seg] = offset
        lengths[seg] = len(c) - 1
        offset += len(c) - 1
    ring = np.concatenate(parts, axis=0)
    n = len(ring)
    arc_segment = np.empty(n, dtype=np.int64)
    for seg in starts:
        arc_segment[starts[seg]: starts[seg] + lengths[seg]] = seg
    bounds = {seg: (starts[seg], (starts[seg] + lengths[seg]) % n) for seg in starts}
    return ring, arc_segment, bounds


def _self_intersections(ring_xyz, arc_segment, centre, probs: _Problems) -> None:
    """Report pairs of crossing arcs (great circles are straight in the gnomonic plane)."""
    import shapely

    x, y = sphere.gnomonic_forward(ring_xyz, centre)
    pts = np.column_stack([x, y])
    n = len(pts)
    nxt = np.roll(pts, -1, axis=0)
    lines = shapely.linestrings(np.stack([pts, nxt], axis=1))
    tree = shapely.STRtree(lines)
    i, j = tree.query(lines, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    adjacent = (j == i + 1) | ((i == 0) & (j == n - 1))
    # adjacent arcs share a vertex; they only offend if they overlap (the ring doubles back)
    if adjacent.any():
        inter = shapely.intersection(lines[i[adjacent]], lines[j[adjacent]])
        bad_adj = shapely.get_type_id(inter) != 0  # not a single point
        adjacent[np.flatnonzero(adjacent)[~bad_adj]] = True
        offend = ~adjacent
        offend[np.flatnonzero(adjacent)[bad_adj]] = True
    else:
        offend = np.ones(len(i), dtype=bool)
    i, j = i[offend], j[offend]
    if not len(i):
        return
    inter = shapely.intersection(lines[i], lines[j])
    cx, cy = shapely.get_coordinates(shapely.centroid(inter)).T
    ll = np.column_stack(sphere.xyz_to_lonlat(sphere.gnomonic_inverse(cx, cy, centre)))
    seen = set()
    for a, b, (lon, lat) in zip(i.tolist(), j.tolist(), ll.tolist()):
        sa, sb = int(arc_segment[a]), int(arc_segment[b])
        key = (min(sa, sb), max(sa, sb))
        if key in seen:
            continue
        seen.add(key)
        if len(seen) > 20:
            probs.add("the boundary ring crosses itself in more places than listed", "boundary")
            break
        what = (f"segment {sa} crosses itself" if sa == sb
                else f"segment {key[0]} crosses segment {key[1]}")
        probs.add(f"self-intersecting ring: {what} near {_fmt(lon, lat)}",
                  f"boundary.features[{key[0]}].geometry.coordinates")


# --------------------------------------------------------------------------------------------
# provinces, tables


def _self_crossings_sphere(ring_xyz, arc_segment, probs: _Problems) -> None:
    """Crossing arcs of a ring too wide for a gnomonic plane, found on the sphere."""
    a, b = ring_xyz, np.roll(ring_xyz, -1, axis=0)
    n = len(a)
    pairs = arcs.near_pairs(a, b, 0.0)
    i, j = pairs[:, 0], pairs[:, 1]
    keep = ~((j == i + 1) | ((i == 0) & (j == n - 1)))
    i, j = i[keep], j[keep]
    meet, point = arcs.arc_crossings(a[i], b[i], a[j], b[j])
    seen = set()
    for a_, b_, p in zip(i[meet].tolist(), j[meet].tolist(), point[meet]):
        sa, sb = int(arc_segment[a_]), int(arc_segment[b_])
        if (min(sa, sb), max(sa, sb)) in seen:
            continue
        seen.add((min(sa, sb), max(sa, sb)))
        lon, lat = sphere.xyz_to_lonlat(p)
        probs.add(f"the boundary crosses itself at {_fmt(float(lon), float(lat))} (segments {sa} "
                  f"and {sb})", f"boundary.features[{min(sa, sb)}].geometry.coordinates")


def _check_provinces(raw, probs: _Problems):
    """Returns (list of (ring (k, 2), props dict), normalised FeatureCollection)."""
    if raw is None:
        return [], None
    feats = raw.get("features") if isinstance(raw, dict) else raw
    if isinstance(raw, dict) and raw.get("type") != "FeatureCollection":
        probs.add("provinces must be a GeoJSON FeatureCollection of Polygon features", "provinces.type")
        return [], None
    if not isinstance(feats, list):
        probs.add(f"provinces must be a FeatureCollection (or a list) of Polygon features, got "
                  f"{_describe(feats)}", "provinces")
        return [], None
    out, norm = [], []
    for i, feat in enumerate(feats):
        base = f"provinces.features[{i}]"
        if not isinstance(feat, dict) or feat.get("type") != "Feature":
            probs.add("each province must be a GeoJSON Feature with a Polygon geometry", base)
            continue
        geom, props = feat.get("geometry"), feat.get("properties")
        ring = None
        if not isinstance(geom, dict) or geom.get("type") != "Polygon":
            got = geom.get("type") if isinstance(geom, dict) else geom
            probs.add(f"province geometry must be a Polygon, got {_describe(got)}", f"{base}.geometry")
        else:
            rings = geom.get("coordinates")
            if not isinstance(rings, list) or not rings:
                probs.add("Polygon coordinates must be a list of rings", f"{base}.geometry.coordinates")
            else:
                if len(rings) > 1:
                    probs.add("province polygons with holes are not supported; split the province "
                              "or list the hole as a province of its own (later provinces win)",
                              f"{base}.geometry.coordinates[1]")
                ring = _positions(rings[0], f"{base}.geometry.coordinates[0]", probs, 4)
                if ring is not None:
                    if np.allclose(ring[0], ring[-1]):
                        ring = ring[:-1]
                    if len(ring) < 3:
                        probs.add("a province ring needs at least 3 distinct vertices",
                                  f"{base}.geometry.coordinates[0]")
                        ring = None
        if not isinstance(props, dict):
            probs.add("province properties must be an object with 'lithosphere'", f"{base}.properties")
            continue
        pbase = f"{base}.properties"
        lith = props.get("lithosphere")
        if lith is None:
            probs.add(f"missing 'lithosphere'; expected one of {', '.join(LITHOSPHERES)}",
                      f"{pbase}.lithosphere")
        else:
            lith = _choice(lith, LITHOSPHERES, f"{pbase}.lithosphere", probs, "lithosphere")
        age = props.get("age_myr")
        if age is not None:
            age = _number(age, f"{pbase}.age_myr", probs, low=0.0, high=4600.0, what="age_myr")
        stiff = props.get("stiffness", 1.0)
        stiff = _number(stiff, f"{pbase}.stiffness", probs, low=0.0, high=1e3, what="stiffness")
        name = props.get("name", f"province {i}")
        if not isinstance(name, str):
            probs.add(f"name must be a string, got {_describe(name)}", f"{pbase}.name")
            name = None
        if ring is None or lith is None or stiff is None or name is None or (
                "age_myr" in props and props["age_myr"] is not None and age is None):
            continue
        p = dict(props)
        p.update({"lithosphere": lith, "stiffness": stiff, "name": name})
        if age is not None:
            p["age_myr"] = age
        out.append((i, ring, p))
        norm.append({"type": "Feature", "properties": p,
                     "geometry": {"type": "Polygon",
                                  "coordinates": [np.vstack([ring, ring[:1]]).tolist()]}})
    return out, {"type": "FeatureCollection", "features": norm}


def _province_overlaps(provs, plate_poly, centre, probs: _Problems):
    """Keep provinces that overlap the plate; report the others."""
    import shapely

    kept = []
    for i, ring, p in provs:
        where = f"provinces.features[{i}].geometry"
        xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
        if np.any(xyz @ centre <= np.cos(np.radians(89.0))):
            probs.add(f"province {p['name']!r} lies outside the plate (it reaches more than 89 "
                      "degrees from the plate centre)", where)
            continue
        x, y = sphere.gnomonic_forward(xyz, centre)
        poly = shapely.Polygon(np.column_stack([x, y]))
        if not poly.is_valid:
            probs.add(f"province {p['name']!r}: its polygon crosses itself", where)
            continue
        overlap = plate_poly.intersection(poly).area
        if overlap <= 1e-9 * max(poly.area, 1e-300):
            probs.add(f"province {p['name']!r} lies outside the plate (it does not overlap the "
                      "plate's polygon)", where)
            continue
        kept.append((ring, p))
    return kept


def _refinement(value, where: str, probs: _Problems):
    if not isinstance(value, list):
        probs.add(f"refinement must be a list of objects, got {_describe(value)}", where)
        return None
    out = []
    n0 = len(probs)
    for k, item in enumerate(value):
        w = f"{where}[{k}]"
        if not isinstance(item, dict):
            probs.add(f"each refinement must be an object with 'point' or 'polygon' and 'edge_km', "
                      f"got {_describe(item)}", w)
            continue
        unknown = set(item) - {"point", "polygon", "edge_km", "radius_km"}
        for u in sorted(unknown, key=str):
            probs.add(f"unknown field {u!r}; expected point or polygon, edge_km, radius_km", f"{w}.{u}")
        r = {}
        if ("point" in item) == ("polygon" in item):
            probs.add("give exactly one of 'point' ([lon, lat]) or 'polygon' ([[lon, lat], ...])", w)
        elif "point" in item:
            pos = _position(item["point"], f"{w}.point", probs)
            if pos is not None:
                r["point"] = list(pos)
        else:
            ring = _positions(item["polygon"], f"{w}.polygon", probs, 3)
            if ring is not None:
                r["polygon"] = ring.tolist()
        if "edge_km" not in item:
            probs.add("missing 'edge_km' (the finer edge length, km)", f"{w}.edge_km")
        else:
            e = _number(item["edge_km"], f"{w}.edge_km", probs, low=0.1, high=5000.0,
                        low_inclusive=True, what="edge_km")
            if e is not None:
                r["edge_km"] = e
        rad = _number(item.get("radius_km", 0.0), f"{w}.radius_km", probs, low=0.0, high=20000.0,
                      low_inclusive=True, what="radius_km")
        r["radius_km"] = rad if rad is not None else 0.0
        out.append(r)
    return out if len(probs) == n0 else None


# --------------------------------------------------------------------------------------------


def parse_plate(document) -> PlateModel:
    """Validate a plate model document and build the :class:`PlateModel`.

    Parameters
    ----------
    document : dict
        The plate model document (README "Plate model document").

    Returns
    -------
    PlateModel

    Raises
    ------
    ModelValidationError
        Listing every problem found, each with the field it concerns. No other exception
        escapes, whatever JSON value is given.

    Examples
    --------
    >>> import json, importlib.resources
    >>> doc = json.loads(importlib.resources.files("stressmap.data")
    ...                  .joinpath("demo_plate.json").read_text())
    >>> plate = parse_plate(doc)
    >>> plate.name, len(plate.segments), len(plate.provinces)
    ('Meridia (fictional demo plate)', 16, 2)
    >>> round(plate.area_km2 / 1e6, 2)  # million km^2
    12.97
    >>> try:
    ...     parse_plate({"name": "x", "boundary": {"type": "FeatureCollection", "features": []}})
    ... except ModelValidationError as err:
    ...     print(err.problems[0]["message"])
    the boundary needs at least one LineString feature
    """
    probs = _Problems()
    if not isinstance(document, dict):
        probs.add(f"a plate model document must be a JSON object, got {_describe(document)}")
        raise ModelValidationError("invalid plate model document", probs.items)
    defaults = plate_defaults()
    for key in document:
        if key not in _TOP_FIELDS:
            probs.add(f"unknown field {key!r}; expected {', '.join(_TOP_FIELDS)}", str(key))

    name = document.get("name")
    if not isinstance(name, str) or not name.strip():
        probs.add(f"name must be a non-empty string, got {_describe(name)}", "name")
        name = None
    description = document.get("description")
    if description is not None and not isinstance(description, str):
        probs.add(f"description must be a string, got {_describe(description)}", "description")
    region = document.get("region", "smaller")
    region = _choice(region, REGIONS, "region", probs, "region")

    def num(low=None, high=None, low_inclusive=False, high_inclusive=True):
        def check(value, where):
            return _number(value, where, probs, low, high, low_inclusive, high_inclusive,
                           what=where.split(".")[-1])
        return check

    def choice(options):
        return lambda value, where: _choice(value, options, where, probs, where.split(".")[-1])

    def text(value, where):
        if not isinstance(value, str) or not value:
            probs.add(f"must be a non-empty string, got {_describe(value)}", where)
            return None
        return value

    ridge_push = _table(document, "ridge_push", defaults["ridge_push"], {
        "mode": choice(("edge", "distributed")),
        "age_source": choice(("provinces", "grid", "ridge_distance")),
        "age_grid": text,
        "age_variable": text,
    }, probs)
    if ridge_push.get("mode") == "distributed":
        src = ridge_push.setdefault("age_source", "grid" if "age_grid" in ridge_push else "ridge_distance")
        if src == "grid" and "age_grid" not in ridge_push:
            probs.add("ridge_push.age_source 'grid' needs 'age_grid' (path of a netCDF age grid)",
                      "ridge_push.age_grid")
    ridge_mode = ("distributed_ridge_distance" if ridge_push.get("mode") == "distributed"
                  and ridge_push.get("age_source") == "ridge_distance" else ridge_push.get("mode"))

    drag = _table(document, "drag", defaults["drag"], {
        "closure": choice(("torque_balance", "none")),
        "viscosity_pa_s": num(0.0, 1e30),
        "channel_km": num(0.0, 3000.0),
    }, probs)
    sheet = _table(document, "sheet", defaults["sheet"], {
        "thickness_km": num(0.0, 1000.0),
        "young_gpa": num(0.0, 1e4),
        "poisson": num(0.0, 0.5, low_inclusive=True, high_inclusive=False),
    }, probs)
    mesh = _table(document, "mesh", defaults["mesh"], {
        "edge_km": num(1.0, 2000.0, low_inclusive=True),
        "grading": num(0.05, 2.0, low_inclusive=True),
        "refinement": lambda v, w: _refinement(v, w, probs),
    }, probs)

    # boundary --------------------------------------------------------------------------
    boundary = document.get("boundary")
    seg_coords: list = []
    features_out: list = []
    boundary_ok = False
    if boundary is None:
        probs.add("missing 'boundary' (a GeoJSON FeatureCollection of LineString segments)",
                  "boundary")
    elif not isinstance(boundary, dict) or boundary.get("type") != "FeatureCollection":
        probs.add("boundary must be a GeoJSON FeatureCollection of LineString features", "boundary")
    elif not isinstance(boundary.get("features"), list):
        probs.add(f"boundary.features must be an array, got {_describe(boundary.get('features'))}",
                  "boundary.features")
    elif not boundary["features"]:
        probs.add("the boundary needs at least one LineString feature", "boundary.features")
    else:
        n0 = len(probs)
        for i, feat in enumerate(boundary["features"]):
            coords, feat_out = _check_segment(i, feat, probs, ridge_mode)
            seg_coords.append(coords)
            features_out.append(feat_out)
        boundary_ok = all(c is not None for c in seg_coords) and len(probs) == n0

    provs, provinces_out = _check_provinces(document.get("provinces"), probs)

    ring = arc_segment = bounds = centre = None
    area_km2 = 0.0
    kept_provs: list = []
    if boundary_ok:
        order = _join_ring(seg_coords, probs)
        if order is not None:
            ring, arc_segment, bounds = _build_ring(order, seg_coords)
            ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
            # crossings first, about the vertex mean (area and centroid mean nothing for a
            # ring that crosses itself)
            mean = sphere.normalize(ring_xyz.sum(axis=0))
            spread = (np.degrees(np.max(sphere.angle_between(ring_xyz, mean)))
                      if np.any(mean) else 180.0)
            n0 = len(probs)
            if spread < 89.0:
                _self_intersections(ring_xyz, arc_segment, mean, probs)
            else:
                _self_crossings_sphere(ring_xyz, arc_segment, probs)
            if len(probs) > n0:
                ring = None
            if ring is not None:
                area = sphere.spherical_polygon_area(ring_xyz)
                if region == "left" and area < 0:  # the larger region, on the left as given
                    area = 4.0 * np.pi * EARTH_RADIUS_KM**2 + area
                elif area < 0:
                    order = [(s, not f) for s, f in reversed(order)]
                    ring, arc_segment, bounds = _build_ring(order, seg_coords)
                    ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
                area_km2 = abs(area)
                centre = sphere.polygon_centroid_xyz(ring_xyz)
                extent = np.degrees(np.max(sphere.angle_between(ring_xyz, centre)))
                if len(ring) < 3 or area_km2 < 1.0:
                    probs.add(f"the boundary ring encloses no area ({area_km2:.3g} km^2)",
                              "boundary")
                    ring = None
                elif extent > MAX_EXTENT_DEG:
                    probs.add(f"the plate is larger than supported: its ring reaches {extent:.1f} "
                              f"degrees of arc from the plate centre; the limit is "
                              f"{MAX_EXTENT_DEG:g} degrees; split the plate", "boundary")
                    ring = None
            if ring is not None:
                est_nodes = _estimate_nodes(area_km2, mesh)
                if est_nodes > MAX_MESH_NODES:
                    probs.add(f"mesh.edge_km {mesh['edge_km']:g} km is too fine for a plate of "
                              f"{area_km2:.3g} km^2: about {est_nodes:,.0f} nodes, the limit is "
                              f"{MAX_MESH_NODES:,}", "mesh.edge_km")
                if provs:
                    import shapely

                    gx, gy = sphere.gnomonic_forward(ring_xyz, centre)
                    plate_poly = shapely.Polygon(np.column_stack([gx, gy]))
                    kept_provs = _province_overlaps(provs, plate_poly, centre, probs)

    if len(probs):
        raise ModelValidationError(
            f"invalid plate model document: {len(probs)} problem{'s' if len(probs) > 1 else ''}",
            probs.items)

    segments = []
    for i, (feat, coords) in enumerate(zip(features_out, seg_coords)):
        props = feat["properties"]
        props.setdefault("group", props["kind"])
        segments.append(Segment(index=i, kind=props["kind"], group=props["group"],
                                properties=dict(props),
                                start=int(bounds[i][0]), stop=int(bounds[i][1])))
    provinces = tuple(
        Province(polygon_lonlat=_frozen(r), lithosphere=p["lithosphere"], age_myr=p.get("age_myr"),
                 stiffness=float(p["stiffness"]), name=p["name"]) for r, p in kept_provs)
    norm = {"name": name.strip()}
    if description is not None:
        norm["description"] = description
    if region != "smaller":
        norm["region"] = region
    norm["boundary"] = {"type": "FeatureCollection", "features": features_out}
    if provinces_out is not None:
        norm["provinces"] = provinces_out
    norm.update({"ridge_push": ridge_push, "drag": drag, "sheet": sheet, "mesh": mesh})
    ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
    return PlateModel(
        name=name.strip(), document=norm, ring_lonlat=_frozen(ring), ring_xyz=_frozen(ring_xyz),
        segments=tuple(segments), provinces=provinces, ridge_push=dict(ridge_push),
        drag=dict(drag), sheet=dict(sheet), mesh=dict(mesh), arc_segment=_frozen(arc_segment),
        centre_xyz=_frozen(centre), area_km2=float(area_km2))


def _estimate_nodes(area_km2: float, mesh: dict) -> float:
    """Nodes of a uniform mesh of equilateral triangles (2 triangles per node)."""
    edge = mesh.get("edge_km") or 50.0
    per_node = np.sqrt(3.0) / 2.0 * edge**2
    return area_km2 / per_node


def _frozen(a) -> np.ndarray:
    a = np.ascontiguousarray(a)
    a.setflags(write=False)
    return a


def load_plate_files(boundary_path, params_path=None) -> dict:
    """Build a plate model document from a boundary file and a parameter file.

    Thin wrapper over :func:`stressmap.io.plate_files.load_plate_files` (file reading lives in the I/O
    module); see there.
    """

    return _load(boundary_path, params_path)
