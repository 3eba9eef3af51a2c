"""Loads on the thin sheet: edge line forces, transform shear, body forces and basal-drag closure.

Pure numpy core: nodal forces are returned as 3D vectors (n, 3) in newtons; :func:`to_dofs`
projects them on the nodal (east, north) frames (the radial part is carried by the radially rigid
foundation and does no work). Positions are in metres.

Sign conventions (README, Conventions):

* A boundary ring is traversed with the plate interior on the left (seen from outside the sphere,
  or from +z in planar mode). For a boundary edge with unit tangent ``t`` and outward-pointing
  "up" ``r`` (the radial direction, +z in planar mode) the inward normal is ``r x t``.
* Normal line forces (N/m) are positive when they push into the plate.
* Transform shear: for a *dextral* boundary, standing inside the plate and looking outward across
  it (along the outward normal ``o``), the neighbour moves to the right, along ``o x r``; the
  resisting shear traction on this plate points along the neighbour's motion relative to it, i.e.
  along ``o x r = -t``. Sinistral is the opposite. Shear magnitudes are positive numbers.
* Basal drag of a rigid rotation ``omega`` (rad/s) is the traction ``-(eta/h_c) (omega x r)``; its
  torque is ``-J omega`` with ``J = (eta/h_c) sum_i A_i (|r_i|^2 I - r_i r_i^T)``.
  :func:`torque_closure` solves ``J omega = M_driving`` so the total load has zero net torque.
"""

from __future__ import annotations

import numpy as np

from stressmap.constants import SECONDS_PER_MYR

__all__ = [
    "edge_geometry",
    "edge_traction_loads",
    "edge_line_loads",
    "body_force_loads",
    "facet_gradient",
    "gpe_loads",
    "to_dofs",
    "net_torque",
    "drag_matrix",
    "drag_loads",
    "torque_closure",
    "pole_and_rate",
    "plate_speed_mm_yr",
    "SENSES",
]

#: Transform senses and the sign of the shear traction along the ring tangent ``t``.
SENSES = {"dextral": -1.0, "sinistral": 1.0}


def edge_geometry(xyz, edges, planar: bool = False):
    """Length (k,), unit tangent (k, 3) and inward unit normal (k, 3) of boundary edges.

    Edges are straight chords (as the flat facets); the "up" direction is the normalised
    chord midpoint on the sphere and +z in planar mode.

    Examples
    --------
    >>> xyz = np.array([[0.0, 0, 0], [2.0, 0, 0]])
    >>> length, t, n = edge_geometry(xyz, np.array([[0, 1]]), planar=True)
    >>> float(length[0]), t[0].tolist(), n[0].tolist()
    (2.0, [1.0, 0.0, 0.0], [0.0, 1.0, 0.0])
    """
    xyz = np.asarray(xyz, dtype=float)
    edges = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    a, b = xyz[edges[:, 0]], xyz[edges[:, 1]]
    d = b - a
    length = np.linalg.norm(d, axis=1)
    t = d / np.where(length > 0, length, 1.0)[:, None]
    if planar:
        up = np.broadcast_to(np.array([0.0, 0.0, 1.0]), a.shape)
    else:
        mid = a + b
        up = mid / np.linalg.norm(mid, axis=1, keepdims=True)
    inward = np.cross(up, t)
    inward /= np.linalg.norm(inward, axis=1, keepdims=True)
    return length, t, inward


def edge_traction_loads(xyz, edges, traction_start, traction_end=None, n_nodes=None) -> np.ndarray:
    """Consistent nodal forces (n, 3), N, of tractions (N/m) varying linearly along each edge.

    ``traction_start`` (k, 3) acts at the first node of each edge, ``traction_end`` at the second
    (default: the same). Node a gets ``L (2 t_a + t_b) / 6`` and node b ``L (t_a + 2 t_b) / 6``.

    Examples
    --------
    >>> xyz = np.array([[0.0, 0, 0], [3.0, 0, 0]])
    >>> edge_traction_loads(xyz, [[0, 1]], [[0.0, 2.0, 0.0]])[:, 1].tolist()
    [3.0, 3.0]
    """
    xyz = np.asarray(xyz, dtype=float)
    edges = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    n = xyz.shape[0] if n_nodes is None else int(n_nodes)
    ta = np.asarray(traction_start, dtype=float).reshape(-1, 3)
    tb = ta if traction_end is None else np.asarray(traction_end, dtype=float).reshape(-1, 3)
    length = np.linalg.norm(xyz[edges[:, 1]] - xyz[edges[:, 0]], axis=1)[:, None]
    out = np.zeros((n, 3))
    np.add.at(out, edges[:, 0], length * (2.0 * ta + tb) / 6.0)
    np.add.at(out, edges[:, 1], length * (ta + 2.0 * tb) / 6.0)
    return out


def _per_edge_ends(value, k):
    v = np.asarray(value, dtype=float)
    if v.ndim == 0:
        v = np.full(k, float(v))
    if v.ndim == 1:
        v = v[:, None]
    return np.broadcast_to(v, (k, 2))


def edge_line_loads(xyz, edges, normal_n_per_m=0.0, shear_n_per_m=0.0, planar: bool = False):
    """Nodal forces (n, 3), N, of normal and shear line forces on boundary edges.

    Parameters
    ----------
    normal_n_per_m : (k,) or (k, 2) array_like
        Normal line force per edge (or at its two ends), positive pushing into the plate.
    shear_n_per_m : (k,) or (k, 2) array_like
        Shear line force along the edge tangent ``t`` (direction of ring traversal).
        Use :data:`SENSES` to turn a transform sense into this sign.

    Examples
    --------
    A unit push on the bottom edge of a planar square (traversed left to right, interior above)
    pushes its nodes up (+y):

    >>> xyz = np.array([[0.0, 0, 0], [1.0, 0, 0]])
    >>> edge_line_loads(xyz, [[0, 1]], [1.0], planar=True)[:, 1].tolist()
    [0.5, 0.5]
    """
    xyz = np.asarray(xyz, dtype=float)
    edges = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    k = edges.shape[0]
    _, t, inward = edge_geometry(xyz, edges, planar=planar)
    fn = _per_edge_ends(normal_n_per_m, k)
    fs = _per_edge_ends(shear_n_per_m, k)
    ta = fn[:, :1] * inward + fs[:, :1] * t
    tb = fn[:, 1:] * inward + fs[:, 1:] * t
    return edge_traction_loads(xyz, edges, ta, tb)


def facet_gradient(xyz, triangles, values) -> np.ndarray:
    """Gradient (m, 3) of a P1 nodal field over each flat facet (value unit per m).

    Examples
    --------
    >>> xyz = np.array([[0.0, 0, 0], [1.0, 0, 0], [0.0, 1, 0]])
    >>> facet_gradient(xyz, [[0, 1, 2]], [0.0, 2.0, 3.0]).tolist()
    [[2.0, 3.0, 0.0]]
    """
    xyz = np.asarray(xyz, dtype=float)
    tri = np.asarray(triangles, dtype=np.int64).reshape(-1, 3)
    v = np.asarray(values, dtype=float)[tri]  # (m, 3)
    p = xyz[tri]
    nrm = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
    nn = np.einsum("mc,mc->m", nrm, nrm)[:, None]
    # grad = sum_i v_i (n x (p_{i+2} - p_{i+1})) / |n|^2  (edges opposite each node)
    g = (v[:, 0:1] * np.cross(nrm, p[:, 2] - p[:, 1])
         + v[:, 1:2] * np.cross(nrm, p[:, 0] - p[:, 2])
         + v[:, 2:3] * np.cross(nrm, p[:, 1] - p[:, 0]))
    return g / nn


def body_force_loads(xyz, triangles, force_per_area) -> np.ndarray:
    """Nodal forces (n, 3), N, of a force per unit area (m, 3), Pa, constant on each facet
    (one third of the facet's force to each of its nodes)."""
    xyz = np.asarray(xyz, dtype=float)
    tri = np.asarray(triangles, dtype=np.int64).reshape(-1, 3)
    p = xyz[tri]
    area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
    f = np.asarray(force_per_area, dtype=float).reshape(-1, 3) * (area / 3.0)[:, None]
    out = np.zeros((xyz.shape[0], 3))
    np.add.at(out, tri.reshape(-1), np.repeat(f, 3, axis=0))
    return out


def _region_boundary(triangles, active):
    """Edges (k, 2) of the active facets that no other active facet shares, as ordered in their
    facet (counter-clockwise seen from outside: the region on their left), and that facet (k,)."""
    idx = np.flatnonzero(active)
    tri = triangles[idx]
    edges = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
    owner = np.tile(idx, 3)
    lo, hi = edges.min(axis=1), edges.max(axis=1)
    key = lo * (int(triangles.max(initial=0)) + 1) + hi  # one int64 per undirected edge
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    once = counts[inverse] == 1
    return edges[once], owner[once]


def gpe_loads(xyz, triangles, gpe_n_per_m, active=None) -> np.ndarray:
    """Equivalent nodal forces (n, 3), N, of a GPE field: the body force ``-grad U``.

    ``U`` (n,) is the nodal GPE (N/m, P1 over each flat facet); the thin-sheet equation
    ``div N = grad U`` (tension-positive N; :mod:`stressmap.physics.gpe`) is loaded in weak form
    by, at each node i,

        F_i = integral U grad(phi_i) dA  -  integral_boundary U phi_i n_out ds

    over the active facets: the volume term (GPE times the shape-function gradients) and the
    edge term where the boundary of the active region (the plate boundary, or the edge of the
    provinces that carry GPE) cuts the field. Together they equal ``-integral phi_i grad U dA``,
    so adding a constant to U changes nothing. Both terms use each facet's own plane, so on a
    flat region the identity is exact; on the faceted sphere the facets of an interior edge are
    not coplanar and a constant U would leave forces along the mean facet normal (the radial
    direction carried by the foundation) with tangential parts of order (edge / radius)^2: U is
    therefore taken relative to its mean over the active nodes first.

    Parameters
    ----------
    xyz : (n, 3) node positions, m.
    triangles : (m, 3) node indices, counter-clockwise seen from outside (or from +z, planar).
    gpe_n_per_m : (n,) nodal GPE, N/m.
    active : (m,) bool, optional, the facets that carry GPE (default all).

    Examples
    --------
    A constant U loads nothing; a linear U gives the body force ``-grad U`` times the area:

    >>> xyz = np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]])
    >>> tri = np.array([[0, 1, 2], [0, 2, 3]])
    >>> float(np.abs(gpe_loads(xyz, tri, np.full(4, 5.0))).max())
    0.0
    >>> gpe_loads(xyz, tri, xyz[:, 0] * 2.0).sum(axis=0).round(12).tolist()
    [-2.0, 0.0, 0.0]
    """
    xyz = np.asarray(xyz, dtype=float)
    tri = np.asarray(triangles, dtype=np.int64).reshape(-1, 3)
    active = np.ones(tri.shape[0], dtype=bool) if active is None else np.asarray(active, bool)
    t = tri[active]
    u = np.asarray(gpe_n_per_m, dtype=float)
    if t.size:  # only differences load the sheet; this also keeps the curvature residual least
        u = u - u[np.unique(t)].mean()
    p = xyz[t]
    nrm = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
    nn = np.einsum("mc,mc->m", nrm, nrm)[:, None]
    # grad(phi_i) = n x (p_{i+2} - p_{i+1}) / |n|^2 ; integral of U over the facet = A * mean(U)
    grads = [np.cross(nrm, p[:, (i + 2) % 3] - p[:, (i + 1) % 3]) / nn for i in range(3)]
    u_int = (0.5 * np.sqrt(nn[:, 0]) * u[t].mean(axis=1))[:, None]
    out = np.zeros((xyz.shape[0], 3))
    for i in range(3):  # the three vertices of every facet at once
        np.add.at(out, t[:, i], u_int * grads[i])
    edges, owner = _region_boundary(tri, active)
    if edges.size:
        # inward normal in the plane of the edge's own facet: n_f x t (region on the left)
        f = xyz[tri[owner]]
        fn = np.cross(f[:, 1] - f[:, 0], f[:, 2] - f[:, 0])
        t = xyz[edges[:, 1]] - xyz[edges[:, 0]]
        inward = np.cross(fn, t)
        inward /= np.linalg.norm(inward, axis=1, keepdims=True)
        ua, ub = u[edges[:, 0]][:, None], u[edges[:, 1]][:, None]
        # - U n_out = + U n_in, integrated exactly for U linear along the edge
        out += edge_traction_loads(xyz, edges, ua * inward, ub * inward, n_nodes=xyz.shape[0])
    return out


def to_dofs(forces, frames) -> np.ndarray:
    """Project nodal 3D forces (..., n, 3) on the nodal frames (n, 2, 3): DOF loads (..., 2n)."""
    forces = np.asarray(forces, dtype=float)
    comp = np.einsum("...nc,njc->...nj", forces, frames)
    return comp.reshape(*forces.shape[:-2], -1)


def net_torque(xyz, forces) -> np.ndarray:
    """Net torque ``sum_i r_i x f_i`` (..., 3), N m, of nodal forces (..., n, 3) at positions (n, 3) m.

    Examples
    --------
    >>> net_torque([[1.0, 0, 0]], [[0.0, 2.0, 0]]).tolist()
    [0.0, 0.0, 2.0]
    """
    xyz = np.asarray(xyz, dtype=float)
    return np.cross(xyz, np.asarray(forces, dtype=float)).sum(axis=-2)


def drag_matrix(xyz, nodal_area_m2, eta_over_h) -> np.ndarray:
    """Drag torque matrix ``J`` (3, 3), N m per rad/s: ``J = (eta/h) sum A_i (|r_i|^2 I - r_i r_i^T)``."""
    xyz = np.asarray(xyz, dtype=float)
    a = np.asarray(nodal_area_m2, dtype=float)
    r2 = np.einsum("nc,nc->n", xyz, xyz)
    j = np.einsum("n,n->", a, r2) * np.eye(3) - np.einsum("n,na,nb->ab", a, xyz, xyz)
    return float(eta_over_h) * j


def drag_loads(xyz, nodal_area_m2, eta_over_h, omega) -> np.ndarray:
    """Nodal basal drag forces (..., n, 3), N, for rigid rotations ``omega`` (..., 3) rad/s:
    ``-A_i (eta/h) (omega x r_i)``."""
    xyz = np.asarray(xyz, dtype=float)
    omega = np.asarray(omega, dtype=float)
    v = np.cross(omega[..., None, :], xyz)
    return -float(eta_over_h) * np.asarray(nodal_area_m2, dtype=float)[:, None] * v


def torque_closure(xyz, nodal_area_m2, eta_over_h, forces):
    """Rotation and basal drag that put driving forces in torque balance.

    Parameters
    ----------
    xyz : (n, 3) node positions, m.
    nodal_area_m2 : (n,) lumped nodal areas.
    eta_over_h : float, asthenosphere viscosity over channel thickness, Pa s / m.
    forces : (G, n, 3) driving nodal forces per load group, N.

    Returns
    -------
    omega : (G, 3) rad/s, the rigid rotation whose drag balances each group's torque.
    drag : (G, n, 3) the drag nodal forces, N.

    Examples
    --------
    Eight nodes on a unit sphere with one tangential push: after closure the torque vanishes.

    >>> xyz = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [-1, 0, 0], [0, -1, 0], [0, 0, -1],
    ...                 [0.6, 0.8, 0], [0, 0.6, 0.8]], dtype=float)
    >>> f = np.zeros((1, 8, 3)); f[0, 0] = [0, 1, 0]
    >>> omega, drag = torque_closure(xyz, np.ones(8), 1.0, f)
    >>> bool(np.allclose(net_torque(xyz, f + drag), 0.0, atol=1e-12))
    True
    """
    forces = np.asarray(forces, dtype=float)
    j = drag_matrix(xyz, nodal_area_m2, eta_over_h)
    torque = net_torque(xyz, forces)  # (G, 3)
    omega = np.linalg.solve(j, torque.reshape(-1, 3).T).T.reshape(torque.shape)
    return omega, drag_loads(xyz, nodal_area_m2, eta_over_h, omega)


def pole_and_rate(omega_rad_s):
    """Euler pole (lon, lat in degrees) and rate (deg/Myr) of rotation vectors (..., 3) rad/s.

    A zero rotation has pole NaN and rate 0.

    Examples
    --------
    >>> lon, lat, rate = pole_and_rate([0.0, 0.0, np.radians(1.0) / 3.15576e13])
    >>> float(lat), round(float(rate), 9)
    (90.0, 1.0)
    """
    w = np.asarray(omega_rad_s, dtype=float)
    rate = np.linalg.norm(w, axis=-1)
    safe = np.where(rate > 0, rate, 1.0)
    lat = np.degrees(np.arcsin(np.clip(w[..., 2] / safe, -1.0, 1.0)))
    lon = np.degrees(np.arctan2(w[..., 1], w[..., 0]))
    lat = np.where(rate > 0, lat, np.nan)
    lon = np.where(rate > 0, lon, np.nan)
    return lon, lat, np.degrees(rate) * SECONDS_PER_MYR


def plate_speed_mm_yr(xyz, omega_rad_s) -> np.ndarray:
    """Speed |omega x r| at positions (n, 3) m for rotations (..., 3) rad/s, mm/yr (..., n)."""
    v = np.cross(np.asarray(omega_rad_s, dtype=float)[..., None, :], np.asarray(xyz, dtype=float))
    return np.linalg.norm(v, axis=-1) * 1e3 * (SECONDS_PER_MYR / 1e6)
