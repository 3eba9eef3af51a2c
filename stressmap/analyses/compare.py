"""Model-data comparison: predicted SHmax and regime at every indicator, misfits, and a summary.

Per indicator: ``predicted_shmax_azimuth_deg``, ``predicted_regime``, ``predicted_regime_index``,
``inside`` (the indicator lies in the plate), ``misfit_deg`` = observed - predicted wrapped into
[-90, 90), ``abs_misfit_deg``, ``regime_agreement`` (True/False; empty where the indicator has no
regime or the model none), and ``province`` (name of the plate province holding it, "" if none).

Summary (indicators with both azimuths defined): weighted mean absolute misfit (indicator
weights), unweighted mean and median, weighted RMS misfit, weighted axial mean misfit (a
systematic rotation of the model), fractions within 15 and 30 degrees, and the comparison with
random orientations -- for unrelated orientations the absolute misfit is uniform on [0, 90]
(mean 45 degrees, a third within 30 degrees): a z score and one-sided p-value for the mean
(:func:`stressmap.geo.circular.random_misfit_significance`) and an exact binomial p-value for the
count within 30 degrees (scipy.stats.binomtest). The same statistics are given by indicator type
and by province, and the share of regime agreements.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import binomtest

from stressmap.constants import CAUTION
from stressmap.geo import circular
from stressmap.model import locate, predict_points, resolve_weights

__all__ = [
    "misfit_deg",
    "misfit_statistics",
    "summarise_misfits",
    "provinces_at",
    "compare",
    "COMPARISON_COLUMNS",
]

#: Columns :func:`compare` adds to the indicator table.
COMPARISON_COLUMNS = [
    "inside",
    "province",
    "predicted_shmax_azimuth_deg",
    "predicted_regime",
    "predicted_regime_index",
    "misfit_deg",
    "abs_misfit_deg",
    "regime_agreement",
]


def misfit_deg(observed_deg, predicted_deg):
    """Observed minus predicted SHmax azimuth, wrapped into [-90, 90) degrees.

    Examples
    --------
    >>> misfit_deg([170.0, 10.0, 45.0], [10.0, 170.0, np.nan]).tolist()
    [-20.0, 20.0, nan]
    """
    return circular.axial_difference_deg(observed_deg, predicted_deg)


def misfit_statistics(misfit, weight=None, regime_agreement=None) -> dict:
    """Statistics of a set of misfits (degrees, NaN entries ignored).

    Examples
    --------
    >>> s = misfit_statistics([10.0, -20.0, 40.0], [1.0, 1.0, 2.0])
    >>> s["count"], s["weighted_mean_abs_misfit_deg"], s["fraction_within_30_deg"]
    (3, 27.5, 0.6666666666666666)
    """

    m = np.asarray(misfit, dtype=float)
    w = np.ones_like(m) if weight is None else np.asarray(weight, dtype=float)
    ok = np.isfinite(m) & np.isfinite(w) & (w > 0)
    m, w = m[ok], w[ok]
    a = np.abs(m)
    n = int(m.size)
    out: dict = {"count": n}
    if n == 0:
        nan = float("nan")
        out.update({k: nan for k in (
            "weighted_mean_abs_misfit_deg", "mean_abs_misfit_deg", "median_abs_misfit_deg",
            "rms_misfit_deg", "mean_misfit_deg", "fraction_within_15_deg", "fraction_within_30_deg",
            "random_z", "random_p_value", "within_30_binomial_p_value")})
    else:
        mean_abs, z, p = circular.random_misfit_significance(a, w)
        k30 = int(np.sum(a <= 30.0))
        out.update({
            "weighted_mean_abs_misfit_deg": mean_abs,
            "mean_abs_misfit_deg": float(np.mean(a)),
            "median_abs_misfit_deg": float(np.median(a)),
            "rms_misfit_deg": float(np.sqrt(np.sum(w * m**2) / np.sum(w))),
            "mean_misfit_deg": float(np.mod(circular.axial_mean_deg(m, w) + 90.0, 180.0) - 90.0),
            "fraction_within_15_deg": float(np.mean(a <= 15.0)),
            "fraction_within_30_deg": k30 / n,
            "random_z": z,
            "random_p_value": p,
            "within_30_binomial_p_value": float(binomtest(k30, n, 1.0 / 3.0, alternative="greater").pvalue),
        })
    out["random_expected_mean_abs_misfit_deg"] = circular.RANDOM_MEAN_ABS_MISFIT_DEG
    if regime_agreement is not None:
        ra = np.asarray(regime_agreement, dtype=float)
        ra = ra[np.isfinite(ra)]
        out["regime_compared"] = int(ra.size)
        out["regime_agreement_fraction"] = float(np.mean(ra)) if ra.size else float("nan")
    return out


def summarise_misfits(table) -> dict:
    """Overall, per-type and per-province statistics of a comparison table (see module doc)."""
    misfit = table["misfit_deg"].to_numpy(float)
    weight = table["weight"].to_numpy(float)
    agree = table["regime_agreement"].astype("Float64").to_numpy(float, na_value=np.nan)
    out = {
        "caution": CAUTION,
        "total": int(len(table)),
        "inside": int(table["inside"].sum()),
        "outside": int((~table["inside"].astype(bool)).sum()),
        "undefined_observed": int(np.isnan(table["shmax_azimuth_deg"].to_numpy(float)).sum()),
        "undefined_predicted": int((table["inside"].astype(bool)
                                    & np.isnan(table["predicted_shmax_azimuth_deg"].to_numpy(float))).sum()),
        "overall": misfit_statistics(misfit, weight, agree),
        "by_type": {},
        "by_province": {},
    }
    for key, col in (("by_type", "type"), ("by_province", "province")):
        labels = table[col].astype(str).to_numpy(object)
        for label in np.unique(labels[table["inside"].to_numpy(bool)]) if len(labels) else []:
            m = labels == label
            name = label if label else "(no province)"
            out[key][name] = misfit_statistics(misfit[m], weight[m], agree[m])
    return out


def provinces_at(model, lon, lat):
    """Province name of each point ("" outside provinces or outside the plate).

    Uses the facet that holds the point and the province index of that facet stored with the
    model (``element_province``), so the answer follows the mesh exactly.
    """

    inside, triangle, _ = locate(model, lon, lat)
    feats = (model.definition.get("provinces") or {}).get("features") or []
    names = np.array([str((f.get("properties") or {}).get("name") or f"province {i + 1}")
                      for i, f in enumerate(feats)] + [""], dtype=object)
    if "element_province" not in model.fields:
        return np.full(inside.size, "", dtype=object)
    elem = np.asarray(model.fields["element_province"].values, dtype=np.int64)
    idx = np.where(inside, elem[np.where(inside, triangle, 0)], -1)
    idx = np.where((idx < 0) | (idx >= len(feats)), len(feats), idx)
    return names[idx]


def compare(model, indicators, weights=None):
    """Compare a built model with indicators.

    Parameters
    ----------
    model : stressmap.model.BuiltModel
    indicators : geopandas.GeoDataFrame
        As from :func:`stressmap.analyses.indicators.read_indicators`.
    weights : dict, optional
        Load-group weights (see :func:`stressmap.model.resolve_weights`).

    Returns
    -------
    table : geopandas.GeoDataFrame
        The indicators with :data:`COMPARISON_COLUMNS` added.
    summary : dict
        JSON-able summary (see :func:`summarise_misfits`), with ``weights`` and ``caution``.
    """
    import pandas as pd


    lon = indicators["lon"].to_numpy(float)
    lat = indicators["lat"].to_numpy(float)
    pred = predict_points(model, lon, lat, weights)
    table = indicators.copy()
    inside = np.asarray(pred["inside"].values, dtype=bool)
    p_az = np.asarray(pred["shmax_azimuth_deg"].values, dtype=float)
    p_regime = np.asarray(pred["regime"].values).astype(object)
    table["inside"] = inside
    table["province"] = provinces_at(model, lon, lat)
    table["predicted_shmax_azimuth_deg"] = p_az
    table["predicted_regime"] = p_regime
    table["predicted_regime_index"] = np.asarray(pred["regime_index"].values, dtype=float)
    m = misfit_deg(table["shmax_azimuth_deg"].to_numpy(float), p_az)
    table["misfit_deg"] = m
    table["abs_misfit_deg"] = np.abs(m)
    obs_regime = table["regime"].astype(str).to_numpy(object)
    comparable = (obs_regime != "") & (p_regime != "")
    table["regime_agreement"] = pd.array(np.where(comparable, obs_regime == p_regime, False),
                                         dtype="boolean")
    table.loc[~comparable, "regime_agreement"] = pd.NA
    summary = summarise_misfits(table)
    summary["weights"] = dict(zip(model.groups, resolve_weights(model, weights).tolist()))
    summary["model_name"] = str(model.summary.get("name", ""))
    summary["model_build_time"] = str(model.summary.get("build_time", ""))
    return table, summary
