"""GeoJSON (RFC 7946) building blocks shared by every GeoJSON stressmap writes.

Precision (documented in README): coordinates are rounded to :data:`COORD_DECIMALS` = 6 decimal
places of a degree (about 0.1 m on the ground, far below anything a plate-scale model resolves);
other floating-point properties to :data:`SIGNIFICANT_DIGITS` = 7 significant digits. Non-finite
numbers become ``null``. Every FeatureCollection has a ``name`` (GDAL and desktop GIS use it as the
layer name) and the output's metadata (caution, model id, build time, ...) as top-level members.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["COORD_DECIMALS", "SIGNIFICANT_DIGITS", "round_coord", "round_number", "round_array",
           "feature_collection", "plain"]

COORD_DECIMALS = 6
SIGNIFICANT_DIGITS = 7


def round_coord(values):
    """Coordinates (degrees) rounded to :data:`COORD_DECIMALS` places; arrays or scalars.

    Examples
    --------
    >>> round_coord(12.123456789), round_coord(np.array([-0.0000004, 179.9999996])).tolist()
    (12.123457, [-0.0, 180.0])
    """
    out = np.round(np.asarray(values, dtype=float), COORD_DECIMALS)
    return float(out) if out.ndim == 0 else out


def round_array(values: np.ndarray, digits: int = SIGNIFICANT_DIGITS) -> np.ndarray:
    """Floats rounded to ``digits`` significant digits (NaN/inf kept), vectorised.

    Examples
    --------
    >>> round_array(np.array([123.456789123, 0.000123456789, 0.0, np.nan, 1.5e12])).tolist()
    [123.4568, 0.0001234568, 0.0, nan, 1500000000000.0]
    """
    x = np.asarray(values, dtype=float)
    finite = np.isfinite(x) & (x != 0)
    mag = np.zeros(x.shape, dtype=int)
    mag[finite] = np.floor(np.log10(np.abs(x[finite]))).astype(int)
    decimals = digits - 1 - mag
    out = x.copy()
    for d in np.unique(decimals[finite]):  # one pass per decade present, not per value
        sel = finite & (decimals == d)
        out[sel] = np.round(x[sel], int(d))
    return out


def round_number(value):
    """One property value with floats rounded as :func:`round_array` (None for NaN/inf).

    Examples
    --------
    >>> round_number(2.718281828459045), round_number(float("nan")), round_number("x"), round_number(True)
    (2.718282, None, 'x', True)
    """
    value = plain(value)
    if isinstance(value, float):
        return float(round_array(np.array([value]))[0])
    return value


def plain(value):
    """numpy scalar -> Python scalar; NaN/inf -> None (JSON has no NaN); bytes -> text."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    return value


def feature_collection(features: list, name: str, meta: dict | None = None) -> dict:
    """A FeatureCollection with ``name`` and ``meta`` members before ``features``.

    Examples
    --------
    >>> feature_collection([], "wells", {"caution": "c"})
    {'type': 'FeatureCollection', 'name': 'wells', 'caution': 'c', 'features': []}
    """
    out: dict = {"type": "FeatureCollection", "name": name}
    for k, v in (meta or {}).items():
        if k not in ("type", "features", "name"):
            out[k] = plain(v)
    out["features"] = features
    return out
