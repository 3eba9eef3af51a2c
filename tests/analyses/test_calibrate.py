"""Calibration of load-group weights (stressmap.analyses.calibrate).

The core is checked on synthetic unit fields: random (G, N, 3) arrays are valid unit solutions for
the combination algebra (any linear sheet gives stress = sum_g w_g U_g), so indicators generated
from known weights plus known angular noise are an analytic test of recovery. References:

- gradient: scipy.optimize.approx_fprime (independent finite differences);
- global minimum: scipy.optimize.brute grid search;
- random orientations: the absolute axial misfit is uniform on [0, 90] deg, mean 45, and
  E[1 - cos 2 delta] = 1 (analytic);
- normal angular noise of standard deviation s: E|delta| = s sqrt(2/pi) (analytic, half-normal);
- bootstrap percentile intervals cover the truth at about their nominal rate (Efron & Tibshirani
  1993, "An Introduction to the Bootstrap", ch. 13 -- from memory), checked by repeated trials.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import approx_fprime, brute

from stressmap.analyses.calibrate import (
    axial_terms,
    calibrate_arrays,
    fit_weights,
    indicator_kappa,
    misfit_deg,
    misfit_objective,
)
from stressmap.errors import InputError
from stressmap.geo.tensor import shmax_azimuth_deg


def synthetic(weights, n, noise_deg, seed):
    """Unit fields (G, n, 3) and azimuths of sum w U plus normal noise of noise_deg."""
    rng = np.random.default_rng(seed)
    unit = rng.normal(size=(len(weights), n, 3))
    s = np.einsum("g,gnc->nc", np.asarray(weights, float), unit)
    az = np.mod(shmax_azimuth_deg(s[:, 0], s[:, 1], s[:, 2]) + rng.normal(0, noise_deg, n), 180)
    return unit, az


def test_gradient_matches_finite_differences():
    # Reference: scipy.optimize.approx_fprime.
    unit, az = synthetic([1.0, 0.5, 2.0], 50, 15.0, seed=3)
    d, e = axial_terms(unit)
    two = np.radians(2 * az)
    k = indicator_kappa(np.random.default_rng(0).uniform(5, 25, 50))
    w = np.array([1.0, 0.7, 1.3])
    _, grad = misfit_objective(w, d, e, np.cos(two), np.sin(two), k)
    numeric = approx_fprime(w, lambda x: misfit_objective(x, d, e, np.cos(two), np.sin(two), k)[0],
                            1e-7)
    assert_allclose(grad, numeric, rtol=1e-4, atol=1e-7)


def test_random_orientations_give_the_analytic_reference():
    # Analytic: |delta| ~ U(0, 90) -> mean 45 deg, and E[1 - cos 2 delta] = 1.
    rng = np.random.default_rng(11)
    unit = rng.normal(size=(1, 20000, 3))
    az = rng.uniform(0, 180, 20000)
    d, e = axial_terms(unit)
    two = np.radians(2 * az)
    f, _ = misfit_objective([1.0], d, e, np.cos(two), np.sin(two), np.ones(20000))
    m, _ = misfit_deg([1.0], d, e, az, np.ones(20000))
    assert_allclose(f, 1.0, atol=0.03)   # standard error sqrt(0.5/20000) = 0.005
    assert_allclose(m, 45.0, atol=0.6)   # standard error 26/sqrt(20000) = 0.18


def test_fit_finds_the_global_minimum_of_a_two_weight_problem():
    # Reference: scipy.optimize.brute on a fine grid, polished by fmin.
    unit, az = synthetic([1.0, 1.5, 0.4], 40, 20.0, seed=5)
    d, e = axial_terms(unit)
    two = np.radians(2 * az)

    def f(x):
        return misfit_objective(np.r_[1.0, x], d, e, np.cos(two), np.sin(two), np.ones(40))[0]

    ref = brute(f, ((0, 5), (0, 5)), Ns=60)
    w, fbest = fit_weights(unit, az, np.ones(40), [[0, 5]] * 3, 0, start=np.ones(3), seed=1)
    assert fbest <= f(ref) + 1e-9
    assert_allclose(w[1:], ref, atol=2e-3)


def test_recovery_within_reported_intervals():
    # 99 % intervals for three free weights: all three cover the truth with probability ~0.97
    # (one data set here; the coverage rate over many data sets is the next test).
    truth = np.array([1.0, 0.6, 2.0, 0.3])
    unit, az = synthetic(truth, 200, 10.0, seed=2)
    res = calibrate_arrays(unit, az, indicator_kappa(np.full(200, 10.0)), reference="g0",
                           n_bootstrap=100, n_random=30, confidence=0.99, seed=2)
    assert np.all(res.weights_ci[:, 0] <= truth) and np.all(truth <= res.weights_ci[:, 1])
    assert_allclose(res.weights, truth, rtol=0.25, atol=0.05)
    # After calibration the misfit is the noise: E|delta| = 10 sqrt(2/pi) = 7.98 deg (half-normal);
    # before (all weights 1) it is larger.
    assert_allclose(res.misfit_after_deg, 10.0 * np.sqrt(2 / np.pi), rtol=0.15)
    assert res.misfit_before_deg > res.misfit_after_deg
    assert res.significance["p_value"] <= 1 / 31 + 1e-12
    assert res.constrained.all() and res.flags == {}
    out = res.to_dict()
    assert set(out["weights"]) == set(out["weights_ci"]) == {"g0", "g1", "g2", "g3"}
    assert out["misfit_before"] == res.misfit_before_deg


def test_bootstrap_intervals_cover_the_truth_at_about_the_nominal_rate():
    # 40 independent small problems; 90 % percentile intervals. Binomial(40, 0.9): 36 +- 1.9, so a
    # coverage below 0.75 (3 sd) means the intervals are too narrow. Intervals must also not be
    # uselessly wide: their mean width is compared with the spread of the estimates over trials
    # (for a normal estimator, width = 2 * 1.645 * sd).
    truth = np.array([1.0, 0.8])
    covered, widths, estimates = [], [], []
    for trial in range(40):
        unit, az = synthetic(truth, 40, 12.0, seed=100 + trial)
        res = calibrate_arrays(unit, az, None, reference="g0", n_starts=2, n_bootstrap=80,
                               n_random=0, confidence=0.9, seed=trial)
        lo, hi = res.weights_ci[1]
        covered.append(lo <= truth[1] <= hi)
        widths.append(hi - lo)
        estimates.append(res.weights[1])
    coverage = np.mean(covered)
    assert 0.75 <= coverage <= 1.0, coverage
    ratio = np.mean(widths) / (2 * 1.645 * np.std(estimates))
    assert 0.5 < ratio < 2.0, ratio


def test_random_azimuths_are_not_significant():
    unit, _ = synthetic([1.0, 1.0, 1.0], 60, 0.0, seed=9)
    az = np.random.default_rng(4).uniform(0, 180, 60)
    res = calibrate_arrays(unit, az, None, n_bootstrap=20, n_random=40, seed=1)
    assert res.significance["p_value"] > 0.05
    assert res.misfit_after_deg > 25.0


def test_scale_invariance_and_reference_choice():
    # Orientations are blind to scale: multiplying every unit field by 7 changes nothing, and
    # choosing another reference gives proportional weights.
    truth = np.array([1.0, 0.5, 1.5])
    unit, az = synthetic(truth, 120, 5.0, seed=21)
    a = calibrate_arrays(unit, az, None, reference="g0", n_bootstrap=0, n_random=0, seed=0)
    b = calibrate_arrays(7.0 * unit, az, None, reference="g0", n_bootstrap=0, n_random=0, seed=0)
    c = calibrate_arrays(unit, az, None, reference="g1", bounds={"g0": [0, 20], "g2": [0, 20]},
                         n_bootstrap=0, n_random=0, seed=0)
    assert_allclose(a.weights, b.weights, rtol=1e-5)
    assert_allclose(c.weights / c.weights[0], a.weights, rtol=1e-3)


def test_unconstrained_weight_is_flagged():
    # Group g2 is isotropic at every indicator: it cannot change any SHmax azimuth.
    unit, az = synthetic([1.0, 0.5], 80, 8.0, seed=13)
    iso = np.zeros((1, 80, 3))
    iso[..., 0] = iso[..., 1] = 3.0
    res = calibrate_arrays(np.concatenate([unit, iso]), az, None, reference="g0",
                           n_bootstrap=60, n_random=0, seed=0)
    assert not res.constrained[2]
    assert "g2" in res.flags and "g1" not in res.flags
    assert res.constrained[1]


def test_bounds_are_respected():
    unit, az = synthetic([1.0, 3.0], 100, 5.0, seed=17)
    res = calibrate_arrays(unit, az, None, reference="g0", bounds={"g1": [0.0, 1.5]},
                           n_bootstrap=30, n_random=0)
    assert_allclose(res.weights[1], 1.5)
    assert np.all(res.bootstrap_weights[:, 1] <= 1.5 + 1e-12)


def test_same_seed_same_result():
    unit, az = synthetic([1.0, 0.5, 2.0], 60, 10.0, seed=1)
    kw = dict(n_bootstrap=40, n_random=10, seed=123)
    a = calibrate_arrays(unit, az, None, **kw).to_dict()
    b = calibrate_arrays(unit, az, None, **kw).to_dict()
    assert a == b


@pytest.mark.parametrize(
    "kwargs, field",
    [
        ({"bounds": {"nope": [0, 1]}}, "bounds.nope"),
        ({"bounds": {"g1": [2, 1]}}, "bounds.g1"),
        ({"bounds": {"g1": "x"}}, "bounds.g1"),
        ({"reference": "nope"}, "reference"),
        ({"confidence": 1.5}, "confidence"),
    ],
)
def test_bad_settings_name_the_field(kwargs, field):
    unit, az = synthetic([1.0, 1.0], 10, 5.0, seed=0)
    with pytest.raises(InputError) as err:
        calibrate_arrays(unit, az, None, n_bootstrap=0, n_random=0, **kwargs)
    assert any(p.get("field") == field for p in err.value.problems)


def test_bad_indicator_rows_are_named():
    unit, az = synthetic([1.0, 1.0], 10, 5.0, seed=0)
    az[3] = np.nan
    with pytest.raises(InputError) as err:
        calibrate_arrays(unit, az, None, n_bootstrap=0, n_random=0)
    assert err.value.problems[0]["row"] == 4
    assert err.value.problems[0]["field"] == "shmax_azimuth_deg"


def test_too_few_indicators():
    unit, az = synthetic([1.0, 1.0, 1.0, 1.0], 2, 5.0, seed=0)
    with pytest.raises(InputError, match="too few"):
        calibrate_arrays(unit, az, None, n_bootstrap=0, n_random=0)


# ----------------------------------------------------------------------------- on a built model

def test_model_calibration_recovers_known_weights(coarse_demo_model):
    # Indicators at random interior points, predicted with known weights (stressmap.model
    # .predict_points) plus 8-degree normal noise, with sigma 8 in the table.
    import geopandas as gpd

    from stressmap.analyses.calibrate import calibrate
    from stressmap.model import predict_points

    m = coarse_demo_model
    truth = {g: w for g, w in zip(m.groups, [1.0, 1.0, 0.4, 1.0, 2.5])}
    rng = np.random.default_rng(8)
    lon, lat = rng.uniform(-30, 0, 400), rng.uniform(-32, -6, 400)
    pred = predict_points(m, lon, lat, weights=truth)
    az = np.mod(pred["shmax_azimuth_deg"].values + rng.normal(0, 8.0, 400), 180)
    table = gpd.GeoDataFrame({"shmax_azimuth_deg": az, "sigma_deg": np.full(400, 8.0)},
                             geometry=gpd.points_from_xy(lon, lat), crs="EPSG:4326")
    bounds = {g: [0.0, 4.0] for g in m.groups}
    res = calibrate(m, table, bounds=bounds, reference="ridge", n_bootstrap=60, n_random=10,
                    seed=1)
    inside = pred["inside"].values
    assert res.settings["n_outside"] == int((~inside).sum())
    assert res.n_indicators == int(inside.sum())
    assert np.isnan(res.residuals_deg[~inside]).all()
    assert res.misfit_after_deg < res.misfit_before_deg
    for g, w, (lo, hi), ok in zip(res.groups, res.weights, res.weights_ci, res.constrained):
        if ok:   # weights the data constrain must be recovered within their interval
            assert lo - 0.05 <= truth[g] <= hi + 0.05, (g, w, lo, hi)
    assert res.constrained[res.groups.index("collision")]
    assert_allclose(res.weights[res.groups.index("collision")], 0.4, atol=0.15)


def test_batched_solver_agrees_with_scipy_lbfgsb():
    # The batched Levenberg-Marquardt (used for bootstrap resamples and random data sets) must
    # reach the same minima as scipy.optimize.minimize(L-BFGS-B) started from the same points.
    from scipy.optimize import minimize

    from stressmap.analyses.calibrate import _batched_fit, _polish, _problem

    unit, az = synthetic([1.0, 0.6, 2.0], 150, 8.0, seed=31)
    d, e = axial_terms(unit)
    k = np.random.default_rng(2).uniform(0.5, 2.0, (6, 150))
    prob = _problem(d, e, az, [[0, 5]] * 3, 0, 1.0)
    x0 = np.tile([0.6, 2.0], (6, 1)) + np.random.default_rng(3).normal(0, 0.2, (6, 2))
    xs, fs = _batched_fit(prob, k, x0)
    xs = _polish(prob, k, xs)
    for j in range(6):
        ref = minimize(prob.fun(k[j]), x0[j], jac=True, method="L-BFGS-B", bounds=prob.bounds,
                       options={"ftol": 1e-14, "gtol": 1e-12})
        assert_allclose(xs[j], ref.x, atol=1e-4)
