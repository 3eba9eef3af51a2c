"""Earthquake focal mechanisms: nodal planes, P/T/B axes, SHmax and faulting class.

Pure numpy, vectorised over any array shape (one code path for a mechanism and a catalogue).

Conventions
-----------
* Nodal planes follow Aki & Richards (1980/2002, "Quantitative Seismology", box 4.3 and eq. 4.88,
  from memory): ``strike_deg`` clockwise from north with the plane dipping to the right of the
  strike direction, ``dip_deg`` in [0, 90], ``rake_deg`` in (-180, 180] measured in the fault plane
  from the strike direction to the slip of the hanging wall relative to the footwall.
* Vectors are Cartesian in the local (north, east, down) frame, last axis of length 3.
* Axes are reported as lines: ``trend`` (azimuth of the downward-pointing end, degrees clockwise
  from north, in [0, 360); horizontal axes in [0, 180)) and ``plunge`` in [0, 90] degrees below the
  horizontal.
* P (pressure), T (tension) and B (null) axes of a double couple: ``T = (n + d)/sqrt 2``,
  ``P = (n - d)/sqrt 2``, ``B = n x d`` for fault normal ``n`` and slip vector ``d`` (common practice;
  e.g. Stein & Wysession 2003, section 4.2, from memory).

SHmax from principal stress axes follows Lund & Townend (2007, Geophys. J. Int. 170, 1328-1335,
from memory): the azimuth that maximises the horizontal normal stress of the tensor with principal
directions (s1, s2, s3) and shape ratio. We parameterise the shape by
``phi = (sigma2 - sigma3) / (sigma1 - sigma3)`` (the same ``phi`` as :func:`stressmap.geo.tensor.shape_ratio`);
Lund & Townend's ``R = (sigma1 - sigma2) / (sigma1 - sigma3) = 1 - phi``. The horizontal normal stress
in the direction ``u`` is, up to a constant and a positive factor, ``(s1.u)^2 + phi (s2.u)^2``, so

    tan 2 alpha = 2 (s1N s1E + phi s2N s2E) / (s1N^2 - s1E^2 + phi (s2N^2 - s2E^2))

and the quadrant of ``2 alpha`` chosen by ``arctan2`` is the maximum (not the minimum). SHmax is
undefined (NaN) where the horizontal stress is isotropic: s1 vertical with phi = 0, s3 vertical with
phi = 1, and -- the case that catches people out -- s2 horizontal with s1 plunging at ``theta`` where
``tan^2 theta = (1 - phi) / phi`` (for phi = 0.5, P and T both plunging 45 degrees, as for pure
dip-slip on a vertical plane).

Faulting class from axis plunges after Frohlich (1992, Phys. Earth Planet. Inter. 75, 193-198, from
memory): B plunge > 60 -> "strike-slip", T plunge > 50 -> "reverse" (Frohlich's "thrust"), P plunge > 60 ->
"normal", otherwise "oblique" (Frohlich's "odd"). The three conditions are mutually exclusive because
the squared sines of the three plunges sum to one.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "MECHANISM_CLASSES",
    "fault_vectors",
    "plane_from_vectors",
    "auxiliary_plane",
    "trend_plunge",
    "vector_from_trend_plunge",
    "principal_axes",
    "planes_from_axes",
    "shmax_from_axes",
    "shmax_span_deg",
    "frohlich_class",
    "describe_mechanisms",
]

#: Faulting classes in full words (Frohlich 1992 thresholds; "oblique" is Frohlich's "odd").
MECHANISM_CLASSES = ("normal", "strike-slip", "reverse", "oblique")

_EPS = 1e-12


def _f(x):
    return np.asarray(x, dtype=float)


def fault_vectors(strike_deg, dip_deg, rake_deg):
    """Unit fault normal ``n`` (pointing up, into the hanging wall) and slip vector ``d``.

    Aki & Richards eq. 4.88 (from memory), in the (north, east, down) frame::

        n = (-sin(dip) sin(strike), sin(dip) cos(strike), -cos(dip))
        d = (cos(rake) cos(strike) + cos(dip) sin(rake) sin(strike),
             cos(rake) sin(strike) - cos(dip) sin(rake) cos(strike),
             -sin(rake) sin(dip))

    Returns
    -------
    n, d : ndarray, shape (..., 3)

    Examples
    --------
    >>> n, d = fault_vectors(0.0, 90.0, 0.0)   # vertical N-S plane, left-lateral slip north
    >>> np.round(n, 12).tolist(), np.round(d, 12).tolist()
    ([0.0, 1.0, 0.0], [1.0, 0.0, 0.0])
    >>> n, d = fault_vectors(90.0, 45.0, 90.0)  # pure thrust dipping south: hanging wall moves up-dip
    >>> np.round(d, 6).tolist()
    [0.707107, 0.0, -0.707107]
    """
    phi, delta, lam = (np.radians(v) for v in np.broadcast_arrays(_f(strike_deg), _f(dip_deg), _f(rake_deg)))
    sp, cp = np.sin(phi), np.cos(phi)
    sd, cd = np.sin(delta), np.cos(delta)
    sl, cl = np.sin(lam), np.cos(lam)
    n = np.stack([-sd * sp, sd * cp, -cd], axis=-1)
    d = np.stack([cl * cp + cd * sl * sp, cl * sp - cd * sl * cp, -sl * sd], axis=-1)
    return n, d


def plane_from_vectors(normal, slip):
    """Strike, dip and rake (degrees) of the plane with unit ``normal`` and ``slip`` vectors.

    The pair (n, d) and (-n, -d) describe the same fault; the normal is turned upward first. Rake is
    ``atan2(d.h, d.s)`` with ``s`` the strike direction and ``h`` the up-dip direction in the plane,
    which stays defined for horizontal planes (any strike is then valid; the one returned is
    consistent with the rake).

    Returns
    -------
    strike_deg in [0, 360), dip_deg in [0, 90], rake_deg in [-180, 180]

    Examples
    --------
    >>> n, d = fault_vectors(30.0, 60.0, -120.0)
    >>> [round(float(v), 9) for v in plane_from_vectors(n, d)]
    [30.0, 60.0, -120.0]
    """
    n = _f(normal)
    d = _f(slip)
    n, d = np.broadcast_arrays(n, d)
    flip = n[..., 2] > 0
    sign = np.where(flip, -1.0, 1.0)[..., None]
    n = n * sign
    d = d * sign
    dip = np.degrees(np.arctan2(np.hypot(n[..., 0], n[..., 1]), -n[..., 2]))  # exact near 0 and 90
    # Horizontal plane: the strike is free; take it from the slip so the rake is 0.
    horiz = np.hypot(n[..., 0], n[..., 1]) < _EPS
    phi = np.where(horiz, np.arctan2(d[..., 1], d[..., 0]), np.arctan2(-n[..., 0], n[..., 1]))
    sp, cp = np.sin(phi), np.cos(phi)
    cd = np.cos(np.radians(dip))
    sd = np.sin(np.radians(dip))
    d_s = d[..., 0] * cp + d[..., 1] * sp
    d_h = d[..., 0] * cd * sp - d[..., 1] * cd * cp - d[..., 2] * sd
    rake = np.degrees(np.arctan2(d_h, d_s))
    strike = np.mod(np.degrees(phi), 360.0)
    strike = np.where(strike >= 360.0 - 1e-9, 0.0, strike) + 0.0
    return strike, dip, rake


def auxiliary_plane(strike_deg, dip_deg, rake_deg):
    """The auxiliary nodal plane (strike, dip, rake in degrees): normal and slip exchanged.

    Examples
    --------
    >>> [round(float(v), 6) for v in auxiliary_plane(0.0, 90.0, 0.0)]   # vertical strike-slip
    [270.0, 90.0, 180.0]
    >>> [round(float(v), 6) for v in auxiliary_plane(0.0, 45.0, 90.0)]  # pure thrust: mirror plane
    [180.0, 45.0, 90.0]
    """
    n, d = fault_vectors(strike_deg, dip_deg, rake_deg)
    return plane_from_vectors(d, n)


def trend_plunge(v):
    """Trend and plunge (degrees) of the line along ``v`` (north, east, down).

    Examples
    --------
    >>> [float(x) for x in trend_plunge([0.0, 0.0, 1.0])]
    [0.0, 90.0]
    >>> [round(float(x), 9) for x in trend_plunge([-1.0, 0.0, -1.0])]   # upward end given
    [0.0, 45.0]
    >>> [round(float(x), 9) for x in trend_plunge([0.0, -1.0, 0.0])]    # horizontal: [0, 180)
    [90.0, 0.0]
    """
    v = _f(v)
    v = v / np.linalg.norm(v, axis=-1, keepdims=True)
    up = v[..., 2] < 0
    v = v * np.where(up, -1.0, 1.0)[..., None]
    plunge = np.degrees(np.arctan2(v[..., 2], np.hypot(v[..., 0], v[..., 1])))
    trend = np.mod(np.degrees(np.arctan2(v[..., 1], v[..., 0])), 360.0)
    horizontal = np.abs(v[..., 2]) < 1e-12
    trend = np.where(horizontal, np.mod(trend, 180.0), trend)
    vertical = np.hypot(v[..., 0], v[..., 1]) < 1e-12
    trend = np.where(vertical | (trend >= 360.0 - 1e-9), 0.0, trend) + 0.0
    return trend, plunge


def vector_from_trend_plunge(trend_deg, plunge_deg):
    """Unit vector (north, east, down) of a line with the given trend and plunge.

    Examples
    --------
    >>> np.round(vector_from_trend_plunge(90.0, 0.0), 12).tolist()
    [0.0, 1.0, 0.0]
    """
    t, p = (np.radians(x) for x in np.broadcast_arrays(_f(trend_deg), _f(plunge_deg)))
    return np.stack([np.cos(p) * np.cos(t), np.cos(p) * np.sin(t), np.sin(p)], axis=-1)


def principal_axes(strike_deg, dip_deg, rake_deg):
    """P, T and B unit vectors (north, east, down) of double-couple mechanisms.

    Returns
    -------
    p, t, b : ndarray, shape (..., 3)

    Examples
    --------
    >>> p, t, b = principal_axes(0.0, 90.0, 0.0)   # left-lateral on a N-S plane: P trends NW-SE
    >>> round(float(trend_plunge(p)[0]), 6), round(float(trend_plunge(t)[0]), 6)
    (135.0, 45.0)
    """
    n, d = fault_vectors(strike_deg, dip_deg, rake_deg)
    t = (n + d) / np.sqrt(2.0)
    p = (n - d) / np.sqrt(2.0)
    b = np.cross(n, d)
    return p, t, b


def planes_from_axes(p, t):
    """Both nodal planes of the double couple with P axis ``p`` and T axis ``t`` (orthogonal).

    Returns
    -------
    (strike1, dip1, rake1), (strike2, dip2, rake2) : tuples of ndarrays, degrees

    Examples
    --------
    >>> p, t, _ = principal_axes(40.0, 70.0, 20.0)
    >>> [round(float(v), 6) for v in planes_from_axes(p, t)[0]]
    [40.0, 70.0, 20.0]
    """
    p = _f(p)
    t = _f(t)
    n = (t + p) / np.sqrt(2.0)
    d = (t - p) / np.sqrt(2.0)
    return plane_from_vectors(n, d), plane_from_vectors(d, n)


def shmax_from_axes(s1, s2, shape_ratio=0.5, tol=1e-9):
    """SHmax azimuth (degrees in [0, 180)) from principal stress directions (Lund & Townend 2007).

    Parameters
    ----------
    s1, s2 : array_like, shape (..., 3)
        Unit vectors (north, east, down) of the most and the intermediate compressive principal
        stress (for a focal mechanism: the P and B axes). s3 is implied (orthogonal to both).
    shape_ratio : array_like
        ``phi = (sigma2 - sigma3) / (sigma1 - sigma3)`` in [0, 1] (Lund & Townend's ``R = 1 - phi``).
    tol : float
        Horizontal anisotropy (relative to sigma1 - sigma3) below which SHmax is undefined.

    Returns
    -------
    ndarray
        Azimuth in [0, 180); NaN where the horizontal stress is isotropic (degenerate cases in the
        module docstring) or the input is not finite.

    Examples
    --------
    >>> float(shmax_from_axes([1, 0, 0], [0, 1, 0]))                      # s1 horizontal north
    0.0
    >>> float(shmax_from_axes([0, 0, 1], [0, 1, 0], 0.3))                 # s1 vertical: SHmax // s2
    90.0
    >>> bool(np.isnan(shmax_from_axes([0, 0, 1], [0, 1, 0], 0.0)))        # uniaxial vertical
    True
    >>> s = np.sqrt(0.5)
    >>> bool(np.isnan(shmax_from_axes([s, 0, s], [0, 1, 0], 0.5)))        # P, T both at 45 deg
    True
    >>> float(shmax_from_axes([s, 0, s], [0, 1, 0], 0.2))                 # ... defined for phi != 0.5
    0.0
    """
    s1 = _f(s1)
    s2 = _f(s2)
    phi = _f(shape_ratio)
    c = (s1[..., 0] ** 2 - s1[..., 1] ** 2) + phi * (s2[..., 0] ** 2 - s2[..., 1] ** 2)
    s = 2.0 * (s1[..., 0] * s1[..., 1] + phi * s2[..., 0] * s2[..., 1])
    amp = np.hypot(c, s)
    az = np.mod(np.degrees(0.5 * np.arctan2(s, c)), 180.0)
    az = np.where(az >= 180.0 - 1e-9, 0.0, az) + 0.0
    return np.where(amp > tol, az, np.nan)


def shmax_span_deg(s1, s2):
    """Largest axial change of SHmax when the shape ratio runs over [0, 1] (degrees, in [0, 90]).

    Lund & Townend (2007) recommend reporting this range for focal mechanisms whose shape ratio is
    unknown. The doubled-angle vector whose direction gives SHmax is linear in the shape ratio,
    ``v(phi) = a + phi b``, so its direction turns monotonically along the segment and the extremes
    are at phi = 0 and phi = 1 (a segment through the origin flips SHmax by 90 degrees, which the
    end points show). Ends at which SHmax is undefined are skipped; NaN where it is undefined at
    phi = 0.5.

    Examples
    --------
    >>> float(shmax_span_deg([1, 0, 0], [0, 1, 0]))   # s1 and s2 horizontal: never changes
    0.0
    >>> s = np.sqrt(0.5)
    >>> float(shmax_span_deg([s, 0, s], [0, 1, 0]))   # P, T at 45 degrees: anything goes
    nan
    >>> round(float(shmax_span_deg([0.9, 0, np.sqrt(0.19)], [0, 1, 0])), 6)   # flips by 90
    90.0
    """
    ref = shmax_from_axes(s1, s2, 0.5)
    ends = [shmax_from_axes(s1, s2, phi) for phi in (0.0, 1.0)]
    diffs = [np.where(np.isnan(e), 0.0, np.abs(np.mod(e - ref + 90.0, 180.0) - 90.0)) for e in ends]
    return np.where(np.isnan(ref), np.nan, np.maximum(*diffs))


def frohlich_class(p_plunge_deg, t_plunge_deg, b_plunge_deg):
    """Faulting class in full words from axis plunges (Frohlich 1992 thresholds).

    Examples
    --------
    >>> frohlich_class([80.0, 10.0, 5.0, 30.0], [5.0, 70.0, 10.0, 40.0], [8.0, 18.0, 78.0, 35.0]).tolist()
    ['normal', 'reverse', 'strike-slip', 'oblique']
    """
    p, t, b = np.broadcast_arrays(_f(p_plunge_deg), _f(t_plunge_deg), _f(b_plunge_deg))
    out = np.where(b > 60.0, "strike-slip", np.where(t > 50.0, "reverse", np.where(p > 60.0, "normal", "oblique")))
    bad = ~(np.isfinite(p) & np.isfinite(t) & np.isfinite(b))
    return np.where(bad, "", out).astype(object)


def describe_mechanisms(strike_deg, dip_deg, rake_deg, shape_ratio=0.5) -> dict:
    """Every derived quantity of a set of focal mechanisms, as a dict of arrays.

    Keys: ``aux_strike_deg``, ``aux_dip_deg``, ``aux_rake_deg``, ``p_trend_deg``, ``p_plunge_deg``,
    ``t_trend_deg``, ``t_plunge_deg``, ``b_trend_deg``, ``b_plunge_deg``, ``mechanism_class``,
    ``shmax_azimuth_deg`` (Lund & Townend with the P, B, T axes taken as sigma1, sigma2, sigma3 and
    the given shape ratio) and ``shmax_span_deg`` (its range over all shape ratios).

    Examples
    --------
    >>> out = describe_mechanisms([0.0], [90.0], [0.0])
    >>> out["mechanism_class"].tolist(), [round(float(v), 6) for v in out["shmax_azimuth_deg"]]
    (['strike-slip'], [135.0])
    """
    p, t, b = principal_axes(strike_deg, dip_deg, rake_deg)
    aux = auxiliary_plane(strike_deg, dip_deg, rake_deg)
    (pt, pp), (tt, tp), (bt, bp) = trend_plunge(p), trend_plunge(t), trend_plunge(b)
    return {
        "aux_strike_deg": aux[0],
        "aux_dip_deg": aux[1],
        "aux_rake_deg": aux[2],
        "p_trend_deg": pt,
        "p_plunge_deg": pp,
        "t_trend_deg": tt,
        "t_plunge_deg": tp,
        "b_trend_deg": bt,
        "b_plunge_deg": bp,
        "mechanism_class": frohlich_class(pp, tp, bp),
        "shmax_azimuth_deg": shmax_from_axes(p, b, shape_ratio),
        "shmax_span_deg": shmax_span_deg(p, b),
    }
