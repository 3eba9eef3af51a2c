"""Specification of stressmap.analyses.depth_profile: stresses from the surface down."""

import time

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import screening as sc
from stressmap.analyses.depth_profile import depth_grid, stress_profile
from stressmap.errors import InputError


def test_sv_and_pp_are_the_integrated_columns():
    # Sv = rho g z and hydrostatic Pp = rho_w g z (analytic for constant densities)
    z = depth_grid(4.0, step_km=0.5)
    p = stress_profile(z, regime_code=1, shape_ratio=0.5,
                       density=sc.density_profile(density_kg_m3=2500.0))
    assert_allclose(p.central["sv_mpa"], 2500.0 * 9.81 * z * 1e3 / 1e6)
    assert_allclose(p.central["pp_mpa"], 1000.0 * 9.81 * z * 1e3 / 1e6)


@pytest.mark.parametrize("code", [0, 1, 2])
def test_central_estimate_sits_at_the_frictional_limit_inside_the_bounds(code):
    # Jaeger & Cook: (S1 - Pp) / (S3 - Pp) = q at the central estimate, every depth > 0
    z = depth_grid(5.0, count=21)[1:]
    p = stress_profile(z, regime_code=code, shape_ratio=0.3, friction=0.7)
    c, b = p.central, p.bounds
    ratio = sc.frictional_ratio(c["shmax_mpa"], c["shmin_mpa"], c["sv_mpa"], c["pp_mpa"])
    assert_allclose(ratio, sc.frictional_limit_ratio(0.7), rtol=1e-9)
    assert np.all(b["shmax_lower_mpa"] <= c["shmax_mpa"] + 1e-9)
    assert np.all(c["shmax_mpa"] <= b["shmax_upper_mpa"] + 1e-9)


def test_percentiles_bracket_the_central_profile_and_are_ordered():
    rng = np.random.default_rng(1)
    n = 1000
    samples = {"friction": rng.uniform(0.5, 0.8, n),
               "pore_gradient_mpa_km": rng.uniform(9.5, 12.0, n)}
    z = depth_grid(5.0, count=100)
    t0 = time.perf_counter()
    p = stress_profile(z, regime_code=1, shape_ratio=0.5, friction=0.65,
                       pore_gradient_mpa_km=10.75, samples=samples)
    assert time.perf_counter() - t0 < 30.0  # a sanity bound only; speed is in benchmarks/
    lo, mid, hi = p.spread["shmin_mpa"]
    assert np.all(lo <= mid + 1e-9) and np.all(mid <= hi + 1e-9)
    assert np.all(lo[1:] < p.central["shmin_mpa"][1:]) and np.all(p.central["shmin_mpa"][1:] < hi[1:])
    # scipy/numpy-independent check of one percentile at one depth, by sorting by hand
    i = 60
    pp = samples["pore_gradient_mpa_km"] * z[i]
    shmin = sc.frictional_equilibrium(p.central["sv_mpa"][i], pp, samples["friction"], 1, 0.5)[1]
    assert_allclose(mid[i], np.sort(shmin)[[499, 500]].mean(), rtol=1e-12)


@pytest.mark.parametrize("kwargs", [{"max_depth_km": -1}, {"max_depth_km": 0},
                                    {"max_depth_km": 50}, {"max_depth_km": 3, "step_km": 0},
                                    {"max_depth_km": 3, "count": 1}])
def test_bad_depths_are_refused(kwargs):
    with pytest.raises(InputError):
        depth_grid(**kwargs)
