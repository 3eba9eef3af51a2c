"""Predictions from a built model: point location, weighted unit fields, derived quantities.

Stresses are tectonic (depth-averaged deviatoric membrane force divided by the sheet thickness),
in MPa, **compression positive**, with components (s_ee, s_nn, s_en) in the local
(east, north) frame.

Points are located in the mesh by central projection: the flat facets project onto the sphere
exactly as the plate polygon (boundary arcs are great circles), so a point is inside the plate
exactly when it falls in a facet; outside points are flagged and get NaN, never extrapolated.
"""

from __future__ import annotations

import logging

import numpy as np
import xarray as xr
from scipy.spatial import cKDTree

from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.geo.grid import regular_grid, wrap_lon
from stressmap.geo.sphere import local_frame
from stressmap.geo.tensor import describe
from stressmap.model.built import MAX_GRID_POINTS, BuiltModel

log = logging.getLogger(__name__)

# --------------------------------------------------------------------------------------------
# queries


def _geometry(model: BuiltModel):
    """Cached unit node vectors, triangles, inverse vertex matrices, centroid tree, unit fields."""
    cache = model._cache
    if "geom" not in cache:

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

    Callers that need the location for more than the stress (a network's plate column) locate
    once and pass the answer on as ``located``.
    """
    lon, lat = _check_lonlat(lon, lat)
    return _locate(model, lon, lat)


def _locate(model: BuiltModel, lon, lat):
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


def unit_stress_at(model: BuiltModel, lon, lat, located=None):
    """Unit stress of every load group at points (``located``: the answer of :func:`locate`
    for these points, when the caller already has it).

    Returns
    -------
    inside : (P,) bool
    unit : (G, P, 3) float64
        (s_ee, s_nn, s_en) in MPa, compression positive, per group at weight 1; NaN outside.
    """
    lon, lat = _check_lonlat(lon, lat)
    inside, triangle, w = located if located is not None else _locate(model, lon, lat)
    xyz, tri, _, _, _, unit_nodes = _geometry(model)
    g = unit_nodes.shape[0]
    out = np.full((g, inside.size, 3), np.nan)
    if inside.any():
        nodes = tri[triangle[inside]]  # (Pin, 3)
        lo, la = np.radians(lon[inside]), np.radians(lat[inside])
        q = np.stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)], axis=1)
        at_q = _to_point_frames(unit_nodes[:, nodes], xyz[nodes], q)
        out[:, inside] = np.einsum("pj,gpjc->gpc", w[inside], at_q)
    return inside, out


def _to_point_frames(s, node_xyz, q):
    """Node tensors (G, P, 3 nodes, 3 components) in their nodal (east, north) frames, expressed
    in the (east, north) frame at the points q (P, 3).

    Frames of nearby nodes differ by the convergence of the meridians (up to 180 degrees next
    to a pole), so the components are turned by the angle between the node's east and the
    point's east (the node's east projected on the point's tangent plane) before weighting.
    """
    qe, qn = local_frame(q)
    ne, _ = local_frame(node_xyz)  # (P, 3, 3)
    x = np.einsum("pjk,pk->pj", ne, qe)
    y = np.einsum("pjk,pk->pj", ne, qn)
    theta = np.arctan2(y, x)
    c, sn = np.cos(theta), np.sin(theta)
    see, snn, sen = s[..., 0], s[..., 1], s[..., 2]
    return np.stack([c * c * see + sn * sn * snn - 2.0 * c * sn * sen,
                     sn * sn * see + c * c * snn + 2.0 * c * sn * sen,
                     c * sn * (see - snn) + (c * c - sn * sn) * sen], axis=-1)


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


def stress_at(model: BuiltModel, lon, lat, weights=None, located=None):
    """Combined stress (P, 3) (s_ee, s_nn, s_en) MPa compression positive and ``inside`` (P,)."""
    w = resolve_weights(model, weights)
    inside, unit = unit_stress_at(model, lon, lat, located)
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


def predict_points(model: BuiltModel, lon, lat, weights=None, located=None):
    """Predicted stress at points as an xarray Dataset with dimension ``point``.

    Variables: lon, lat, inside, s_ee_mpa, s_nn_mpa, s_en_mpa, s_hmax_mpa, s_hmin_mpa,
    shmax_azimuth_deg, regime (str), regime_index (A-phi), shape_ratio, max_shear_mpa.
    Points outside the plate have ``inside = False``, NaN values and regime "".
    ``located`` is the answer of :func:`locate` for these points, when the caller has it.
    """

    lon, lat = _check_lonlat(lon, lat)
    inside, s = stress_at(model, lon, lat, weights, located)
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


def grid_points(bbox, spacing_km):
    """Axes of the prediction grid and its nodes in row-major order, longitudes in [-180, 180)
    (the points :func:`predict_grid` evaluates)."""
    lons, lats = regular_grid(bbox, spacing_km, max_nodes=MAX_GRID_POINTS)
    glon, glat = np.meshgrid(lons, lats)
    return lons, lats, wrap_lon(glon.ravel()), glat.ravel()


def predict_grid(model: BuiltModel, bbox, spacing_km, weights=None, located=None):
    """Predicted stress on a regular lon/lat grid as a CF-1.8 xarray Dataset (dims lat, lon).

    ``bbox = (W, S, E, N)`` in degrees (W > E crosses the antimeridian; longitudes then run
    past 180 so that they stay increasing); ``spacing_km`` is the node spacing along a meridian,
    and along the parallel through the middle of the box. The grid and its rules (W == E
    refused, -180..180 or 0..360 longitudes, at most ``MAX_GRID_POINTS`` nodes) are those of
    :func:`stressmap.geo.grid.regular_grid`. ``located``: the answer of :func:`locate` for the
    nodes of :func:`grid_points`, when the caller has it.
    """

    lons, lats, qlon, qlat = grid_points(bbox, spacing_km)
    n_lat, n_lon = lats.size, lons.size
    inside, s = stress_at(model, qlon, qlat, weights, located)
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
    attrs = _output_attrs(model, weights) | {"grid_spacing_km": float(spacing_km)}
    return xr.Dataset(data, coords=coords, attrs=attrs)


def plate_outline(model: BuiltModel) -> list[dict]:
    """Boundary segments for maps: a list of ``{"kind", "group", "name", "lon", "lat"}`` with
    lon/lat arrays of the ring vertices of each segment, in ring order (each plate's ring on its
    own for the joined plates of a network)."""
    f = model.fields
    lon = np.asarray(f["ring_lon"].values, float)
    lat = np.asarray(f["ring_lat"].values, float)
    arc = np.asarray(f["arc_segment"].values, dtype=np.int64)
    tables = ([str(k) for k in f["segment_kind"].values], [str(g) for g in f["segment_group"].values],
              [str(g) for g in f["segment_name"].values])
    if "ring_plate" not in f:
        return _ring_runs(lon, lat, arc, *tables)
    which = np.asarray(f["ring_plate"].values)
    out = []
    for k in np.unique(which):  # the plates of a network: a dozen or so
        sel = which == k
        out += _ring_runs(lon[sel], lat[sel], arc[sel], *tables)
    return out


def _ring_runs(lon, lat, arc, kinds, groups, names) -> list[dict]:
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
