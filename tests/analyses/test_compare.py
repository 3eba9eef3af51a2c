"""Model-data comparison: synthetic indicators drawn from a known field with known noise recover
the noise level (normal-distribution moments, analytic); random orientations look random
(mean |misfit| 45 degrees, analytic); regime agreement, per-type and per-province summaries."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy.special import erf

from stressmap.analyses import compare
from stressmap.constants import CAUTION


@pytest.fixture(scope="module")
def demo_model(coarse_demo_model):
    """The fictional demo plate on a coarse mesh (session fixture in conftest.py)."""
    return coarse_demo_model


def synthetic_indicators(model, n, sigma_deg, seed, kinds=("breakout", "focal_mechanism")):
    """Indicators at random points inside the plate: SHmax = predicted + N(0, sigma) noise."""
    from stressmap.model import predict_points

    rng = np.random.default_rng(seed)
    lon = rng.uniform(-36.0, 12.0, 4 * n)
    lat = rng.uniform(-36.0, 0.0, 4 * n)
    pred = predict_points(model, lon, lat)
    keep = np.flatnonzero(pred["inside"].values & np.isfinite(pred["shmax_azimuth_deg"].values))[:n]
    true = pred["shmax_azimuth_deg"].values[keep]
    obs = np.mod(true + rng.normal(0.0, sigma_deg, keep.size), 180.0)
    return pd.DataFrame({
        "id": [f"S{i}" for i in range(keep.size)],
        "lon": lon[keep], "lat": lat[keep],
        "type": np.resize(np.array(kinds, dtype=object), keep.size),
        "shmax_azimuth_deg": obs,
        "weight": np.ones(keep.size),
        "regime": pred["regime"].values[keep].astype(object),
    })


def test_misfit_wraps_into_half_open_interval():
    assert_allclose(compare.misfit_deg([170.0, 10.0, 0.0, 90.0], [10.0, 170.0, 90.0, 0.0]),
                    [-20.0, 20.0, -90.0, -90.0])


@pytest.mark.parametrize("sigma", [5.0, 12.0, 20.0])
def test_statistics_recover_known_noise(sigma):
    """Normal noise N(0, sigma), well inside +-90: RMS -> sigma, mean |x| -> sigma sqrt(2/pi),
    P(|x| <= 15) -> erf(15 / (sigma sqrt 2)) (normal-distribution moments, analytic)."""
    rng = np.random.default_rng(int(sigma))
    n = 4000
    truth = rng.uniform(0, 180, n)                       # a known field, any shape
    obs = np.mod(truth + rng.normal(0, sigma, n), 180.0)
    s = compare.misfit_statistics(compare.misfit_deg(obs, truth))
    se = sigma / np.sqrt(2 * n)
    assert abs(s["rms_misfit_deg"] - sigma) < 4 * se + 0.02 * sigma
    assert abs(s["mean_abs_misfit_deg"] - sigma * np.sqrt(2 / np.pi)) < 0.05 * sigma
    assert abs(s["fraction_within_15_deg"] - erf(15 / (sigma * np.sqrt(2)))) < 0.03
    assert s["random_p_value"] < 1e-10
    assert abs(s["mean_misfit_deg"]) < 4 * sigma / np.sqrt(n)


def test_random_orientations_are_not_significant():
    rng = np.random.default_rng(99)
    s = compare.misfit_statistics(compare.misfit_deg(rng.uniform(0, 180, 3000), rng.uniform(0, 180, 3000)))
    assert abs(s["weighted_mean_abs_misfit_deg"] - 45.0) < 1.5      # analytic: uniform on [0, 90]
    assert abs(s["fraction_within_30_deg"] - 1 / 3) < 0.03
    assert s["random_p_value"] > 0.001 and s["within_30_binomial_p_value"] > 0.001


def test_weights_enter_the_weighted_mean():
    s = compare.misfit_statistics([10.0, 50.0], [3.0, 1.0])
    assert_allclose(s["weighted_mean_abs_misfit_deg"], 20.0)
    assert_allclose(s["mean_abs_misfit_deg"], 30.0)
    assert compare.misfit_statistics([np.nan])["count"] == 0


def test_compare_with_model_recovers_noise(demo_model):
    sigma = 10.0
    ind = synthetic_indicators(demo_model, 400, sigma, seed=1)
    table, summary = compare.compare(demo_model, ind)
    assert summary["overall"]["count"] == len(ind)
    assert abs(summary["overall"]["rms_misfit_deg"] - sigma) < 1.5
    assert summary["overall"]["random_p_value"] < 1e-10
    assert summary["overall"]["regime_agreement_fraction"] == 1.0
    assert summary["caution"] == CAUTION
    assert set(summary["by_type"]) == {"breakout", "focal_mechanism"}
    assert set(summary["by_province"]) <= {"Meridia basin (fictional)", "Meridia shield (fictional)",
                                           "(no province)"}
    assert sum(v["count"] for v in summary["by_type"].values()) == len(ind)
    for col in compare.COMPARISON_COLUMNS:
        assert col in table.columns
    # misfit really is observed - predicted, wrapped
    d = np.mod(table["shmax_azimuth_deg"] - table["predicted_shmax_azimuth_deg"] + 90, 180) - 90
    assert_allclose(table["misfit_deg"], d, atol=1e-9)


def test_compare_weights_change_the_prediction(demo_model):
    ind = synthetic_indicators(demo_model, 50, 0.0, seed=2)
    _, base = compare.compare(demo_model, ind)
    assert base["overall"]["rms_misfit_deg"] < 1e-6
    group = demo_model.groups[0]
    _, other = compare.compare(demo_model, ind, weights={group: 5.0})
    assert other["weights"][group] == 5.0
    assert other["overall"]["rms_misfit_deg"] > 1e-3


def test_outside_points_and_regime_disagreement(demo_model):
    ind = synthetic_indicators(demo_model, 6, 0.0, seed=3)
    ind.loc[0, ["lon", "lat"]] = [100.0, 40.0]           # far outside the plate
    flip = {"normal": "reverse", "reverse": "normal", "strike-slip": "reverse"}
    ind.loc[1, "regime"] = flip[ind.loc[1, "regime"]]
    ind.loc[2, "regime"] = ""
    table, summary = compare.compare(demo_model, ind)
    assert not table["inside"].iloc[0] and np.isnan(table["misfit_deg"].iloc[0])
    assert summary["outside"] == 1 and summary["overall"]["count"] == 5
    assert table["regime_agreement"].iloc[1] is np.False_ or table["regime_agreement"].iloc[1] == False  # noqa: E712
    assert pd.isna(table["regime_agreement"].iloc[2])
    assert summary["overall"]["regime_compared"] == 4
    assert_allclose(summary["overall"]["regime_agreement_fraction"], 0.75)
    assert table["province"].iloc[0] == ""


def test_demo_anomalies_stand_out(demo_model):
    """The fictional demo set's deliberate local anomalies misfit far more than the rest."""
    from importlib import resources
    from pathlib import Path

    from stressmap.io.indicators import read_indicators

    demo = read_indicators(Path(str(resources.files("stressmap.data").joinpath("demo_indicators.csv"))))
    table, summary = compare.compare(demo_model, demo)
    anomalous = table["note"].fillna("").str.contains("anomaly").to_numpy()
    cluster = table["note"].fillna("").str.contains("local source").to_numpy()
    assert np.nanmean(table["abs_misfit_deg"][cluster]) > 55.0
    assert np.nanmean(table["abs_misfit_deg"][~anomalous]) < 25.0
    assert summary["overall"]["random_p_value"] < 1e-20
