"""Stress magnitudes at depth: overburden, pore pressure, frictional limits, central estimate.

Pure numpy, vectorised over any broadcastable shape (sites, depths or Monte-Carlo samples share
one code path). Conventions used throughout:

- stresses and pressures in MPa, **compression positive**; effective stress = total - Pp;
- depths in km below the surface (positive down); densities in kg/m^3;
- 3-D tensors in the geographic frame (north, east, down) -- "NED"; azimuths in degrees
  clockwise from north;
- Anderson's assumption: one principal stress is vertical (Sv); the horizontal ones are SHmax
  (azimuth from the model or the user) and Shmin;
- regime codes as in :mod:`stressmap.geo.tensor`: 0 normal (Sv >= SHmax >= Shmin), 1 strike-slip
  (SHmax >= Sv >= Shmin), 2 reverse (SHmax >= Shmin >= Sv);
- shape ratio phi = (S2 - S3) / (S1 - S3) in [0, 1].

Frictional limit (Jaeger & Cook): faults of friction coefficient ``mu`` that are optimally
oriented do not slip while ``(S1 - Pp) / (S3 - Pp) <= ((mu^2 + 1)^(1/2) + mu)^2``
(Jaeger, Cook & Zimmerman, "Fundamentals of Rock Mechanics"; Zoback, "Reservoir Geomechanics",
ch. 4 -- from memory). Applied to each Anderson regime this bounds the admissible (Shmin, SHmax)
pairs: the *stress polygon*.

The central estimate puts the crust at frictional equilibrium (the limit holds with equality) in
the given regime, with the given shape ratio fixing the intermediate stress.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from stressmap.constants import G_M_S2
from stressmap.errors import InputError, problem
from stressmap.geo.tensor import REGIMES

__all__ = [
    "REGIMES",
    "DEFAULT_DENSITY_KG_M3",
    "DEFAULT_WATER_DENSITY_KG_M3",
    "DensityProfile",
    "density_profile",
    "vertical_stress_mpa",
    "mean_density_kg_m3",
    "pore_pressure_mpa",
    "frictional_limit_ratio",
    "regime_code_of",
    "regime_bounds",
    "stress_polygon",
    "frictional_equilibrium",
    "complete_magnitudes",
    "regime_from_magnitudes",
    "frictional_ratio",
    "shape_ratio_of",
    "regime_fields",
    "principal_tensor_ned",
]

#: Default bulk density of the overburden, kg/m^3: 2450 kg/m^3 gives 24.0 MPa/km, inside the
#: 23-25 MPa/km range of overburden gradients in sedimentary basins (common practice).
DEFAULT_DENSITY_KG_M3 = 2450.0

#: Fresh-water density for hydrostatic pore pressure, kg/m^3 (9.81 MPa/km).
DEFAULT_WATER_DENSITY_KG_M3 = 1000.0


# ---------------------------------------------------------------------------------------------
# Overburden


@dataclass(frozen=True)
class DensityProfile:
    """Piecewise-linear density with depth: layers from ``top_km`` down to the next top.

    Inside layer ``i`` the density is ``density_kg_m3[i] + gradient_kg_m3_per_km[i] * (z - top)``.
    The first layer starts at the surface (0 km); the last extends to any depth.

    Attributes
    ----------
    top_km : (L,) float64, strictly increasing, first element 0.
    density_kg_m3 : (L,) float64, density at each layer top.
    gradient_kg_m3_per_km : (L,) float64, density increase per km inside each layer.
    """

    top_km: np.ndarray
    density_kg_m3: np.ndarray
    gradient_kg_m3_per_km: np.ndarray

    def to_dict(self) -> dict:
        return {
            "top_km": self.top_km.tolist(),
            "density_kg_m3": self.density_kg_m3.tolist(),
            "gradient_kg_m3_per_km": self.gradient_kg_m3_per_km.tolist(),
        }


def density_profile(top_km=0.0, density_kg_m3=DEFAULT_DENSITY_KG_M3,
                    gradient_kg_m3_per_km=0.0, *, field: str = "density") -> DensityProfile:
    """Validated :class:`DensityProfile` (constant, layered or gradient).

    Parameters
    ----------
    top_km, density_kg_m3, gradient_kg_m3_per_km : float or sequence
        Layer tops (km, first 0, increasing), density at each top (kg/m^3) and the gradient
        inside each layer (kg/m^3 per km). Scalars broadcast against the others.
    field : str
        Name used in error messages.

    Raises
    ------
    InputError
        One problem per bad layer (row = 1-based layer number).

    Examples
    --------
    >>> p = density_profile()                                  # constant
    >>> p.density_kg_m3.tolist(), p.top_km.tolist()
    ([2450.0], [0.0])
    >>> density_profile([0, 1.5], [2200, 2600]).top_km.tolist()  # layered
    [0.0, 1.5]
    >>> density_profile(0, 2000, 150).gradient_kg_m3_per_km.tolist()  # compaction gradient
    [150.0]
    >>> density_profile([0, 2], [2400, -5])
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: density profile is not usable
      - row 2, field density.density_kg_m3: must be a positive number, got -5.0
    """
    try:
        top, rho, grad = np.broadcast_arrays(
            np.atleast_1d(np.asarray(top_km, dtype=float)),
            np.atleast_1d(np.asarray(density_kg_m3, dtype=float)),
            np.atleast_1d(np.asarray(gradient_kg_m3_per_km, dtype=float)),
        )
    except (TypeError, ValueError) as exc:
        raise InputError(f"{field}: layer tops, densities and gradients must be numbers of "
                         f"matching length ({exc})", [problem(str(exc), field=field)]) from exc
    problems = []
    if top.ndim != 1 or top.size == 0:
        problems.append(problem("needs at least one layer", field=field))
    else:
        if top[0] != 0.0:
            problems.append(problem(f"the first layer must start at 0 km, got {top[0]}",
                                    field=f"{field}.top_km", row=1))
        for i in np.flatnonzero(~np.isfinite(top)):
            problems.append(problem("must be a finite depth in km", field=f"{field}.top_km",
                                    row=i + 1))
        for i in np.flatnonzero(np.isfinite(top[1:]) & (np.diff(top) <= 0)):
            problems.append(problem(f"layer tops must increase; {top[i + 1]} km follows "
                                    f"{top[i]} km", field=f"{field}.top_km", row=i + 2))
        for i in np.flatnonzero(~(np.isfinite(rho) & (rho > 0))):
            problems.append(problem(f"must be a positive number, got {rho[i]}",
                                    field=f"{field}.density_kg_m3", row=i + 1))
        for i in np.flatnonzero(~np.isfinite(grad)):
            problems.append(problem("must be a finite number", field=f"{field}.gradient_kg_m3_per_km",
                                    row=i + 1))
        if not problems:
            # density must stay positive down to the next top (the last layer to 100 km)
            thick = np.diff(np.append(top, max(top[-1], 0.0) + 100.0))
            bottom = rho + grad * thick
            for i in np.flatnonzero(bottom <= 0):
                problems.append(problem("the gradient makes the density non-positive inside "
                                        "the layer", field=f"{field}.gradient_kg_m3_per_km",
                                        row=i + 1))
    if problems:
        raise InputError("density profile is not usable", problems)
    f64 = lambda a: np.ascontiguousarray(a, dtype=np.float64)  # noqa: E731
    return DensityProfile(f64(top), f64(rho), f64(grad))


def _overburden_integral(depth_km, profile: DensityProfile):
    """Integral of density over depth, kg/m^3 * km, shape of ``depth_km``."""
    z = np.asarray(depth_km, dtype=float)[..., None]                  # (..., 1)
    top = profile.top_km                                              # (L,)
    bottom = np.append(top[1:], np.inf)
    thick = np.clip(np.minimum(z, bottom) - top, 0.0, None)           # (..., L)
    per_layer = profile.density_kg_m3 * thick + 0.5 * profile.gradient_kg_m3_per_km * thick**2
    return per_layer.sum(axis=-1)


def vertical_stress_mpa(depth_km, profile: DensityProfile | None = None, *, g_m_s2=G_M_S2):
    """Vertical (overburden) stress Sv = g * integral of density dz, MPa.

    Parameters
    ----------
    depth_km : array_like
        Depths below the surface, km (>= 0).
    profile : DensityProfile, optional
        Defaults to the constant :data:`DEFAULT_DENSITY_KG_M3`.

    Examples
    --------
    >>> round(float(vertical_stress_mpa(3.0)), 3)           # 2450 kg/m^3 * 9.81 * 3000 m
    72.103
    >>> vertical_stress_mpa([0.0, 1.0]).round(2).tolist()
    [0.0, 24.03]
    >>> p = density_profile([0.0, 1.0], [2000.0, 2500.0])  # 1 km at 2000 over 2500
    >>> round(float(vertical_stress_mpa(2.0, p)), 3)          # (2000 + 2500) * 9.81e3 / 1e6
    44.145
    >>> lin = density_profile(0.0, 2000.0, 200.0)            # 2000 at top, +200 per km
    >>> round(float(vertical_stress_mpa(2.0, lin)), 3)        # mean 2200 over 2 km
    43.164
    """
    profile = density_profile() if profile is None else profile
    return _overburden_integral(depth_km, profile) * 1e3 * g_m_s2 / 1e6


def mean_density_kg_m3(depth_km, profile: DensityProfile | None = None):
    """Average overburden density above ``depth_km`` (kg/m^3); the profile's top density at 0 km.

    Examples
    --------
    >>> float(mean_density_kg_m3(2.0, density_profile(0.0, 2000.0, 200.0)))
    2200.0
    """
    profile = density_profile() if profile is None else profile
    z = np.asarray(depth_km, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = _overburden_integral(z, profile) / np.where(z > 0, z, 1.0)
    return np.where(z > 0, mean, profile.density_kg_m3[0])


def pore_pressure_mpa(depth_km, gradient_mpa_per_km=None, value_mpa=None, *,
                      water_density_kg_m3=DEFAULT_WATER_DENSITY_KG_M3, g_m_s2=G_M_S2):
    """Pore pressure at depth, MPa: a given value, a gradient times depth, or hydrostatic.

    Examples
    --------
    >>> round(float(pore_pressure_mpa(3.0)), 3)                  # hydrostatic, fresh water
    29.43
    >>> float(pore_pressure_mpa(3.0, gradient_mpa_per_km=12.0))  # overpressured gradient
    36.0
    >>> float(pore_pressure_mpa(3.0, value_mpa=31.5))             # measured value wins
    31.5
    """
    z = np.asarray(depth_km, dtype=float)
    if value_mpa is not None:
        return np.broadcast_arrays(np.asarray(value_mpa, dtype=float), z)[0].copy()
    if gradient_mpa_per_km is None:
        gradient_mpa_per_km = water_density_kg_m3 * g_m_s2 * 1e3 / 1e6
    return np.asarray(gradient_mpa_per_km, dtype=float) * z


# ---------------------------------------------------------------------------------------------
# Frictional limits


def frictional_limit_ratio(mu):
    """Jaeger & Cook limit of (S1 - Pp)/(S3 - Pp): ``((mu^2 + 1)^(1/2) + mu)^2``.

    Examples
    --------
    >>> round(float(frictional_limit_ratio(0.6)), 2)
    3.12
    >>> frictional_limit_ratio([0.0, 1.0]).round(4).tolist()
    [1.0, 5.8284]
    """
    mu = np.asarray(mu, dtype=float)
    return (np.sqrt(mu * mu + 1.0) + mu) ** 2


def regime_code_of(regime) -> np.ndarray:
    """Regime names (or codes) to integer codes 0 normal, 1 strike-slip, 2 reverse.

    Accepts the names of :data:`REGIMES` (also "strike_slip", "strikeslip", "thrust"), any case,
    or the integer codes; anything else raises :class:`InputError`.

    Examples
    --------
    >>> regime_code_of(["normal", "Strike-slip", "thrust", 2]).tolist()
    [0, 1, 2, 2]
    """
    aliases = {"normal": 0, "extension": 0, "strike-slip": 1, "strike_slip": 1, "strikeslip": 1,
               "ss": 1, "reverse": 2, "thrust": 2}
    numeric = np.asarray(regime) if not isinstance(regime, str) else None
    if numeric is not None and numeric.dtype.kind in "iu":   # codes: vectorised (samples)
        if numeric.size and (numeric.min() < 0 or numeric.max() > 2):
            raise InputError("regime codes must be 0, 1 or 2",
                             [problem("unknown regime code", field="regime")])
        return numeric.astype(np.int8)
    arr = np.asarray(regime, dtype=object)
    flat = arr.reshape(-1)
    out = np.empty(flat.shape, dtype=np.int8)
    bad = []
    for i, r in enumerate(flat.tolist()):  # names are few (user input); codes take the path above
        key = r.strip().lower() if isinstance(r, str) else r
        if isinstance(key, str) and key in aliases:
            out[i] = aliases[key]
        elif isinstance(key, (int, np.integer)) and not isinstance(key, bool) and 0 <= key <= 2:
            out[i] = key
        else:
            bad.append(problem(f"unknown regime {r!r}; use one of {', '.join(REGIMES)}",
                               field="regime"))
    if bad:
        raise InputError(bad[0]["message"], bad)
    return out.reshape(arr.shape)


def _polygon_corners(sv, pp, mu):
    q = frictional_limit_ratio(mu)
    sv, pp = np.asarray(sv, dtype=float), np.asarray(pp, dtype=float)
    floor = pp + (sv - pp) / q       # least possible Shmin (normal faulting at the limit)
    ceiling = pp + q * (sv - pp)     # greatest possible SHmax (reverse faulting at the limit)
    return q, sv, pp, floor, ceiling


def regime_bounds(sv_mpa, pp_mpa, mu, regime):
    """Frictional-limit bounds of SHmax and Shmin in one regime.

    Returns
    -------
    dict
        ``shmax_lower_mpa``, ``shmax_upper_mpa``, ``shmin_lower_mpa``, ``shmin_upper_mpa``:
        normal: Shmin in [Pp + (Sv-Pp)/q, Sv], SHmax in [that floor, Sv];
        strike-slip: Shmin in [floor, Sv], SHmax in [Sv, Pp + q (Sv-Pp)];
        reverse: both in [Sv, Pp + q (Sv-Pp)]; with q the Jaeger & Cook ratio.

    Examples
    --------
    >>> b = regime_bounds(70.0, 30.0, 0.6, "normal")
    >>> {k: round(float(v), 2) for k, v in b.items()}  # doctest: +NORMALIZE_WHITESPACE
    {'shmax_lower_mpa': 42.82, 'shmax_upper_mpa': 70.0,
     'shmin_lower_mpa': 42.82, 'shmin_upper_mpa': 70.0}
    """
    code = regime_code_of(regime)
    q, sv, pp, floor, ceiling = _polygon_corners(sv_mpa, pp_mpa, mu)
    return {
        "shmax_lower_mpa": np.where(code == 0, floor, sv),
        "shmax_upper_mpa": np.where(code == 0, sv, ceiling),
        "shmin_lower_mpa": np.where(code == 2, sv, floor),
        "shmin_upper_mpa": np.where(code == 2, ceiling, sv),
    }


def stress_polygon(sv_mpa, pp_mpa, mu):
    """Vertices of the stress polygon in the (Shmin, SHmax) plane, MPa.

    The admissible region is ``Shmin <= SHmax`` above the floor ``Shmin >= Pp + (Sv-Pp)/q``,
    below the ceiling ``SHmax <= Pp + q (Sv-Pp)`` and under the strike-slip limit
    ``SHmax - Pp <= q (Shmin - Pp)``. Its four corners, counter-clockwise in (x=Shmin,
    y=SHmax), are (floor, floor), (ceiling, ceiling), (Sv, ceiling) and (floor, Sv).
    The lines Shmin = Sv and SHmax = Sv divide it into the normal (lower left), strike-slip
    (upper left) and reverse (upper right) fields.

    Returns
    -------
    ndarray, shape (..., 4, 2)
        Corners as (Shmin, SHmax), counter-clockwise, starting at (floor, floor).

    Examples
    --------
    >>> stress_polygon(70.0, 30.0, 0.6).round(2).tolist()
    [[42.82, 42.82], [154.78, 154.78], [70.0, 154.78], [42.82, 70.0]]
    """
    q, sv, pp, floor, ceiling = _polygon_corners(sv_mpa, pp_mpa, mu)
    sv, floor, ceiling = np.broadcast_arrays(sv, floor, ceiling)
    corners = [(floor, floor), (ceiling, ceiling), (sv, ceiling), (floor, sv)]
    return np.stack([np.stack(c, axis=-1) for c in corners], axis=-2)


def regime_fields(sv_mpa, pp_mpa, mu) -> dict:
    """The stress polygon split by Anderson regime: ``regime -> (3, 2)`` triangle corners
    (Shmin, SHmax) in MPa, counter-clockwise.

    The lines Shmin = Sv and SHmax = Sv cut :func:`stress_polygon` into the normal (lower left),
    strike-slip (upper left) and reverse (upper right) fields.

    Examples
    --------
    >>> {k: v.round(2).tolist() for k, v in regime_fields(70.0, 30.0, 0.6).items()}
    ... # doctest: +NORMALIZE_WHITESPACE
    {'normal': [[42.82, 42.82], [70.0, 70.0], [42.82, 70.0]],
     'strike-slip': [[42.82, 70.0], [70.0, 70.0], [70.0, 154.78]],
     'reverse': [[70.0, 70.0], [154.78, 154.78], [70.0, 154.78]]}
    """
    _, sv, _, floor, ceiling = (float(v) for v in _polygon_corners(sv_mpa, pp_mpa, mu))
    return {
        "normal": np.array([[floor, floor], [sv, sv], [floor, sv]]),
        "strike-slip": np.array([[floor, sv], [sv, sv], [sv, ceiling]]),
        "reverse": np.array([[sv, sv], [ceiling, ceiling], [sv, ceiling]]),
    }


def frictional_equilibrium(sv_mpa, pp_mpa, mu, regime, shape_ratio):
    """Central estimate of (SHmax, Shmin), MPa: crust at the frictional limit in ``regime``.

    S1 and S3 satisfy (S1 - Pp) = q (S3 - Pp) exactly and the shape ratio
    phi = (S2 - S3)/(S1 - S3) places the intermediate stress:

    - normal (S1 = Sv): Shmin = Pp + (Sv - Pp)/q, SHmax = Shmin + phi (Sv - Shmin);
    - strike-slip (S2 = Sv): Shmin - Pp = (Sv - Pp)/(1 + phi (q - 1)), SHmax - Pp = q (Shmin - Pp);
    - reverse (S3 = Sv): SHmax = Pp + q (Sv - Pp), Shmin = Sv + phi (SHmax - Sv).

    Examples
    --------
    >>> [round(float(v), 2) for v in frictional_equilibrium(70.0, 30.0, 0.6, "normal", 0.5)]
    [56.41, 42.82]
    >>> [round(float(v), 2) for v in frictional_equilibrium(70.0, 30.0, 0.6, "reverse", 0.0)]
    [154.78, 70.0]
    >>> # strike-slip with phi = 0 meets the reverse corner, phi = 1 the normal corner
    >>> frictional_equilibrium(70.0, 30.0, 0.6, "strike-slip", [0.0, 1.0])[1].round(2).tolist()
    [70.0, 42.82]
    """
    code = regime_code_of(regime)
    q, sv, pp, floor, ceiling = _polygon_corners(sv_mpa, pp_mpa, mu)
    phi = np.clip(np.asarray(shape_ratio, dtype=float), 0.0, 1.0)
    v = sv - pp
    ss_shmin = pp + v / (1.0 + phi * (q - 1.0))
    ss_shmax = pp + q * (ss_shmin - pp)
    shmax = np.where(code == 0, floor + phi * (sv - floor),
                     np.where(code == 1, ss_shmax, ceiling))
    shmin = np.where(code == 0, floor, np.where(code == 1, ss_shmin, sv + phi * (ceiling - sv)))
    return shmax, shmin


def complete_magnitudes(sv_mpa, pp_mpa, mu, regime, shape_ratio, shmax_mpa=None, shmin_mpa=None):
    """(SHmax, Shmin) with measured values kept and the missing one(s) completed.

    Neither given: :func:`frictional_equilibrium`. One given: the other follows the rule of the
    central estimate -- the frictional limit ties S1 to S3 and the shape ratio places S2:

    ====================  ==========================  ==============================
    regime                Shmin given                 SHmax given
    ====================  ==========================  ==============================
    normal                SHmax = Shmin + phi(Sv-Shmin) Shmin = Pp + (Sv-Pp)/q
    strike-slip           SHmax = Pp + q(Shmin-Pp)    Shmin = Pp + (SHmax-Pp)/q
    reverse               SHmax = Pp + q(Sv-Pp)       Shmin = Sv + phi(SHmax-Sv)
    ====================  ==========================  ==============================

    Both given: returned unchanged. ``None`` means "not given"; arrays may hold NaN for
    "not given" element-wise.

    Examples
    --------
    >>> [round(float(v), 2) for v in complete_magnitudes(70, 30, 0.6, "strike-slip", 0.5,
    ...                                                   shmin_mpa=50.0)]
    [92.4, 50.0]
    >>> [round(float(v), 2) for v in complete_magnitudes(70, 30, 0.6, "normal", 0.5,
    ...                                                   shmax_mpa=60.0)]
    [60.0, 42.82]
    """
    code = regime_code_of(regime)
    q, sv, pp, floor, ceiling = _polygon_corners(sv_mpa, pp_mpa, mu)
    phi = np.clip(np.asarray(shape_ratio, dtype=float), 0.0, 1.0)
    est_max, est_min = frictional_equilibrium(sv, pp, mu, code, phi)
    gmax = np.full(np.shape(est_max), np.nan) if shmax_mpa is None else \
        np.asarray(shmax_mpa, dtype=float)
    gmin = np.full(np.shape(est_min), np.nan) if shmin_mpa is None else \
        np.asarray(shmin_mpa, dtype=float)
    has_max, has_min = np.isfinite(gmax), np.isfinite(gmin)
    from_min = np.where(code == 0, gmin + phi * (sv - gmin),
                        np.where(code == 1, pp + q * (gmin - pp), ceiling))
    from_max = np.where(code == 0, floor,
                        np.where(code == 1, pp + (gmax - pp) / q, sv + phi * (gmax - sv)))
    shmax = np.where(has_max, gmax, np.where(has_min, from_min, est_max))
    shmin = np.where(has_min, gmin, np.where(has_max, from_max, est_min))
    return shmax, shmin


def regime_from_magnitudes(shmax_mpa, shmin_mpa, sv_mpa):
    """Anderson regime code from the order of SHmax, Shmin and Sv (ties go to strike-slip).

    Examples
    --------
    >>> regime_from_magnitudes([60, 90, 120], [40, 50, 80], 70).tolist()
    [0, 1, 2]
    """
    shmax, shmin, sv = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                             for a in (shmax_mpa, shmin_mpa, sv_mpa)))
    return np.where(shmax < sv, 0, np.where(shmin > sv, 2, 1)).astype(np.int8)


def shape_ratio_of(shmax_mpa, shmin_mpa, sv_mpa):
    """Shape ratio phi = (S2 - S3)/(S1 - S3) of the three principal magnitudes (NaN when
    S1 == S3, where it is undefined).

    Examples
    --------
    >>> shape_ratio_of([84.0, 60.0], [48.0, 40.0], [69.7, 70.0]).round(4).tolist()
    [0.6028, 0.6667]
    >>> bool(np.isnan(shape_ratio_of(50.0, 50.0, 50.0)))
    True
    """
    s = np.sort(np.stack(np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                               for a in (shmax_mpa, shmin_mpa, sv_mpa)))), axis=0)
    span = s[2] - s[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(span > 0, (s[1] - s[0]) / np.where(span > 0, span, 1.0), np.nan)


def frictional_ratio(shmax_mpa, shmin_mpa, sv_mpa, pp_mpa):
    """(S1 - Pp)/(S3 - Pp) of a state; above the Jaeger & Cook ratio means beyond the limit.

    Examples
    --------
    >>> round(float(frictional_ratio(56.41, 42.82, 70.0, 30.0)), 2)
    3.12
    """
    s = np.stack(np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                       for a in (shmax_mpa, shmin_mpa, sv_mpa))))
    pp = np.asarray(pp_mpa, dtype=float)
    s1, s3 = s.max(axis=0), s.min(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(s3 > pp, (s1 - pp) / np.where(s3 > pp, s3 - pp, 1.0), np.inf)


def principal_tensor_ned(shmax_mpa, shmin_mpa, sv_mpa, shmax_azimuth_deg):
    """Stress tensor in (north, east, down) from Anderson principal stresses, MPa.

    ``S = SHmax h h^T + Shmin k k^T + Sv d d^T`` with h = (cos A, sin A, 0) along SHmax
    (azimuth A), k = (-sin A, cos A, 0) and d = (0, 0, 1).

    Returns
    -------
    ndarray, shape (..., 3, 3)

    Examples
    --------
    >>> principal_tensor_ned(3.0, 1.0, 2.0, 90.0).round(12).tolist()   # SHmax east-west
    [[1.0, 0.0, 0.0], [0.0, 3.0, 0.0], [0.0, 0.0, 2.0]]
    >>> principal_tensor_ned([3.0, 5.0], 1.0, 2.0, 0.0).shape
    (2, 3, 3)
    """
    shmax, shmin, sv, az = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in
                                                 (shmax_mpa, shmin_mpa, sv_mpa,
                                                  shmax_azimuth_deg)))
    a = np.radians(az)
    c, s = np.cos(a), np.sin(a)
    out = np.zeros(shmax.shape + (3, 3))
    out[..., 0, 0] = shmax * c * c + shmin * s * s
    out[..., 1, 1] = shmax * s * s + shmin * c * c
    out[..., 0, 1] = out[..., 1, 0] = (shmax - shmin) * c * s
    out[..., 2, 2] = sv
    return out
