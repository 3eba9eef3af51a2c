"""Horizontal stress tensors: principal values, SHmax azimuth, Anderson regime, shape ratio.

Pure numpy, vectorised over any array shape; one code path for a point and a million points.

Inputs are the horizontal components of the *tectonic* stress in the local (east, north) frame,
**compression positive**, in any consistent unit (outputs carry the same unit): ``s_ee`` (east-east),
``s_nn`` (north-north) and ``s_en`` (east-north). The vertical tectonic stress is zero by
construction (README, Conventions), so the third principal stress is 0 and the regime follows Anderson:
both horizontal principal stresses compressive -> reverse; one compressive, one tensile ->
strike-slip; both tensile -> normal.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "REGIMES",
    "horizontal_principal",
    "shmax_azimuth_deg",
    "regime",
    "regime_code",
    "shape_ratio",
    "regime_index",
    "max_shear",
    "describe",
    "components_from_principal",
]

#: Regime names in order of their code (0, 1, 2), the order of Simpson's A-phi scale.
REGIMES = ("normal", "strike-slip", "reverse")


def _arrays(*xs):
    return np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in xs))


def horizontal_principal(s_ee, s_nn, s_en):
    """Principal horizontal stresses (compression positive).

    Returns
    -------
    s_hmax, s_hmin : ndarray
        The more and the less compressive horizontal principal stress (``s_hmax >= s_hmin``).

    Examples
    --------
    >>> [float(v) for v in horizontal_principal(10.0, 4.0, 0.0)]
    [10.0, 4.0]
    >>> [round(float(v), 6) for v in horizontal_principal(0.0, 0.0, 3.0)]
    [3.0, -3.0]
    """
    s_ee, s_nn, s_en = _arrays(s_ee, s_nn, s_en)
    mean = 0.5 * (s_ee + s_nn)
    radius = np.hypot(0.5 * (s_ee - s_nn), s_en)
    return mean + radius, mean - radius


def shmax_azimuth_deg(s_ee, s_nn, s_en):
    """Azimuth of SHmax, degrees clockwise from north in [0, 180).

    The normal stress on a vertical plane whose normal has azimuth A is
    ``mean + (s_nn - s_ee)/2 cos 2A + s_en sin 2A``; SHmax is its maximiser. Isotropic states have
    no SHmax direction and give NaN.

    Examples
    --------
    >>> float(shmax_azimuth_deg(1.0, 5.0, 0.0))   # most compressive north-south
    0.0
    >>> float(shmax_azimuth_deg(5.0, 1.0, 0.0))   # east-west
    90.0
    >>> float(shmax_azimuth_deg(0.0, 0.0, 1.0))   # shear only: NE-SW
    45.0
    >>> float(shmax_azimuth_deg(0.0, 0.0, -1.0))  # wraps into [0, 180)
    135.0
    >>> bool(np.isnan(shmax_azimuth_deg(2.0, 2.0, 0.0)))
    True
    """
    s_ee, s_nn, s_en = _arrays(s_ee, s_nn, s_en)
    two_a = np.arctan2(2.0 * s_en, s_nn - s_ee)
    az = np.mod(np.degrees(0.5 * two_a), 180.0)
    # Round-off can give 180 - tiny after mod; fold it back.
    az = np.where(az >= 180.0 - 1e-12, 0.0, az)
    scale = np.maximum(np.abs(s_ee) + np.abs(s_nn) + np.abs(s_en), np.finfo(float).tiny)
    isotropic = np.hypot(0.5 * (s_ee - s_nn), s_en) <= 1e-12 * scale
    return np.where(isotropic | ~np.isfinite(two_a), np.nan, az)


def regime_code(s_hmax, s_hmin):
    """Anderson regime as an integer code: 0 normal, 1 strike-slip, 2 reverse, -1 undefined.

    Examples
    --------
    >>> regime_code([5.0, 5.0, -1.0, np.nan], [2.0, -2.0, -3.0, 0.0]).tolist()
    [2, 1, 0, -1]
    """
    s_hmax, s_hmin = _arrays(s_hmax, s_hmin)
    code = np.where(s_hmin > 0, 2, np.where(s_hmax > 0, 1, 0))
    undefined = ~(np.isfinite(s_hmax) & np.isfinite(s_hmin)) | ((s_hmax == 0) & (s_hmin == 0))
    return np.where(undefined, -1, code).astype(np.int8)


def regime(s_hmax, s_hmin):
    """Anderson regime names ("normal", "strike-slip", "reverse"; "" where undefined).

    Examples
    --------
    >>> regime([5.0, 5.0, -1.0], [2.0, -2.0, -3.0]).tolist()
    ['reverse', 'strike-slip', 'normal']
    """
    code = regime_code(s_hmax, s_hmin)
    names = np.array(REGIMES + ("",))
    return names[np.where(code < 0, 3, code)]


def _principal3(s_hmax, s_hmin):
    """Sorted principal stresses sigma1 >= sigma2 >= sigma3 of (s_hmax, s_hmin, 0)."""
    s_hmax, s_hmin = _arrays(s_hmax, s_hmin)
    zero = np.zeros_like(s_hmax)
    stack = np.sort(np.stack([s_hmax, s_hmin, zero]), axis=0)
    return stack[2], stack[1], stack[0]


def shape_ratio(s_hmax, s_hmin):
    """Stress shape ratio phi = (sigma2 - sigma3) / (sigma1 - sigma3) in [0, 1].

    The principal stresses are (s_hmax, s_hmin, vertical = 0). NaN where sigma1 == sigma3.

    Examples
    --------
    >>> float(shape_ratio(10.0, 5.0))     # reverse: sigma3 = vertical = 0
    0.5
    >>> float(shape_ratio(10.0, -10.0))   # strike-slip, sigma2 = 0 midway
    0.5
    >>> float(shape_ratio(-2.0, -8.0))    # normal: sigma1 = 0
    0.75
    """
    s1, s2, s3 = _principal3(s_hmax, s_hmin)
    span = s1 - s3
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(span > 0, (s2 - s3) / np.where(span > 0, span, 1.0), np.nan)


def regime_index(s_hmax, s_hmin):
    """Simpson's (1997) A-phi regime index in [0, 3].

    ``A_phi = (n + 0.5) + (-1)**n (phi - 0.5)`` with n = 0, 1, 2 for normal, strike-slip, reverse:
    0 radial extension, 1 strike-slip, 3 radial compression (from memory of Simpson 1997,
    JGR 102, 17909).

    Examples
    --------
    >>> float(regime_index(-1.0, -1.0))   # radial extension (sigma2 = sigma3)
    0.0
    >>> float(regime_index(5.0, -5.0))    # pure strike-slip, phi = 0.5
    1.5
    >>> float(regime_index(4.0, 4.0))     # radial compression
    3.0
    """
    n = regime_code(s_hmax, s_hmin).astype(float)
    phi = shape_ratio(s_hmax, s_hmin)
    out = (n + 0.5) + np.where(n == 1, -1.0, 1.0) * (phi - 0.5)
    return np.where(n < 0, np.nan, out)


def max_shear(s_hmax, s_hmin):
    """Maximum shear stress (sigma1 - sigma3) / 2 over all three principal directions.

    Examples
    --------
    >>> float(max_shear(10.0, 4.0))
    5.0
    >>> float(max_shear(6.0, -2.0))
    4.0
    """
    s1, _, s3 = _principal3(s_hmax, s_hmin)
    return 0.5 * (s1 - s3)


def components_from_principal(s_hmax, s_hmin, azimuth_deg):
    """(s_ee, s_nn, s_en) of a horizontal tensor with given principal values and SHmax azimuth.

    Examples
    --------
    >>> [round(float(v), 9) for v in components_from_principal(3.0, 1.0, 90.0)]
    [3.0, 1.0, 0.0]
    """
    s_hmax, s_hmin, az = _arrays(s_hmax, s_hmin, azimuth_deg)
    a = np.radians(az)
    e, n = np.sin(a), np.cos(a)  # unit vector along SHmax
    s_ee = s_hmax * e * e + s_hmin * n * n
    s_nn = s_hmax * n * n + s_hmin * e * e
    s_en = (s_hmax - s_hmin) * e * n
    return s_ee, s_nn, s_en


def describe(s_ee, s_nn, s_en) -> dict:
    """Every derived quantity of a horizontal tensor field, as a dict of arrays.

    Keys: ``s_hmax``, ``s_hmin``, ``shmax_azimuth_deg``, ``regime`` (names), ``regime_code``,
    ``shape_ratio``, ``regime_index`` (A-phi), ``max_shear``. Stress keys keep the input unit.
    """
    s_hmax, s_hmin = horizontal_principal(s_ee, s_nn, s_en)
    return {
        "s_hmax": s_hmax,
        "s_hmin": s_hmin,
        "shmax_azimuth_deg": shmax_azimuth_deg(s_ee, s_nn, s_en),
        "regime": regime(s_hmax, s_hmin),
        "regime_code": regime_code(s_hmax, s_hmin),
        "shape_ratio": shape_ratio(s_hmax, s_hmin),
        "regime_index": regime_index(s_hmax, s_hmin),
        "max_shear": max_shear(s_hmax, s_hmin),
    }
