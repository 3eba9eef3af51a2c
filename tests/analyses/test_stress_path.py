"""Specification of stressmap.analyses.stress_path: the poroelastic stress path and the
pore-pressure change to fault failure with and without it."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from stressmap.analyses.faults import fault_tendencies, plane_vectors_ned, resolve_traction
from stressmap.analyses.screening import principal_tensor_ned
from stressmap.analyses.stress_path import pressure_change_to_failure, stress_path_coefficient
from stressmap.errors import InputError


def test_coefficient_is_the_published_formula():
    # A = alpha (1 - 2 nu) / (1 - nu) (Engelder & Fischer 1994): alpha = 1, nu = 0.25 -> 2/3;
    # nu = 0.5 (incompressible) -> 0; alpha = 0 -> 0 (analytic)
    assert_allclose(stress_path_coefficient(1.0, 0.25), 2.0 / 3.0)
    assert_allclose(stress_path_coefficient([0.7, 0.0], [0.2, 0.3]), [0.7 * 0.6 / 0.8, 0.0])
    assert stress_path_coefficient(1.0, 0.5) == 0.0


@pytest.mark.parametrize("biot, poisson, field", [(1.2, 0.25, "biot"), (0.8, -0.1, "poisson"),
                                                   (np.nan, 0.2, "biot")])
def test_bad_coefficient_inputs_name_their_field(biot, poisson, field):
    with pytest.raises(InputError) as err:
        stress_path_coefficient(biot, poisson)
    assert err.value.problems[0]["field"] == field


def test_without_the_path_injection_is_the_fault_margin():
    # A = 0: only Pp changes, so the increase to failure is the margin of
    # stressmap.analyses.faults (Morris slip tendency / Coulomb; same formula, other code)
    s = principal_tensor_ned(80.0, 45.0, 70.0, 15.0)
    strike, dip = np.array([10.0, 60.0, 100.0, 160.0]), np.array([55.0, 80.0, 70.0, 40.0])
    got = pressure_change_to_failure(s, 28.0, strike, dip, 0.6, 1.0, coefficient=0.0)
    margin = fault_tendencies(s, 28.0, strike, dip, 0.6, 1.0)["pore_pressure_margin_mpa"]
    assert_allclose(got["injection_mpa"], np.maximum(margin, 0.0), atol=1e-9)
    assert np.all(np.isnan(got["depletion_mpa"][margin > 0]))   # depletion only stabilises


def _cfs(stress, pp, n, mu, c, a, dp):
    ds = a * dp * np.diag([1.0, 1.0, 0.0])
    sn, tau, _ = resolve_traction(stress + ds, n)
    return tau - mu * (sn - pp - dp) - c


@pytest.mark.parametrize("regime_stresses", [(80.0, 45.0, 70.0), (60.0, 40.0, 72.0),
                                             (120.0, 90.0, 70.0)])
def test_with_the_path_against_an_independent_root_finder(regime_stresses):
    # scipy's brentq on the Coulomb function of the changed tensor (no closed form) finds the
    # same least change, for injection and depletion, in all three regimes
    sh, shmin, sv = regime_stresses
    s = principal_tensor_ned(sh, shmin, sv, 35.0)
    strike, dip = np.array([0.0, 35.0, 125.0, 80.0]), np.array([60.0, 30.0, 75.0, 45.0])
    pp, mu, a = 30.0, 0.6, 0.8
    got = pressure_change_to_failure(s, pp, strike, dip, mu, 0.0, coefficient=a)
    n = plane_vectors_ned(strike, dip)[0]
    for i in range(strike.size):
        f = lambda dp, i=i: _cfs(s, pp, n[i], mu, 0.0, a, dp)  # noqa: E731
        if f(0.0) >= 0:
            assert got["injection_mpa"][i] == 0.0
            continue
        ups = np.linspace(0.0, 300.0, 30001)
        vals = np.array([f(d) for d in ups[::100]])
        hit = np.nonzero(vals >= 0)[0]
        if hit.size:
            expect = brentq(f, ups[::100][hit[0] - 1], ups[::100][hit[0]])
            assert_allclose(got["injection_mpa"][i], expect, atol=1e-6)
        else:
            assert np.isnan(got["injection_mpa"][i]) or got["injection_mpa"][i] > 300
        downs = -np.linspace(0.0, pp, 3001)
        vals = np.array([f(d) for d in downs])
        hit = np.nonzero(vals >= 0)[0]
        if hit.size:
            expect = brentq(f, downs[hit[0] - 1], downs[hit[0]])
            assert_allclose(got["depletion_mpa"][i], expect, atol=1e-6)
        else:
            assert np.isnan(got["depletion_mpa"][i])


def test_depletion_can_fail_normal_faults_only_with_a_stress_path():
    # normal faulting: with A = 0.9 the horizontal stress falls faster than the effective
    # vertical stress rises (Segall & Fitzgerald 1998; Zoback, "Reservoir Geomechanics",
    # ch. 12 -- from memory): a normal fault striking along SHmax (north) can fail in depletion
    s = principal_tensor_ned(50.0, 45.0, 70.0, 0.0)
    fixed = pressure_change_to_failure(s, 30.0, [0.0], [60.0], 0.6, 0.0, coefficient=0.0)
    moving = pressure_change_to_failure(s, 30.0, [0.0], [60.0], 0.6, 0.0, coefficient=0.9)
    assert np.isnan(fixed["depletion_mpa"][0])
    assert -30.0 <= moving["depletion_mpa"][0] < 0.0
