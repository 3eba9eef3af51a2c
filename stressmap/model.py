"""A built plate model: unit stress fields per load group, and predictions from them.

:func:`build_model` runs the whole chain once -- validate the document
(:func:`stressmap.plate.parse_plate`), mesh the plate (:func:`stressmap.mesh.mesh_plate`),
assemble and factorise the thin sheet (:mod:`stressmap.sheet`), build the loads of every load
group (:mod:`stressmap.loads`, force laws from :mod:`stressmap.forces`), put each group in torque
balance with its own share of basal drag, solve all groups as right-hand sides of one
factorisation and recover smoothed nodal stresses. The result stores *unit* stress fields: the
field of each group at weight 1.0 (the forces the document and defaults specify). Any weighted
combination is then a weighted sum -- :func:`predict_points` and :func:`predict_grid` never solve
again -- and stays in torque balance because every unit field carries its own drag.

Stresses are tectonic (depth-averaged deviatoric membrane force divided by the sheet thickness),
in MPa, **compression positive**, with components (s_ee, s_nn, s_en) in the local
(east, north) frame.

Points are located in the mesh by central projection: the flat facets project onto the sphere
exactly as the plate polygon (boundary arcs are great circles), so a point is inside the plate
exactly when it falls in a facet; outside points are flagged and get NaN, never extrapolated.
"""

from __future__ import annotations

import datetime as _dt
import logging
import time
from dataclasses import dataclass, field

import numpy as np

from stressmap import loads as _loads
from stressmap import sheet as _sheet
from stressmap.constants import CAUTION, EARTH_RADIUS_KM, EARTH_RADIUS_M, PA_PER_MPA
from stressmap.errors import InputError, ModelValidationError, problem
from stressmap.tensor import describe

__all__ = [
    "BuiltModel",
    "COMPONENTS",
    "build_model",
    "resolve_weights",
    "unit_stress_at",
    "stress_at",
    "predict_points",
    "predict_grid",
    "plate_outline",
    "locate",
]

log = logging.getLogger(__name__)

#: Stress components of the unit fields, in the local (east, north) frame.
COMPONENTS = ("s_ee", "s_nn", "s_en")

#: Largest grid :func:`predict_grid` evaluates in one call.
MAX_GRID_POINTS = 4_000_000

_KM_PER_DEG = np.pi * EARTH_RADIUS_KM / 180.0


@dataclass(frozen=True)
class BuiltModel:
    """A plate model with its unit stress fields (see :func:`build_model`).

    Attributes
    ----------
    definition : dict
        The validated, normalised plate document.
    fields : xarray.Dataset
        Unit stress fields ``unit_stress_mpa`` (group, node, component) and the mesh
        (``lon``, ``lat`` per node, ``triangles`` (triangle, vertex)), the boundary ring and the
        per-group rotation of the drag closure.
    summary : dict
        JSON-able build report: name, mesh statistics, groups, torque before/after closure,
        omega pole and rate, plate speed range, build time (ISO-8601 UTC), timings.
    """

    definition: dict
    fields: object
    summary: dict
    _cache: dict = field(default_factory=dict, repr=False, compare=False, hash=False)

    @property
    def groups(self) -> list[str]:
        """Load group names, in the order of the unit fields."""
        names = self._cache.get("groups")
        if names is None:  # read once: ~0.05 ms of xarray indexing per call otherwise
            names = self._cache["groups"] = tuple(str(g) for g in self.fields["group"].values)
        return list(names)

    @property
    def default_weights(self) -> dict:
        """Weight 1.0 for every group: the forces the document specifies."""
        return {g: 1.0 for g in self.groups}


# --------------------------------------------------------------------------------------------
# building


def _now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def _finite_or_none(x):
    x = float(x)
    return x if np.isfinite(x) else None


def _segment_loads(plate, mesh, groups):
    """Edge normal and shear line forces (k,) and the group index (k,) of every boundary edge."""
    from stressmap import forces

    k = mesh.boundary_edges.shape[0]
    normal = np.zeros(k)
    shear = np.zeros(k)
    group = np.full(k, -1, dtype=np.int64)
    distributed = plate.ridge_push.get("mode") == "distributed"
    problems = []
    for seg in plate.segments:  # a handful of segments, not mesh elements
        on = mesh.edge_segment == seg.index
        if seg.kind in ("free", "fixed"):
            continue
        if seg.kind == "ridge" and distributed and seg.properties.get("force_n_per_m") is None:
            continue  # ridge push enters as a body force through the oceanic lithosphere
        try:
            value = float(forces.segment_force_n_per_m(seg.kind, seg.properties))
        except InputError as exc:
            for p in exc.problems:
                problems.append(problem(p["message"], field=f"boundary.features[{seg.index}]."
                                        + str(p.get("field", "properties"))))
            continue
        if seg.kind == "transform":
            shear[on] = _loads.SENSES[seg.properties.get("sense", "dextral")] * value
        else:
            normal[on] = value
        group[on] = groups.index(seg.group)
    if problems:
        raise ModelValidationError("the plate model's force parameters are not usable", problems)
    return normal, shear, group


def _node_ages_myr(plate, mesh, xyz_unit, sheet):
    """Lithosphere age (Myr) at nodes and the segment of the nearest ridge of each node.

    Sources (``ridge_push.age_source``): ``ridge_distance`` (great-circle distance to the
    nearest ridge over its half spreading rate; 1 mm/yr = 1 km/Myr), ``provinces`` (area-weighted
    average of the ages of the adjacent oceanic-province elements) or ``grid`` (bilinear
    interpolation of a netCDF age grid). With provinces or a grid, nodes on the ridge get age 0.
    """
    from scipy.spatial import cKDTree

    ridge_segs = [s for s in plate.segments if s.kind == "ridge"]
    on_ridge = np.isin(mesh.edge_segment, [s.index for s in ridge_segs])
    edges = mesh.boundary_edges[on_ridge]
    seg_of_edge = mesh.edge_segment[on_ridge]
    # sample the ridge edges densely (8 points per edge) for nearest-ridge queries
    t = (np.arange(8) + 0.5) / 8
    pts = (xyz_unit[edges[:, 0]][:, None] * (1 - t)[None, :, None]
           + xyz_unit[edges[:, 1]][:, None] * t[None, :, None]).reshape(-1, 3)
    pts /= np.linalg.norm(pts, axis=1, keepdims=True)
    pts = np.concatenate([pts, xyz_unit[edges.reshape(-1)]])
    owner = np.concatenate([np.repeat(seg_of_edge, 8), np.repeat(seg_of_edge, 2)])
    chord, idx = cKDTree(pts).query(xyz_unit)
    nearest_seg = owner[idx]
    source = plate.ridge_push.get("age_source", "ridge_distance")
    if source == "ridge_distance":
        dist_km = 2.0 * np.arcsin(np.clip(chord / 2.0, 0.0, 1.0)) * EARTH_RADIUS_KM
        rate = np.zeros(len(plate.segments))
        for s in ridge_segs:
            rate[s.index] = float(s.properties.get("half_rate_mm_yr") or np.nan)
        age = dist_km / rate[nearest_seg]  # km / (mm/yr) = Myr
    elif source == "provinces":
        prov_age = np.array([np.nan if p.age_myr is None else float(p.age_myr)
                             for p in plate.provinces] + [np.nan])
        oceanic = np.array([p.lithosphere == "oceanic" for p in plate.provinces] + [False])
        elem_age = np.where(oceanic[mesh.element_province],
                            prov_age[mesh.element_province], np.nan)  # -1 -> trailing NaN
        w = np.where(np.isfinite(elem_age), sheet.area, 0.0)
        num = np.zeros(mesh.n_nodes)
        den = np.zeros(mesh.n_nodes)
        np.add.at(num, mesh.triangles.reshape(-1), np.repeat(np.nan_to_num(elem_age) * w, 3))
        np.add.at(den, mesh.triangles.reshape(-1), np.repeat(w, 3))
        with np.errstate(invalid="ignore", divide="ignore"):
            age = np.where(den > 0, num / den, np.nan)
    else:
        age = _age_grid_at(plate.ridge_push, mesh.lonlat[:, 0], mesh.lonlat[:, 1])
    if source != "ridge_distance":
        age[edges.reshape(-1)] = 0.0  # lithosphere is new at the ridge by definition
    return age, nearest_seg


def _age_grid_at(ridge_push, lon, lat):
    """Read the age grid (netCDF, via xarray) and interpolate it bilinearly at the nodes."""
    import xarray as xr

    path = ridge_push["age_grid"]
    try:
        ds = xr.open_dataset(path)
    except (OSError, ValueError) as exc:
        raise ModelValidationError(f"cannot read the age grid {path!r}: {exc}",
                                   [problem(f"cannot read the age grid: {exc}",
                                            field="ridge_push.age_grid")]) from exc
    with ds:
        name = ridge_push.get("age_variable") or next(iter(ds.data_vars), None)
        if name not in ds.data_vars:
            raise ModelValidationError(f"age grid has no variable {name!r}",
                                       [problem(f"no variable {name!r} in the age grid",
                                                field="ridge_push.age_variable")])
        da = ds[name]
        dims = {d.lower(): d for d in da.dims}
        xdim = next((dims[d] for d in ("lon", "longitude", "x") if d in dims), None)
        ydim = next((dims[d] for d in ("lat", "latitude", "y") if d in dims), None)
        if xdim is None or ydim is None or da.ndim != 2:
            raise ModelValidationError(
                "age grid must be a 2-D variable on lon/lat dimensions",
                [problem(f"variable {name!r} has dimensions {da.dims}; expected (lat, lon)",
                         field="ridge_push.age_variable")])
        lon_grid = da[xdim].values
        lon = np.asarray(lon, float)
        if np.nanmax(lon_grid) > 180.0:  # 0..360 grids
            lon = np.mod(lon, 360.0)
        got = da.interp({xdim: xr.DataArray(lon, dims="node"), ydim: xr.DataArray(lat, dims="node")})
        return np.asarray(got.values, dtype=float)


def _ridge_body_forces(plate, mesh, sheet, xyz_unit, groups):
    """Distributed ridge push: nodal forces (G, n, 3) from the gradient of the ridge-push
    potential F(age) over the oceanic lithosphere."""
    from stressmap import forces

    out = np.zeros((len(groups), mesh.n_nodes, 3))
    ridge_segs = [s for s in plate.segments if s.kind == "ridge"
                  and s.properties.get("force_n_per_m") is None]
    if plate.ridge_push.get("mode") != "distributed" or not ridge_segs:
        return out
    age, nearest_seg = _node_ages_myr(plate, mesh, xyz_unit, sheet)
    # ridge push of lithosphere of each node's age; its gradient is rate(age) * grad(age)
    # (forces.ridge_push_rate_n_per_m_per_myr), pointing toward older lithosphere; the P1
    # gradient of F integrates exactly to the ridge-push difference across any strip.
    finite = np.isfinite(age)
    potential = np.zeros(mesh.n_nodes)
    if finite.any():
        potential[finite] = forces.ridge_push_n_per_m(np.maximum(age[finite], 0.0))
    oceanic = np.array([p.lithosphere == "oceanic" for p in plate.provinces] + [False])
    if oceanic[:-1].any():
        use = oceanic[mesh.element_province]
    else:  # no oceanic province declared: the whole plate is oceanic lithosphere
        use = np.ones(mesh.n_triangles, dtype=bool)
    use &= finite[mesh.triangles].all(axis=1)
    grad = _loads.facet_gradient(sheet.xyz, mesh.triangles, potential)  # N/m per m
    grad[~use] = 0.0
    seg_group = np.array([groups.index(s.group) if s.group in groups else -1
                          for s in plate.segments])
    elem_group = seg_group[nearest_seg[mesh.triangles[:, 0]]]
    for g in range(len(groups)):  # a few load groups
        f = np.where((elem_group == g)[:, None], grad, 0.0)
        if np.any(f):
            out[g] = _loads.body_force_loads(sheet.xyz, mesh.triangles, f)
    return out


def _load_groups(plate):
    """Groups that carry a load, in order of first appearance."""
    out = []
    for s in plate.segments:
        if s.kind not in ("free", "fixed") and s.group not in out:
            out.append(s.group)
    return out


def build_model(document: dict, progress=None) -> BuiltModel:
    """Validate, mesh, solve every load group and return the unit stress fields.

    Parameters
    ----------
    document : dict
        A plate model document (README "Plate model document").
    progress : callable, optional
        ``progress(fraction, message)`` called as the build advances (fraction in [0, 1]).

    Raises
    ------
    ModelValidationError
        With one problem per defect of the document.

    Examples
    --------
    The fictional demo plate: one unit field per load group, then predictions at any weights.

    >>> import json
    >>> from importlib import resources
    >>> text = resources.files("stressmap.data").joinpath("demo_plate.json").read_text()
    >>> built = build_model(json.loads(text))
    >>> sorted(built.groups)
    ['collision', 'overriding', 'ridge', 'subduction', 'transform']
    >>> ds = predict_points(built, [-15.0, 60.0], [-20.0, 0.0], weights={"ridge": 2.0})
    >>> ds["inside"].values.tolist(), ds["regime"].values[1]
    ([True, False], '')
    >>> bool(0.0 <= ds["shmax_azimuth_deg"].values[0] < 180.0)
    True
    """
    import xarray as xr

    from stressmap import mesh as _mesh
    from stressmap import plate as _plate

    def report(fraction, message):
        log.debug("build %.0f%%: %s", 100 * fraction, message)
        if progress is not None:
            progress(float(fraction), message)

    timings = {}
    t_all = time.perf_counter()
    report(0.0, "validating the plate model")
    t0 = time.perf_counter()
    plate = _plate.parse_plate(document)
    timings["validate_s"] = time.perf_counter() - t0
    groups = _load_groups(plate)
    if not groups:
        raise ModelValidationError(
            "the plate has no loaded boundary segment",
            [problem("every segment is 'free' or 'fixed', so nothing loads the plate; give at least "
                     "one segment a driving or resisting kind", field="boundary.features")])

    report(0.05, "meshing")
    t0 = time.perf_counter()
    mesh = _mesh.mesh_plate(plate)
    timings["mesh_s"] = time.perf_counter() - t0

    report(0.3, "assembling the sheet")
    t0 = time.perf_counter()
    sh_par = plate.sheet
    thickness_m = float(sh_par["thickness_km"]) * 1e3
    xyz_unit = np.asarray(mesh.xyz, dtype=float)
    xyz_m = xyz_unit * EARTH_RADIUS_M
    sheet = _sheet.make_sheet(xyz_m, mesh.triangles, thickness_m, float(sh_par["young_gpa"]) * 1e9,
                              float(sh_par["poisson"]), mesh.element_stiffness)
    stiffness = _sheet.assemble_stiffness(sheet)
    timings["assemble_s"] = time.perf_counter() - t0

    fixed_kinds = np.array([s.kind == "fixed" for s in plate.segments])
    fixed_nodes = np.unique(mesh.boundary_edges[fixed_kinds[mesh.edge_segment]])
    fixed_dofs = np.concatenate([2 * fixed_nodes, 2 * fixed_nodes + 1])

    report(0.4, "factorising")
    t0 = time.perf_counter()
    factor = _sheet.factorise(sheet, stiffness, fixed_dofs)
    timings["factorise_s"] = time.perf_counter() - t0

    report(0.55, "building loads")
    t0 = time.perf_counter()
    normal, shear, edge_group = _segment_loads(plate, mesh, groups)
    g_count = len(groups)
    driving = np.zeros((g_count, mesh.n_nodes, 3))
    for g in range(g_count):  # a few load groups
        on = edge_group == g
        if on.any():
            driving[g] = _loads.edge_line_loads(xyz_m, mesh.boundary_edges[on], normal[on], shear[on])
    driving += _ridge_body_forces(plate, mesh, sheet, xyz_unit, groups)
    areas = _sheet.nodal_areas(sheet)
    torque_before = _loads.net_torque(xyz_m, driving)  # (G, 3)
    closure = plate.drag.get("closure", "torque_balance")
    eta_over_h = float(plate.drag["viscosity_pa_s"]) / (float(plate.drag["channel_km"]) * 1e3)
    if fixed_nodes.size:
        closure_used = "fixed_edges"
        omega = np.full((g_count, 3), np.nan)
        drag = np.zeros_like(driving)
    elif closure == "torque_balance":
        closure_used = "torque_balance"
        omega, drag = _loads.torque_closure(xyz_m, areas, eta_over_h, driving)
    else:
        closure_used = "none"
        scale = np.linalg.norm(np.cross(xyz_m, driving), axis=-1).sum(axis=-1)
        bad = np.linalg.norm(torque_before, axis=1) > 1e-6 * np.maximum(scale, 1e-300)
        if bad.any():
            names = ", ".join(g for g, b in zip(groups, bad) if b)
            raise ModelValidationError(
                "drag.closure is 'none' but the plate is free and its loads are not in torque balance",
                [problem(f"load group(s) {names} have a net torque and no fixed edge holds the "
                         "plate; use drag.closure 'torque_balance' or add a 'fixed' segment",
                         field="drag.closure")])
        omega = np.full((g_count, 3), np.nan)
        drag = np.zeros_like(driving)
    total = driving + drag
    torque_after = _loads.net_torque(xyz_m, total)
    rhs = _loads.to_dofs(total, sheet.frames).T  # (2n, G)
    timings["loads_s"] = time.perf_counter() - t0

    report(0.65, "solving every load group")
    t0 = time.perf_counter()
    u = factor.solve(rhs)
    timings["solve_s"] = time.perf_counter() - t0

    report(0.8, "recovering stresses")
    t0 = time.perf_counter()
    membrane = _sheet.nodal_membrane_forces(sheet, u)  # (G, n, 3) N/m tension positive
    unit_force = -membrane  # compression positive
    unit_stress = unit_force / thickness_m / PA_PER_MPA
    timings["stress_s"] = time.perf_counter() - t0

    report(0.9, "collecting fields")
    ring_lonlat = np.asarray(plate.ring_lonlat, dtype=float)
    seg_kind = [s.kind for s in plate.segments]
    seg_group = [s.group for s in plate.segments]
    seg_name = [str(s.properties.get("name", "")) for s in plate.segments]
    build_time = _now_iso()
    fields = xr.Dataset(
        {
            "unit_stress_mpa": (("group", "node", "component"), unit_stress, {
                "long_name": "tectonic stress of each load group at weight 1 (compression positive)",
                "units": "MPa"}),
            "unit_force_n_per_m": (("group", "node", "component"), unit_force, {
                "long_name": "membrane force per unit length of each load group at weight 1 "
                             "(compression positive)", "units": "N m-1"}),
            "lon": (("node",), mesh.lonlat[:, 0], {"standard_name": "longitude", "units": "degrees_east"}),
            "lat": (("node",), mesh.lonlat[:, 1], {"standard_name": "latitude", "units": "degrees_north"}),
            "triangles": (("triangle", "vertex"), np.asarray(mesh.triangles, dtype=np.int64), {
                "long_name": "node indices of each facet, counter-clockwise seen from outside"}),
            "element_province": (("triangle",), np.asarray(mesh.element_province, dtype=np.int64),
                                 {"long_name": "province index of each facet (-1 none)"}),
            "element_stiffness": (("triangle",), np.asarray(mesh.element_stiffness, dtype=float),
                                  {"long_name": "relative stiffness of each facet"}),
            "omega_rad_s": (("group", "axis"), omega, {
                "long_name": "rigid rotation whose basal drag balances the group's torque",
                "units": "rad s-1"}),
            "torque_before_n_m": (("group", "axis"), torque_before, {"units": "N m"}),
            "torque_after_n_m": (("group", "axis"), torque_after, {"units": "N m"}),
            "ring_lon": (("ring_vertex",), ring_lonlat[:, 0], {"units": "degrees_east"}),
            "ring_lat": (("ring_vertex",), ring_lonlat[:, 1], {"units": "degrees_north"}),
            "arc_segment": (("ring_vertex",), np.asarray(plate.arc_segment, dtype=np.int64), {
                "long_name": "segment of the arc from each ring vertex to the next"}),
            "segment_kind": (("segment",), np.array(seg_kind, dtype=object)),
            "segment_group": (("segment",), np.array(seg_group, dtype=object)),
            "segment_name": (("segment",), np.array(seg_name, dtype=object)),
        },
        coords={"group": np.array(groups, dtype=object), "component": list(COMPONENTS),
                "axis": ["x", "y", "z"]},
        attrs={
            "title": f"stressmap unit stress fields: {plate.name}",
            "Conventions": "CF-1.8",
            "source": "stressmap thin-sheet model (flat-facet membrane elements on the sphere)",
            "stress_sign": "compression positive",
            "components": "s_ee, s_nn, s_en in the local (east, north) frame",
            "thickness_m": thickness_m,
            "earth_radius_m": EARTH_RADIUS_M,
            "closure": closure_used,
            "build_time": build_time,
            "comment": CAUTION,
        },
    )

    # summary
    def rotation_report(w):
        lon, lat, rate = _loads.pole_and_rate(w)
        speed = _loads.plate_speed_mm_yr(xyz_m, w) if np.all(np.isfinite(w)) else np.array([np.nan])
        return {"omega_pole_lon": _finite_or_none(lon), "omega_pole_lat": _finite_or_none(lat),
                "omega_rate_deg_per_myr": _finite_or_none(rate),
                "plate_speed_min_mm_yr": _finite_or_none(np.min(speed)),
                "plate_speed_max_mm_yr": _finite_or_none(np.max(speed))}

    group_reports = []
    for g, name in enumerate(groups):
        kinds = sorted({s.kind for s in plate.segments if s.group == name})
        group_reports.append({
            "name": name, "kinds": kinds,
            "segments": int(sum(s.group == name for s in plate.segments)),
            "torque_before_n_m": float(np.linalg.norm(torque_before[g])),
            "torque_after_n_m": float(np.linalg.norm(torque_after[g])),
            **rotation_report(omega[g]),
        })
    tb, ta = torque_before.sum(axis=0), torque_after.sum(axis=0)
    timings["total_s"] = time.perf_counter() - t_all
    summary = {
        "name": plate.name,
        "build_time": build_time,
        "mesh": {k: (v.item() if isinstance(v, np.generic) else v) for k, v in mesh.stats.items()},
        "dofs": int(sheet.n_dofs),
        "groups": group_reports,
        "total": {"torque_before_n_m": float(np.linalg.norm(tb)),
                  "torque_after_n_m": float(np.linalg.norm(ta)),
                  **rotation_report(omega.sum(axis=0))},
        "closure": closure_used,
        "drag": {"viscosity_pa_s": float(plate.drag["viscosity_pa_s"]),
                 "channel_km": float(plate.drag["channel_km"])},
        "sheet": {k: float(v) for k, v in sh_par.items()},
        "ridge_push": {k: v for k, v in plate.ridge_push.items()},
        "timings": {k: round(float(v), 4) for k, v in timings.items()},
        "caution": CAUTION,
    }
    report(1.0, "done")
    return BuiltModel(definition=plate.document, fields=fields, summary=summary)


# --------------------------------------------------------------------------------------------
# queries


def _geometry(model: BuiltModel):
    """Cached unit node vectors, triangles, inverse vertex matrices, centroid tree, unit fields."""
    cache = model._cache
    if "geom" not in cache:
        from scipy.spatial import cKDTree

        f = model.fields
        lon = np.radians(np.asarray(f["lon"].values, float))
        lat = np.radians(np.asarray(f["lat"].values, float))
        xyz = np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], axis=1)
        tri = np.asarray(f["triangles"].values, dtype=np.int64)
        verts = xyz[tri]  # (m, 3 vertices, 3)
        # q = sum_j l_j v_j  <=>  l = inv(V^T) q with V rows the vertices
        inv = np.linalg.inv(verts.transpose(0, 2, 1))
        cent = verts.mean(axis=1)
        cent /= np.linalg.norm(cent, axis=1, keepdims=True)
        # largest centroid-to-vertex chord bounds how far a containing facet's centroid can be
        reach = np.linalg.norm(verts - cent[:, None], axis=2).max()
        unit = np.ascontiguousarray(np.asarray(f["unit_stress_mpa"].values, dtype=float))
        cache["geom"] = (xyz, tri, inv, cKDTree(cent), reach, unit)
    return cache["geom"]


def _check_lonlat(lon, lat):
    lon = np.atleast_1d(np.asarray(lon, dtype=float)).ravel()
    lat = np.atleast_1d(np.asarray(lat, dtype=float)).ravel()
    probs = []
    if lon.shape != lat.shape:
        raise InputError(f"lon and lat differ in length ({lon.size} and {lat.size})",
                         [problem(f"lon has {lon.size} values, lat has {lat.size}", field="lon")])
    for name, v, lim in (("lon", lon, 360.0), ("lat", lat, 90.0)):
        bad = np.flatnonzero(~np.isfinite(v) | (np.abs(v) > lim))
        for i in bad[:20]:
            probs.append(problem(f"{name} must be a finite number in [-{lim:g}, {lim:g}], got {v[i]!r}",
                                 field=name, row=int(i) + 1))
        if bad.size > 20:
            probs.append(problem(f"... and {bad.size - 20} more bad {name} values", field=name))
    if probs:
        raise InputError("invalid point coordinates", probs)
    return lon, lat


def locate(model: BuiltModel, lon, lat):
    """Containing facet and barycentric weights of points.

    Returns
    -------
    inside : (P,) bool
    triangle : (P,) int64, -1 outside
    weights : (P, 3) float64, barycentric weights of the facet's vertices (NaN outside)
    """
    lon, lat = _check_lonlat(lon, lat)
    xyz, tri, inv, tree, reach, _ = _geometry(model)
    lo, la = np.radians(lon), np.radians(lat)
    q = np.stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)], axis=1)
    p = q.shape[0]
    triangle = np.full(p, -1, dtype=np.int64)
    weights = np.full((p, 3), np.nan)
    todo = np.arange(p)
    m = tri.shape[0]
    for k in (1, 8, 32, 128):  # widen the candidate set only for the points not yet found
        if todo.size == 0:
            break
        kk = min(k, m)
        dist, cand = tree.query(q[todo], k=kk, distance_upper_bound=reach * 1.01)
        dist = dist.reshape(todo.size, kk)
        cand = cand.reshape(todo.size, kk)
        valid = np.isfinite(dist)
        cand_safe = np.where(valid, cand, 0)
        qt = q[todo]
        lam = np.einsum("pkij,pj->pki", inv[cand_safe], qt)  # (P, k, 3)
        l0, l1, l2 = lam[..., 0], lam[..., 1], lam[..., 2]
        tol = -1e-12 * (np.abs(l0) + np.abs(l1) + np.abs(l2))
        total = l0 + l1 + l2
        ok = valid & (l0 >= tol) & (l1 >= tol) & (l2 >= tol) & (total > 0)
        found = ok.any(axis=1)
        first = np.argmax(ok, axis=1)
        rows = np.flatnonzero(found)
        sel = first[rows]
        triangle[todo[rows]] = cand[rows, sel]
        lw = lam[rows, sel]
        weights[todo[rows]] = np.clip(lw / lw.sum(axis=1, keepdims=True), 0.0, 1.0)
        # points with no facet centroid in reach are outside: stop looking for them
        still = ~found & valid.all(axis=1)
        todo = todo[still] if kk < m else todo[:0]
    inside = triangle >= 0
    return inside, triangle, weights


def unit_stress_at(model: BuiltModel, lon, lat):
    """Unit stress of every load group at points.

    Returns
    -------
    inside : (P,) bool
    unit : (G, P, 3) float64
        (s_ee, s_nn, s_en) in MPa, compression positive, per group at weight 1; NaN outside.
    """
    inside, triangle, w = locate(model, lon, lat)
    _, tri, _, _, _, unit_nodes = _geometry(model)
    g = unit_nodes.shape[0]
    out = np.full((g, inside.size, 3), np.nan)
    if inside.any():
        nodes = tri[triangle[inside]]  # (Pin, 3)
        out[:, inside] = np.einsum("pj,gpjc->gpc", w[inside], unit_nodes[:, nodes])
    return inside, out


def resolve_weights(model: BuiltModel, weights=None) -> np.ndarray:
    """Weights (G,) of the load groups from a dict ``{group: weight}`` (missing groups: 1.0).

    Raises :class:`InputError` for unknown groups and values that are not finite numbers.
    """
    groups = model.groups
    out = np.ones(len(groups))
    if weights is None:
        return out
    if not isinstance(weights, dict):
        raise InputError("weights must be an object mapping load group to a number",
                         [problem(f"got {type(weights).__name__}", field="weights")])
    probs = []
    for name, value in weights.items():
        if name not in groups:
            probs.append(problem(f"unknown load group {name!r}; the model's groups are "
                                 f"{', '.join(groups)}", field=f"weights.{name}"))
            continue
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
                or not np.isfinite(value):
            probs.append(problem(f"weight must be a finite number, got {value!r}", field=f"weights.{name}"))
            continue
        out[groups.index(name)] = float(value)
    if probs:
        raise InputError("invalid load-group weights", probs)
    return out


def stress_at(model: BuiltModel, lon, lat, weights=None):
    """Combined stress (P, 3) (s_ee, s_nn, s_en) MPa compression positive and ``inside`` (P,)."""
    w = resolve_weights(model, weights)
    inside, unit = unit_stress_at(model, lon, lat)
    return inside, np.einsum("g,gpc->pc", w, unit)


_VARIABLES = {
    "s_ee_mpa": ("east-east tectonic stress (compression positive)", "MPa"),
    "s_nn_mpa": ("north-north tectonic stress (compression positive)", "MPa"),
    "s_en_mpa": ("east-north tectonic stress", "MPa"),
    "s_hmax_mpa": ("maximum horizontal tectonic stress (compression positive)", "MPa"),
    "s_hmin_mpa": ("minimum horizontal tectonic stress (compression positive)", "MPa"),
    "shmax_azimuth_deg": ("azimuth of SHmax, clockwise from north, in [0, 180)", "degree"),
    "regime_index": ("regime index A-phi (0 radial extension, 1 strike-slip, 3 radial compression)", "1"),
    "shape_ratio": ("stress shape ratio phi", "1"),
    "max_shear_mpa": ("maximum shear stress (sigma1 - sigma3) / 2", "MPa"),
}


def _derived(s):
    d = describe(s[..., 0], s[..., 1], s[..., 2])
    return {
        "s_ee_mpa": s[..., 0], "s_nn_mpa": s[..., 1], "s_en_mpa": s[..., 2],
        "s_hmax_mpa": d["s_hmax"], "s_hmin_mpa": d["s_hmin"],
        "shmax_azimuth_deg": d["shmax_azimuth_deg"], "regime": d["regime"],
        "regime_index": d["regime_index"], "shape_ratio": d["shape_ratio"],
        "max_shear_mpa": d["max_shear"],
    }


def predict_points(model: BuiltModel, lon, lat, weights=None):
    """Predicted stress at points as an xarray Dataset with dimension ``point``.

    Variables: lon, lat, inside, s_ee_mpa, s_nn_mpa, s_en_mpa, s_hmax_mpa, s_hmin_mpa,
    shmax_azimuth_deg, regime (str), regime_index (A-phi), shape_ratio, max_shear_mpa.
    Points outside the plate have ``inside = False``, NaN values and regime "".
    """
    import xarray as xr

    lon, lat = _check_lonlat(lon, lat)
    inside, s = stress_at(model, lon, lat, weights)
    d = _derived(s)
    d["regime"] = np.where(inside, d["regime"], "").astype(object)
    data = {"lon": (("point",), lon, {"standard_name": "longitude", "units": "degrees_east"}),
            "lat": (("point",), lat, {"standard_name": "latitude", "units": "degrees_north"}),
            "inside": (("point",), inside, {"long_name": "point lies inside the plate"})}
    for name, values in d.items():
        long_name, units = _VARIABLES.get(name, ("Anderson regime (normal, strike-slip, reverse)", None))
        attrs = {"long_name": long_name} | ({"units": units} if units else {})
        data[name] = (("point",), values, attrs)
    return xr.Dataset(data, attrs=_output_attrs(model, weights))


def _output_attrs(model, weights):
    w = resolve_weights(model, weights)
    return {
        "Conventions": "CF-1.8",
        "title": f"stressmap prediction: {model.summary.get('name', '')}",
        "source": "stressmap thin-sheet model",
        "model_name": str(model.summary.get("name", "")),
        "build_time": str(model.summary.get("build_time", "")),
        "weights": ", ".join(f"{g}={v:g}" for g, v in zip(model.groups, w)),
        "stress_sign": "compression positive",
        "comment": CAUTION,
    }


def predict_grid(model: BuiltModel, bbox, spacing_km, weights=None):
    """Predicted stress on a regular lon/lat grid as a CF-1.8 xarray Dataset (dims lat, lon).

    ``bbox = (W, S, E, N)`` in degrees (W > E crosses the antimeridian; longitudes then run
    past 180 so that they stay increasing); ``spacing_km`` is the node spacing along a meridian,
    and along the parallel through the middle of the box.
    """
    import xarray as xr

    try:
        w_, s_, e_, n_ = (float(v) for v in bbox)
    except (TypeError, ValueError):
        raise InputError("bbox must be four numbers W,S,E,N",
                         [problem(f"got {bbox!r}", field="bbox")]) from None
    probs = []
    for name, v, lim in (("W", w_, 180.0), ("S", s_, 90.0), ("E", e_, 180.0), ("N", n_, 90.0)):
        if not np.isfinite(v) or abs(v) > lim:
            probs.append(problem(f"{name} must be a finite number in [-{lim:g}, {lim:g}], got {v!r}",
                                 field="bbox"))
    if not probs and s_ >= n_:
        probs.append(problem(f"south ({s_:g}) must be less than north ({n_:g})", field="bbox"))
    if not probs and w_ == e_:
        probs.append(problem("west and east must differ", field="bbox"))
    try:
        spacing = float(spacing_km)
    except (TypeError, ValueError):
        spacing = float("nan")
    if not np.isfinite(spacing) or spacing <= 0:
        probs.append(problem(f"spacing_km must be a positive number, got {spacing_km!r}",
                             field="spacing_km"))
    if probs:
        raise InputError("invalid grid request", probs)
    if e_ < w_:
        e_ += 360.0
    dlat = spacing / _KM_PER_DEG
    mid = np.radians(0.5 * (s_ + n_))
    dlon = dlat / max(np.cos(mid), 1e-3)
    n_lat = int(np.floor((n_ - s_) / dlat + 1e-9)) + 1
    n_lon = int(np.floor((e_ - w_) / dlon + 1e-9)) + 1
    if n_lat * n_lon > MAX_GRID_POINTS:
        raise InputError(f"the grid would have {n_lat * n_lon} nodes (limit {MAX_GRID_POINTS})",
                         [problem(f"{n_lat} x {n_lon} nodes; use a larger spacing_km or a smaller "
                                  "bbox", field="spacing_km")])
    lats = s_ + dlat * np.arange(n_lat)
    lons = w_ + dlon * np.arange(n_lon)
    glon, glat = np.meshgrid(lons, lats)
    qlon = (glon.ravel() + 180.0) % 360.0 - 180.0
    inside, s = stress_at(model, qlon, glat.ravel(), weights)
    d = _derived(s)
    d["regime"] = np.where(inside, d["regime"], "").astype(object)
    data = {"inside": (("lat", "lon"), inside.reshape(n_lat, n_lon),
                       {"long_name": "grid node lies inside the plate"})}
    for name, values in d.items():
        long_name, units = _VARIABLES.get(name, ("Anderson regime (normal, strike-slip, reverse)", None))
        attrs = {"long_name": long_name} | ({"units": units} if units else {})
        if values.dtype.kind == "f":
            attrs["_FillValue"] = np.nan
        data[name] = (("lat", "lon"), values.reshape(n_lat, n_lon), attrs)
    coords = {"lat": ("lat", lats, {"standard_name": "latitude", "units": "degrees_north",
                                    "axis": "Y"}),
              "lon": ("lon", lons, {"standard_name": "longitude", "units": "degrees_east",
                                    "axis": "X"})}
    attrs = _output_attrs(model, weights) | {"grid_spacing_km": spacing}
    return xr.Dataset(data, coords=coords, attrs=attrs)


def plate_outline(model: BuiltModel) -> list[dict]:
    """Boundary segments for maps: a list of ``{"kind", "group", "name", "lon", "lat"}`` with
    lon/lat arrays of the ring vertices of each segment, in ring order."""
    f = model.fields
    lon = np.asarray(f["ring_lon"].values, float)
    lat = np.asarray(f["ring_lat"].values, float)
    arc = np.asarray(f["arc_segment"].values, dtype=np.int64)
    kinds = [str(k) for k in f["segment_kind"].values]
    groups = [str(g) for g in f["segment_group"].values]
    names = [str(g) for g in f["segment_name"].values]
    n = arc.size
    # runs of consecutive arcs of one segment (the ring starts at a segment boundary or inside one)
    change = np.flatnonzero(arc != np.roll(arc, 1))
    starts = change if change.size else np.array([0])
    out = []
    for i, a in enumerate(starts):  # one entry per boundary segment run
        b = starts[(i + 1) % starts.size] if starts.size > 1 else a + n
        idx = np.arange(a, b + (n if b <= a else 0) + 1) % n
        s = int(arc[a])
        out.append({"kind": kinds[s], "group": groups[s], "name": names[s],
                    "lon": lon[idx], "lat": lat[idx]})
    return out
