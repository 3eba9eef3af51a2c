"""Axial (orientation) statistics: angles defined modulo 180 degrees.

Axial data are handled by doubling the angles, applying ordinary circular statistics and halving
the result (Mardia & Jupp 2000, "Directional Statistics", section 9.3.2 -- from memory). All
functions are vectorised and reduce along ``axis``; NaN entries are ignored (they get zero weight).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "axial_difference_deg",
    "axial_resultant",
    "axial_mean_deg",
    "axial_std_deg",
    "rayleigh_axial",
]


def axial_difference_deg(a_deg, b_deg):
    """Wrapped difference ``a - b`` of two orientations, in [-90, 90).

    Examples
    --------
    >>> float(axial_difference_deg(170.0, 10.0))
    -20.0
    >>> float(axial_difference_deg(10.0, 170.0))
    20.0
    >>> float(axial_difference_deg(90.0, 0.0))
    -90.0
    """
    d = np.asarray(a_deg, dtype=float) - np.asarray(b_deg, dtype=float)
    return np.mod(d + 90.0, 180.0) - 90.0


def _weights(theta, weights):
    theta = np.asarray(theta, dtype=float)
    w = np.ones_like(theta) if weights is None else np.broadcast_to(
        np.asarray(weights, dtype=float), theta.shape
    )
    ok = np.isfinite(theta) & np.isfinite(w)
    return np.where(ok, theta, 0.0), np.where(ok, w, 0.0)


def axial_resultant(theta_deg, weights=None, axis=-1):
    """Weighted mean resultant of doubled angles.

    Returns
    -------
    mean_deg : ndarray
        Mean orientation in [0, 180) (NaN when the resultant vanishes or no data).
    r : ndarray
        Mean resultant length of the doubled angles in [0, 1].
    n_eff : ndarray
        Sum of weights used.

    Examples
    --------
    >>> m, r, n = axial_resultant([170.0, 10.0])
    >>> round(float(m), 9) % 180.0, round(float(r), 6), float(n)
    (0.0, 0.939693, 2.0)
    """
    theta, w = _weights(theta_deg, weights)
    two = np.radians(2.0 * theta)
    c = np.sum(w * np.cos(two), axis=axis)
    s = np.sum(w * np.sin(two), axis=axis)
    n = np.sum(w, axis=axis)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.hypot(c, s) / n
    mean = np.mod(np.degrees(0.5 * np.arctan2(s, c)), 180.0)
    degenerate = ~(n > 0) | ~(r > 1e-12)
    return np.where(degenerate, np.nan, mean), np.where(n > 0, np.clip(r, 0.0, 1.0), np.nan), n


def axial_mean_deg(theta_deg, weights=None, axis=-1):
    """Weighted mean orientation in [0, 180).

    Examples
    --------
    >>> round(float(axial_mean_deg([175.0, 5.0, 15.0])), 6)
    5.0
    >>> bool(np.isnan(axial_mean_deg([0.0, 90.0])))   # opposite axes cancel
    True
    """
    return axial_resultant(theta_deg, weights, axis)[0]


def axial_std_deg(theta_deg, weights=None, axis=-1):
    """Axial circular standard deviation, degrees: ``0.5 * sqrt(-2 ln R)`` of the doubled angles.

    Equals scipy.stats.circstd of the doubled angles, halved.

    Examples
    --------
    >>> float(axial_std_deg([30.0, 30.0, 210.0]))
    0.0
    """
    _, r, _ = axial_resultant(theta_deg, weights, axis)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.degrees(0.5 * np.sqrt(-2.0 * np.log(np.clip(r, 1e-300, 1.0))))


def rayleigh_axial(theta_deg, axis=-1):
    """Rayleigh test of uniformity on doubled angles (unweighted).

    Returns ``(z, p)`` with ``z = n R^2`` and the p-value from the series of Mardia & Jupp (2000,
    eq. 6.3.6, from memory): ``p = exp(-z) (1 + (2z - z^2)/(4n) - (24z - 132z^2 + 76z^3 - 9z^4)/(288 n^2))``,
    clipped to [0, 1].

    Examples
    --------
    >>> z, p = rayleigh_axial([10.0, 12.0, 8.0, 11.0, 9.0, 10.0])
    >>> bool(p < 0.01)
    True
    """
    theta = np.asarray(theta_deg, dtype=float)
    _, r, n = axial_resultant(theta, None, axis)
    z = n * r**2
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.exp(-z) * (
            1.0
            + (2 * z - z**2) / (4 * n)
            - (24 * z - 132 * z**2 + 76 * z**3 - 9 * z**4) / (288 * n**2)
        )
    return z, np.clip(p, 0.0, 1.0)
