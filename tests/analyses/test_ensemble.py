"""Ensembles of load-group weights (stressmap.analyses.ensemble).

Synthetic unit fields (random (G, P, 3) arrays) test the combination algebra; references:

- one member: the statistics reduce to the forward tensor quantities of :mod:`stressmap.geo.tensor`
  (principal values, SHmax azimuth, Anderson regime, Simpson's A-phi) -- an independent code path;
- axial mean / standard deviation: scipy.stats.circmean / circstd of the doubled angles, halved
  (Mardia & Jupp 2000, section 9.3.2 -- from memory);
- convergence: a one-point ensemble whose doubled SHmax angle is ``atan(w)`` with ``w ~ U(0, a)``
  has ``E cos 2theta = asinh(a)/a`` and ``E sin 2theta = (sqrt(1 + a^2) - 1)/a`` (analytic), and
  one whose principal stresses are ``1 +- w`` has exact percentiles and regime probabilities;
- percentiles: numpy.percentile over all member stresses computed directly;
- Dask: a dask.distributed LocalCluster started in the test must agree with the local threads.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy.stats import circmean, circstd

from stressmap.geo import tensor
from stressmap.analyses.ensemble import (
    chunk_statistics,
    ensemble_statistics,
    grid_coordinates,
    parameter_to_weight,
    plan_chunks,
    regime_index_from_principal,
    sample_weights,
    validate_distributions,
)
from stressmap.errors import InputError

GROUPS = ["a", "b", "c"]
SPECS = {
    "a": {"distribution": "uniform", "low": 0.5, "high": 1.5},
    "b": {"distribution": "log-uniform", "low": 0.2, "high": 5.0},
    "c": {"distribution": "normal", "mean": 1.0, "std": 0.5},
}


@pytest.fixture
def unit():
    return np.random.default_rng(42).normal(size=(3, 257, 3))


def direct(unit, weights):
    """Every member's tensor quantities computed with stressmap.geo.tensor, shape (M, P)."""
    s = np.einsum("mg,gpc->mpc", weights, unit)
    return tensor.describe(s[..., 0], s[..., 1], s[..., 2])


def test_one_member_equals_the_forward_prediction(unit):
    w = np.array([[1.0, 0.7, 2.0]])
    out = ensemble_statistics(unit, w, percentiles=[0, 50, 100])
    ref = {k: v[0] for k, v in direct(unit, w).items()}
    assert_allclose(out["shmax_azimuth_deg"], ref["shmax_azimuth_deg"], atol=1e-9)
    assert_allclose(out["shmax_std_deg"], 0.0, atol=1e-6)
    assert_allclose(out["regime_index"], ref["regime_index"], atol=1e-12)
    for q in range(3):
        assert_allclose(out["s_hmax_mpa"][:, q], ref["s_hmax"], atol=1e-12)
        assert_allclose(out["s_hmin_mpa"][:, q], ref["s_hmin"], atol=1e-12)
    code = ref["regime_code"]
    assert_array_equal(out["prob_normal"], code == 0)
    assert_array_equal(out["prob_strike_slip"], code == 1)
    assert_array_equal(out["prob_reverse"], code == 2)


def test_statistics_match_direct_computation(unit):
    # Reference: scipy circmean/circstd of doubled angles; numpy.percentile; tensor.regime_code.
    w = sample_weights(GROUPS, SPECS, members=300, seed=5)
    out = ensemble_statistics(unit, w, percentiles=[5, 50, 95], memory_mb=0.5, member_chunk=64,
                              workers=2)
    ref = direct(unit, w)
    two = np.radians(2 * ref["shmax_azimuth_deg"])
    mean = np.degrees(circmean(two, axis=0)) / 2
    assert_allclose(np.cos(np.radians(2 * (out["shmax_azimuth_deg"] - mean))), 1.0, atol=1e-9)
    assert_allclose(out["shmax_std_deg"], np.degrees(circstd(two, axis=0)) / 2, rtol=1e-9)
    assert_allclose(out["s_hmax_mpa"], np.percentile(ref["s_hmax"], [5, 50, 95], axis=0).T,
                    rtol=1e-12)
    assert_allclose(out["s_hmin_mpa"], np.percentile(ref["s_hmin"], [5, 50, 95], axis=0).T,
                    rtol=1e-12)
    assert_allclose(out["prob_reverse"], np.mean(ref["regime_code"] == 2, axis=0))
    assert_allclose(out["prob_strike_slip"], np.mean(ref["regime_code"] == 1, axis=0))
    assert_allclose(out["prob_normal"], np.mean(ref["regime_code"] == 0, axis=0))
    assert_allclose(out["regime_index"], np.mean(ref["regime_index"], axis=0), rtol=1e-10)


def test_regime_index_closed_form_matches_tensor():
    rng = np.random.default_rng(0)
    a, b = np.sort(rng.normal(size=(2, 1000)), axis=0)[::-1]
    assert_allclose(regime_index_from_principal(a, b), tensor.regime_index(a, b), atol=1e-12)


def test_statistics_converge_to_the_analytic_values():
    # One point: s = (0, 1, 0) + w (0, 0, 0.5) -> doubled SHmax angle atan(w), w ~ U(0, a).
    a = 3.0
    unit = np.array([[[0.0, 1.0, 0.0]], [[0.0, 0.0, 0.5]]])
    c, s = np.arcsinh(a) / a, (np.sqrt(1 + a * a) - 1) / a
    mean_ref = np.degrees(0.5 * np.arctan2(s, c))
    std_ref = np.degrees(0.5 * np.sqrt(-2 * np.log(np.hypot(c, s))))
    errors = []
    for members in (100, 1000, 10000, 100000):
        w = sample_weights(["n", "shear"], {"shear": {"distribution": "uniform", "low": 0,
                                                      "high": a}}, members, seed=1)
        out = ensemble_statistics(unit, w)
        err = np.array([out["shmax_azimuth_deg"][0] - mean_ref, out["shmax_std_deg"][0] - std_ref])
        # Monte Carlo standard error of both is about std_ref / sqrt(M); allow 4 of them.
        assert np.all(np.abs(err) < 4 * std_ref / np.sqrt(members)), (members, err)
        errors.append(np.abs(err).sum())
    assert errors[-1] < 0.15 < errors[0]


def test_percentiles_and_regime_probabilities_converge():
    # s_ee = 1 - w, s_nn = 1 + w: s_hmax = 1 + w, s_hmin = 1 - w with w ~ U(0, 2): the 25th
    # percentile of s_hmax is 1.5, and P(reverse) = P(w < 1) = 0.5 = P(strike-slip).
    unit = np.array([[[1.0, 1.0, 0.0]], [[-1.0, 1.0, 0.0]]])
    w = sample_weights(["iso", "dev"], {"dev": {"distribution": "uniform", "low": 0, "high": 2}},
                       200000, seed=3)
    out = ensemble_statistics(unit, w, percentiles=[25, 75])
    assert_allclose(out["s_hmax_mpa"][0], [1.5, 2.5], atol=0.01)
    assert_allclose(out["s_hmin_mpa"][0], [-0.5, 0.5], atol=0.01)
    assert_allclose(out["prob_reverse"][0], 0.5, atol=0.005)
    assert_allclose(out["prob_strike_slip"][0], 0.5, atol=0.005)
    assert out["prob_normal"][0] == 0.0
    assert_allclose(out["shmax_azimuth_deg"][0], 0.0, atol=1e-9)


def test_same_seed_same_result_and_chunking_does_not_matter(unit):
    w1 = sample_weights(GROUPS, SPECS, 500, seed=9)
    w2 = sample_weights(GROUPS, SPECS, 500, seed=9)
    assert_array_equal(w1, w2)
    assert not np.array_equal(w1, sample_weights(GROUPS, SPECS, 500, seed=10))
    a = ensemble_statistics(unit, w1, workers=1)
    b = ensemble_statistics(unit, w2, memory_mb=0.2, member_chunk=33, workers=2)
    for key in a:
        assert_allclose(a[key], b[key], rtol=1e-12, atol=1e-12, err_msg=key)


def test_group_streams_are_independent():
    # Adding a distribution for one group does not change another group's draws.
    w1 = sample_weights(GROUPS, {"a": SPECS["a"]}, 100, seed=2)
    w2 = sample_weights(GROUPS, SPECS, 100, seed=2)
    assert_array_equal(w1[:, 0], w2[:, 0])
    assert_array_equal(w1[:, 1], 1.0)


def test_distributions_have_their_documented_moments():
    # uniform(0.5, 1.5): mean 1; log-uniform(0.2, 5): median sqrt(0.2 * 5) = 1;
    # normal(1, 0.5) truncated at 0: mean 1 + 0.5 phi(2)/Phi(2) = 1.0277 (scipy.stats.truncnorm).
    from scipy.stats import truncnorm

    w = sample_weights(GROUPS, SPECS, 100000, seed=0)
    assert_allclose(w[:, 0].mean(), 1.0, atol=0.01)
    assert_allclose(np.median(w[:, 1]), 1.0, atol=0.03)
    assert_allclose(w[:, 2].mean(), truncnorm.mean(-2, np.inf, 1.0, 0.5), atol=0.01)
    assert w[:, 2].min() >= 0 and w[:, 1].min() >= 0.2 and w[:, 1].max() <= 5.0


def test_points_outside_get_nan(unit):
    u = unit.copy()
    u[:, 5] = np.nan
    out = ensemble_statistics(u, sample_weights(GROUPS, SPECS, 20, seed=0))
    assert np.isnan(out["shmax_azimuth_deg"][5]) and np.isnan(out["s_hmax_mpa"][5]).all()
    assert np.isfinite(out["shmax_azimuth_deg"][4])


def test_dask_cluster_agrees_with_local_threads(unit):
    distributed = pytest.importorskip("distributed")
    w = sample_weights(GROUPS, SPECS, 200, seed=4)
    local = ensemble_statistics(unit, w, memory_mb=0.3)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster:
        remote = ensemble_statistics(unit, w, memory_mb=0.3, scheduler=cluster.scheduler_address)
    for key in local:
        assert_allclose(local[key], remote[key], rtol=1e-12, atol=1e-12, err_msg=key)


def test_chunks_keep_memory_bounded():
    # 10,000 members x 100,000 points with the default 256 MiB per chunk.
    size = plan_chunks(100_000, 10_000, 6)
    assert 8.0 * size * (2 * 10_000 + 8 * 256) <= 256 * 2**20
    assert size >= 100


def test_pull_fraction_and_slab_age_map_to_weights():
    # Slab pull is proportional to the pull fraction; for age, the ratio of the force law.
    from stressmap.physics.forces import slab_pull_n_per_m

    assert_allclose(parameter_to_weight("pull_fraction", [0.06, 0.12], 0.12), [0.5, 1.0])
    ratio = slab_pull_n_per_m(80.0, 660.0, 0.1) / slab_pull_n_per_m(40.0, 660.0, 0.1)
    assert_allclose(parameter_to_weight("slab_age_myr", [80.0], 40.0), [ratio], rtol=1e-12)
    # half-space cooling: the density anomaly grows as sqrt(age) (Turcotte & Schubert, from memory)
    assert_allclose(ratio, np.sqrt(2.0), rtol=1e-6)
    w = sample_weights(["slab"], {"slab": {"distribution": "uniform", "low": 0.06, "high": 0.24,
                                           "parameter": "pull_fraction", "reference": 0.12}},
                       1000, seed=0)
    assert 0.5 <= w.min() and w.max() <= 2.0


@pytest.mark.parametrize(
    "spec, field",
    [
        ({"x": {"distribution": "uniform", "low": 0, "high": 1}}, "distributions.x"),
        ({"a": {"distribution": "beta"}}, "distributions.a.distribution"),
        ({"a": {"distribution": "uniform", "low": 2, "high": 1}}, "distributions.a.high"),
        ({"a": {"distribution": "log-uniform", "low": 0, "high": 1}}, "distributions.a.low"),
        ({"a": {"distribution": "normal", "mean": 1, "std": -1}}, "distributions.a.std"),
        ({"a": {"distribution": "uniform", "low": "x", "high": 1}}, "distributions.a.low"),
        ({"a": {"distribution": "uniform", "low": 0, "high": 1, "parameter": "colour"}},
         "distributions.a.parameter"),
    ],
)
def test_bad_distributions_name_the_field(spec, field):
    with pytest.raises(InputError) as err:
        validate_distributions(spec, GROUPS)
    assert [p["field"] for p in err.value.problems] == [field]


def test_physical_parameter_needs_a_reference():
    with pytest.raises(InputError) as err:
        sample_weights(["s"], {"s": {"distribution": "uniform", "low": 0.1, "high": 0.2,
                                     "parameter": "pull_fraction"}}, 10)
    assert err.value.problems[0]["field"] == "distributions.s.reference"


def test_members_must_be_positive():
    with pytest.raises(InputError):
        sample_weights(GROUPS, {}, 0)


def test_grid_coordinates_spacing():
    # 1 degree of latitude on a 6371 km sphere is 111.195 km (R pi / 180).
    lon, lat = grid_coordinates((10, -5, 12, 5), 111.19492664455873)
    assert_allclose(lat, np.arange(-5, 6), atol=1e-9)
    assert_allclose(lon, [10, 11, 12], atol=1e-9)
    with pytest.raises(InputError):
        grid_coordinates((10, 5, 12, -5), 10)
    with pytest.raises(InputError):
        grid_coordinates((10, -5, 12, 5), -1)


def test_chunk_statistics_doctest_case():
    out = chunk_statistics(np.array([[[0.0, 2.0, 0.0]]]), np.array([[1.0], [3.0]]), [50])
    assert_allclose(out["s_hmax_mpa"], [[4.0]])
    assert out["prob_reverse"][0] == 0.0 and out["prob_strike_slip"][0] == 1.0


# ----------------------------------------------------------------------------- on a built model

def test_model_ensemble_of_one_member_equals_predict_points(coarse_demo_model):
    from stressmap.analyses.ensemble import ensemble_points
    from stressmap.model import predict_points

    m = coarse_demo_model
    lon = np.array([-20.0, -10.0, -25.0, 0.0, 60.0])
    lat = np.array([-20.0, -15.0, -10.0, -25.0, 10.0])   # the last point is outside the plate
    weights = {g: 0.5 + 0.3 * i for i, g in enumerate(m.groups)}
    w = np.array([[weights[g] for g in m.groups]])
    ens = ensemble_points(m, lon, lat, weights=w, percentiles=[50])
    ref = predict_points(m, lon, lat, weights=weights)
    inside = ref["inside"].values
    assert_array_equal(ens["inside"].values, inside)
    assert not inside[-1] and inside[:-1].all()
    assert_allclose(ens["shmax_azimuth_deg"].values[inside], ref["shmax_azimuth_deg"].values[inside],
                    atol=1e-9)
    assert_allclose(ens["s_hmax_mpa"].values[inside, 0], ref["s_hmax_mpa"].values[inside],
                    rtol=1e-12)
    assert_allclose(ens["regime_index"].values[inside], ref["regime_index"].values[inside],
                    atol=1e-12)
    assert_array_equal(ens["regime"].values[inside], ref["regime"].values[inside])
    assert np.isnan(ens["shmax_azimuth_deg"].values[-1]) and ens["regime"].values[-1] == ""


def test_model_ensemble_grid_and_pull_fraction(coarse_demo_model):
    from stressmap.analyses.ensemble import ensemble_grid

    m = coarse_demo_model
    dist = {"subduction": {"distribution": "uniform", "low": 0.06, "high": 0.24,
                           "parameter": "pull_fraction"},      # reference 0.12 from the document
            "collision": {"distribution": "log-uniform", "low": 0.3, "high": 3.0}}
    a = ensemble_grid(m, (-30, -30, -5, -5), 400.0, members=200, distributions=dist, seed=3)
    b = ensemble_grid(m, (-30, -30, -5, -5), 400.0, members=200, distributions=dist, seed=3)
    assert a.sizes["lat"] >= 5 and a.sizes["lon"] >= 5 and a.attrs["Conventions"] == "CF-1.8"
    assert a.equals(b)
    w = a["member_weight"].sel(group="subduction").values
    assert 0.5 <= w.min() and w.max() <= 2.0     # pull fraction 0.06 .. 0.24 over 0.12
    inside = a["inside"].values.astype(bool)
    p = (a["prob_normal"] + a["prob_strike_slip"] + a["prob_reverse"]).values
    assert_allclose(p[inside], 1.0)
    assert np.all(a["shmax_std_deg"].values[inside] >= 0)


def test_model_ensemble_without_distributions_varies_the_documented_defaults(coarse_demo_model):
    # README: with no distributions every load group's weight is drawn uniformly from 0.5 to
    # 1.5, and the result says so; an ensemble of identical members was returned before.
    from stressmap.analyses.ensemble import DEFAULT_WEIGHT_RANGE, ensemble_points

    m = coarse_demo_model
    ens = ensemble_points(m, [-20.0, -10.0], [-20.0, -15.0], members=300, seed=2)
    w = ens["member_weight"].values
    lo, hi = DEFAULT_WEIGHT_RANGE
    assert w.min() >= lo and w.max() <= hi and np.all(w.std(axis=0) > 0.2)
    assert np.all(ens["shmax_std_deg"].values > 0)
    assert ens.attrs["distributions_source"].startswith("default")
    assert set(json.loads(ens.attrs["distributions"])) == set(m.groups)


def test_model_ensemble_with_nothing_varied_is_refused(coarse_demo_model):
    from stressmap.analyses.ensemble import ensemble_points

    fixed = {"ridge": {"distribution": "uniform", "low": 1.0, "high": 1.0}}
    with pytest.raises(InputError) as err:
        ensemble_points(coarse_demo_model, [-20.0], [-20.0], members=10, distributions=fixed)
    assert err.value.problems[0]["field"] == "distributions"
