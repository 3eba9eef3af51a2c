"""Distributed loads of a plate model: oceanic ages at the nodes, ridge push as a body force and
the GPE load group (body forces from topography, :mod:`stressmap.physics.gpe`).

Grids are never opened here: they arrive as arrays (:class:`stressmap.geo.raster.Raster` or
anything :func:`~stressmap.geo.raster.as_raster` takes) in the ``grids`` mapping that
:func:`stressmap.model.build.build_model` receives, keyed by the reference string the document
gives (``ridge_push.age_grid``) or by the role (``"age"``). The CLI and the service read the
files or uploads at the edge (:mod:`stressmap.io.grids`).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from scipy.spatial import cKDTree

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import ModelValidationError, problem
from stressmap.fem import loads as _loads
from stressmap.geo.raster import as_raster, sample_raster
from stressmap.physics import forces
from stressmap.physics import gpe as _gpe

__all__ = ["GRID_ROLES", "find_grid", "sample_grid_at_nodes", "node_ages_myr", "oceanic_facets",
           "ridge_body_forces", "gpe_field", "gpe_body_forces"]

#: Grid roles a document can name, with the field naming each (the reference string).
GRID_ROLES = {"age": "ridge_push.age_grid", "elevation": "gpe.elevation_grid",
              "crust_thickness": "gpe.crust_grid"}


def find_grid(grids: Mapping | None, role: str, reference: str | None):
    """The raster of ``role`` from ``grids`` (keyed by the document's reference or the role).

    Raises
    ------
    ModelValidationError
        Naming the document field when the grid was not supplied or is malformed.
    """
    field = GRID_ROLES[role]
    grids = grids or {}
    grid = grids.get(reference) if reference is not None else None
    if grid is None:
        grid = grids.get(role)
    if grid is None:
        name = f" {reference!r}" if reference else ""
        raise ModelValidationError(
            f"the {role} grid{name} was not supplied",
            [problem(f"the {role} grid{name} named by the document was not given to the build; "
                     f"the CLI reads it from a file, the service from an uploaded grid id, and "
                     f"Python callers pass build_model(document, grids={{{role!r}: ...}})",
                     field=field)])
    try:
        return as_raster(grid, name=role)
    except ValueError as exc:
        raise ModelValidationError(f"the {role} grid is not usable: {exc}",
                                   [problem(str(exc), field=field)]) from None


def sample_grid_at_nodes(grid, role: str, lon, lat, need=None, smooth_km=None) -> np.ndarray:
    """Samples of a grid at nodes; an error (naming the field) where a needed node has none.

    ``need`` (n,) bool marks the nodes that must get a value (default: all).
    """
    values, ok = sample_raster(grid, lon, lat, smooth_km=smooth_km)
    need = np.ones(values.shape, dtype=bool) if need is None else np.asarray(need, dtype=bool)
    missing = need & ~ok
    if missing.any():
        k = int(np.flatnonzero(missing)[0])
        lon_k, lat_k = float(np.asarray(lon)[k]), float(np.asarray(lat)[k])
        raise ModelValidationError(
            f"the {role} grid does not cover the plate",
            [problem(f"{int(missing.sum())} mesh node(s) fall outside the {role} grid or on its "
                     f"NaN cells (first at lon {lon_k:.3f}, lat {lat_k:.3f}); the grid must cover "
                     "the plate without holes", field=GRID_ROLES[role])])
    return values


def _ridge_samples(xyz_unit, edges, seg_of_edge):
    """Points densely along the ridge edges (8 per edge plus the ends) and their segment."""
    t = (np.arange(8) + 0.5) / 8
    pts = (xyz_unit[edges[:, 0]][:, None] * (1 - t)[None, :, None]
           + xyz_unit[edges[:, 1]][:, None] * t[None, :, None]).reshape(-1, 3)
    pts /= np.linalg.norm(pts, axis=1, keepdims=True)
    pts = np.concatenate([pts, xyz_unit[edges.reshape(-1)]])
    owner = np.concatenate([np.repeat(seg_of_edge, 8), np.repeat(seg_of_edge, 2)])
    return pts, owner


def _province_ages(plate, mesh, area):
    """Area-weighted average age (Myr) of the oceanic-province facets around each node."""
    prov_age = np.array([np.nan if p.age_myr is None else float(p.age_myr)
                         for p in plate.provinces] + [np.nan])
    oceanic = np.array([p.lithosphere == "oceanic" for p in plate.provinces] + [False])
    elem_age = np.where(oceanic[mesh.element_province],
                        prov_age[mesh.element_province], np.nan)  # -1 -> trailing NaN
    w = np.where(np.isfinite(elem_age), area, 0.0)
    num = np.zeros(mesh.n_nodes)
    den = np.zeros(mesh.n_nodes)
    np.add.at(num, mesh.triangles.reshape(-1), np.repeat(np.nan_to_num(elem_age) * w, 3))
    np.add.at(den, mesh.triangles.reshape(-1), np.repeat(w, 3))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, np.nan)


def node_ages_myr(plate, mesh, xyz_unit, area, grids=None, need=None):
    """Lithosphere age (Myr) at nodes and the segment of the nearest ridge of each node.

    Sources (``ridge_push.age_source``): ``ridge_distance`` (great-circle distance to the
    nearest ridge over its half spreading rate; 1 mm/yr = 1 km/Myr), ``provinces`` (area-weighted
    average of the ages of the adjacent oceanic-province elements) or ``grid`` (the ``age``
    raster of ``grids``, sampled bilinearly at the nodes; see :mod:`stressmap.geo.raster`).
    With provinces or a grid, nodes on the ridge get age 0. ``area`` (m,) is the facet area;
    ``need`` (n,) marks the nodes a grid must cover (default: all).
    """
    ridge_segs = [s for s in plate.segments if s.kind == "ridge"]
    on_ridge = np.isin(mesh.edge_segment, [s.index for s in ridge_segs])
    edges = mesh.boundary_edges[on_ridge]
    if edges.size:
        pts, owner = _ridge_samples(xyz_unit, edges, mesh.edge_segment[on_ridge])
        chord, idx = cKDTree(pts).query(xyz_unit)
        nearest_seg = owner[idx]
    else:
        chord, nearest_seg = np.full(mesh.n_nodes, np.inf), np.full(mesh.n_nodes, -1)
    source = plate.ridge_push.get("age_source", "ridge_distance")
    if source == "ridge_distance":
        dist_km = 2.0 * np.arcsin(np.clip(chord / 2.0, 0.0, 1.0)) * EARTH_RADIUS_KM
        rate = np.full(len(plate.segments) + 1, np.nan)  # index -1: no ridge at all
        for s in ridge_segs:
            rate[s.index] = float(s.properties.get("half_rate_mm_yr") or np.nan)
        age = dist_km / rate[nearest_seg]  # km / (mm/yr) = Myr
    elif source == "provinces":
        age = _province_ages(plate, mesh, area)
    else:
        grid = find_grid(grids, "age", plate.ridge_push.get("age_grid"))
        lon, lat = mesh.lonlat[:, 0], mesh.lonlat[:, 1]
        age = sample_raster(grid, lon, lat)[0] if need is None else sample_grid_at_nodes(
            grid, "age", lon, lat, need=need)
    if source != "ridge_distance":
        age[edges.reshape(-1)] = 0.0  # lithosphere is new at the ridge by definition
    return age, nearest_seg


def oceanic_facets(plate, mesh) -> np.ndarray:
    """(m,) bool: facets of oceanic provinces; every facet when no province is oceanic."""
    oceanic = np.array([p.lithosphere == "oceanic" for p in plate.provinces] + [False])
    if oceanic[:-1].any():
        return oceanic[mesh.element_province]
    return np.ones(mesh.n_triangles, dtype=bool)


def ridge_body_forces(plate, mesh, sheet, xyz_unit, groups, grids=None):
    """Distributed ridge push: nodal forces (G, n, 3) from the gradient of the ridge-push
    potential F(age) over the oceanic lithosphere (``ridge_push.mode`` ``distributed``)."""

    out = np.zeros((len(groups), mesh.n_nodes, 3))
    ridge_segs = [s for s in plate.segments if s.kind == "ridge"
                  and s.properties.get("force_n_per_m") is None]
    if plate.ridge_push.get("mode") != "distributed" or not ridge_segs:
        return out
    age, nearest_seg = node_ages_myr(plate, mesh, xyz_unit, sheet.area, grids)
    # ridge push of lithosphere of each node's age; its gradient is rate(age) * grad(age)
    # (forces.ridge_push_rate_n_per_m_per_myr), pointing toward older lithosphere; the P1
    # gradient of F integrates exactly to the ridge-push difference across any strip.
    finite = np.isfinite(age)
    potential = np.zeros(mesh.n_nodes)
    if finite.any():
        potential[finite] = forces.ridge_push_n_per_m(np.maximum(age[finite], 0.0))
    use = oceanic_facets(plate, mesh) & finite[mesh.triangles].all(axis=1)
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


def _gpe_params(gpe: Mapping) -> dict:
    keys = ("isostasy", "crust_density_kg_m3", "mantle_density_kg_m3", "water_density_kg_m3",
            "reference_crust_km", "compensation_depth_km", "ocean_model")
    return {k: gpe[k] for k in keys if k in gpe}


def _gpe_columns(plate, mesh):
    """Active facets (m,) and oceanic-by-age nodes (n,) of the GPE load.

    ``ridge_push.mode`` 'gpe': every facet carries GPE and the nodes of oceanic provinces take the
    cooling-model column (with no province declared, every node when no elevation grid is given).
    Other modes: ridge push is carried by the ridge loads, so oceanic provinces carry no GPE
    gradient (their facets are inactive) and every active node takes its column from elevation.
    """
    declared = np.array([p.lithosphere == "oceanic" for p in plate.provinces] + [False])
    facet_oceanic = declared[mesh.element_province]
    oceanic = np.zeros(mesh.n_nodes, dtype=bool)
    if plate.ridge_push.get("mode") == "gpe":
        active = np.ones(mesh.n_triangles, dtype=bool)
        if declared[:-1].any():
            oceanic[mesh.triangles[facet_oceanic].reshape(-1)] = True
        elif "elevation_grid" not in plate.gpe:
            oceanic[:] = True
    else:
        active = ~facet_oceanic
    return active, oceanic


def gpe_field(plate, mesh, xyz_unit, area, grids=None):
    """Nodal GPE (n,) N/m relative to the reference column (NaN off the GPE region) and the
    active facets (m,) bool. See :mod:`stressmap.physics.gpe` for the columns."""
    gpe = plate.gpe
    active, oceanic = _gpe_columns(plate, mesh)
    used = np.zeros(mesh.n_nodes, dtype=bool)
    used[mesh.triangles[active].reshape(-1)] = True
    land = used & ~oceanic
    lon, lat = mesh.lonlat[:, 0], mesh.lonlat[:, 1]
    smooth = float(gpe.get("smooth_km", plate.mesh.get("edge_km", 0.0)))
    elevation = crust = age = None
    if land.any():
        if "elevation_grid" not in gpe:
            raise ModelValidationError(
                "the GPE load needs an elevation grid",
                [problem("continental columns take their GPE from elevation: give "
                         "gpe.elevation_grid (or declare the plate's provinces oceanic with "
                         "ridge_push.mode 'gpe')", field="gpe.elevation_grid")])
        grid = find_grid(grids, "elevation", gpe["elevation_grid"])
        elevation = sample_grid_at_nodes(grid, "elevation", lon, lat, need=land, smooth_km=smooth)
        if gpe.get("isostasy") == "crust":
            grid = find_grid(grids, "crust_thickness", gpe.get("crust_grid"))
            crust = sample_grid_at_nodes(grid, "crust_thickness", lon, lat, need=land,
                                         smooth_km=smooth)
    if oceanic.any():
        age, _ = node_ages_myr(plate, mesh, xyz_unit, area, grids, need=oceanic)
        bad = oceanic & ~np.isfinite(age)
        if bad.any():
            raise ModelValidationError(
                "oceanic columns without an age",
                [problem(f"{int(bad.sum())} oceanic node(s) have no lithosphere age; give "
                         "ridge_push.age_source a source that covers the oceanic provinces",
                         field="ridge_push.age_source")])
    u = np.full(mesh.n_nodes, np.nan)
    sel = land | oceanic
    u[sel] = gpe_columns_at(elevation, crust, age, oceanic, sel, _gpe_params(gpe))
    return u, active


def gpe_columns_at(elevation, crust, age, oceanic, sel, params) -> np.ndarray:
    """GPE of the selected nodes from whatever inputs exist (None: not needed there)."""
    pick = (lambda a: None if a is None else np.asarray(a)[sel])
    return _gpe.column_gpe_n_per_m(pick(elevation), pick(crust), pick(age), oceanic[sel], params)


def gpe_body_forces(plate, mesh, sheet, xyz_unit, groups, grids=None):
    """The GPE load group: nodal forces (G, n, 3) (nonzero only in the GPE group) and the nodal
    GPE (n,) N/m; ``(zeros, None)`` when the document loads no GPE."""
    out = np.zeros((len(groups), mesh.n_nodes, 3))
    if plate.gpe is None:
        return out, None
    u, active = gpe_field(plate, mesh, xyz_unit, sheet.area, grids)
    g = groups.index(plate.gpe["group"])
    out[g] = _loads.gpe_loads(sheet.xyz, mesh.triangles, np.nan_to_num(u), active)
    return out, u
