"""Fault planes in a stress field: tractions, slip and dilation tendency, margin to failure.

Pure numpy, vectorised over faults *and* over samples by broadcasting: a stress tensor of shape
(..., 3, 3) meets fault normals of shape (..., 3); pass ``stress[:, None]`` against ``(F,)``
planes to get (N, F) results for N samples. No Python loops over faults or samples.

Conventions
-----------
- Frame: geographic (north, east, down), "NED"; stress compression positive, MPa;
  effective normal stress = normal stress - Pp.
- Planes: strike/dip with the right-hand rule -- the plane dips to the right of the strike
  direction, so dip direction = strike + 90 degrees; dip in [0, 90] degrees from horizontal.
- Unit normal pointing from the footwall into the hanging wall (Aki & Richards, "Quantitative
  Seismology", section 4.2, from memory): ``n = (-sin d sin s, sin d cos s, -cos d)``;
  strike vector ``(cos s, sin s, 0)``; down-dip vector ``(-cos d sin s, cos d cos s, sin d)``.
- Rake of the hanging wall's slip direction measured in the plane from the strike direction,
  -90 normal, 0 left-lateral, +90 reverse, +-180 right-lateral (Aki & Richards).

Measures
--------
- slip tendency ``Ts = tau / (sigma_n - Pp)`` (Morris, Ferrill & Henderson 1996, Geology 24,
  275, with effective normal stress);
- dilation tendency ``Td = (sigma_1 - sigma_n) / (sigma_1 - sigma_3)`` (Ferrill et al. 1999,
  GSA Today 9(5));
- Coulomb failure stress ``CFS = tau - mu (sigma_n - Pp) - C`` (positive: beyond failure);
- pore-pressure margin ``margin = (sigma_n - Pp) - (tau - C) / mu``: the pore-pressure increase
  that brings the plane to Coulomb failure (``-CFS / mu``; negative means already beyond).

Traces (GIS lines) become one plane per straight segment: strike from the segment's geodesic
azimuth (pyproj.Geod on the 6371 km sphere), turned by 180 degrees where needed so that the
right-hand-rule dip direction agrees with the stated dip direction.
"""

from __future__ import annotations

import numpy as np
from pyproj import Geod

from stressmap.constants import EARTH_RADIUS_M
from stressmap.errors import InputError, problem

__all__ = [
    "plane_vectors_ned",
    "resolve_traction",
    "principal_stresses",
    "slip_tendency",
    "dilation_tendency",
    "coulomb_failure_stress_mpa",
    "pore_pressure_margin_mpa",
    "fault_tendencies",
    "tractions_vertical_principal",
    "rank_order",
    "optimal_planes",
    "segment_azimuth_deg",
    "strike_from_azimuth",
    "trace_segments",
    "validate_planes",
]


def _f(x):
    return np.asarray(x, dtype=float)


def plane_vectors_ned(strike_deg, dip_deg):
    """Unit normal, strike and down-dip vectors of right-hand-rule planes in (N, E, D).

    Returns
    -------
    normal, strike_vec, dip_vec : ndarray, each shape (..., 3)

    Examples
    --------
    >>> n, s, d = plane_vectors_ned(0.0, 90.0)   # vertical N-S plane: normal points east
    >>> n.round(12).tolist(), s.round(12).tolist(), d.round(12).tolist()
    ([0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])
    >>> plane_vectors_ned(90.0, 0.0)[0].round(12).tolist()   # horizontal: normal points up
    [0.0, 0.0, -1.0]
    """
    s, d = np.broadcast_arrays(np.radians(_f(strike_deg)), np.radians(_f(dip_deg)))
    sd, cd, ss, cs = np.sin(d), np.cos(d), np.sin(s), np.cos(s)
    normal = np.stack([-sd * ss, sd * cs, -cd], axis=-1)
    strike_vec = np.stack([cs, ss, np.zeros_like(s)], axis=-1)
    dip_vec = np.stack([-cd * ss, cd * cs, sd], axis=-1)
    return normal, strike_vec, dip_vec


def resolve_traction(stress_ned, normal):
    """Normal and shear traction on planes, and the shear traction vector.

    Parameters
    ----------
    stress_ned : array_like, shape (..., 3, 3)
        Symmetric stress tensors (compression positive).
    normal : array_like, shape (..., 3)
        Unit plane normals; broadcast against the tensors' leading dimensions.

    Returns
    -------
    normal_stress, shear_stress : ndarray, shape (...)
    shear_vec : ndarray, shape (..., 3)
        ``t - (t . n) n`` with ``t = S n``.

    Examples
    --------
    >>> S = np.diag([3.0, 1.0, 2.0])
    >>> n = np.array([1.0, 1.0, 0.0]) / np.sqrt(2)
    >>> sn, tau, _ = resolve_traction(S, n)
    >>> round(float(sn), 12), round(float(tau), 12)
    (2.0, 1.0)
    """
    stress_ned, normal = _f(stress_ned), _f(normal)
    t = np.matmul(stress_ned, normal[..., None])[..., 0]
    sn = (t * normal).sum(axis=-1)
    shear_vec = t - sn[..., None] * normal
    # |shear|^2 = |t|^2 - sn^2, clipped against round-off; sqrt of the sum is cheaper than norm
    tau = np.sqrt(np.maximum((shear_vec * shear_vec).sum(axis=-1), 0.0))
    return sn, tau, shear_vec


def principal_stresses(stress_ned):
    """sigma_1 >= sigma_2 >= sigma_3 of symmetric tensors (..., 3, 3).

    Examples
    --------
    >>> [float(v) for v in principal_stresses(np.diag([2.0, 5.0, 1.0]))]
    [5.0, 2.0, 1.0]
    """
    w = np.linalg.eigvalsh(_f(stress_ned))
    return w[..., 2], w[..., 1], w[..., 0]


def slip_tendency(normal_stress_mpa, shear_stress_mpa, pp_mpa=0.0):
    """Slip tendency tau / (sigma_n - Pp) (Morris et al. 1996); NaN where sigma_n <= Pp.

    Examples
    --------
    >>> float(slip_tendency(50.0, 12.0, 20.0))
    0.4
    >>> bool(np.isnan(slip_tendency(10.0, 1.0, 10.0)))
    True
    """
    eff = _f(normal_stress_mpa) - _f(pp_mpa)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(eff > 0, _f(shear_stress_mpa) / np.where(eff > 0, eff, 1.0), np.nan)


def dilation_tendency(normal_stress_mpa, sigma1_mpa, sigma3_mpa):
    """Dilation tendency (sigma_1 - sigma_n)/(sigma_1 - sigma_3) (Ferrill et al. 1999), in [0, 1].

    NaN for an isotropic state.

    Examples
    --------
    >>> float(dilation_tendency(40.0, 70.0, 30.0))
    0.75
    """
    s1, s3 = _f(sigma1_mpa), _f(sigma3_mpa)
    span = s1 - s3
    with np.errstate(divide="ignore", invalid="ignore"):
        td = (s1 - _f(normal_stress_mpa)) / np.where(span > 0, span, 1.0)
    return np.where(span > 0, np.clip(td, 0.0, 1.0), np.nan)


def coulomb_failure_stress_mpa(normal_stress_mpa, shear_stress_mpa, pp_mpa, friction,
                               cohesion_mpa=0.0):
    """Coulomb failure stress tau - mu (sigma_n - Pp) - C, MPa (>= 0: at or beyond failure).

    Examples
    --------
    >>> float(coulomb_failure_stress_mpa(50.0, 12.0, 20.0, 0.6, 1.0))
    -7.0
    """
    return _f(shear_stress_mpa) - _f(friction) * (_f(normal_stress_mpa) - _f(pp_mpa)) - \
        _f(cohesion_mpa)


def pore_pressure_margin_mpa(normal_stress_mpa, shear_stress_mpa, pp_mpa, friction,
                             cohesion_mpa=0.0):
    """Pore-pressure increase that brings a plane to Coulomb failure, MPa.

    ``(sigma_n - Pp) - (tau - C)/mu``; zero at failure, negative beyond it.

    Examples
    --------
    >>> round(float(pore_pressure_margin_mpa(50.0, 12.0, 20.0, 0.6, 1.0)), 6)
    11.666667
    """
    mu = _f(friction)
    return (_f(normal_stress_mpa) - _f(pp_mpa)) - (_f(shear_stress_mpa) - _f(cohesion_mpa)) / mu


def fault_tendencies(stress_ned, pp_mpa, strike_deg, dip_deg, friction=0.6, cohesion_mpa=0.0):
    """Every screening measure of planes in a stress field.

    Parameters
    ----------
    stress_ned : array_like, shape (..., 3, 3)
        Total stress, compression positive, MPa; broadcast against the planes (add an axis for
        samples: ``stress[:, None]`` with planes of shape (F,) gives (N, F) results).
    pp_mpa, friction, cohesion_mpa : array_like
        Pore pressure (MPa), friction coefficient, cohesion (MPa); broadcast likewise.
    strike_deg, dip_deg : array_like
        Right-hand-rule strike and dip, degrees.

    Returns
    -------
    dict of ndarray
        ``normal_stress_mpa``, ``effective_normal_stress_mpa``, ``shear_stress_mpa``,
        ``slip_tendency``, ``dilation_tendency``, ``coulomb_failure_stress_mpa``,
        ``pore_pressure_margin_mpa``, ``rake_deg``.

    Examples
    --------
    >>> S = np.diag([56.4, 42.8, 70.0])     # normal regime at the limit, SHmax N-S, Pp = 30
    >>> out = fault_tendencies(S, 30.0, [0.0, 90.0], 60.0, friction=0.6)
    >>> out["slip_tendency"].round(3).tolist()     # plane striking along SHmax is near-critical
    [0.601, 0.198]
    >>> out["pore_pressure_margin_mpa"].round(2).tolist()
    [-0.03, 19.99]
    >>> out["rake_deg"].round(6).tolist()          # pure dip slip, normal sense
    [-90.0, -90.0]
    """
    stress = _f(stress_ned)
    normal, strike_vec, dip_vec = plane_vectors_ned(strike_deg, dip_deg)
    sn, tau, shear_vec = resolve_traction(stress, normal)
    s1, _, s3 = principal_stresses(stress)
    pp = _f(pp_mpa)
    # The hanging wall slides along the shear traction it exerts on the footwall, which is
    # -(shear part of S n) for compression-positive S and n pointing into the hanging wall.
    slip = -shear_vec
    along = (slip * strike_vec).sum(axis=-1)
    down = (slip * dip_vec).sum(axis=-1)
    rake = np.degrees(np.arctan2(-down, along))
    rake = np.where(tau > 1e-12 * np.maximum(np.abs(sn), 1.0), rake, np.nan)
    sn, tau, s1, s3, pp = np.broadcast_arrays(sn, tau, s1, s3, pp)
    return {
        "normal_stress_mpa": sn,
        "effective_normal_stress_mpa": sn - pp,
        "shear_stress_mpa": tau,
        "slip_tendency": slip_tendency(sn, tau, pp),
        "dilation_tendency": dilation_tendency(sn, s1, s3),
        "coulomb_failure_stress_mpa": coulomb_failure_stress_mpa(sn, tau, pp, friction,
                                                                  cohesion_mpa),
        "pore_pressure_margin_mpa": pore_pressure_margin_mpa(sn, tau, pp, friction, cohesion_mpa),
        "rake_deg": rake,
    }


def tractions_vertical_principal(s_nn, s_ee, s_ne, s_dd, normal):
    """Normal and shear traction for tensors with a vertical principal axis (Anderson states).

    A cheaper path than :func:`resolve_traction` for many samples x many planes: with
    ``S = [[s_nn, s_ne, 0], [s_ne, s_ee, 0], [0, 0, s_dd]]`` in (N, E, D),
    ``sigma_n = n.S.n`` and ``tau^2 = |S n|^2 - sigma_n^2`` are formed directly on the broadcast
    shape without (..., 3) temporaries.

    Parameters
    ----------
    s_nn, s_ee, s_ne, s_dd : array_like
        Tensor components (e.g. shape (N, 1) for N samples).
    normal : array_like, shape (F, 3)
        Unit plane normals.

    Examples
    --------
    >>> sn, tau = tractions_vertical_principal(3.0, 1.0, 0.0, 2.0, np.array([[1.0, 1.0, 0.0]]) /
    ...                                        np.sqrt(2))
    >>> round(float(sn[0]), 12), round(float(tau[0]), 12)
    (2.0, 1.0)
    """
    normal = _f(normal)
    nx, ny, nz = normal[..., 0], normal[..., 1], normal[..., 2]
    a, b, c, v = _f(s_nn), _f(s_ee), _f(s_ne), _f(s_dd)
    tx = a * nx + c * ny
    ty = c * nx + b * ny
    tz = v * nz
    sn = tx * nx + ty * ny + tz * nz
    tau = np.sqrt(np.maximum(tx * tx + ty * ty + tz * tz - sn * sn, 0.0))
    return sn, tau


def rank_order(margin_mpa):
    """Indices that sort planes from least to greatest margin along the last axis (NaN last).

    Examples
    --------
    >>> rank_order([5.0, np.nan, -1.0, 2.0]).tolist()
    [2, 3, 0, 1]
    """
    return np.argsort(_f(margin_mpa), axis=-1, kind="stable")


def optimal_planes(shmax_azimuth_deg, regime_code, friction):
    """Strike and dip of the planes most prone to slip (Anderson + Coulomb), degrees.

    The plane contains sigma_2 and makes an angle ``beta = 45 - atan(mu)/2`` with sigma_1
    (Jaeger, Cook & Zimmerman, from memory). Two conjugate planes per state.

    Returns
    -------
    strike_deg, dip_deg : ndarray, shape (..., 2)

    Examples
    --------
    >>> s, d = optimal_planes(0.0, 0, 0.6)     # normal: strike along SHmax, dip 45 + phi/2
    >>> s.round(2).tolist(), d.round(2).tolist()
    ([0.0, 180.0], [60.48, 60.48])
    >>> s, d = optimal_planes(0.0, 1, 0.6)     # strike-slip: vertical, +-29.5 deg from SHmax
    >>> s.round(2).tolist(), d.round(2).tolist()
    ([29.52, 330.48], [90.0, 90.0])
    """
    az, code, mu = np.broadcast_arrays(_f(shmax_azimuth_deg), np.asarray(regime_code), _f(friction))
    beta = 45.0 - 0.5 * np.degrees(np.arctan(mu))
    pair = np.array([0.0, 180.0])
    normal_strike = az[..., None] + pair
    reverse_strike = az[..., None] + 90.0 + pair
    ss_strike = az[..., None] + np.stack([beta, -beta], axis=-1)
    strike = np.where((code == 0)[..., None], normal_strike,
                      np.where((code == 1)[..., None], ss_strike, reverse_strike))
    dip = np.where(code == 0, 90.0 - beta, np.where(code == 1, 90.0, beta))
    return np.mod(strike, 360.0), np.repeat(dip[..., None], 2, axis=-1)


# ---------------------------------------------------------------------------------------------
# Traces


def segment_azimuth_deg(lon1, lat1, lon2, lat2):
    """Azimuth of straight trace segments, degrees clockwise from north in [0, 360).

    The mean direction of the geodesic at its two ends (pyproj.Geod on the 6371 km sphere), so a
    segment's strike does not depend on which end it starts from beyond the 180-degree flip.

    Examples
    --------
    >>> segment_azimuth_deg([0, 0], [0, 0], [0, 0.01], [0.01, 0]).round(6).tolist()
    [0.0, 90.0]
    >>> float(segment_azimuth_deg(0.01, 0.0, 0.0, 0.0).round(6))   # westward
    270.0
    """

    geod = Geod(a=EARTH_RADIUS_M, f=0.0)
    lon1, lat1, lon2, lat2 = np.broadcast_arrays(_f(lon1), _f(lat1), _f(lon2), _f(lat2))
    fwd, back, _ = geod.inv(lon1, lat1, lon2, lat2)
    a1, a2 = np.radians(fwd), np.radians(np.asarray(back) + 180.0)
    mean = np.degrees(np.arctan2(np.sin(a1) + np.sin(a2), np.cos(a1) + np.cos(a2)))
    return np.mod(np.round(mean, 12), 360.0)


def strike_from_azimuth(azimuth_deg, dip_direction_deg=None):
    """Right-hand-rule strike of a segment with a given trend and dip direction.

    Of the two directions along the segment (``azimuth`` and ``azimuth + 180``) the strike is the
    one whose right-hand-rule dip direction (strike + 90) lies nearer the stated dip direction.
    Without a dip direction (NaN) the plane dips to the right of the digitised direction.

    Returns
    -------
    strike_deg : ndarray in [0, 360)
    misfit_deg : ndarray in [0, 90]
        Angle between the stated dip direction and strike + 90 (0 when none was stated); large
        values mean the dip direction runs nearly along the trace.

    Examples
    --------
    >>> s, m = strike_from_azimuth([0.0, 0.0, 180.0, 350.0], [90.0, 270.0, 90.0, 100.0])
    >>> s.tolist(), m.round(6).tolist()
    ([0.0, 180.0, 0.0, 350.0], [0.0, 0.0, 0.0, 20.0])
    >>> s, m = strike_from_azimuth(45.0, np.nan)     # no dip direction: dips to the right
    >>> float(s), float(m)
    (45.0, 0.0)
    """
    az = np.mod(_f(azimuth_deg), 360.0)
    if dip_direction_deg is None:
        dip_direction_deg = np.nan
    dd = _f(dip_direction_deg)
    az, dd = np.broadcast_arrays(az, dd)
    diff = np.mod(dd - (az + 90.0) + 180.0, 360.0) - 180.0          # (-180, 180]
    flip = np.isfinite(dd) & (np.abs(diff) > 90.0)
    strike = np.mod(np.where(flip, az + 180.0, az), 360.0)
    misfit = np.where(np.isfinite(dd), np.where(flip, 180.0 - np.abs(diff), np.abs(diff)), 0.0)
    return strike, misfit


def trace_segments(coords_lonlat, part_index):
    """Straight segments of line traces given as stacked vertices.

    Parameters
    ----------
    coords_lonlat : array_like, shape (K, 2)
        Vertices of all traces one after another (lon, lat degrees), e.g. from
        ``shapely.get_coordinates(lines, return_index=True)``.
    part_index : array_like of int, shape (K,)
        Which trace each vertex belongs to.

    Returns
    -------
    start, end : ndarray, shape (M, 2)
        Segment end points (lon, lat).
    part : ndarray of int, shape (M,)
        Trace of each segment. Repeated vertices (zero-length segments) are dropped.

    Examples
    --------
    >>> xy = [[0, 0], [0, 1], [1, 1], [5, 5], [5, 5], [6, 5]]
    >>> s, e, p = trace_segments(xy, [0, 0, 0, 1, 1, 1])
    >>> p.tolist(), s.tolist()
    ([0, 0, 1], [[0.0, 0.0], [0.0, 1.0], [5.0, 5.0]])
    """
    xy = _f(coords_lonlat).reshape(-1, 2)
    idx = np.asarray(part_index).reshape(-1)
    keep = (idx[1:] == idx[:-1]) & np.any(xy[1:] != xy[:-1], axis=1)
    start, end = xy[:-1][keep], xy[1:][keep]
    return start, end, idx[:-1][keep].astype(np.int64)


def validate_planes(strike_deg, dip_deg, field="planes") -> tuple[np.ndarray, np.ndarray]:
    """Check strike/dip arrays (strike any finite angle -> [0, 360); dip in [0, 90]).

    Raises
    ------
    InputError
        One problem per bad row (1-based).

    Examples
    --------
    >>> [a.tolist() for a in validate_planes([370.0, -10.0], [30.0, 90.0])]
    [[10.0, 350.0], [30.0, 90.0]]
    >>> validate_planes([10.0], [95.0])
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: dip must be between 0 and 90 degrees, got 95.0
    """
    strike, dip = np.broadcast_arrays(np.atleast_1d(_f(strike_deg)), np.atleast_1d(_f(dip_deg)))
    problems = []
    for i in np.flatnonzero(~np.isfinite(strike)):
        problems.append(problem(f"strike must be a finite angle in degrees, got {strike[i]}",
                                field=f"{field}.strike_deg", row=i + 1))
    for i in np.flatnonzero(~(np.isfinite(dip) & (dip >= 0) & (dip <= 90))):
        problems.append(problem(f"dip must be between 0 and 90 degrees, got {dip[i]}",
                                field=f"{field}.dip_deg", row=i + 1))
    if problems:
        msg = problems[0]["message"] if len(problems) == 1 else \
            f"{len(problems)} problems with the planes"
        raise InputError(msg, problems)
    return np.mod(strike, 360.0), dip.copy()
