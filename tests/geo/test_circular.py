"""Axial statistics checked against scipy.stats.circmean / circstd on doubled angles (an
independent library), Monte Carlo for the Rayleigh test, and invariance properties (hypothesis)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.stats import circmean, circstd

from stressmap.geo import circular


def scipy_axial_mean(theta):
    return np.mod(circmean(2.0 * np.asarray(theta), high=360.0, low=0.0) / 2.0, 180.0)


def scipy_axial_std(theta):
    return circstd(np.radians(2.0 * np.asarray(theta))) / 2.0 * 180.0 / np.pi


def axial_distance(a, b):
    return np.abs(circular.axial_difference_deg(a, b))


SETS = {
    "straddles 0/180": [172.0, 178.0, 3.0, 9.0, 175.0],
    "straddles 0/180, mostly low": [179.0, 1.0, 2.0, 4.0],
    "around 90": [80.0, 95.0, 100.0, 85.0],
    "spread": [10.0, 40.0, 70.0, 100.0, 130.0],
    "equivalent axes 10/190": [10.0, 190.0, 370.0, -170.0, 15.0],
    "random": list(np.random.default_rng(7).uniform(0, 180, 50)),
}


@pytest.mark.parametrize("name", SETS)
def test_mean_and_std_match_scipy_on_doubled_angles(name):
    theta = np.asarray(SETS[name])
    assert axial_distance(circular.axial_mean_deg(theta), scipy_axial_mean(theta)) < 1e-9
    assert_allclose(circular.axial_std_deg(theta), scipy_axial_std(theta), rtol=1e-10, atol=1e-10)
    m = circular.axial_mean_deg(theta)
    assert 0.0 <= m < 180.0


def test_straddling_mean_is_not_the_arithmetic_mean():
    # 170 and 10 degrees are 20 degrees apart; their axial mean is 0, not 90 (common practice).
    assert axial_distance(circular.axial_mean_deg([170.0, 10.0]), 0.0) < 1e-12
    assert_allclose(circular.axial_difference_deg(170.0, 10.0), -20.0)


def test_integer_weights_equal_repetition_scipy():
    theta = np.array([12.0, 170.0, 33.0, 5.0])
    w = np.array([3, 1, 2, 4])
    rep = np.repeat(theta, w)
    assert axial_distance(circular.axial_mean_deg(theta, w), scipy_axial_mean(rep)) < 1e-9
    assert_allclose(circular.axial_std_deg(theta, w), scipy_axial_std(rep), rtol=1e-10)


def test_nan_is_ignored_and_axis_reduces():
    theta = np.array([[10.0, np.nan, 20.0], [100.0, 110.0, np.nan]])
    m = circular.axial_mean_deg(theta, axis=1)
    assert_allclose(m, [15.0, 105.0], atol=1e-9)
    _, _, n = circular.axial_resultant(theta, axis=1)
    assert_allclose(n, [2.0, 2.0])


def test_empty_and_cancelling_sets():
    assert np.isnan(circular.axial_mean_deg(np.array([])))
    assert np.isnan(circular.axial_std_deg(np.array([])))
    assert np.isnan(circular.axial_mean_deg([0.0, 90.0]))
    assert np.isinf(circular.axial_std_deg([0.0, 90.0]))


def test_negative_weights_rejected():
    with pytest.raises(ValueError):
        circular.axial_mean_deg([1.0, 2.0], [1.0, -1.0])


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(0.0, 180.0, allow_nan=False), min_size=2, max_size=30),
    st.floats(-720.0, 720.0, allow_nan=False),
)
def test_mean_rotates_with_the_data(theta, rot):
    theta = np.asarray(theta)
    m, r, _ = circular.axial_resultant(theta)
    if not r > 1e-6:
        return  # no defined mean to rotate
    m_rot, r_rot, _ = circular.axial_resultant(theta + rot)
    assert axial_distance(m_rot, m + rot) < 1e-6
    assert_allclose(r_rot, r, atol=1e-12)
    assert_allclose(circular.axial_std_deg(theta + rot), circular.axial_std_deg(theta), atol=1e-6)


@settings(max_examples=60, deadline=None)
@given(st.floats(-1e4, 1e4, allow_nan=False), st.floats(-1e4, 1e4, allow_nan=False))
def test_axial_difference_range_and_symmetry(a, b):
    d = float(circular.axial_difference_deg(a, b))
    assert -90.0 <= d < 90.0
    # a - d is the same axis as b
    assert abs(np.sin(np.radians(a - d - b))) < 1e-9 * max(1.0, abs(a), abs(b))
    if abs(d) < 90.0 - 1e-9:
        assert_allclose(float(circular.axial_difference_deg(b, a)), -d, atol=1e-9)


def test_rayleigh_p_value_matches_monte_carlo():
    """Monte Carlo under uniformity: P(Z >= z0) for n = 8 doubled angles, compared with the series
    approximation (Mardia & Jupp 2000, from memory) -- agreement to 0.01."""
    rng = np.random.default_rng(42)
    n = 8
    sims = rng.uniform(0.0, 180.0, (40000, n))
    z_sim, _ = circular.rayleigh_axial(sims, axis=1)
    data = np.array([10.0, 25.0, 170.0, 35.0, 5.0, 60.0, 15.0, 160.0])
    z0, p = circular.rayleigh_axial(data)
    p_mc = np.mean(z_sim >= z0)
    assert 0.001 < p_mc < 0.5
    assert abs(p - p_mc) < 0.01


def test_rayleigh_rejects_concentrated_not_uniform():
    rng = np.random.default_rng(3)
    _, p_conc = circular.rayleigh_axial(np.mod(rng.normal(30.0, 10.0, 40), 180.0))
    assert p_conc < 1e-6
    _, p_unif = circular.rayleigh_axial(rng.uniform(0, 180, (2000, 30)), axis=1)
    # Size of the test: about 5 % of uniform samples fall below 0.05 (Monte Carlo tolerance).
    assert 0.03 < np.mean(p_unif < 0.05) < 0.07


def test_random_misfit_significance_under_null_and_signal():
    rng = np.random.default_rng(11)
    # Analytic: |difference| of independent uniform axes is uniform on [0, 90], mean 45.
    a, b = rng.uniform(0, 180, (2, 200000))
    assert_allclose(np.mean(axial_distance(a, b)), circular.RANDOM_MEAN_ABS_MISFIT_DEG, atol=0.2)
    # p-values of random sets are uniform: about 5 % below 0.05.
    misfits = rng.uniform(0, 90, (4000, 20))
    ps = np.array([circular.random_misfit_significance(m)[2] for m in misfits[:2000]])
    assert 0.035 < np.mean(ps < 0.05) < 0.065
    m, z, p = circular.random_misfit_significance(np.abs(rng.normal(0, 15, 30)))
    assert m < 20 and z > 5 and p < 1e-6
    assert np.isnan(circular.random_misfit_significance([])[0])
