"""Poroelastic stress path: horizontal stresses that follow the pore pressure in a reservoir.

When a laterally extensive reservoir is injected into or depleted, its horizontal stresses
change with the pore pressure while the vertical stress (the weight of the overburden) does not.
For a uniaxial-strain reservoir of Biot coefficient ``alpha`` and drained Poisson's ratio ``nu``::

    dS_h = A dPp,    A = alpha (1 - 2 nu) / (1 - nu)

(Engelder & Fischer 1994, "Influence of poroelastic behavior on the magnitude of minimum
horizontal stress, Sh, in overpressured parts of sedimentary basins", Geology 22; also Segall &
Fitzgerald 1998 and Zoback, "Reservoir Geomechanics", ch. 3 -- from memory). Both horizontal
principal stresses change by the same amount; Sv and the azimuth of SHmax stay.

For every fault this module finds the pore-pressure change that brings it to Coulomb failure
``tau = mu (sigma_n - Pp) + c`` with and without the stress path, for injection (dPp > 0) and
depletion (dPp < 0). Without the stress path depletion only stabilises; with it, the shrinking
horizontal stresses can bring normal faults to failure during depletion.
"""

from __future__ import annotations

import numpy as np

from stressmap.analyses.faults import plane_vectors_ned, resolve_traction
from stressmap.errors import InputError, problem

__all__ = ["stress_path_coefficient", "pressure_change_to_failure", "path_stresses"]


def stress_path_coefficient(biot=1.0, poisson=0.25):
    """``A = alpha (1 - 2 nu) / (1 - nu)``.

    Examples
    --------
    >>> round(float(stress_path_coefficient(1.0, 0.25)), 4)   # 1 x 0.5 / 0.75
    0.6667
    >>> float(stress_path_coefficient(0.8, 0.5))                # incompressible: no path
    0.0
    """
    a, nu = np.asarray(biot, dtype=float), np.asarray(poisson, dtype=float)
    problems = []
    if np.any(~np.isfinite(a) | (a < 0.0) | (a > 1.0)):
        problems.append(problem("the Biot coefficient must be in [0, 1]", field="biot"))
    if np.any(~np.isfinite(nu) | (nu < 0.0) | (nu > 0.5)):
        problems.append(problem("Poisson's ratio must be in [0, 0.5]", field="poisson"))
    if problems:
        raise InputError(problems[0]["message"], problems)
    return a * (1.0 - 2.0 * nu) / (1.0 - nu)


def path_stresses(shmax_mpa, shmin_mpa, pp_mpa, delta_pp_mpa, coefficient):
    """Horizontal stresses and pore pressure after a change ``delta_pp_mpa`` (broadcast)."""
    dp = np.asarray(delta_pp_mpa, dtype=float)
    a = np.asarray(coefficient, dtype=float)
    return (np.asarray(shmax_mpa, dtype=float) + a * dp,
            np.asarray(shmin_mpa, dtype=float) + a * dp,
            np.asarray(pp_mpa, dtype=float) + dp)


def pressure_change_to_failure(stress_ned, pp_mpa, strike_deg, dip_deg, friction=0.6,
                               cohesion_mpa=0.0, coefficient=0.0):
    """Pore-pressure change (MPa) that brings each plane to Coulomb failure.

    Parameters
    ----------
    stress_ned : (3, 3) array
        Total stress (compression positive) with a vertical principal axis.
    pp_mpa : float
        Pore pressure before the change.
    strike_deg, dip_deg : (F,) arrays
        Planes (right-hand rule).
    coefficient : float
        Stress-path coefficient A (0: the stresses stay, only the pore pressure changes).

    Returns
    -------
    dict of (F,) arrays
        ``injection_mpa`` (> 0, the least increase that reaches failure), ``depletion_mpa``
        (< 0, the least decrease that reaches failure, never below -Pp); NaN where no change
        in that direction reaches failure, 0 where the plane is already at or past failure.

    Notes
    -----
    The horizontal stresses change by ``A dP`` (the tensor by ``A dP (I - d d^T)``, d down), so
    the traction, the normal stress and the shear vector are linear in ``dP``; squaring
    ``|tau(dP)| = mu (sigma_n(dP) - Pp - dP) + c`` gives one quadratic per plane, solved in
    closed form; roots where the right side is negative are dropped.
    """
    s = np.asarray(stress_ned, dtype=float)
    n, _, _ = plane_vectors_ned(strike_deg, dip_deg)
    sn0, tau0, shear0 = resolve_traction(s, n)
    a = float(coefficient)
    h = np.diag([1.0, 1.0, 0.0])
    hn = n @ h                                  # d(traction)/d(dP) / A
    dsn = (hn * n).sum(axis=-1)                 # d(sigma_n)/d(dP) / A
    w = a * (hn - dsn[..., None] * n)           # d(shear vector)/d(dP)
    mu, c = float(friction), float(cohesion_mpa)
    r0 = mu * (sn0 - pp_mpa) + c                # right side at dP = 0
    r1 = mu * (a * dsn - 1.0)                   # its slope
    qa = (w * w).sum(axis=-1) - r1 * r1
    qb = 2.0 * ((shear0 * w).sum(axis=-1) - r0 * r1)
    qc = tau0 * tau0 - r0 * r0
    failing = tau0 >= r0
    disc = qb * qb - 4.0 * qa * qc
    with np.errstate(divide="ignore", invalid="ignore"):
        sq = np.sqrt(np.where(disc >= 0.0, disc, np.nan))
        lin = np.abs(qa) < 1e-12 * np.maximum(1.0, np.abs(qb))
        roots = np.stack([np.where(lin, -qc / qb, (-qb - sq) / (2.0 * qa)),
                          np.where(lin, np.nan, (-qb + sq) / (2.0 * qa))])
    valid = np.isfinite(roots) & (r0 + r1 * roots >= -1e-9)
    up = np.where(valid & (roots > 0.0), roots, np.inf).min(axis=0)
    down = np.where(valid & (roots < 0.0) & (roots >= -pp_mpa), roots, -np.inf).max(axis=0)
    return {"injection_mpa": np.where(failing, 0.0, np.where(np.isfinite(up), up, np.nan)),
            "depletion_mpa": np.where(failing, 0.0, np.where(np.isfinite(down), down, np.nan))}
