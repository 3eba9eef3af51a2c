"""GPE loads on the sheet (stressmap.fem.loads.gpe_loads): weak form, invariance, the strip."""

from __future__ import annotations

import json
from importlib import resources

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.constants import EARTH_RADIUS_M
from stressmap.fem import loads, sheet
from stressmap.fem.mesh import mesh_plate
from stressmap.model.plate import parse_plate


def _strip(length_m=2.0e6, width_m=2.0e5, nx=201, ny=11):
    """Structured planar triangulation of a strip (x along its length), counter-clockwise."""
    x, y = np.meshgrid(np.linspace(0, length_m, nx), np.linspace(0, width_m, ny))
    xyz = np.c_[x.ravel(), y.ravel(), np.zeros(x.size)]
    idx = np.arange(x.size).reshape(ny, nx)
    a, b = idx[:-1, :-1].ravel(), idx[:-1, 1:].ravel()
    c, d = idx[1:, 1:].ravel(), idx[1:, :-1].ravel()
    tri = np.r_[np.c_[a, b, c], np.c_[a, c, d]]
    return xyz, tri


def test_weak_form_equals_the_body_force_minus_grad_u_on_a_flat_region():
    """Volume term plus edge term = -int phi grad U (divergence theorem), on a sub-region."""
    xyz, tri = _strip(nx=21, ny=6)
    rng = np.random.default_rng(1)
    u = rng.normal(size=xyz.shape[0]) * 1e12
    active = xyz[tri].mean(axis=1)[:, 0] < 1.1e6
    grad = loads.facet_gradient(xyz, tri, u)
    grad[~active] = 0.0
    expected = loads.body_force_loads(xyz, tri, -grad)
    assert_allclose(loads.gpe_loads(xyz, tri, u, active), expected, rtol=0, atol=1e-6 * np.abs(expected).max())


def test_a_constant_gpe_changes_nothing_on_the_faceted_sphere():
    """Adding a constant to U (another reference column) leaves the tangential loads unchanged,
    and the loads match -grad U within 0.2 % (curvature of the facets, (edge/R)^2)."""
    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json").read_text())
    m = mesh_plate(parse_plate(doc))
    xyz = np.asarray(m.xyz) * EARTH_RADIUS_M
    frames = sheet.make_sheet(xyz, m.triangles, 1e5, 7e10, 0.25).frames
    u = 1e12 * np.sin(np.radians(3.0 * m.lonlat[:, 0])) * np.cos(np.radians(2.0 * m.lonlat[:, 1]))
    active = m.element_province == 1
    a = loads.to_dofs(loads.gpe_loads(xyz, m.triangles, u, active), frames)
    b = loads.to_dofs(loads.gpe_loads(xyz, m.triangles, u + 7.5e12, active), frames)
    assert_allclose(a, b, rtol=0, atol=1e-9 * np.abs(a).max())
    grad = loads.facet_gradient(xyz, m.triangles, u)
    grad[~active] = 0.0
    body = loads.to_dofs(loads.body_force_loads(xyz, m.triangles, -grad), frames)
    assert np.linalg.norm(a - body) < 2e-3 * np.linalg.norm(body)


@pytest.mark.parametrize("offset", [0.0, 4.0e12])
def test_strip_with_a_gpe_step(offset):
    """A long strip, west end held in x, GPE stepping up by dU at mid-length: the thin-sheet
    equation div N = grad U (England & McKenzie 1982; Molnar & Lyon-Caen 1988; from memory)
    gives N_xx = U - U(east end), so the stress difference across the step is dU / h and the
    high side is in relative tension (compression positive: low side compressed). To 1 %."""
    length, h, du = 2.0e6, 1.0e5, 2.0e12
    xyz, tri = _strip(length_m=length)
    u = offset + du * np.clip((xyz[:, 0] - 0.995e6) / 1.0e4, 0.0, 1.0)  # step over one element
    sh = sheet.make_sheet(xyz, tri, h, 7e10, 0.25, planar=True)
    k = sheet.assemble_stiffness(sh)
    west = np.flatnonzero(xyz[:, 0] == 0.0)
    fixed = np.r_[2 * west, 2 * west[:1] + 1]  # x held along the west end, y at one node
    f = loads.gpe_loads(xyz, tri, u)
    disp = sheet.factorise(sh, k, fixed).solve(loads.to_dofs(f, sh.frames))
    stress_mpa = -sheet.nodal_membrane_forces(sh, disp) / h / 1e6  # compression positive
    x = xyz[:, 0]
    low = (x > 0.3e6) & (x < 0.7e6)
    high = (x > 1.3e6) & (x < 1.7e6)
    s_low, s_high = stress_mpa[low, 0].mean(), stress_mpa[high, 0].mean()
    assert_allclose(s_low - s_high, du / h / 1e6, rtol=0.01)
    assert s_low > 0 and abs(s_high) < 0.01 * s_low
    assert np.abs(stress_mpa[low | high, 1]).max() < 0.01 * s_low  # no transverse stress
