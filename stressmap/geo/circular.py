"""Axial (orientation) statistics: angles defined modulo 180 degrees.

Axial data are handled by doubling the angles, applying ordinary circular statistics and halving
the result (Mardia & Jupp 2000, "Directional Statistics", section 9.3.2 -- from memory). All
functions are vectorised and reduce along ``axis``; NaN entries are ignored (they get zero weight).
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr

__all__ = [
    "axial_difference_deg",
    "axial_resultant",
    "axial_mean_deg",
    "axial_std_deg",
    "rayleigh_axial",
    "axial_from_sums",
    "std_from_resultant_deg",
    "doubled_components",
    "RANDOM_MEAN_ABS_MISFIT_DEG",
    "random_misfit_significance",
]

#: Expected absolute axial difference between two independent, uniformly random orientations:
#: |difference| is uniform on [0, 90], so its mean is 45 degrees and its standard deviation
#: 90/sqrt(12) degrees (analytic).
RANDOM_MEAN_ABS_MISFIT_DEG = 45.0


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
    if np.any(w < 0):
        raise ValueError("weights must not be negative")
    ok = np.isfinite(theta) & np.isfinite(w)
    return np.where(ok, theta, 0.0), np.where(ok, w, 0.0)


def doubled_components(theta_deg, weights=None):
    """Weighted doubled-angle components ``(w cos 2theta, w sin 2theta, w)``, NaN entries zeroed.

    Sums of these (over any grouping, e.g. with ``np.bincount``) go into :func:`axial_from_sums`.

    Examples
    --------
    >>> [np.round(v, 12).tolist() for v in doubled_components([45.0, np.nan], [2.0, 1.0])]
    [[0.0, 0.0], [2.0, 0.0], [2.0, 0.0]]
    """
    theta, w = _weights(theta_deg, weights)
    two = np.radians(2.0 * theta)
    return w * np.cos(two), w * np.sin(two), w


def axial_from_sums(c, s, n):
    """Mean orientation (degrees in [0, 180)) and mean resultant length from summed components.

    Examples
    --------
    >>> m, r = axial_from_sums(np.array([0.0, 1.0]), np.array([2.0, 0.0]), np.array([2.0, 0.0]))
    >>> m.tolist(), r.tolist()
    ([45.0, nan], [1.0, nan])
    """
    c, s, n = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (c, s, n)))
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.hypot(c, s) / np.where(n > 0, n, np.nan)
    mean = np.mod(np.degrees(0.5 * np.arctan2(s, c)), 180.0)
    mean = np.where(mean >= 180.0 - 1e-12, 0.0, mean) + 0.0
    degenerate = ~(n > 0) | ~(r > 1e-12)
    return np.where(degenerate, np.nan, mean), np.where(n > 0, np.clip(r, 0.0, 1.0), np.nan)


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
    wc, ws, w = doubled_components(theta_deg, weights)
    c = np.sum(wc, axis=axis)
    s = np.sum(ws, axis=axis)
    n = np.sum(w, axis=axis)
    mean, r = axial_from_sums(c, s, n)
    return mean, r, n


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

    Equals scipy.stats.circstd of the doubled angles, halved; infinite when the resultant vanishes
    (below 1e-12, where the mean is also undefined), NaN without data.

    Examples
    --------
    >>> float(axial_std_deg([30.0, 30.0, 210.0]))
    0.0
    >>> float(axial_std_deg([0.0, 90.0]))
    inf
    """
    _, r, _ = axial_resultant(theta_deg, weights, axis)
    return std_from_resultant_deg(r)


def std_from_resultant_deg(r):
    """Axial circular standard deviation (degrees) from the doubled-angle resultant length.

    Examples
    --------
    >>> round(float(std_from_resultant_deg(np.exp(-0.5))), 9)   # sqrt(-2 ln R) = 1 rad, halved
    28.647889757
    """
    r = np.asarray(r, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.degrees(0.5 * np.sqrt(-2.0 * np.log(np.clip(r, 0.0, 1.0))))
    return np.where(r > 1e-12, out, np.where(np.isnan(r), np.nan, np.inf)) + 0.0  # no -0.0


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


def random_misfit_significance(abs_misfit_deg, weights=None):
    """How unlikely a mean absolute misfit this small is if the orientations were random.

    Under the null hypothesis (observed and predicted orientations unrelated) each absolute misfit is
    uniform on [0, 90] degrees: mean 45, standard deviation ``90/sqrt(12)``. For a weighted mean the
    effective number of values is ``(sum w)^2 / sum w^2``, and the mean is close to normal (central
    limit theorem; for equal weights it is an Irwin-Hall sum, rescaled).

    Returns
    -------
    mean_abs_deg, z, p_value : float
        Weighted mean absolute misfit, its standard score below 45 degrees, and the one-sided
        probability of a mean at least this small by chance (NaN without data).

    Examples
    --------
    >>> m, z, p = random_misfit_significance(np.full(25, 45.0 - 90.0 / np.sqrt(12.0) / 5.0))
    >>> round(float(z), 9), round(float(p), 4)    # one standard error below 45 -> p = 0.1587
    (1.0, 0.1587)
    """

    a = np.abs(np.asarray(abs_misfit_deg, dtype=float))
    w = np.ones_like(a) if weights is None else np.broadcast_to(np.asarray(weights, float), a.shape)
    ok = np.isfinite(a) & np.isfinite(w) & (w > 0)
    a, w = a[ok], w[ok]
    if a.size == 0:
        return float("nan"), float("nan"), float("nan")
    mean = float(np.sum(w * a) / np.sum(w))
    n_eff = float(np.sum(w) ** 2 / np.sum(w**2))
    se = 90.0 / np.sqrt(12.0) / np.sqrt(n_eff)
    z = (RANDOM_MEAN_ABS_MISFIT_DEG - mean) / se
    return mean, float(z), float(ndtr(-z))
