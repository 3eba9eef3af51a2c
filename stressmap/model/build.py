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

The chain is a table of named stages (:data:`STAGES`: validate, mesh, assemble, factorise, loads,
solve, recover, collect), each a function from one :class:`BuildState` to the next; the driver
:func:`run_stages` calls the progress callback before each and records its seconds, which the
summary reports under ``timings`` (the CLI progress bar and benchmarks/solver.py read them).
Grids (age, elevation, crustal thickness) arrive as arrays in ``grids``: the core opens no files.

The unit fields are tectonic stresses in MPa, compression positive, in the local (east, north)
frame (see :mod:`stressmap.model.predict` for how they are queried).
"""

from __future__ import annotations

import datetime as _dt
import logging
import time
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import xarray as xr

from stressmap.constants import CAUTION, EARTH_RADIUS_M, PA_PER_MPA
from stressmap.errors import InputError, ModelValidationError, problem
from stressmap.fem import loads as _loads
from stressmap.fem import mesh as _mesh
from stressmap.fem import sheet as _sheet
from stressmap.model import body_forces as _body
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
        if seg.kind == "ridge" and plate.ridge_push.get("mode") == "gpe":
            continue  # ridge push is the GPE of the oceanic columns (the GPE group)
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


def _load_groups(plate):
    """Groups that carry a load, in order of first appearance; the GPE group last.

    With ``ridge_push.mode`` 'gpe' the ridge segments carry no load of their own (their push is
    in the GPE group), so ridge push is never counted twice.
    """
    unloaded = ("free", "fixed", "ridge") if plate.ridge_push.get("mode") == "gpe" else ("free", "fixed")
    out = []
    for s in plate.segments:
        if s.kind not in unloaded and s.group not in out:
            out.append(s.group)
    if plate.gpe is not None and plate.gpe["group"] not in out:
        out.append(plate.gpe["group"])
    return out


@dataclass(frozen=True)
class BuildState:
    """What the build stages have made so far; each stage returns a new state with more filled.

    Attributes are ``None`` until the stage that makes them has run (:data:`STAGES`).
    """

    document: Any
    grids: Mapping | None = None
    plate: Any = None                 # validate: the parsed PlateModel
    groups: tuple = ()                # validate: load group names, in order
    mesh: Any = None                  # mesh: the PlateMesh
    sheet: Any = None                 # assemble: the thin sheet (facet bases, areas)
    stiffness: Any = None             # assemble: sparse stiffness (2n, 2n)
    thickness_m: float = 0.0          # assemble: sheet thickness, m
    xyz_m: Any = None                 # assemble: node positions (n, 3), m
    fixed_nodes: Any = None           # factorise: nodes on 'fixed' segments
    factor: Any = None                # factorise: the factorised sheet
    load_cases: Any = None            # loads: LoadCases
    displacement: Any = None          # solve: (2n, G) nodal (east, north) displacements, m
    unit_force: Any = None            # recover: (G, n, 3) N/m, compression positive
    unit_stress: Any = None           # recover: (G, n, 3) MPa, compression positive
    built: Any = None                 # collect: the BuiltModel
    timings: Mapping = field(default_factory=dict)


@dataclass(frozen=True)
class LoadCases:
    """Unit load cases of every group, in torque balance (the ``loads`` stage)."""

    driving: np.ndarray        # (G, n, 3) N: edge and body forces of each group
    total: np.ndarray          # (G, n, 3) N: driving + basal drag
    rhs: np.ndarray            # (2n, G) DOF loads
    omega: np.ndarray          # (G, 3) rad/s: rotation whose drag balances each group (NaN if none)
    torque_before: np.ndarray  # (G, 3) N m
    torque_after: np.ndarray   # (G, 3) N m
    closure: str               # 'torque_balance', 'fixed_edges' or 'none'
    node_fields: Mapping = field(default_factory=dict)  # e.g. gpe_n_per_m (n,): the loads' inputs


def validate(state: BuildState) -> BuildState:
    """Parse the document (every problem at once) and find the load groups."""
    plate = _plate.parse_plate(state.document)
    groups = _load_groups(plate)
    if not groups:
        raise ModelValidationError(
            "the plate has no loaded boundary segment",
            [problem("every segment is 'free' or 'fixed', so nothing loads the plate; give at least "
                     "one segment a driving or resisting kind", field="boundary.features")])
    return replace(state, plate=plate, groups=tuple(groups))


def mesh(state: BuildState) -> BuildState:
    """Triangulate the spherical polygon (:func:`stressmap.fem.mesh.mesh_plate`)."""
    return replace(state, mesh=_mesh.mesh_plate(state.plate))


def assemble(state: BuildState) -> BuildState:
    """Facet bases and the sparse membrane stiffness of the sheet."""
    sh_par = state.plate.sheet
    thickness_m = float(sh_par["thickness_km"]) * 1e3
    xyz_m = np.asarray(state.mesh.xyz, dtype=float) * EARTH_RADIUS_M
    sheet = _sheet.make_sheet(xyz_m, state.mesh.triangles, thickness_m,
                              float(sh_par["young_gpa"]) * 1e9, float(sh_par["poisson"]),
                              state.mesh.element_stiffness)
    return replace(state, sheet=sheet, stiffness=_sheet.assemble_stiffness(sheet),
                   thickness_m=thickness_m, xyz_m=xyz_m)


def factorise(state: BuildState) -> BuildState:
    """Hold the nodes of 'fixed' segments and factorise the stiffness once."""
    m = state.mesh
    fixed_kinds = np.array([s.kind == "fixed" for s in state.plate.segments])
    fixed_nodes = np.unique(m.boundary_edges[fixed_kinds[m.edge_segment]])
    fixed_dofs = np.concatenate([2 * fixed_nodes, 2 * fixed_nodes + 1])
    factor = _sheet.factorise(state.sheet, state.stiffness, fixed_dofs)
    return replace(state, fixed_nodes=fixed_nodes, factor=factor)


def _driving_loads(state: BuildState):
    """Edge line forces and distributed body forces of every group (G, n, 3), N, and the nodal
    fields they came from (the GPE, N/m)."""
    plate, m, groups = state.plate, state.mesh, list(state.groups)
    normal, shear, edge_group = _segment_loads(plate, m, groups)
    driving = np.zeros((len(groups), m.n_nodes, 3))
    for g in range(len(groups)):  # a few load groups
        on = edge_group == g
        if on.any():
            driving[g] = _loads.edge_line_loads(state.xyz_m, m.boundary_edges[on],
                                                normal[on], shear[on])
    xyz_unit = np.asarray(m.xyz, dtype=float)
    driving += _body.ridge_body_forces(plate, m, state.sheet, xyz_unit, groups, state.grids)
    gpe_forces, gpe_nodal = _body.gpe_body_forces(plate, m, state.sheet, xyz_unit, groups,
                                                  state.grids)
    node_fields = {} if gpe_nodal is None else {"gpe_n_per_m": gpe_nodal}
    return driving + gpe_forces, node_fields


def _closure(state: BuildState, driving: np.ndarray):
    """Basal drag per group: (closure used, omega (G, 3) rad/s, drag (G, n, 3) N)."""
    plate, xyz_m, groups = state.plate, state.xyz_m, state.groups
    nan_omega = np.full((len(groups), 3), np.nan)
    if state.fixed_nodes.size:
        return "fixed_edges", nan_omega, np.zeros_like(driving)
    if plate.drag.get("closure", "torque_balance") == "torque_balance":
        eta_over_h = float(plate.drag["viscosity_pa_s"]) / (float(plate.drag["channel_km"]) * 1e3)
        areas = _sheet.nodal_areas(state.sheet)
        omega, drag = _loads.torque_closure(xyz_m, areas, eta_over_h, driving)
        return "torque_balance", omega, drag
    torque = _loads.net_torque(xyz_m, driving)
    scale = np.linalg.norm(np.cross(xyz_m, driving), axis=-1).sum(axis=-1)
    bad = np.linalg.norm(torque, axis=1) > 1e-6 * np.maximum(scale, 1e-300)
    if bad.any():
        names = ", ".join(g for g, b in zip(groups, bad) if b)
        raise ModelValidationError(
            "drag.closure is 'none' but the plate is free and its loads are not in torque balance",
            [problem(f"load group(s) {names} have a net torque and no fixed edge holds the "
                     "plate; use drag.closure 'torque_balance' or add a 'fixed' segment",
                     field="drag.closure")])
    return "none", nan_omega, np.zeros_like(driving)


def loads(state: BuildState) -> BuildState:
    """Unit load cases: the driving loads of each group plus its own share of basal drag."""
    driving, node_fields = _driving_loads(state)
    closure_used, omega, drag = _closure(state, driving)
    total = driving + drag
    cases = LoadCases(driving=driving, total=total,
                      rhs=_loads.to_dofs(total, state.sheet.frames).T, omega=omega,
                      torque_before=_loads.net_torque(state.xyz_m, driving),
                      torque_after=_loads.net_torque(state.xyz_m, total), closure=closure_used,
                      node_fields=node_fields)
    return replace(state, load_cases=cases)


def solve(state: BuildState) -> BuildState:
    """Every load group as one right-hand side of the factorisation."""
    return replace(state, displacement=state.factor.solve(state.load_cases.rhs))


def recover(state: BuildState) -> BuildState:
    """Smoothed nodal membrane forces and tectonic stresses (compression positive)."""
    membrane = _sheet.nodal_membrane_forces(state.sheet, state.displacement)  # tension positive
    unit_force = -membrane
    return replace(state, unit_force=unit_force,
                   unit_stress=unit_force / state.thickness_m / PA_PER_MPA)


def collect(state: BuildState) -> BuildState:
    """The unit fields as an xarray Dataset and the JSON summary, as a :class:`BuiltModel`."""
    build_time = _now_iso()
    fields = _fields_dataset(state, build_time)
    summary = _summary(state, build_time)
    built = BuiltModel(definition=state.plate.document, fields=fields, summary=summary)
    return replace(state, built=built)


def _fields_dataset(state: BuildState, build_time: str):
    plate, m, lc = state.plate, state.mesh, state.load_cases
    ring_lonlat = np.asarray(plate.ring_lonlat, dtype=float)
    node, seg = ("group", "node", "component"), ("segment",)
    ds = xr.Dataset(
        {
            "unit_stress_mpa": (node, state.unit_stress, {
                "long_name": "tectonic stress of each load group at weight 1 (compression positive)",
                "units": "MPa"}),
            "unit_force_n_per_m": (node, state.unit_force, {
                "long_name": "membrane force per unit length of each load group at weight 1 "
                             "(compression positive)", "units": "N m-1"}),
            "lon": (("node",), m.lonlat[:, 0], {"standard_name": "longitude", "units": "degrees_east"}),
            "lat": (("node",), m.lonlat[:, 1], {"standard_name": "latitude", "units": "degrees_north"}),
            "triangles": (("triangle", "vertex"), np.asarray(m.triangles, dtype=np.int64), {
                "long_name": "node indices of each facet, counter-clockwise seen from outside"}),
            "element_province": (("triangle",), np.asarray(m.element_province, dtype=np.int64),
                                 {"long_name": "province index of each facet (-1 none)"}),
            "element_stiffness": (("triangle",), np.asarray(m.element_stiffness, dtype=float),
                                  {"long_name": "relative stiffness of each facet"}),
            "omega_rad_s": (("group", "axis"), lc.omega, {
                "long_name": "rigid rotation whose basal drag balances the group's torque",
                "units": "rad s-1"}),
            "torque_before_n_m": (("group", "axis"), lc.torque_before, {"units": "N m"}),
            "torque_after_n_m": (("group", "axis"), lc.torque_after, {"units": "N m"}),
            "ring_lon": (("ring_vertex",), ring_lonlat[:, 0], {"units": "degrees_east"}),
            "ring_lat": (("ring_vertex",), ring_lonlat[:, 1], {"units": "degrees_north"}),
            "arc_segment": (("ring_vertex",), np.asarray(plate.arc_segment, dtype=np.int64), {
                "long_name": "segment of the arc from each ring vertex to the next"}),
            "segment_kind": (seg, np.array([s.kind for s in plate.segments], dtype=object)),
            "segment_group": (seg, np.array([s.group for s in plate.segments], dtype=object)),
            "segment_name": (seg, np.array([str(s.properties.get("name", ""))
                                            for s in plate.segments], dtype=object)),
        },
        coords={"group": np.array(state.groups, dtype=object), "component": list(COMPONENTS),
                "axis": ["x", "y", "z"]},
        attrs={
            "title": f"stressmap unit stress fields: {plate.name}",
            "Conventions": "CF-1.8",
            "source": "stressmap thin-sheet model (flat-facet membrane elements on the sphere)",
            "stress_sign": "compression positive",
            "components": "s_ee, s_nn, s_en in the local (east, north) frame",
            "thickness_m": state.thickness_m,
            "earth_radius_m": EARTH_RADIUS_M,
            "closure": lc.closure,
            "build_time": build_time,
            "comment": CAUTION,
        },
    )
    if "gpe_n_per_m" in lc.node_fields:
        ds["gpe_n_per_m"] = (("node",), lc.node_fields["gpe_n_per_m"], {
            "long_name": "gravitational potential energy of the column relative to the reference "
                         "column (NaN where no GPE load)", "units": "N m-1"})
    return ds


def _rotation_report(xyz_m, w) -> dict:
    lon, lat, rate = _loads.pole_and_rate(w)
    speed = _loads.plate_speed_mm_yr(xyz_m, w) if np.all(np.isfinite(w)) else np.array([np.nan])
    return {"omega_pole_lon": _finite_or_none(lon), "omega_pole_lat": _finite_or_none(lat),
            "omega_rate_deg_per_myr": _finite_or_none(rate),
            "plate_speed_min_mm_yr": _finite_or_none(np.min(speed)),
            "plate_speed_max_mm_yr": _finite_or_none(np.max(speed))}


def _summary(state: BuildState, build_time: str) -> dict:
    plate, lc, xyz_m = state.plate, state.load_cases, state.xyz_m
    group_reports = []
    for g, name in enumerate(state.groups):  # a few load groups
        group_reports.append({
            "name": name, "kinds": sorted({s.kind for s in plate.segments if s.group == name}),
            "segments": int(sum(s.group == name for s in plate.segments)),
            "torque_before_n_m": float(np.linalg.norm(lc.torque_before[g])),
            "torque_after_n_m": float(np.linalg.norm(lc.torque_after[g])),
            **_rotation_report(xyz_m, lc.omega[g]),
        })
    tb, ta = lc.torque_before.sum(axis=0), lc.torque_after.sum(axis=0)
    stats = state.mesh.stats
    return {
        "name": plate.name,
        "build_time": build_time,
        "mesh": {k: (v.item() if isinstance(v, np.generic) else v) for k, v in stats.items()},
        "dofs": int(state.sheet.n_dofs),
        "groups": group_reports,
        "total": {"torque_before_n_m": float(np.linalg.norm(tb)),
                  "torque_after_n_m": float(np.linalg.norm(ta)),
                  **_rotation_report(xyz_m, lc.omega.sum(axis=0))},
        "closure": lc.closure,
        "drag": {"viscosity_pa_s": float(plate.drag["viscosity_pa_s"]),
                 "channel_km": float(plate.drag["channel_km"])},
        "sheet": {k: float(v) for k, v in plate.sheet.items()},
        "ridge_push": {k: v for k, v in plate.ridge_push.items()},
        **({"gpe": dict(plate.gpe)} if plate.gpe is not None else {}),
        "timings": {},
        "caution": CAUTION,
    }


#: The build stages in order: (name, progress fraction at its start, progress message, function).
STAGES = (
    ("validate", 0.0, "validating the plate model", validate),
    ("mesh", 0.05, "meshing", mesh),
    ("assemble", 0.3, "assembling the sheet", assemble),
    ("factorise", 0.4, "factorising", factorise),
    ("loads", 0.55, "building loads", loads),
    ("solve", 0.65, "solving every load group", solve),
    ("recover", 0.8, "recovering stresses", recover),
    ("collect", 0.9, "collecting fields", collect),
)


def run_stages(state: BuildState, progress=None, stop_after: str | None = None) -> BuildState:
    """Run :data:`STAGES` in order, timing each (``state.timings[name + '_s']``, seconds).

    ``progress(fraction, message)`` is called before each stage; ``stop_after`` ends the run
    after the named stage (the benchmark times stages one by one).
    """
    timings = dict(state.timings)
    for name, fraction, message, stage in STAGES:
        log.debug("build %.0f%%: %s", 100 * fraction, message)
        if progress is not None:
            progress(float(fraction), message)
        t0 = time.perf_counter()
        state = stage(state)
        timings[f"{name}_s"] = time.perf_counter() - t0
        if name == stop_after:
            break
    return replace(state, timings=timings)


def build_model(document: dict, progress=None, grids: Mapping | None = None) -> BuiltModel:
    """Validate, mesh, solve every load group and return the unit stress fields.

    Runs :data:`STAGES` (validate, mesh, assemble, factorise, loads, solve, recover, collect);
    the summary's ``timings`` give each stage's seconds (``<stage>_s``) and ``total_s``.

    Parameters
    ----------
    document : dict
        A plate model document (README "Plate model document").
    progress : callable, optional
        ``progress(fraction, message)`` called as the build advances (fraction in [0, 1]).
    grids : mapping, optional
        Gridded inputs as arrays, never paths: ``{key: Raster or (lon, lat, values)}`` where
        key is the reference string the document gives (``ridge_push.age_grid``) or the role
        (``"age"``). :func:`stressmap.io.grids.read_document_grids` reads the files a
        document names.

    Raises
    ------
    ModelValidationError
        With one problem per defect of the document (or of a grid it needs).

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
    >>> [k for k in built.summary["timings"]][:3]
    ['validate_s', 'mesh_s', 'assemble_s']
    >>> ds = predict_points(built, [-15.0, 60.0], [-20.0, 0.0], weights={"ridge": 2.0})
    >>> ds["inside"].values.tolist(), ds["regime"].values[1]
    ([True, False], '')
    >>> bool(0.0 <= ds["shmax_azimuth_deg"].values[0] < 180.0)
    True
    """
    t_all = time.perf_counter()
    state = run_stages(BuildState(document=document, grids=grids), progress)
    timings = {**state.timings, "total_s": time.perf_counter() - t_all}
    state.built.summary["timings"] = {k: round(float(v), 4) for k, v in timings.items()}
    if progress is not None:
        progress(1.0, "done")
    return state.built
