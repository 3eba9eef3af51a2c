"""Building a plate model: document -> mesh -> unit load cases -> factorised sheet -> unit fields.

:func:`build_model` runs the whole chain once -- validate the document
(:func:`stressmap.model.plate.parse_plate`), mesh the plate (:func:`stressmap.fem.mesh.mesh_plate`),
assemble and factorise the thin sheet (:mod:`stressmap.fem.sheet`), build the loads of every load
group (:mod:`stressmap.fem.loads`, force laws from :mod:`stressmap.physics.forces`), put each group in torque
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

import numpy as np

from stressmap.constants import CAUTION, EARTH_RADIUS_KM, EARTH_RADIUS_M, PA_PER_MPA
from stressmap.errors import InputError, ModelValidationError, problem
from stressmap.fem import loads as _loads
from stressmap.fem import mesh as _mesh
from stressmap.fem import sheet as _sheet
from stressmap.model import plate as _plate
from stressmap.model.built import COMPONENTS, BuiltModel
from stressmap.physics import forces

log = logging.getLogger(__name__)

# --------------------------------------------------------------------------------------------
# building


def _now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def _finite_or_none(x):
    x = float(x)
    return x if np.isfinite(x) else None


def _segment_loads(plate, mesh, groups):
    """Edge normal and shear line forces (k,) and the group index (k,) of every boundary edge."""

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
    >>> from stressmap.model import predict_points
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


