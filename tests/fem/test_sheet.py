"""Specification of the thin-sheet solver (stressmap.fem.sheet) against analytic solutions and an
independent finite-element library (scikit-fem).

Test meshes are made here (scikit-fem's mesh generators, a graded polar mesh) so that the solver is
checked independently of the plate mesher.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.fem import loads
from stressmap.fem import sheet
from stressmap.constants import EARTH_RADIUS_M
from stressmap.geo.tensor import horizontal_principal, shmax_azimuth_deg

R = EARTH_RADIUS_M
YOUNG, POISSON, THICK = 70e9, 0.25, 100e3


def oriented_boundary(xyz, tri, up=None):
    """Boundary edges (k, 2) of a triangle mesh ordered with the interior on the left."""
    tri = np.asarray(tri)
    e = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
    third = np.concatenate([tri[:, 2], tri[:, 0], tri[:, 1]])
    key = np.sort(e, axis=1)
    _, inv, cnt = np.unique(key, axis=0, return_inverse=True, return_counts=True)
    once = cnt[inv.ravel()] == 1
    e, third = e[once], third[once]
    a, b, c = xyz[e[:, 0]], xyz[e[:, 1]], xyz[third]
    up = (a + b) if up is None else np.broadcast_to(up, a.shape)
    left = np.einsum("kc,kc->k", np.cross(b - a, c - a), up) > 0
    return np.where(left[:, None], e, e[:, ::-1])


# --------------------------------------------------------------------------------------------
# spherical cap under a uniform inward edge force


def cap_mesh(theta0_rad, nrefs):
    """scikit-fem's unit-disk mesh mapped azimuthally-equidistantly onto a polar cap (radius R)."""
    skfem = pytest.importorskip("skfem")
    m = skfem.MeshTri.init_circle(nrefs)
    p = m.p.T
    rho = np.hypot(p[:, 0], p[:, 1])
    theta = theta0_rad * rho / rho.max()
    phi = np.arctan2(p[:, 1], p[:, 0])
    xyz = R * np.stack([np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)], 1)
    return xyz, m.t.T.copy(), theta


def exact_cap(theta, theta0, nu):
    """Axisymmetric membrane state of a cap with u_r = 0 under N_theta(theta0) = -1 (per unit
    edge force), by scipy's collocation BVP solver.

    Meridional displacement u(theta) (in units of R F / C, C = E t / (1 - nu^2)):
    strains e_tt = u'/R, e_pp = u cot(theta)/R; N_t = C (e_tt + nu e_pp), N_p = C (e_pp + nu e_tt);
    equilibrium dN_t/dtheta + cot(theta) (N_t - N_p) = 0 (membrane shell equations with the
    normal displacement suppressed, e.g. Timoshenko & Woinowsky-Krieger, Theory of plates and
    shells, ch. 14, from memory). Regularity at the pole: u ~ a theta, so at theta = eps
    u = eps N_t / (1 + nu).
    """
    from scipy.integrate import solve_bvp

    def ode(x, y):
        u, n = y
        c = 1.0 / np.tan(x)
        return np.vstack([n - nu * u * c, -c * ((1 - nu) * n - (1 - nu**2) * u * c)])

    eps = 1e-4
    x = np.linspace(eps, theta0, 50)
    guess = np.vstack([-(1 - nu) * np.sin(x), -np.ones_like(x)])
    sol = solve_bvp(ode, lambda ya, yb: np.array([ya[0] - eps * ya[1] / (1 + nu), yb[1] + 1.0]),
                    x, guess, tol=1e-10, max_nodes=100000)
    assert sol.status == 0
    th = np.maximum(theta, eps)
    u, n_t = sol.sol(th)
    n_p = (1 - nu**2) * u / np.tan(th) + nu * n_t
    return n_t, n_p


@pytest.fixture(scope="module")
def cap_solution():
    theta0 = np.radians(10.0)
    force = 3e12  # N/m, inward
    xyz, tri, theta = cap_mesh(theta0, 5)  # 128 boundary edges of ~55 km: the default resolution
    sh = sheet.make_sheet(xyz, tri, THICK, YOUNG, POISSON)
    edges = oriented_boundary(xyz, tri)
    f = loads.to_dofs(loads.edge_line_loads(xyz, edges, force), sh.frames)
    u = sheet.factorise(sh).solve(f)
    return dict(sh=sh, u=u, theta=theta, theta0=theta0, force=force, edges=edges)


def test_cap_is_isotropic_compression_equal_to_edge_force(cap_solution):
    # Analytic (equilibrium of a plane disk under uniform edge pressure): N = -F isotropic
    # everywhere; the cap departs from it by the small curvature term checked below.
    n = sheet.nodal_membrane_forces(cap_solution["sh"], cap_solution["u"])
    f = cap_solution["force"]
    mean = 0.5 * (n[:, 0] + n[:, 1])
    deviatoric = np.hypot(0.5 * (n[:, 0] - n[:, 1]), n[:, 2])
    assert_allclose(mean, -f, rtol=5e-3)
    assert deviatoric.max() < 5e-3 * f


def test_cap_matches_exact_axisymmetric_membrane_solution(cap_solution):
    # Near the pole north points to the pole, so N_nn is the meridional and N_ee the hoop force.
    n = sheet.nodal_membrane_forces(cap_solution["sh"], cap_solution["u"])
    f = cap_solution["force"]
    n_t, n_p = exact_cap(cap_solution["theta"], cap_solution["theta0"], POISSON)
    # the curvature term is real: the exact solution departs from -1 by more than the tolerance
    assert np.ptp(n_p) > 5e-3
    assert_allclose(n[:, 1] / f, n_t, atol=1e-3)
    assert_allclose(n[:, 0] / f, n_p, atol=1e-3)


def test_rigid_rotations_are_zero_energy_modes(cap_solution):
    sh = cap_solution["sh"]
    k = sheet.assemble_stiffness(sh)
    z = sheet.rigid_modes(sh)
    scale = abs(k).max() * np.abs(z).max()
    assert np.abs(k @ z).max() < 1e-9 * scale
    assert abs(k - k.T).max() < 1e-9 * abs(k).max()  # symmetric


def test_solution_has_no_rigid_part_and_pins_carry_no_reaction(cap_solution):
    sh, u = cap_solution["sh"], cap_solution["u"]
    z = sheet.rigid_modes(sh)
    assert np.abs(z.T @ u).max() < 1e-8 * np.abs(z).max() * np.abs(u).max() * sh.n_nodes


# --------------------------------------------------------------------------------------------
# small planar patches


def test_uniform_plus_bending_edge_traction():
    """Plane stress under sigma_xx = a + b y on the ends of a rectangle: the exact state is
    sigma_xx = a + b y, sigma_yy = sigma_xy = 0 everywhere (Timoshenko & Goodier, Theory of
    elasticity, pure bending of a beam, from memory)."""
    skfem = pytest.importorskip("skfem")
    m = skfem.MeshTri.init_tensor(np.linspace(0.0, 2.0, 81), np.linspace(-0.5, 0.5, 41))
    xyz = np.c_[m.p.T, np.zeros(m.p.shape[1])]
    tri = m.t.T.copy()
    sh = sheet.make_sheet(xyz, tri, 1.0, 1.0, 0.3, planar=True)
    edges = oriented_boundary(xyz, tri, up=[0, 0, 1])
    a, b = 1.0, 4.0
    ends = np.isclose(xyz[edges, 0], 0.0).all(1) | np.isclose(xyz[edges, 0], 2.0).all(1)
    sxx_ends = a + b * xyz[edges, 1]  # (k, 2) at each edge end
    push = np.where(ends[:, None], -sxx_ends, 0.0)  # tension pulls outward
    f = loads.edge_line_loads(xyz, edges, push, planar=True)
    u = sheet.factorise(sh).solve(loads.to_dofs(f, sh.frames))
    n = sheet.nodal_membrane_forces(sh, u)
    inner = (xyz[:, 0] > 0.2) & (xyz[:, 0] < 1.8)
    exact = a + b * xyz[:, 1]
    scale = a + 0.5 * b
    assert_allclose(n[inner, 0], exact[inner], atol=0.02 * scale)
    assert_allclose(n[inner, 1:], 0.0, atol=0.02 * scale)


def annulus_mesh(a, b, n_theta):
    """Graded polar mesh of a <= r <= b (cells of aspect ratio ~1, finest at the hole)."""
    n_r = int(np.ceil(np.log(b / a) / (2 * np.pi / n_theta)))
    r = a * (b / a) ** (np.arange(n_r + 1) / n_r)
    th = np.arange(n_theta) * 2 * np.pi / n_theta
    rr, tt = np.meshgrid(r, th, indexing="ij")
    xyz = np.c_[(rr * np.cos(tt)).ravel(), (rr * np.sin(tt)).ravel(), np.zeros(rr.size)]
    i, j = np.meshgrid(np.arange(n_r), np.arange(n_theta), indexing="ij")
    i, j = i.ravel(), j.ravel()
    p00 = i * n_theta + j
    p01 = i * n_theta + (j + 1) % n_theta
    p10 = p00 + n_theta
    p11 = p01 + n_theta
    tri = np.concatenate([np.c_[p00, p10, p11], np.c_[p00, p11, p01]])
    return xyz, tri


def kirsch_polar(r, th, a, s):
    """Kirsch (1898) stresses around a circular hole of radius a under remote uniaxial sigma_xx = s
    (tension positive), e.g. Jaeger, Cook & Zimmerman, Fundamentals of rock mechanics, sec. 8.4."""
    q2, q4 = (a / r) ** 2, (a / r) ** 4
    c2, s2 = np.cos(2 * th), np.sin(2 * th)
    srr = 0.5 * s * (1 - q2) + 0.5 * s * (1 - 4 * q2 + 3 * q4) * c2
    stt = 0.5 * s * (1 + q2) - 0.5 * s * (1 + 3 * q4) * c2
    srt = -0.5 * s * (1 + 2 * q2 - 3 * q4) * s2
    return srr, stt, srt


def test_kirsch_hole_concentration():
    a, b, s = 1.0, 12.0, 1.0
    xyz, tri = annulus_mesh(a, b, 192)
    sh = sheet.make_sheet(xyz, tri, 1.0, 1.0, 0.25, planar=True)
    edges = oriented_boundary(xyz, tri, up=[0, 0, 1])
    r = np.hypot(xyz[:, 0], xyz[:, 1])
    outer = np.isclose(r[edges], b).all(1)
    edges = edges[outer]  # the hole is traction-free
    # exact Kirsch traction on the outer circle, sigma . e_r
    th = np.arctan2(xyz[:, 1], xyz[:, 0])
    srr, _, srt = kirsch_polar(b, th, a, s)
    er = np.c_[np.cos(th), np.sin(th), 0 * th]
    et = np.c_[-np.sin(th), np.cos(th), 0 * th]
    trac = srr[:, None] * er + srt[:, None] * et
    f = loads.edge_traction_loads(xyz, edges, trac[edges[:, 0]], trac[edges[:, 1]])
    u = sheet.factorise(sh).solve(loads.to_dofs(f, sh.frames))
    n = sheet.nodal_membrane_forces(sh, u)
    top = int(np.argmin(np.hypot(xyz[:, 0], xyz[:, 1] - a)))  # hole edge at theta = 90 deg
    assert_allclose(n[top, 0] / s, 3.0, rtol=0.05)
    # theta = 0: sigma_tt = -s; the one-sided average of the boundary elements is biased by
    # O(h) towards the interior value, hence the wider tolerance
    side = int(np.argmin(np.hypot(xyz[:, 0] - a, xyz[:, 1])))
    assert_allclose(n[side, 1] / s, -1.0, atol=0.1)


# --------------------------------------------------------------------------------------------
# a few-hundred-km spherical patch against scikit-fem in a gnomonic projection


def test_spherical_patch_matches_scikit_fem_in_local_projection():
    skfem = pytest.importorskip("skfem")
    from pyproj import Transformer
    from skfem.helpers import ddot, sym_grad, trace, eye

    lon0, lat0, half = 10.0, 45.0, 200e3
    to_geo = Transformer.from_crs(
        f"+proj=gnom +lat_0={lat0} +lon_0={lon0} +R={R} +units=m",
        f"+proj=longlat +R={R} +no_defs", always_xy=True)
    grid = np.linspace(-half, half, 41)
    m = skfem.MeshTri.init_tensor(grid, grid)
    px, py = m.p
    lon, lat = to_geo.transform(px, py)
    lo, la = np.radians(lon), np.radians(lat)
    xyz = R * np.c_[np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)]
    tri = m.t.T.copy()

    # loads (N/m): west edge pushed on its middle half by 2 F, east edge by F, north and
    # south by F/2, and a pure shear tau on all four edges: balanced in force and moment.
    F, tau = 2e12, 0.6e12

    def traction(x, y):
        """Plane traction (tx, ty) on the boundary at (x, y), N/m."""
        tx, ty = np.zeros_like(x), np.zeros_like(y)
        east, west = np.isclose(x, half), np.isclose(x, -half)
        north, south = np.isclose(y, half), np.isclose(y, -half)
        mid = np.abs(y) < 0.5 * half
        tx = np.where(east, -F, tx) + np.where(west & mid, 2 * F, 0.0)
        ty = np.where(north, -0.5 * F, ty) + np.where(south, 0.5 * F, 0.0)
        ty = ty + np.where(east, tau, 0.0) - np.where(west, tau, 0.0)
        tx = tx + np.where(north, tau, 0.0) - np.where(south, tau, 0.0)
        return tx, ty

    # --- scikit-fem: plane stress with membrane constants (thickness folded in)
    c = YOUNG * THICK / (1 - POISSON**2)
    lam, mu = c * POISSON, c * (1 - POISSON) / 2
    e = skfem.ElementVector(skfem.ElementTriP1())
    basis = skfem.Basis(m, e, intorder=2)

    @skfem.BilinearForm
    def stiffness(u, v, w):
        eps_u, eps_v = sym_grad(u), sym_grad(v)
        return 2 * mu * ddot(eps_u, eps_v) + lam * trace(eps_u) * trace(eps_v)

    fbasis = skfem.FacetBasis(m, e, intorder=4)

    @skfem.LinearForm
    def edge_load(v, w):
        # facet midpoints decide the piece (the load steps sit on mesh nodes)
        x, y = w.x
        xm = x.mean(axis=1, keepdims=True) + 0 * x
        ym = y.mean(axis=1, keepdims=True) + 0 * y
        tx, ty = traction(xm, ym)
        return tx * v[0] + ty * v[1]

    kk = stiffness.assemble(basis)
    ff = edge_load.assemble(fbasis)
    centre = int(np.argmin(np.hypot(px, py)))
    far = int(np.argmin(np.hypot(px - half, py)))
    dofs = basis.nodal_dofs
    fixed = np.array([dofs[0, centre], dofs[1, centre], dofs[1, far]])
    u_ref = skfem.solve(*skfem.condense(kk, ff, D=fixed))
    grads = basis.interpolate(u_ref).grad  # (2, 2, nelem, nqp)
    g = grads.mean(axis=-1)
    exx, eyy, exy = g[0, 0], g[1, 1], 0.5 * (g[0, 1] + g[1, 0])
    sxx = lam * (exx + eyy) + 2 * mu * exx
    syy = lam * (exx + eyy) + 2 * mu * eyy
    sxy = 2 * mu * exy
    area = skfem.Functional(lambda w: 1.0 + 0 * w.x[0]).elemental(skfem.Basis(m, skfem.ElementTriP1()))
    node_s = np.zeros((m.p.shape[1], 3))
    wsum = np.zeros(m.p.shape[1])
    for k in range(3):  # the three corners of every element
        np.add.at(node_s, m.t[k], area[:, None] * np.c_[sxx, syy, sxy])
        np.add.at(wsum, m.t[k], area)
    node_s /= wsum[:, None]

    # --- stressmap on the sphere with the same loads (normal push and shear along the ring)
    sh = sheet.make_sheet(xyz, tri, THICK, YOUNG, POISSON)
    edges = oriented_boundary(xyz, tri)
    mx, my = px[edges].mean(1), py[edges].mean(1)
    tx, ty = traction(mx, my)
    # plane tangent and inward normal of each edge (interior on the left)
    d = np.c_[np.diff(px[edges], axis=1), np.diff(py[edges], axis=1)]
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    inward = np.c_[-d[:, 1], d[:, 0]]
    push = tx * inward[:, 0] + ty * inward[:, 1]
    shear = tx * d[:, 0] + ty * d[:, 1]
    f3 = loads.edge_line_loads(xyz, edges, push, shear)
    # curvature leaves a tiny net torque; close it with basal drag as the product does
    areas = sheet.nodal_areas(sh)
    _, drag = loads.torque_closure(xyz, areas, 1.0, f3[None])
    u = sheet.factorise(sh).solve(loads.to_dofs(f3 + drag[0], sh.frames))
    n = sheet.nodal_membrane_forces(sh, u)

    # probes: interior grid nodes away from the load steps
    probes = np.flatnonzero((np.abs(px) <= 0.6 * half) & (np.abs(py) <= 0.6 * half)
                            & (np.hypot(px, py) > 0.1 * half))[::7]
    assert probes.size > 20
    # image of the plane x axis in the local (east, north) frame at each probe
    dx = 1.0
    lon1, lat1 = to_geo.transform(px[probes] + dx, py[probes])
    de = np.radians(lon1 - lon[probes]) * np.cos(la[probes])
    dn = np.radians(lat1 - lat[probes])
    alpha = np.arctan2(de, dn)  # azimuth of the plane x axis
    xe, xn = np.sin(alpha), np.cos(alpha)
    ye, yn = -xn, xe
    s = node_s[probes]
    ref_ee = s[:, 0] * xe * xe + s[:, 1] * ye * ye + 2 * s[:, 2] * xe * ye
    ref_nn = s[:, 0] * xn * xn + s[:, 1] * yn * yn + 2 * s[:, 2] * xn * yn
    ref_en = s[:, 0] * xe * xn + s[:, 1] * ye * yn + s[:, 2] * (xe * yn + ye * xn)
    ours = -n[probes]  # compression positive, like the references below
    az_ref = shmax_azimuth_deg(-ref_ee, -ref_nn, -ref_en)
    az = shmax_azimuth_deg(ours[:, 0], ours[:, 1], ours[:, 2])
    diff = np.abs((az - az_ref + 90.0) % 180.0 - 90.0)
    assert diff.max() < 1.0
    h_ref = np.stack(horizontal_principal(-ref_ee, -ref_nn, -ref_en))
    h = np.stack(horizontal_principal(ours[:, 0], ours[:, 1], ours[:, 2]))
    scale = np.abs(h_ref).max(axis=0)
    assert np.all(np.abs(h - h_ref) <= 0.03 * scale)
