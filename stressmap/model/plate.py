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

Every value is checked with :mod:`stressmap.validate` (the package's one field validator), so
a bad number reads the same here as in a fault file or a request. The geometry rules of the
ring (great-circle arcs, 1 km joins, the smaller region, counter-clockwise, at most
:data:`MAX_EXTENT_DEG` from the centre) live in :mod:`stressmap.model.ring`.

:func:`parse_plate` runs named steps: :func:`_check_header` (name, description, unknown
fields), :func:`_check_tables` (ridge_push, drag, sheet, mesh), :func:`_check_boundary` (each
segment), :func:`_check_provinces`, :func:`_check_geometry` (ring, size, provinces on the plate)
and :func:`_assemble` (the :class:`PlateModel`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import shapely

from stressmap import validate
from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import ModelValidationError, problem
from stressmap.geo import sphere
from stressmap.model.ring import (
    JOIN_TOLERANCE_KM,
    MAX_EXTENT_DEG,
    REGIONS,
    Ring,
    close_ring,
    fmt_lonlat,
)
from stressmap.physics.forces import load_defaults

__all__ = [
    "KINDS",
    "LITHOSPHERES",
    "MAX_EXTENT_DEG",
    "JOIN_TOLERANCE_KM",
    "MAX_MESH_NODES",
    "Segment",
    "Province",
    "PlateModel",
    "parse_plate",
    "plate_defaults",
]

#: Boundary segment kinds (README "Conventions").
KINDS = ("ridge", "subduction", "overriding", "collision", "transform", "free", "fixed")
LITHOSPHERES = ("oceanic", "continental")
#: Vertices closer than this (km) within one segment are duplicates.
DUPLICATE_TOLERANCE_KM = 1e-3
#: Largest mesh the document may ask for (estimated nodes).
MAX_MESH_NODES = 3_000_000
#: Longest plate, group and province name (characters).
_MAX_NAME_CHARS = 200

_TOP_FIELDS = ("name", "description", "region", "boundary", "provinces", "ridge_push", "gpe", "drag",
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
    gpe : dict or None
        The ``gpe`` table with defaults filled when the document loads GPE (a ``gpe`` table or
        ``ridge_push.mode`` 'gpe'), else None.
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
    gpe: dict | None = None

    @property
    def groups(self) -> list[str]:
        """Load group names of the segments, in order of first appearance."""
        return list(dict.fromkeys(s.group for s in self.segments))


# --------------------------------------------------------------------------------------------
# small checkers (thin uses of stressmap.validate)


class _Problems(list):
    """The problems of one document (a list of problem dicts, as :mod:`stressmap.validate` takes)."""

    def add(self, message: str, field: str | None = None) -> None:
        self.append(problem(message, field=field))


def _table(doc: dict, key: str, defaults: dict, spec: dict, probs: _Problems) -> dict:
    """Validate a flat parameter table; spec maps field -> checker(value, where) -> value|None."""
    raw = doc.get(key, {})
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        probs.add(f"must be an object, got {validate.describe(raw)}", key)
        return dict(defaults)
    out = dict(defaults)
    validate.unknown_fields(raw, spec, probs, prefix=key)
    for name, value in raw.items():
        if name in spec:
            got = spec[name](value, f"{key}.{name}")
            if got is not None:
                out[name] = got
    return out


def _check_gpe(document: dict, ridge_push: dict, probs: _Problems) -> dict | None:
    """The ``gpe`` table (defaults from defaults.toml ``[gpe]``), or None when GPE is off."""
    if "gpe" not in document and ridge_push.get("mode") != "gpe":
        return None
    defaults = {k: v for k, v in load_defaults()["gpe"].items() if k != "gravity_m_s2"}

    def num(low, high, low_inclusive=False):
        return lambda value, where: validate.number(value, where, probs, low=low, high=high,
                                                    low_inclusive=low_inclusive)

    def text(value, where):
        return validate.text(value, where, probs, max_length=_MAX_NAME_CHARS)

    density = num(0.0, 5000.0)
    gpe = _table(document, "gpe", defaults, {
        "group": text,
        "isostasy": lambda v, w: validate.choice(v, ("airy", "crust"), w, probs),
        "elevation_grid": text, "elevation_variable": text, "elevation_units": text,
        "crust_grid": text, "crust_variable": text, "crust_units": text,
        "smooth_km": num(0.0, 2000.0, low_inclusive=True),
        "crust_density_kg_m3": density, "mantle_density_kg_m3": density,
        "water_density_kg_m3": num(0.0, 5000.0, low_inclusive=True),
        "reference_crust_km": num(0.0, 100.0),
        "compensation_depth_km": num(0.0, 1000.0),
        "ocean_model": lambda v, w: validate.choice(v, ("half_space", "plate"), w, probs),
    }, probs)
    if gpe.get("isostasy") == "crust" and "crust_grid" not in gpe:
        probs.add("gpe.isostasy 'crust' needs 'crust_grid' (crustal thickness, km)", "gpe.crust_grid")
    rho = [gpe[k] for k in ("water_density_kg_m3", "crust_density_kg_m3", "mantle_density_kg_m3")]
    if all(isinstance(r, (int, float)) for r in rho) and not rho[0] < rho[1] < rho[2]:
        probs.add("densities must satisfy water < crust < mantle, got "
                  f"{rho[0]:g} / {rho[1]:g} / {rho[2]:g} kg/m3", "gpe.crust_density_kg_m3")
    return gpe


def _check_header(document: dict, probs: _Problems) -> tuple[str | None, Any]:
    """Unknown top-level fields, ``name`` and ``description``."""
    validate.unknown_fields(document, _TOP_FIELDS, probs)
    name = validate.text(document.get("name"), "name", probs, max_length=_MAX_NAME_CHARS)
    description = document.get("description")
    if description is not None:
        validate.text(description, "description", probs, empty=True, strip=False,
                      max_length=None)
    return name, description


def _check_tables(document: dict, probs: _Problems) -> tuple[dict, dict, dict, dict, str | None]:
    """The ``ridge_push``, ``drag``, ``sheet`` and ``mesh`` tables with defaults filled, and the
    ridge mode the segments are checked against."""
    defaults = plate_defaults()

    def num(low=None, high=None, low_inclusive=False, high_inclusive=True):
        return lambda value, where: validate.number(
            value, where, probs, low=low, high=high, low_inclusive=low_inclusive,
            high_inclusive=high_inclusive)

    def choice(options):
        return lambda value, where: validate.choice(value, options, where, probs)

    def text(value, where):
        return validate.text(value, where, probs, strip=False)

    ridge_push = _table(document, "ridge_push", defaults["ridge_push"], {
        "mode": choice(("edge", "distributed", "gpe")),
        "age_source": choice(("provinces", "grid", "ridge_distance")),
        "age_grid": text,
        "age_variable": text,
    }, probs)
    if ridge_push.get("mode") in ("distributed", "gpe"):
        src = ridge_push.setdefault("age_source", "grid" if "age_grid" in ridge_push else "ridge_distance")
        if src == "grid" and "age_grid" not in ridge_push:
            probs.add("ridge_push.age_source 'grid' needs 'age_grid' (a netCDF or GeoTIFF age grid: "
                      "a file for the CLI, an uploaded grid id for the service)",
                      "ridge_push.age_grid")
    ridge_mode = ridge_push.get("mode")
    if ridge_mode in ("distributed", "gpe") and ridge_push.get("age_source") == "ridge_distance":
        ridge_mode = f"{ridge_mode}_ridge_distance"
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
    return ridge_push, drag, sheet, mesh, ridge_mode


# --------------------------------------------------------------------------------------------
# boundary


def _check_boundary(boundary, probs: _Problems, ridge_mode: str | None):
    """Every boundary feature; returns (coords per segment, normalised features, all good)."""
    if boundary is None:
        probs.add("missing 'boundary' (a GeoJSON FeatureCollection of LineString segments)",
                  "boundary")
    elif not isinstance(boundary, dict) or boundary.get("type") != "FeatureCollection":
        probs.add("boundary must be a GeoJSON FeatureCollection of LineString features", "boundary")
    elif not isinstance(boundary.get("features"), list):
        probs.add(f"boundary.features must be an array, got "
                  f"{validate.describe(boundary.get('features'))}", "boundary.features")
    elif not boundary["features"]:
        probs.add("the boundary needs at least one LineString feature", "boundary.features")
    else:
        n0 = len(probs)
        checked = [_check_segment(i, feat, probs, ridge_mode)
                   for i, feat in enumerate(boundary["features"])]
        seg_coords = [c for c, _ in checked]
        features = [f for _, f in checked]
        return seg_coords, features, all(c is not None for c in seg_coords) and len(probs) == n0
    return [], [], False


def _check_segment(i: int, feat, probs: _Problems, ridge_mode: str | None):
    """Validate one boundary feature; returns (coords (k, 2) or None, normalised feature)."""
    base = f"boundary.features[{i}]"
    if not isinstance(feat, dict):
        probs.add(f"each boundary feature must be a GeoJSON Feature object, got "
                  f"{validate.describe(feat)}", base)
        return None, None
    if feat.get("type") != "Feature":
        probs.add(f"'type' must be 'Feature', got {validate.describe(feat.get('type'))}",
                  f"{base}.type")
    coords = _segment_line(feat.get("geometry"), base, probs)
    props = feat.get("properties")
    if not isinstance(props, dict):
        probs.add(f"properties must be an object with at least 'kind', got "
                  f"{validate.describe(props)}", f"{base}.properties")
        return coords, None
    out = _segment_properties(props, f"{base}.properties", probs, ridge_mode)
    feat_out = {"type": "Feature", "properties": out,
                "geometry": {"type": "LineString",
                             "coordinates": coords.tolist() if coords is not None else None}}
    return coords, feat_out


def _segment_line(geom, base: str, probs: _Problems) -> np.ndarray | None:
    """The LineString of one segment as (k, 2) lon/lat, without repeated or antipodal vertices."""
    if not isinstance(geom, dict):
        probs.add(f"geometry must be a LineString object, got {validate.describe(geom)}",
                  f"{base}.geometry")
        return None
    if geom.get("type") != "LineString":
        probs.add(f"geometry type must be 'LineString', got {validate.describe(geom.get('type'))}"
                  + (" (split MultiLineStrings into one feature per line)"
                     if geom.get("type") == "MultiLineString" else ""), f"{base}.geometry.type")
        return None
    where = f"{base}.geometry.coordinates"
    coords = validate.positions(geom.get("coordinates"), where, probs, min_count=2)
    if coords is None:
        return None
    xyz = sphere.lonlat_to_xyz(coords[:, 0], coords[:, 1])
    arc_km = EARTH_RADIUS_KM * sphere.angle_between(xyz[:-1], xyz[1:])
    if arc_km.sum() < DUPLICATE_TOLERANCE_KM:
        probs.add("zero-length segment: all its vertices coincide", where)
        return None
    dup = np.flatnonzero(arc_km < DUPLICATE_TOLERANCE_KM)
    for k in dup[:5]:
        probs.add(f"duplicate vertex: position {k + 1} repeats position {k} at "
                  f"{fmt_lonlat(*coords[k])}", f"{where}[{k + 1}]")
    longarc = np.flatnonzero(arc_km > EARTH_RADIUS_KM * np.radians(170.0))
    for k in longarc[:5]:
        probs.add(f"the arc from position {k} to {k + 1} spans "
                  f"{np.degrees(arc_km[k] / EARTH_RADIUS_KM):.1f} degrees; nearly antipodal "
                  "vertices do not define a great circle, add vertices", f"{where}[{k + 1}]")
    return None if len(dup) or len(longarc) else coords


def _segment_properties(props: dict, pbase: str, probs: _Problems, ridge_mode: str | None) -> dict:
    """Kind, group, force and kind-specific parameters of one segment (normalised copy)."""
    out = dict(props)
    kind = props.get("kind")
    kind = validate.choice(validate.MISSING if kind is None else kind, KINDS, f"{pbase}.kind",
                           probs, required=True)
    if "group" in props:
        group = validate.text(props["group"], f"{pbase}.group", probs,
                              max_length=_MAX_NAME_CHARS)
        if group is not None:
            out["group"] = group
    elif kind is not None:
        out["group"] = kind
    has_force = props.get("force_n_per_m") is not None
    if has_force:
        validate.number(props["force_n_per_m"], f"{pbase}.force_n_per_m", probs, low=-1e14,
                        high=1e14)
    for name, (low, high, incl) in _NUMERIC_PARAMS.items():
        if props.get(name) is not None:
            validate.number(props[name], f"{pbase}.{name}", probs, low=low, high=high,
                            low_inclusive=incl)
    if props.get("sense") is not None:
        validate.choice(props["sense"], _SENSES, f"{pbase}.sense", probs, name="transform sense")
    _required_parameters(kind, {k for k, v in props.items() if v is not None}, has_force,
                         pbase, probs, ridge_mode)
    return out


def _required_parameters(kind, given: set, has_force: bool, pbase: str, probs: _Problems,
                         ridge_mode: str | None) -> None:
    """The parameters each kind needs to compute its force (unless the force is given)."""
    if kind == "ridge":
        if str(ridge_mode).startswith("gpe") and has_force:
            probs.add("a ridge's force_n_per_m would count ridge push twice when ridge_push.mode "
                      "is 'gpe' (the GPE of the oceanic columns carries it); remove it or use mode "
                      "'edge'", f"{pbase}.force_n_per_m")
        if str(ridge_mode).endswith("_ridge_distance") and "half_rate_mm_yr" not in given:
            mode = str(ridge_mode).split("_", 1)[0]
            probs.add("missing parameter: ridges need 'half_rate_mm_yr' when ridge_push.mode is "
                      f"'{mode}' with ages from distance to the ridge", f"{pbase}.half_rate_mm_yr")
        elif ridge_mode == "gpe":
            pass  # ages come from provinces or a grid
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


# --------------------------------------------------------------------------------------------
# provinces, refinement


def _check_provinces(raw, probs: _Problems):
    """Returns (list of (index, ring (k, 2), props dict), normalised FeatureCollection)."""
    if raw is None:
        return [], None
    feats = raw.get("features") if isinstance(raw, dict) else raw
    if isinstance(raw, dict) and raw.get("type") != "FeatureCollection":
        probs.add("provinces must be a GeoJSON FeatureCollection of Polygon features", "provinces.type")
        return [], None
    if not isinstance(feats, list):
        probs.add(f"provinces must be a FeatureCollection (or a list) of Polygon features, got "
                  f"{validate.describe(feats)}", "provinces")
        return [], None
    out, norm = [], []
    for i, feat in enumerate(feats):
        got = _check_province(i, feat, probs)
        if got is None:
            continue
        ring, p = got
        out.append((i, ring, p))
        norm.append({"type": "Feature", "properties": p,
                     "geometry": {"type": "Polygon",
                                  "coordinates": [np.vstack([ring, ring[:1]]).tolist()]}})
    return out, {"type": "FeatureCollection", "features": norm}


def _province_ring(geom, base: str, probs: _Problems) -> np.ndarray | None:
    """The outer ring (k, 2) of a province Polygon, not closed."""
    if not isinstance(geom, dict) or geom.get("type") != "Polygon":
        got = geom.get("type") if isinstance(geom, dict) else geom
        probs.add(f"province geometry must be a Polygon, got {validate.describe(got)}",
                  f"{base}.geometry")
        return None
    rings = geom.get("coordinates")
    if not isinstance(rings, list) or not rings:
        probs.add("Polygon coordinates must be a list of rings", f"{base}.geometry.coordinates")
        return None
    if len(rings) > 1:
        probs.add("province polygons with holes are not supported; split the province or list "
                  "the hole as a province of its own (later provinces win)",
                  f"{base}.geometry.coordinates[1]")
    ring = validate.positions(rings[0], f"{base}.geometry.coordinates[0]", probs, min_count=4)
    if ring is None:
        return None
    if np.allclose(ring[0], ring[-1]):
        ring = ring[:-1]
    if len(ring) < 3:
        probs.add("a province ring needs at least 3 distinct vertices",
                  f"{base}.geometry.coordinates[0]")
        return None
    return ring


def _check_province(i: int, feat, probs: _Problems):
    """One province feature -> (ring (k, 2), normalised properties) or None."""
    base = f"provinces.features[{i}]"
    if not isinstance(feat, dict) or feat.get("type") != "Feature":
        probs.add("each province must be a GeoJSON Feature with a Polygon geometry", base)
        return None
    ring = _province_ring(feat.get("geometry"), base, probs)
    props = feat.get("properties")
    if not isinstance(props, dict):
        probs.add("province properties must be an object with 'lithosphere'", f"{base}.properties")
        return None
    pbase = f"{base}.properties"
    n0 = len(probs)
    lith = props.get("lithosphere")
    lith = validate.choice(validate.MISSING if lith is None else lith, LITHOSPHERES,
                           f"{pbase}.lithosphere", probs, required=True)
    age = validate.number(props.get("age_myr"), f"{pbase}.age_myr", probs, low=0.0,
                          low_inclusive=False, high=4600.0, nullable=True)
    stiff = validate.number(props.get("stiffness", 1.0), f"{pbase}.stiffness", probs, low=0.0,
                            low_inclusive=False, high=1e3)
    name = validate.text(props.get("name", f"province {i}"), f"{pbase}.name", probs, empty=True,
                         strip=False, max_length=_MAX_NAME_CHARS)
    if ring is None or len(probs) > n0:
        return None
    p = dict(props)
    p.update({"lithosphere": lith, "stiffness": stiff, "name": name})
    if age is not None:
        p["age_myr"] = age
    return ring, p


def _province_overlaps(provs, plate_poly, centre, probs: _Problems):
    """Keep provinces that overlap the plate; report the others."""
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
        probs.add(f"refinement must be a list of objects, got {validate.describe(value)}", where)
        return None
    n0 = len(probs)
    out = [_refinement_item(item, f"{where}[{k}]", probs) for k, item in enumerate(value)]
    return out if len(probs) == n0 else None


def _refinement_item(item, w: str, probs: _Problems) -> dict | None:
    if not isinstance(item, dict):
        probs.add(f"each refinement must be an object with 'point' or 'polygon' and 'edge_km', "
                  f"got {validate.describe(item)}", w)
        return None
    unknown = set(item) - {"point", "polygon", "edge_km", "radius_km"}
    for u in sorted(unknown, key=str):
        probs.add(f"unknown field {u!r}; expected point or polygon, edge_km, radius_km", f"{w}.{u}")
    r = {}
    if ("point" in item) == ("polygon" in item):
        probs.add("give exactly one of 'point' ([lon, lat]) or 'polygon' ([[lon, lat], ...])", w)
    elif "point" in item:
        pos = validate.position(item["point"], f"{w}.point", probs)
        if pos is not None:
            r["point"] = list(pos)
    else:
        ring = validate.positions(item["polygon"], f"{w}.polygon", probs, min_count=3)
        if ring is not None:
            r["polygon"] = ring.tolist()
    e = validate.number(item.get("edge_km", validate.MISSING), f"{w}.edge_km", probs, low=0.1,
                        high=5000.0, required="the finer edge length, km")
    if e is not None:
        r["edge_km"] = e
    rad = validate.number(item.get("radius_km", 0.0), f"{w}.radius_km", probs, low=0.0,
                          high=20000.0)
    r["radius_km"] = rad if rad is not None else 0.0
    return r


# --------------------------------------------------------------------------------------------
# the ring, the size limit, the whole document


def _check_geometry(seg_coords: list, mesh: dict, provs: list, probs: _Problems,
                    region: str | None = "smaller"):
    """Close the ring; check the mesh size it implies and that provinces lie on the plate.

    Returns (Ring or None, kept provinces as (ring (k, 2), props)).
    """
    ring = close_ring(seg_coords, probs, region or "smaller")
    if ring is None:
        return None, []
    est_nodes = _estimate_nodes(ring.area_km2, mesh)
    if est_nodes > MAX_MESH_NODES:
        probs.add(f"mesh.edge_km {mesh['edge_km']:g} km is too fine for a plate of "
                  f"{ring.area_km2:.3g} km^2: about {est_nodes:,.0f} nodes, the limit is "
                  f"{MAX_MESH_NODES:,}", "mesh.edge_km")
    kept: list = []
    if provs:
        gx, gy = sphere.gnomonic_forward(ring.xyz, ring.centre_xyz)
        plate_poly = shapely.Polygon(np.column_stack([gx, gy]))
        kept = _province_overlaps(provs, plate_poly, ring.centre_xyz, probs)
    return ring, kept


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
        probs.add(f"a plate model document must be a JSON object, got "
                  f"{validate.describe(document)}")
        raise ModelValidationError("invalid plate model document", probs)
    name, description = _check_header(document, probs)
    ridge_push, drag, sheet, mesh, ridge_mode = _check_tables(document, probs)
    gpe = _check_gpe(document, ridge_push, probs)
    seg_coords, features, boundary_ok = _check_boundary(document.get("boundary"), probs,
                                                        ridge_mode)
    provs, provinces_out = _check_provinces(document.get("provinces"), probs)
    region = validate.choice(document.get("region", "smaller"), REGIONS, "region", probs)
    ring, kept_provs = (_check_geometry(seg_coords, mesh, provs, probs, region) if boundary_ok
                        else (None, []))
    validate.raise_problems(
        probs, f"invalid plate model document: {len(probs)} problem{'s' if len(probs) > 1 else ''}",
        ModelValidationError)
    norm = {"name": name}
    if description is not None:
        norm["description"] = description
    if region == "left":
        norm["region"] = region
    norm["boundary"] = {"type": "FeatureCollection", "features": features}
    if provinces_out is not None:
        norm["provinces"] = provinces_out
    norm["ridge_push"] = ridge_push
    if gpe is not None:
        norm["gpe"] = gpe
    norm.update({"drag": drag, "sheet": sheet, "mesh": mesh})
    return _assemble(norm, ring, kept_provs)


def _assemble(norm: dict, ring: Ring, kept_provs: list) -> PlateModel:
    """The :class:`PlateModel` of a document that passed every check."""
    segments = []
    for i, feat in enumerate(norm["boundary"]["features"]):
        props = feat["properties"]
        props.setdefault("group", props["kind"])
        start, stop = ring.bounds[i]
        segments.append(Segment(index=i, kind=props["kind"], group=props["group"],
                                properties=dict(props), start=int(start), stop=int(stop)))
    provinces = tuple(
        Province(polygon_lonlat=_frozen(r), lithosphere=p["lithosphere"], age_myr=p.get("age_myr"),
                 stiffness=float(p["stiffness"]), name=p["name"]) for r, p in kept_provs)
    return PlateModel(
        name=norm["name"], document=norm, ring_lonlat=_frozen(ring.lonlat),
        ring_xyz=_frozen(ring.xyz), segments=tuple(segments), provinces=provinces,
        ridge_push=dict(norm["ridge_push"]), drag=dict(norm["drag"]), sheet=dict(norm["sheet"]),
        mesh=dict(norm["mesh"]), arc_segment=_frozen(ring.arc_segment),
        centre_xyz=_frozen(ring.centre_xyz), area_km2=float(ring.area_km2),
        gpe=dict(norm["gpe"]) if "gpe" in norm else None)


def _estimate_nodes(area_km2: float, mesh: dict) -> float:
    """Nodes of a uniform mesh of equilateral triangles (2 triangles per node)."""
    edge = mesh.get("edge_km") or 50.0
    per_node = np.sqrt(3.0) / 2.0 * edge**2
    return area_km2 / per_node


def _frozen(a) -> np.ndarray:
    a = np.ascontiguousarray(a)
    a.setflags(write=False)
    return a
