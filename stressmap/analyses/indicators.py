"""Stress indicators: validation, conversion to SHmax, and summary statistics.

An indicator table has one row per measurement with the columns (case-insensitive):

``id``, ``lon``, ``lat``, ``depth_km`` (optional), ``type``, ``azimuth_deg`` (the azimuth of the
feature itself: the breakout, the fracture, the dyke...) or ``strike_deg``, ``dip_deg``,
``rake_deg`` for focal mechanisms (Aki & Richards convention), ``sigma_deg`` (1-sigma uncertainty)
or ``weight``, and ``regime`` (optional: normal, strike-slip, reverse). Other columns are kept.

Conversion to SHmax by type (common practice; e.g. Zoback 2007, "Reservoir Geomechanics", ch. 6,
from memory):

=====================  =======================================================
type                   SHmax azimuth
=====================  =======================================================
breakout               perpendicular to the breakout azimuth (azimuth + 90)
tensile_fracture       parallel to the fracture azimuth
hydraulic_fracture     parallel to the fracture azimuth
overcoring             the given azimuth is SHmax
fault_slip_inversion   the given azimuth is SHmax
geological             the given azimuth is SHmax (dykes, vein sets...)
focal_mechanism        Lund & Townend (2007) from the P, B, T axes, shape ratio 0.5
=====================  =======================================================

Uncertainty and weight: ``weight = (20 / sigma_deg)^2`` (so a 20-degree indicator weighs 1); when
only one of the two is given the other follows from it, when neither is given ``sigma_deg`` takes
the type's default (:data:`DEFAULT_SIGMA_DEG`, our own choice, documented in the README).

Problems are collected for every bad cell (row = 1-based data row, field = column); with
``skip_bad=True`` the bad rows are left out and the problems are kept in
``frame.attrs["skipped"]`` so the caller can report them -- nothing is dropped silently.
"""

from __future__ import annotations

import logging

import geopandas as gpd
import numpy as np
import pandas as pd

from stressmap.errors import IndicatorFileError, problem
from stressmap.geo import circular, focal

__all__ = [
    "TYPES",
    "REGIMES",
    "DEFAULT_SIGMA_DEG",
    "REFERENCE_SIGMA_DEG",
    "FOCAL_COLUMNS",
    "CONVERT_COLUMNS",
    "shmax_from_feature_azimuth",
    "prepare_indicators",
    "summarise",
]

_log = logging.getLogger(__name__)

#: Indicator types understood by the reader.
TYPES = (
    "breakout",
    "tensile_fracture",
    "hydraulic_fracture",
    "overcoring",
    "fault_slip_inversion",
    "geological",
    "focal_mechanism",
)
#: Angle added to the feature azimuth to get SHmax, per non-focal type.
_OFFSET_DEG = {
    "breakout": 90.0,
    "tensile_fracture": 0.0,
    "hydraulic_fracture": 0.0,
    "overcoring": 0.0,
    "fault_slip_inversion": 0.0,
    "geological": 0.0,
}
REGIMES = ("normal", "strike-slip", "reverse")
_REGIME_ALIASES = {
    "normal": "normal",
    "strike-slip": "strike-slip",
    "strike_slip": "strike-slip",
    "strike slip": "strike-slip",
    "strikeslip": "strike-slip",
    "reverse": "reverse",
    "thrust": "reverse",
}
#: Default 1-sigma uncertainty by type when a row gives neither sigma_deg nor weight (degrees).
DEFAULT_SIGMA_DEG = {
    "breakout": 20.0,
    "tensile_fracture": 20.0,
    "hydraulic_fracture": 15.0,
    "overcoring": 25.0,
    "fault_slip_inversion": 20.0,
    "geological": 25.0,
    "focal_mechanism": 25.0,
}
#: sigma_deg of an indicator of weight 1.
REFERENCE_SIGMA_DEG = 20.0

FOCAL_COLUMNS = [
    "aux_strike_deg",
    "aux_dip_deg",
    "aux_rake_deg",
    "p_trend_deg",
    "p_plunge_deg",
    "t_trend_deg",
    "t_plunge_deg",
    "b_trend_deg",
    "b_plunge_deg",
    "mechanism_class",
]
_INPUT_COLUMNS = [
    "id", "lon", "lat", "depth_km", "type", "azimuth_deg", "strike_deg", "dip_deg", "rake_deg",
    "sigma_deg", "weight", "regime",
]
#: Columns written by ``stressmap indicators convert`` (then any extra input columns).
CONVERT_COLUMNS = _INPUT_COLUMNS + ["shmax_azimuth_deg"] + FOCAL_COLUMNS

# (column, low, high, required-when) for numeric cells; ranges inclusive.
_RANGES = {
    "lon": (-180.0, 360.0),
    "lat": (-90.0, 90.0),
    "depth_km": (-10.0, 1000.0),
    "azimuth_deg": (-360.0, 360.0),
    "strike_deg": (-360.0, 360.0),
    "dip_deg": (0.0, 90.0),
    "rake_deg": (-360.0, 360.0),
    "sigma_deg": (0.0, 90.0),
    "weight": (0.0, np.inf),
}


def shmax_from_feature_azimuth(kind, azimuth_deg):
    """SHmax azimuth (degrees in [0, 180)) from the azimuth of the measured feature.

    Examples
    --------
    >>> shmax_from_feature_azimuth(["breakout", "tensile_fracture", "geological"], [10.0, 10.0, 200.0]).tolist()
    [100.0, 10.0, 20.0]
    >>> bool(np.isnan(shmax_from_feature_azimuth(["focal_mechanism"], [10.0])[0]))
    True
    """
    kind = np.asarray(kind, dtype=object)
    az = np.asarray(azimuth_deg, dtype=float)
    offset = np.full(kind.shape, np.nan)
    for name, off in _OFFSET_DEG.items():  # loop over the handful of types, not over indicators
        offset[kind == name] = off
    out = np.mod(az + offset, 180.0)
    return np.where(out >= 180.0 - 1e-12, 0.0, out) + 0.0


def _cells(table, col):
    """(raw object array, numeric float array, empty mask) of one column (absent -> all empty)."""
    n = len(table)
    if col not in table.columns:
        raw = np.full(n, None, dtype=object)
        return raw, np.full(n, np.nan), np.ones(n, dtype=bool)
    series = table[col]
    raw = series.to_numpy(object)
    text = series.astype(str).str.strip()
    empty = series.isna().to_numpy() | (text == "").to_numpy() | text.str.lower().isin(["nan", "none", "null"]).to_numpy()
    num = pd.to_numeric(series.where(~empty), errors="coerce").to_numpy(float)
    return raw, num, empty


def _text(table, col):
    """Stripped strings of one column, "" for empty cells (absent column -> all "")."""
    _, _, empty = _cells(table, col)
    if col not in table.columns:
        return np.full(len(table), "", dtype=object)
    text = pd.Series(table[col].to_numpy(object)).astype(str).str.strip()
    return np.where(empty, "", text.to_numpy(object)).astype(object)


def prepare_indicators(table, skip_bad: bool = False, problems=None, name: str = "indicators"):
    """Validate a raw indicator table and derive SHmax, uncertainty, weight and focal quantities.

    Parameters
    ----------
    table : pandas.DataFrame
        Raw cells (strings or numbers), columns already lower-case; ``lon``/``lat`` present.
    skip_bad : bool
        Leave out bad rows instead of raising; their problems go to ``result.attrs["skipped"]``.
    problems : list of dict, optional
        Problems already found while reading (e.g. non-point geometries), merged in.
    name : str
        Used in error messages (file name).

    Returns
    -------
    geopandas.GeoDataFrame
        One row per good indicator, index = 1-based data row of the source, columns
        :data:`CONVERT_COLUMNS` plus ``shmax_span_deg`` and any extra input columns, point geometry
        in EPSG:4326.

    Raises
    ------
    IndicatorFileError
        Listing every bad cell (row and column) unless ``skip_bad``; also when no usable row is
        left or a required column is missing.
    """
    n = len(table)
    rows = np.arange(1, n + 1)
    probs = list(problems or [])
    bad = np.zeros(n, dtype=bool)
    for p in probs:
        if p.get("row") is not None and 1 <= p["row"] <= n:
            bad[p["row"] - 1] = True
    _require_columns(table, name)
    check = _Checker(rows, probs, bad)
    kind = _check_types(table, check)
    num = _check_numbers(table, kind, check, geometry_bad=bad.copy())
    ids = _check_ids(table, rows, check, name)
    regime = _check_regimes(table, check)

    order = {c: i for i, c in enumerate(["geometry"] + _INPUT_COLUMNS)}
    probs.sort(key=lambda p: (p.get("row") or 0, order.get(p.get("field"), len(order))))
    if probs and not skip_bad:
        raise IndicatorFileError(f"{len(probs)} problem(s) in {name}", probs)
    keep = ~check.bad
    if not keep.any():
        raise IndicatorFileError(f"no usable indicator in {name}",
                                 probs or [problem("the table has no data rows")])
    if probs:
        _log.warning("%s: skipped %d bad row(s) (%d problem(s))", name, int(check.bad.sum()),
                     len(probs))
    return _derived_table(table, keep, rows, kind, num, ids, regime, probs, name)


class _Checker:
    """Collects problems per (row, column) and marks bad rows (vectorised masks in)."""

    def __init__(self, rows, probs, bad):
        self.rows, self.probs, self.bad = rows, probs, bad

    def flag(self, mask, col, message_fn):
        for i in np.flatnonzero(mask):  # one entry per bad cell, for the report
            self.probs.append(problem(message_fn(i), field=col, row=int(self.rows[i])))
        self.bad |= mask


def _require_columns(table, name):
    missing_cols = [c for c in ("lon", "lat", "type") if c not in table.columns]
    if missing_cols:
        raise IndicatorFileError(
            f"{name} lacks required column(s) {', '.join(missing_cols)}",
            [problem("required column missing", field=c) for c in missing_cols],
        )
    if not {"azimuth_deg", "strike_deg"} & set(table.columns):
        raise IndicatorFileError(
            f"{name} has neither an azimuth_deg column nor strike_deg/dip_deg/rake_deg columns",
            [problem("required column missing", field="azimuth_deg")],
        )


def _check_types(table, check: _Checker) -> np.ndarray:
    """Normalised type names (lower case, ``_`` for spaces and dashes)."""
    kind_raw = _text(table, "type")
    kind = (pd.Series(kind_raw, dtype=object).str.lower().str.replace(r"[\s-]+", "_", regex=True)
            .to_numpy(object))
    check.flag(kind == "", "type", lambda i: "missing value; one of " + ", ".join(TYPES))
    check.flag((kind != "") & ~np.isin(kind, TYPES), "type",
               lambda i: f"unknown type {kind_raw[i]!r}; one of " + ", ".join(TYPES))
    return kind


def _check_numbers(table, kind, check: _Checker, geometry_bad) -> dict:
    """Numeric columns as floats (NaN where empty), every missing/unreadable/out-of-range cell
    reported; ``geometry_bad`` rows already have a geometry problem (lon/lat not re-reported)."""
    n = len(table)
    is_focal = kind == "focal_mechanism"
    is_feature = np.isin(kind, TYPES) & ~is_focal
    num = {}
    for col, (lo, hi) in _RANGES.items():  # loop over the columns, vectorised over rows
        raw, val, empty = _cells(table, col)
        num[col] = np.where(empty, np.nan, val)
        required = {
            "lon": np.ones(n, bool), "lat": np.ones(n, bool), "azimuth_deg": is_feature,
            "strike_deg": is_focal, "dip_deg": is_focal, "rake_deg": is_focal,
        }.get(col, np.zeros(n, bool))
        if col in ("lon", "lat"):
            required = required & ~geometry_bad
        check.flag(empty & required, col, lambda i, c=col: "missing value" + (
            f" (needed for type {kind[i]})" if c not in ("lon", "lat") else ""))
        check.flag(~empty & np.isnan(val), col, lambda i, r=raw: f"not a number: {r[i]!r}")
        with np.errstate(invalid="ignore"):
            out_of_range = ~empty & np.isfinite(val) & ((val < lo) | (val > hi))
            if col in ("sigma_deg", "weight"):
                out_of_range |= ~empty & np.isfinite(val) & (val <= 0)
        check.flag(out_of_range | (~empty & np.isinf(val)), col,
                   lambda i, v=val, lo=lo, hi=hi, c=col: f"{v[i]:g} is outside " + (
                       f"(0, {hi:g}]" if c in ("sigma_deg", "weight") else f"[{lo:g}, {hi:g}]"))
    return num


def _check_ids(table, rows, check: _Checker, name: str) -> np.ndarray:
    """Ids as strings (the data row numbers when the column is absent); empty and repeated ids
    reported."""
    if "id" not in table.columns:
        _log.info("%s has no id column; ids are the data row numbers", name)
        return np.array([str(r) for r in rows], dtype=object)
    ids = _text(table, "id")
    check.flag(ids == "", "id", lambda i: "missing value")
    id_series = pd.Series(ids, dtype=object)
    dup = id_series.duplicated(keep="first").to_numpy() & (ids != "")
    first_row = id_series.map(pd.Series(rows).groupby(ids).min()).to_numpy()
    check.flag(dup, "id", lambda i: f"duplicate id {ids[i]!r} (first used in row {first_row[i]})")
    return ids


def _check_regimes(table, check: _Checker) -> np.ndarray:
    """Regimes in their canonical spelling ("" where not given)."""
    regime_raw = _text(table, "regime")
    mapped = pd.Series(regime_raw, dtype=object).str.lower().map(_REGIME_ALIASES)
    unknown_regime = mapped.isna().to_numpy() & (regime_raw != "")
    check.flag(unknown_regime, "regime",
               lambda i: f"unknown regime {regime_raw[i]!r}; one of normal, strike-slip, reverse")
    return mapped.fillna("").to_numpy(object)


def _derived_table(table, k, rows, kind, num, ids, regime, probs, name):
    """The kept rows with SHmax, uncertainty, weight and focal quantities (vectorised)."""
    kind_k = kind[k]
    lon = num["lon"][k]
    lon = np.where(lon >= 180.0, lon - 360.0, lon)
    lat = num["lat"][k]
    shmax = shmax_from_feature_azimuth(kind_k, num["azimuth_deg"][k])
    foc = focal.describe_mechanisms(num["strike_deg"][k], num["dip_deg"][k], num["rake_deg"][k])
    fk = kind_k == "focal_mechanism"
    shmax = np.where(fk, foc["shmax_azimuth_deg"], shmax)
    sigma = num["sigma_deg"][k]
    weight = num["weight"][k]
    default_sigma = pd.Series(kind_k, dtype=object).map(DEFAULT_SIGMA_DEG).to_numpy(float)
    sigma_out = np.where(np.isfinite(sigma), sigma,
                         np.where(np.isfinite(weight), REFERENCE_SIGMA_DEG / np.sqrt(weight), default_sigma))
    weight_out = np.where(np.isfinite(weight), weight, (REFERENCE_SIGMA_DEG / sigma_out) ** 2)
    mech_class = np.where(fk, foc["mechanism_class"], "").astype(object)
    regime_k = regime[k]
    regime_k = np.where((regime_k == "") & np.isin(mech_class, REGIMES), mech_class, regime_k)
    data = {
        "id": ids[k], "lon": lon, "lat": lat, "depth_km": num["depth_km"][k], "type": kind_k,
        "azimuth_deg": num["azimuth_deg"][k], "strike_deg": num["strike_deg"][k],
        "dip_deg": num["dip_deg"][k], "rake_deg": num["rake_deg"][k], "sigma_deg": sigma_out,
        "weight": weight_out, "regime": regime_k.astype(object), "shmax_azimuth_deg": shmax,
    }
    for col in FOCAL_COLUMNS:
        # Angles rounded to 1e-9 degree: removes round-off such as plunges of 2e-15 or -0.0.
        data[col] = (np.round(np.where(fk, foc[col], np.nan), 9) + 0.0
                     if col != "mechanism_class" else mech_class)
    data["shmax_azimuth_deg"] = np.mod(np.round(shmax, 9), 180.0) + 0.0
    data["shmax_span_deg"] = np.where(fk, foc["shmax_span_deg"], np.nan)
    frame = pd.DataFrame(data, index=pd.Index(rows[k], name="row"))
    extra = [c for c in table.columns if c not in data and c not in ("geometry",)]
    for c in extra:
        frame[c] = table[c].to_numpy(object)[k]
    gdf = gpd.GeoDataFrame(frame, geometry=gpd.points_from_xy(lon, lat), crs="EPSG:4326")
    gdf.attrs["skipped"] = probs
    gdf.attrs["source"] = name
    return gdf


def _stats(az, w):
    mean, r, n_w = circular.axial_resultant(az, w)
    z, p = circular.rayleigh_axial(az)
    return {
        "count": int(np.isfinite(az).sum()),
        "mean_shmax_azimuth_deg": float(mean),
        "mean_resultant_length": float(r),
        "axial_std_deg": float(circular.std_from_resultant_deg(r)),
        "rayleigh_z": float(z),
        "rayleigh_p": float(p),
    }


def summarise(indicators) -> dict:
    """Axial statistics of the SHmax azimuths: all indicators and per type.

    Weighted mean orientation and mean resultant length (doubled angles, indicator weights),
    axial circular standard deviation, and the Rayleigh test of uniformity (unweighted). Focal
    mechanisms whose SHmax is undefined are counted in ``undefined``.
    """
    az = indicators["shmax_azimuth_deg"].to_numpy(float)
    w = indicators["weight"].to_numpy(float)
    kinds = indicators["type"].to_numpy(object)
    out = {"total": int(len(az)), "undefined": int(np.isnan(az).sum()), "all": _stats(az, w),
           "by_type": {}}
    for t in TYPES:
        m = kinds == t
        if m.any():
            out["by_type"][t] = _stats(az[m], w[m])
    return out
