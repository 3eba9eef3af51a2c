"""Specification of the load builders (stressmap.fem.loads): edge forces and their signs, transform
shear sense, body forces, basal drag and the torque closure."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.physics import forces
from stressmap.fem import loads
from stressmap.fem import sheet
from stressmap.constants import EARTH_RADIUS_M, SECONDS_PER_MYR

R = EARTH_RADIUS_M


def square_ring(side=2.0):
    """Planar square traversed counter-clockwise (interior on the left)."""
    xyz = np.array([[0, 0, 0], [side, 0, 0], [side, side, 0], [0, side, 0]], dtype=float)
    edges = np.array([[0, 1], [1, 2], [2, 3], [3, 0]])
    return xyz, edges


def test_inward_normal_points_into_the_plate():
    # Interior on the left of the traversal (README, Conventions), so r x t points inside.
    xyz, edges = square_ring()
    _, t, n = loads.edge_geometry(xyz, edges, planar=True)
    mid = 0.5 * (xyz[edges[:, 0]] + xyz[edges[:, 1]])
    centre = xyz.mean(axis=0)
    assert np.all(np.einsum("kc,kc->k", n, centre - mid) > 0)


def test_uniform_push_is_balanced_and_has_the_right_size():
    xyz, edges = square_ring(2.0)
    f = loads.edge_line_loads(xyz, edges, 3.0, planar=True)
    assert_allclose(f.sum(axis=0), 0.0, atol=1e-12)
    # node 0 (corner) gets half of each adjacent edge's push: 3 N/m * 1 m into the plate
    assert_allclose(f[0], [3.0, 3.0, 0.0])
    # a negative force (slab pull) pulls outward
    g = loads.edge_line_loads(xyz, edges[:1], -3.0, planar=True)
    assert g[0, 1] < 0 and g[1, 1] < 0


def test_dextral_shear_points_along_the_neighbours_motion():
    # Issue 3: dextral = standing inside and looking across the boundary, the neighbour moves to
    # the right; the shear on this plate points along that motion. Bottom edge of a square
    # traversed +x with the interior (+y) on the left: looking out (-y, south) the right is west.
    xyz, edges = square_ring()
    f = loads.edge_line_loads(xyz, edges[:1], 0.0, loads.SENSES["dextral"] * 5.0, planar=True)
    assert_allclose(f[[0, 1]].sum(axis=0), [-10.0, 0.0, 0.0])
    f = loads.edge_line_loads(xyz, edges[:1], 0.0, loads.SENSES["sinistral"] * 5.0, planar=True)
    assert_allclose(f[[0, 1]].sum(axis=0), [10.0, 0.0, 0.0])


def test_dextral_on_the_sphere_matches_the_local_right_hand():
    # An edge running north along the equator-crossing meridian lon = 0 with the interior to the
    # west (left when heading north). Looking outward (east) the right hand is south.
    a = np.array([np.cos(0.01), 0.0, -np.sin(0.01)]) * R
    b = np.array([np.cos(0.01), 0.0, np.sin(0.01)]) * R
    xyz = np.stack([a, b])
    f = loads.edge_line_loads(xyz, [[0, 1]], 0.0, loads.SENSES["dextral"] * 1.0)
    assert f.sum(axis=0)[2] < 0  # southward
    push = loads.edge_line_loads(xyz, [[0, 1]], 1.0)
    assert push.sum(axis=0)[1] < 0  # inward = west = -y at lon 0


def test_linearly_varying_traction_is_lumped_consistently():
    # Consistent nodal loads of a linear traction on a 2-node edge: L/6 (2 ta + tb), L/6 (ta + 2 tb)
    # (standard finite-element result, e.g. Zienkiewicz & Taylor, The finite element method, vol. 1).
    xyz = np.array([[0.0, 0, 0], [6.0, 0, 0]])
    f = loads.edge_traction_loads(xyz, [[0, 1]], [[1.0, 0, 0]], [[4.0, 0, 0]])
    assert_allclose(f[:, 0], [6.0, 9.0])
    assert_allclose(f[:, 0].sum(), 6.0 * 2.5)  # integral of the traction


def test_facet_gradient_is_exact_for_linear_fields():
    rng = np.random.default_rng(1)
    xyz = rng.normal(size=(3, 3))
    g = np.array([0.3, -1.2, 2.0])
    values = xyz @ g
    nrm = np.cross(xyz[1] - xyz[0], xyz[2] - xyz[0])
    nrm /= np.linalg.norm(nrm)
    expected = g - nrm * (g @ nrm)  # in-plane part of the gradient
    assert_allclose(loads.facet_gradient(xyz, [[0, 1, 2]], values)[0], expected, rtol=1e-10)


def test_gradient_body_force_integrates_to_the_ridge_push_difference():
    """The P1 gradient of F(age) over a strip 0 <= x <= L integrates to (F(age(L)) - F(0)) * width
    (divergence theorem), the ridge-push force the distributed load must transmit."""
    skfem = pytest.importorskip("skfem")
    m = skfem.MeshTri.init_tensor(np.linspace(0, 1000e3, 21), np.linspace(0, 200e3, 5))
    xyz = np.c_[m.p.T, np.zeros(m.p.shape[1])]
    age = xyz[:, 0] / 20e3  # 20 mm/yr half rate: 1 Myr per 20 km
    potential = forces.ridge_push_n_per_m(age)
    body = loads.facet_gradient(xyz, m.t.T, potential)
    f = loads.body_force_loads(xyz, m.t.T, body)
    expected = (forces.ridge_push_n_per_m(50.0) - forces.ridge_push_n_per_m(0.0)) * 200e3
    assert_allclose(f.sum(axis=0)[0], expected, rtol=1e-12)
    assert np.all(body[:, 0] > 0)  # toward older lithosphere


def cap(nrefs=4, theta0=np.radians(20.0)):
    skfem = pytest.importorskip("skfem")
    mesh = skfem.MeshTri.init_circle(nrefs)
    p = mesh.p.T
    rho = np.hypot(p[:, 0], p[:, 1])
    th = theta0 * rho / rho.max()
    ph = np.arctan2(p[:, 1], p[:, 0])
    xyz = R * np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)], 1)
    return xyz, mesh.t.T.copy()


def test_drag_matrix_matches_the_cap_integral():
    # J = (eta/h) R^4 int (I - r r^T) dOmega over a polar cap of half-angle t0:
    # J_zz = 2 pi R^4 int sin^3, J_xx = R^4 [2 pi (1 - cos t0) - pi int sin^3] (analytic).
    t0 = np.radians(20.0)
    xyz, tri = cap(5, t0)
    sh = sheet.make_sheet(xyz, tri, 1.0, 1.0, 0.25)
    j = loads.drag_matrix(xyz, sheet.nodal_areas(sh), 2.0)
    s3 = 2.0 / 3.0 - np.cos(t0) + np.cos(t0) ** 3 / 3.0  # int_0^t0 sin^3
    jzz = 2.0 * 2 * np.pi * R**4 * s3
    jxx = 2.0 * R**4 * (2 * np.pi * (1 - np.cos(t0)) - np.pi * s3)
    assert_allclose(np.diag(j), [jxx, jxx, jzz], rtol=5e-3)
    assert_allclose(j - np.diag(np.diag(j)), 0.0, atol=1e-6 * jzz)


def test_torque_closure_balances_every_group():
    xyz, tri = cap(4)
    sh = sheet.make_sheet(xyz, tri, 1.0, 1.0, 0.25)
    rng = np.random.default_rng(3)
    f = rng.normal(size=(3, xyz.shape[0], 3)) * 1e15
    f -= np.einsum("gnc,nc->gn", f, xyz / R)[..., None] * xyz / R  # tangential driving forces
    omega, drag = loads.torque_closure(xyz, sheet.nodal_areas(sh), 1e19 / 2e5, f)
    before = np.linalg.norm(loads.net_torque(xyz, f), axis=1)
    after = np.linalg.norm(loads.net_torque(xyz, f + drag), axis=1)
    assert np.all(after < 1e-9 * before)
    # drag is tangential, so it is fully represented by the (east, north) DOFs
    assert_allclose(np.einsum("gnc,nc->gn", drag, xyz), 0.0, atol=1e-6 * np.abs(drag).max() * R)
    # and the DOF loads do the same work on a rigid rotation as the 3D forces
    z = sheet.rigid_modes(sh)
    work = loads.to_dofs(f + drag, sh.frames) @ z
    assert np.abs(work).max() < 1e-9 * before.max()


def test_pole_rate_and_plate_speed():
    # 1 deg/Myr about the z axis moves the equator at 2 pi R / 360 per Myr = 111.19 km/Myr,
    # i.e. 111.19 mm/yr (1 mm/yr = 1 km/Myr).
    w = np.array([0.0, 0.0, np.radians(1.0) / SECONDS_PER_MYR])
    lon, lat, rate = loads.pole_and_rate(w)
    assert_allclose([lat, rate], [90.0, 1.0])
    speed = loads.plate_speed_mm_yr(np.array([[R, 0.0, 0.0]]), w)
    assert_allclose(speed, 2 * np.pi * 6371.0 / 360.0, rtol=1e-12)
    lon, lat, rate = loads.pole_and_rate(np.zeros(3))
    assert np.isnan(lon) and np.isnan(lat) and rate == 0.0
