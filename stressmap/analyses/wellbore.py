"""Stability of a borehole of any azimuth and inclination in a site's stress.

Pure numpy, vectorised over well orientations and positions around the hole. Conventions:

- stresses and pressures in MPa, compression positive; effective stress = total - Pp;
- geographic frame (north, east, down) "NED"; a well has an *azimuth* (degrees clockwise from
  north of its horizontal projection, pointing downhole) and an *inclination* (degrees from the
  vertical: 0 vertical, 90 horizontal);
- the borehole frame (x, y, z): z along the axis pointing downhole, x in the vertical plane of
  the axis pointing to the high side of the hole, y = z cross x horizontal. For a vertical well
  of azimuth 0 this is (north, east, down), so positions around the hole, measured by the angle
  ``theta`` from x towards y, are geographic azimuths.

Wall stresses (the generalisation of the Kirsch solution to inclined holes; Hiramatsu & Oka
1962, Fairhurst 1968; as written in Fjaer et al., "Petroleum Related Rock Mechanics", 2nd ed.,
ch. 4, and Zoback, "Reservoir Geomechanics", ch. 8 -- from memory), linear elastic, isotropic,
impermeable wall, plane strain along the axis, mud pressure ``Pw``::

    s_rr = Pw
    s_tt = sxx + syy - 2 (sxx - syy) cos 2t - 4 sxy sin 2t - Pw
    s_zz = szz - 2 nu (sxx - syy) cos 2t - 4 nu sxy sin 2t
    t_tz = 2 (syz cos t - sxz sin t)

with the far-field stress ``s`` rotated into the borehole frame. In the (theta, z) plane of the
wall the principal stresses are ``(s_zz + s_tt)/2 +- sqrt(((s_zz - s_tt)/2)^2 + t_tz^2)``.

Failure criteria (documented choices):

- shear (breakouts, collapse): Mohr-Coulomb with the Jaeger & Cook form
  ``s1' >= UCS + q s3'``, ``q = (sqrt(mu_i^2 + 1) + mu_i)^2``, on the three principal stresses
  at the wall (s_rr and the two in the (theta, z) plane);
- tensile (drilling-induced fractures, breakdown): least wall principal effective stress
  ``<= -T0`` (tensile strength, default 0: common practice, because small flaws are everywhere).

The mud-weight window of an orientation is bounded below by the larger of the pore pressure
(kick) and the collapse pressure (least ``Pw`` whose breakouts are no wider than an allowed
width, default 0: no breakout), and above by the smaller of the breakdown pressure (least ``Pw``
that opens a tensile fracture) and Shmin (lost circulation through an open fracture: common
practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from stressmap import validate
from stressmap.errors import InputError, problem

__all__ = [
    "RockStrength",
    "rock_strength",
    "borehole_rotation",
    "borehole_stress",
    "wall_stresses",
    "wall_principal",
    "shear_failure_index",
    "breakout_width_deg",
    "failure_azimuths_deg",
    "collapse_pressure_mpa",
    "collapse_pressure_by_angle",
    "breakdown_pressure_by_angle",
    "breakdown_pressure_mpa",
    "mud_window",
    "shmax_from_breakout_mpa",
    "THETA_SAMPLES",
]

#: Positions around the hole sampled over half a turn (the wall stresses repeat every 180 deg):
#: 0.5 degree steps, so breakout widths resolve to 1 degree.
THETA_SAMPLES = 360


@dataclass(frozen=True)
class RockStrength:
    """Rock strength for wall failure.

    Attributes
    ----------
    ucs_mpa : float
        Unconfined compressive strength C0, MPa (> 0).
    internal_friction : float
        Coefficient of internal friction mu_i (>= 0); 0.6 is a common default (friction angle
        31 deg; common practice).
    tensile_mpa : float
        Tensile strength T0, MPa (>= 0; default 0, common practice).
    poisson : float
        Poisson's ratio nu in [0, 0.5) for the axial wall stress (default 0.25, common practice).
    """

    ucs_mpa: float
    internal_friction: float = 0.6
    tensile_mpa: float = 0.0
    poisson: float = 0.25

    @property
    def q(self) -> float:
        """Jaeger & Cook ratio ``(sqrt(mu_i^2 + 1) + mu_i)^2``."""
        mu = self.internal_friction
        return float((np.sqrt(mu * mu + 1.0) + mu) ** 2)


def rock_strength(ucs_mpa, internal_friction=0.6, tensile_mpa=0.0, poisson=0.25,
                  *, prefix: str = "") -> RockStrength:
    """Validated :class:`RockStrength`; every bad value is one problem naming its field.

    Examples
    --------
    >>> round(float(rock_strength(50.0).q), 2)
    3.12
    >>> rock_strength(0.0)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: ucs_mpa must be > 0, got 0
    """
    problems: list = []
    values = {
        "ucs_mpa": validate.number(ucs_mpa, prefix + "ucs_mpa", problems, low=0.0,
                                   low_inclusive=False, required="rock strength"),
        "internal_friction": validate.number(internal_friction, prefix + "internal_friction",
                                             problems, low=0.0, high=5.0),
        "tensile_mpa": validate.number(tensile_mpa, prefix + "tensile_mpa", problems, low=0.0),
        "poisson": validate.number(poisson, prefix + "poisson", problems, low=0.0, high=0.5,
                                   high_inclusive=False),
    }
    validate.raise_problems(problems, None if len(problems) == 1 else
                            "rock strength is not usable")
    return RockStrength(**values)


def _orientation(azimuth_deg, inclination_deg):
    az = np.asarray(azimuth_deg, dtype=float)
    inc = np.asarray(inclination_deg, dtype=float)
    bad = ~np.isfinite(inc) | (inc < 0.0) | (inc > 90.0)
    if np.any(bad) or np.any(~np.isfinite(az)):
        field = "inclination_deg" if np.any(bad) else "azimuth_deg"
        raise InputError(f"{field} out of range",
                         [problem("inclination must be in [0, 90] degrees from the vertical and "
                                  "azimuth a finite angle", field=field)])
    return np.radians(az), np.radians(inc)


def borehole_rotation(azimuth_deg, inclination_deg):
    """Rows x, y, z of the borehole frame in NED, shape (..., 3, 3).

    Examples
    --------
    >>> borehole_rotation(0.0, 0.0).round(12).tolist()      # vertical: the NED frame itself
    [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]
    >>> borehole_rotation(90.0, 90.0)[2].round(12).tolist()  # horizontal well heading east
    [0.0, 1.0, 0.0]
    """
    a, i = _orientation(azimuth_deg, inclination_deg)
    ca, sa, ci, si = np.cos(a), np.sin(a), np.cos(i), np.sin(i)
    zero = np.zeros_like(ca * ci)
    x = np.stack(np.broadcast_arrays(ci * ca, ci * sa, -si), axis=-1)
    y = np.stack(np.broadcast_arrays(-sa + zero, ca + zero, zero), axis=-1)
    z = np.stack(np.broadcast_arrays(si * ca, si * sa, ci), axis=-1)
    return np.stack([x, y, z], axis=-2)


def borehole_stress(stress_ned, azimuth_deg, inclination_deg):
    """Far-field stress in the borehole frame, ``R S R^T``, shape (..., 3, 3)."""
    r = borehole_rotation(azimuth_deg, inclination_deg)
    s = np.asarray(stress_ned, dtype=float)
    return r @ s @ np.swapaxes(r, -1, -2)


def _theta(n: int = THETA_SAMPLES) -> np.ndarray:
    return np.arange(n) * (np.pi / n)


def wall_stresses(stress_b, pw_mpa, poisson, theta_rad):
    """Total wall stresses (s_rr, s_tt, s_zz, t_tz) at angles ``theta_rad`` around the hole.

    ``stress_b`` (..., 3, 3) broadcasts against ``pw_mpa`` (...) and then against
    ``theta_rad`` on a new last axis: results have shape (..., T).
    """
    s = np.asarray(stress_b, dtype=float)
    sxx, syy, szz = s[..., 0, 0, None], s[..., 1, 1, None], s[..., 2, 2, None]
    sxy, sxz, syz = s[..., 0, 1, None], s[..., 0, 2, None], s[..., 1, 2, None]
    pw = np.asarray(pw_mpa, dtype=float)[..., None]
    t = np.asarray(theta_rad, dtype=float)
    c2, s2 = np.cos(2 * t), np.sin(2 * t)
    dev = 2.0 * (sxx - syy) * c2 + 4.0 * sxy * s2
    s_tt = sxx + syy - dev - pw
    s_zz = szz - poisson * dev
    t_tz = 2.0 * (syz * np.cos(t) - sxz * np.sin(t))
    s_rr = np.broadcast_to(pw, s_tt.shape)
    return s_rr, s_tt, s_zz, t_tz


def wall_principal(s_tt, s_zz, t_tz):
    """Greatest and least principal stresses in the (theta, z) plane of the wall."""
    mean = 0.5 * (s_tt + s_zz)
    radius = np.sqrt((0.5 * (s_tt - s_zz)) ** 2 + t_tz * t_tz)
    return mean + radius, mean - radius


def shear_failure_index(s_rr, s_tt, s_zz, t_tz, pp_mpa, strength: RockStrength):
    """``s1' - q s3' - UCS`` at the wall (MPa): >= 0 where the wall fails in shear."""
    t_max, t_min = wall_principal(s_tt, s_zz, t_tz)
    pp = np.asarray(pp_mpa, dtype=float)[..., None]
    s1 = np.maximum(np.maximum(t_max, s_rr), t_min) - pp
    s3 = np.minimum(np.minimum(t_min, s_rr), t_max) - pp
    return s1 - strength.q * s3 - strength.ucs_mpa


def _wall_parts(stress_b, poisson, theta):
    """Mud-pressure-free parts of the wall stresses: s_tt + Pw, s_zz, t_tz, each (..., T)."""
    _, s_tt, s_zz, t_tz = wall_stresses(stress_b, 0.0, poisson, theta)
    return s_tt, s_zz, t_tz


def collapse_pressure_by_angle(stress_b, pp_mpa, strength: RockStrength, theta_rad):
    """Mud pressure (MPa) below which the wall at each angle fails in shear, shape (..., T).

    The breakout mode: the mud pressure is the least principal stress at the wall and the
    greater in-plane wall stress ``t_max(u)`` (``u = h - Pw`` the hoop stress) the greatest, so
    Mohr-Coulomb reads ``t_max(h - Pw) - Pp = UCS + q (Pw - Pp)``. The left side falls and the
    right side rises with ``Pw``: one root per angle, found in closed form by squaring
    ``sqrt(((u - z)/2)^2 + t^2) = alpha - beta u`` (a quadratic in u; the root that solves the
    unsquared equation is kept).
    """
    h, z, t = _wall_parts(stress_b, strength.poisson, theta_rad)
    pp = np.asarray(pp_mpa, dtype=float)[..., None]
    q = strength.q
    k = strength.ucs_mpa - (q - 1.0) * pp
    alpha, beta = k + q * h - 0.5 * z, q + 0.5
    a2 = beta * beta - 0.25
    b1 = 0.5 * z - 2.0 * alpha * beta
    c0 = alpha * alpha - 0.25 * z * z - t * t
    root = np.sqrt(np.maximum(b1 * b1 - 4.0 * a2 * c0, 0.0))
    best_u = best_miss = None
    for u in ((-b1 - root) / (2.0 * a2), (-b1 + root) / (2.0 * a2)):
        t_max = 0.5 * (u + z) + np.sqrt((0.5 * (u - z)) ** 2 + t * t)
        miss = np.abs(t_max - (k + q * (h - u)))
        if best_u is None:
            best_u, best_miss = u, miss
        else:
            best_u = np.where(miss < best_miss, u, best_u)
            best_miss = np.minimum(miss, best_miss)
    return h - best_u


def breakdown_pressure_by_angle(stress_b, pp_mpa, strength: RockStrength, theta_rad):
    """Mud pressure (MPa) above which a tensile fracture opens at each angle, shape (..., T).

    The least in-plane wall stress reaches ``c = Pp - T0`` where the hoop stress is
    ``u* = c + t^2 / (z - c)`` (from ``t_min(u) = c``, ``z`` the axial wall stress); 0 where the
    axial stress alone is already at the tensile limit.
    """
    h, z, t = _wall_parts(stress_b, strength.poisson, theta_rad)
    c = np.asarray(pp_mpa, dtype=float)[..., None] - strength.tensile_mpa
    above = z > c
    pw = h - (c + t * t / np.where(above, z - c, 1.0))
    return np.where(above, np.maximum(pw, 0.0), 0.0)


def breakout_width_deg(stress_b, pw_mpa, pp_mpa, strength: RockStrength, n_theta=THETA_SAMPLES):
    """Angular width of each of the two breakouts (degrees, 0..180) at mud pressure ``pw``."""
    pw_c = collapse_pressure_by_angle(stress_b, pp_mpa, strength, _theta(n_theta))
    return (pw_c > np.asarray(pw_mpa, dtype=float)[..., None]).sum(axis=-1) * (180.0 / n_theta)


def failure_azimuths_deg(stress_b, pp_mpa, strength: RockStrength, n_theta=THETA_SAMPLES):
    """Angles around the hole (degrees from the high side, in [0, 180)) where breakouts centre
    (the highest collapse pressure) and where tensile fractures open first (the lowest
    breakdown pressure); the opposite side of the hole (+180) is the same."""
    theta = _theta(n_theta)
    deg = np.degrees(theta)
    pw_c = collapse_pressure_by_angle(stress_b, pp_mpa, strength, theta)
    pw_t = breakdown_pressure_by_angle(stress_b, pp_mpa, strength, theta)
    return deg[np.argmax(pw_c, axis=-1)], deg[np.argmin(pw_t, axis=-1)]


def collapse_pressure_mpa(stress_b, pp_mpa, strength: RockStrength, max_width_deg=0.0,
                          n_theta=THETA_SAMPLES):
    """Least mud pressure (MPa, >= 0) whose breakouts are no wider than ``max_width_deg``.

    At a mud pressure ``Pw`` the wall fails at every angle whose collapse pressure exceeds
    ``Pw``; the least admissible ``Pw`` is therefore the (k+1)-th largest collapse pressure
    over the angles, with k the samples an allowed breakout may span.
    """
    pw_c = collapse_pressure_by_angle(stress_b, pp_mpa, strength, _theta(n_theta))
    allowed = int(np.floor((float(max_width_deg) + 1e-9) * n_theta / 180.0))
    allowed = min(allowed, n_theta - 1)
    kth = -np.partition(-pw_c, allowed, axis=-1)[..., allowed]
    return np.maximum(kth, 0.0)


def breakdown_pressure_mpa(stress_b, pp_mpa, strength: RockStrength, n_theta=THETA_SAMPLES):
    """Least mud pressure (MPa, >= 0) at which a tensile fracture opens somewhere on the wall."""
    return breakdown_pressure_by_angle(stress_b, pp_mpa, strength, _theta(n_theta)).min(axis=-1)


def mud_window(stress_ned, pp_mpa, shmin_mpa, azimuth_deg, inclination_deg,
               strength: RockStrength, max_breakout_width_deg=0.0, upper_bound="least"):
    """Mud-pressure window (MPa) of wells of the given orientations (broadcast together).

    Returns
    -------
    dict of arrays, each shaped like the broadcast orientations:
        ``pore_pressure_mpa``, ``collapse_mpa``, ``breakdown_mpa``, ``shmin_mpa``,
        ``lower_mpa`` = max(pore pressure, collapse), ``upper_mpa`` = min(breakdown, Shmin)
        (``upper_bound="least"``, the default) or Shmin alone (``"shmin"``: tensile wall
        fractures are accepted while they cannot propagate, common practice where they form
        even at balanced pressure),
        ``width_mpa`` = upper - lower (negative: no safe mud weight),
        ``breakout_deg``/``tensile_deg``: where breakouts and tensile fractures centre at the
        lower bound (degrees around the hole from the high side, [0, 180)).

    Examples
    --------
    >>> from stressmap.analyses.screening import principal_tensor_ned
    >>> s = principal_tensor_ned(90.0, 60.0, 70.0, 0.0)     # strike-slip, SHmax north
    >>> w = mud_window(s, 30.0, 60.0, 0.0, 0.0, rock_strength(60.0))
    >>> round(float(w["breakdown_mpa"]), 2)                   # 3 Shmin - SHmax - Pp + T0
    60.0
    >>> round(float(w["breakout_deg"]), 0)                    # breakouts face Shmin (east)
    90.0
    """
    s_b = borehole_stress(stress_ned, azimuth_deg, inclination_deg)
    pp = np.broadcast_to(np.asarray(pp_mpa, dtype=float), s_b.shape[:-2])
    collapse = collapse_pressure_mpa(s_b, pp, strength, max_breakout_width_deg)
    breakdown = breakdown_pressure_mpa(s_b, pp, strength)
    shmin = np.broadcast_to(np.asarray(shmin_mpa, dtype=float), collapse.shape)
    lower = np.maximum(pp, collapse)
    if upper_bound not in ("least", "shmin"):
        raise InputError("upper_bound must be least or shmin",
                         [problem(f"got {upper_bound!r}", field="window.upper_bound")])
    upper = np.minimum(breakdown, shmin) if upper_bound == "least" else shmin
    bo, tf = failure_azimuths_deg(s_b, pp, strength)
    return {"pore_pressure_mpa": np.asarray(pp, dtype=float), "collapse_mpa": collapse,
            "breakdown_mpa": breakdown, "shmin_mpa": np.asarray(shmin, dtype=float),
            "lower_mpa": lower, "upper_mpa": upper, "width_mpa": upper - lower,
            "breakout_deg": bo, "tensile_deg": tf}


def shmax_from_breakout_mpa(breakout_width_deg, shmin_mpa, pp_mpa, mud_pressure_mpa, ucs_mpa,
                            thermal_stress_mpa=0.0):
    """SHmax (MPa) from the width of breakouts in a vertical well (Zoback et al. 1985; Barton,
    Zoback & Burns 1988; Zoback, "Reservoir Geomechanics", ch. 7 -- from memory).

    At the edge of a breakout the effective hoop stress equals the rock strength::

        SHmax = (UCS + 2 Pp + dP + s_dT - Shmin (1 + 2 cos(pi - w))) / (1 - 2 cos(pi - w))

    with ``w`` the breakout width, ``dP = Pw - Pp`` and ``s_dT`` the thermal hoop stress
    (0 by default). A lower bound when the true rock strength exceeds ``ucs_mpa``.

    Examples
    --------
    >>> # 90 degree breakouts: the edge is 45 degrees from SHmax, where cos 2t = 0, so the hoop
    >>> # stress there is SHmax + Shmin - Pw = UCS + Pp
    >>> round(float(shmax_from_breakout_mpa(90.0, 50.0, 30.0, 30.0, 80.0)), 2)
    90.0
    """
    w = np.radians(np.asarray(breakout_width_deg, dtype=float))
    if np.any(~np.isfinite(w)) or np.any((w <= 0.0) | (w >= np.pi)):
        raise InputError("breakout width out of range",
                         [problem("breakout width must be between 0 and 180 degrees (exclusive)",
                                  field="breakout_width_deg")])
    if np.any(np.asarray(ucs_mpa, dtype=float) <= 0.0):
        raise InputError("rock strength must be > 0",
                         [problem("ucs_mpa must be > 0", field="ucs_mpa")])
    c = np.cos(np.pi - w)
    dp = np.asarray(mud_pressure_mpa, dtype=float) - np.asarray(pp_mpa, dtype=float)
    num = (np.asarray(ucs_mpa, dtype=float) + 2.0 * np.asarray(pp_mpa, dtype=float) + dp
           + np.asarray(thermal_stress_mpa, dtype=float)
           - np.asarray(shmin_mpa, dtype=float) * (1.0 + 2.0 * c))
    return num / (1.0 - 2.0 * c)
