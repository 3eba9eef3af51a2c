"""Slip and dilation tendency of every plane orientation, on a lower-hemisphere equal-area net.

Each plane is drawn as its pole (the downward normal) projected with the Lambert azimuthal
equal-area projection of the lower hemisphere (the Schmidt net), unit radius at the primitive
circle::

    r = sqrt(2) sin(a / 2),   x = r sin(trend),   y = r cos(trend)

with ``a = 90 - plunge`` the angle of the pole from the vertical, x east and y north.

Slip tendency (Morris, Ferrill & Henderson 1996) ``Ts = tau / (sigma_n - Pp)`` with effective
normal stress; a plane slips on reaching the friction coefficient (``Ts >= mu``). Dilation
tendency (Ferrill et al. 1999) ``Td = (sigma_1 - sigma_n) / (sigma_1 - sigma_3)``.
"""

from __future__ import annotations

import numpy as np

from stressmap.analyses.faults import principal_stresses, resolve_traction
from stressmap.errors import InputError, problem

__all__ = ["pole_of_plane", "project_pole", "unproject", "tendency_net", "MAX_NET_SIZE"]

#: Largest grid side of a net.
MAX_NET_SIZE = 801


def pole_of_plane(strike_deg, dip_deg):
    """Trend and plunge (degrees) of the downward pole of right-hand-rule planes.

    The pole points away from the dip direction: trend = strike - 90, plunge = 90 - dip.

    Examples
    --------
    >>> [float(v) for v in pole_of_plane(0.0, 60.0)]        # dips east: pole trends west
    [270.0, 30.0]
    >>> [float(v) for v in pole_of_plane(45.0, 0.0)]        # horizontal: vertical pole
    [315.0, 90.0]
    """
    strike = np.asarray(strike_deg, dtype=float)
    dip = np.asarray(dip_deg, dtype=float)
    return np.mod(strike - 90.0, 360.0), 90.0 - dip


def project_pole(trend_deg, plunge_deg):
    """Equal-area (x, y) of lower-hemisphere directions, unit primitive circle."""
    a = np.radians(90.0 - np.asarray(plunge_deg, dtype=float))
    t = np.radians(np.asarray(trend_deg, dtype=float))
    r = np.sqrt(2.0) * np.sin(a / 2.0)
    return r * np.sin(t), r * np.cos(t)


def unproject(x, y):
    """Trend, plunge (degrees) and the NED unit vector of equal-area points (r <= 1)."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    r = np.minimum(np.hypot(x, y), 1.0)
    a = 2.0 * np.arcsin(r / np.sqrt(2.0))
    t = np.arctan2(x, y)
    vec = np.stack([np.sin(a) * np.cos(t), np.sin(a) * np.sin(t), np.cos(a)], axis=-1)
    return np.mod(np.degrees(t), 360.0), 90.0 - np.degrees(a), vec


def tendency_net(stress_ned, pp_mpa, size: int = 181) -> dict:
    """Slip and dilation tendency on a ``size`` x ``size`` grid of the equal-area net.

    Returns
    -------
    dict
        ``x``, ``y`` (size,) grid coordinates; ``slip_tendency``, ``dilation_tendency``,
        ``trend_deg``, ``plunge_deg`` (size, size) with NaN outside the primitive circle
        (rows follow y, columns x).

    Examples
    --------
    >>> from stressmap.analyses.screening import principal_tensor_ned
    >>> net = tendency_net(principal_tensor_ned(60.0, 40.0, 70.0, 0.0), 20.0, size=5)
    >>> round(float(net["dilation_tendency"][2, 2]), 6)   # pole along Sv = sigma_1
    0.0
    """
    size = int(size)
    if size < 3 or size > MAX_NET_SIZE:
        raise InputError(f"net size must be in [3, {MAX_NET_SIZE}]",
                         [problem(f"got {size}", field="size")])
    axis = np.linspace(-1.0, 1.0, size)
    gx, gy = np.meshgrid(axis, axis)
    inside = np.hypot(gx, gy) <= 1.0 + 1e-12
    trend, plunge, normal = unproject(gx, gy)
    s = np.asarray(stress_ned, dtype=float)
    sn, tau, _ = resolve_traction(s, normal)
    s1, _, s3 = principal_stresses(s)
    with np.errstate(divide="ignore", invalid="ignore"):
        slip = tau / (sn - pp_mpa)
        slip = np.where(sn > pp_mpa, slip, np.inf)
        dil = np.where(s1 > s3, (s1 - sn) / (s1 - s3), 0.0)
    nan = np.where(inside, 1.0, np.nan)
    return {"x": axis, "y": axis, "slip_tendency": slip * nan, "dilation_tendency": dil * nan,
            "trend_deg": trend * nan, "plunge_deg": plunge * nan}
