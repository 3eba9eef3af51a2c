"""Cooling models of oceanic lithosphere: half-space cooling and the plate (finite-thickness) model.

Pure numpy, vectorised: every function broadcasts its age and depth arguments against each other
(one code path for a scalar and for a grid of ages x depths).

Models
------
``"half_space"``
    Conductive cooling of a half-space initially at the mantle temperature ``Tm`` whose surface is
    held at ``T0`` (Turcotte & Schubert, Geodynamics, ch. 4)::

        T(z, t) = T0 + (Tm - T0) erf(z / (2 sqrt(kappa t)))

    Subsidence below the ridge crest (isostasy with a water load)::

        w(t) = 2 rho_m alpha (Tm - T0) / (rho_m - rho_w) * sqrt(kappa t / pi)

``"plate"``
    The same cooling in a layer of thickness ``a`` whose base stays at ``Tm`` (the plate model of
    Parsons & Sclater 1977; defaults: GDH1, Stein & Stein 1992)::

        T(z, t) = T0 + (Tm - T0) [z/a + sum_n 2/(n pi) sin(n pi z/a) exp(-n^2 pi^2 kappa t / a^2)]
        w(t) = rho_m alpha (Tm - T0) a / (rho_m - rho_w)
               * [1/2 - sum_{n odd} 4/(n^2 pi^2) exp(-n^2 pi^2 kappa t / a^2)]

    While ``pi^2 kappa t / a^2 < 0.1`` the plate has not yet felt its base (the first image term
    of the plate solution is below 1e-11 of the half-space one) and the half-space expressions are
    used; above it the series converges within 40 terms.

Units: depths in km, ages in Myr, temperatures in degrees C; SI inside. Parameters come from
``stressmap/data/defaults.toml`` (sections ``[half_space]`` and ``[plate_model]``), overridable by
passing a nested dict (``{"plate_model": {"plate_thickness_km": 125.0}}``).
"""

from __future__ import annotations

import copy
import functools
import importlib.resources
import math
import tomllib
from collections.abc import Mapping

import numpy as np
from scipy import special

from stressmap import validate
from stressmap.constants import SECONDS_PER_MYR
from stressmap.errors import InputError, problem

__all__ = [
    "MODELS",
    "load_defaults",
    "resolve_params",
    "model_constants",
    "half_space_temperature_c",
    "plate_temperature_c",
    "temperature_c",
    "temperature_deficit",
    "thermal_thickness_km",
    "subsidence_km",
    "seafloor_depth_km",
    "integrated_density_anomaly_kg_m2",
    "column_moments",
]

#: Cooling-model names and the section of defaults.toml that holds their constants.
MODELS = {"half_space": "half_space", "plate": "plate_model"}

#: Below this value of pi^2 kappa t / a^2 the plate model equals half-space cooling to 1e-11.
_PLATE_SWITCH = 0.1
#: Series terms used above the switch (exp(-40^2 * 0.1) is far below double precision).
_PLATE_TERMS = 40


@functools.lru_cache(maxsize=1)
def _defaults_cached() -> dict:
    text = importlib.resources.files("stressmap.data").joinpath("defaults.toml").read_text("utf-8")
    return tomllib.loads(text)


def load_defaults() -> dict:
    """Physics defaults from the packaged ``defaults.toml`` as a nested dict (a fresh copy).

    Examples
    --------
    >>> d = load_defaults()
    >>> d["half_space"]["diffusivity_m2_s"]
    1e-06
    >>> d["plate_model"]["plate_thickness_km"]
    95.0
    >>> d["half_space"]["mantle_density_kg_m3"] = 0.0   # callers get a copy
    >>> load_defaults()["half_space"]["mantle_density_kg_m3"]
    3300.0
    """
    return copy.deepcopy(_defaults_cached())


def resolve_params(params: Mapping | None = None) -> dict:
    """Defaults with ``params`` merged over them (two levels: section, key).

    Raises :class:`~stressmap.errors.InputError` naming every unknown section or key and every
    value of the wrong type.

    Examples
    --------
    >>> p = resolve_params({"half_space": {"mantle_temperature_c": 1350}})
    >>> p["half_space"]["mantle_temperature_c"], p["half_space"]["diffusivity_m2_s"]
    (1350, 1e-06)
    >>> resolve_params({"half_space": {"kappa": 1e-6}})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: unknown physics parameter half_space.kappa
    """
    merged = load_defaults()
    if params is None:
        return merged
    if not isinstance(params, Mapping):
        raise InputError("physics parameters must be a mapping of sections to values")
    problems = []
    for section, values in params.items():
        if section not in merged:
            problems.append(problem(f"unknown physics parameter section {section}", field=str(section)))
            continue
        if not isinstance(values, Mapping):
            problems.append(problem("must be a table of parameters", field=str(section)))
            continue
        for key, value in values.items():
            field = f"{section}.{key}"
            if key not in merged[section]:
                problems.append(problem(f"unknown physics parameter {field}", field=field))
                continue
            if isinstance(merged[section][key], str):
                checked = validate.text(value, field, problems, empty=True, strip=False)
            else:
                checked = validate.number(value, field, problems)
            if checked is not None:
                merged[section][key] = value  # as given (an int stays an int)
    if problems:
        msg = problems[0]["message"] if len(problems) == 1 else "invalid physics parameters"
        raise InputError(msg, problems)
    return merged


def model_constants(model: str = "half_space", params: Mapping | None = None) -> dict:
    """SI constants of one cooling model: ``t0_c``, ``tm_c``, ``dt_k``, ``kappa``, ``alpha``,
    ``rho_m``, ``rho_w``, ``ridge_depth_m`` and (plate) ``a_m``.

    Examples
    --------
    >>> c = model_constants("plate")
    >>> c["a_m"], c["dt_k"]
    (95000.0, 1450.0)
    >>> model_constants("slab")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: unknown cooling model 'slab' (use half_space or plate)
    """
    if model not in MODELS:
        raise InputError(
            f"unknown cooling model {model!r} (use half_space or plate)",
            [problem(f"unknown cooling model {model!r} (use half_space or plate)", field="model")],
        )
    sec = resolve_params(params)[MODELS[model]]
    c = {
        "t0_c": float(sec["surface_temperature_c"]),
        "tm_c": float(sec["mantle_temperature_c"]),
        "kappa": float(sec["diffusivity_m2_s"]),
        "alpha": float(sec["expansivity_per_k"]),
        "rho_m": float(sec["mantle_density_kg_m3"]),
        "rho_w": float(sec["water_density_kg_m3"]),
        "ridge_depth_m": float(sec["ridge_depth_km"]) * 1e3,
        "a_m": float(sec["plate_thickness_km"]) * 1e3 if model == "plate" else math.inf,
    }
    c["dt_k"] = c["tm_c"] - c["t0_c"]
    section = MODELS[model]
    problems = []
    for key, name in (("kappa", "diffusivity_m2_s"), ("alpha", "expansivity_per_k"),
                      ("rho_m", "mantle_density_kg_m3"), ("a_m", "plate_thickness_km")):
        if not c[key] > 0:
            problems.append(problem("must be positive", field=f"{section}.{name}"))
    if c["dt_k"] <= 0:
        problems.append(problem("must exceed the surface temperature", field=f"{section}.mantle_temperature_c"))
    if not 0 <= c["rho_w"] < c["rho_m"]:
        problems.append(problem("must be >= 0 and below the mantle density", field=f"{section}.water_density_kg_m3"))
    if problems:
        raise InputError(problems[0]["message"] if len(problems) == 1 else "invalid cooling-model parameters", problems)
    return c


def _age_s(age_myr) -> np.ndarray:
    t = np.asarray(age_myr, dtype=float)
    if np.any(t < 0):
        raise InputError("age_myr must be >= 0", [problem("must be >= 0", field="age_myr")])
    return t * SECONDS_PER_MYR


def _depth_m(depth_km) -> np.ndarray:
    z = np.asarray(depth_km, dtype=float)
    if np.any(z < 0):
        raise InputError("depth_km must be >= 0", [problem("must be >= 0", field="depth_km")])
    return z * 1e3


def _deficit_half_space(z_m, t_s, kappa):
    """(Tm - T)/(Tm - T0) for half-space cooling; t = 0 gives 0 below the surface, 1 at it."""
    z_m, t_s = np.broadcast_arrays(z_m, t_s)
    scale = 2.0 * np.sqrt(kappa * t_s)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = special.erfc(z_m / scale)
    step = np.where(z_m > 0, 0.0, 1.0)  # t = 0: the ridge column
    return np.where(t_s > 0, out, np.where(t_s == 0, step, np.nan))


def _deficit_plate(z_m, t_s, kappa, a_m):
    """(Tm - T)/(Tm - T0) for the plate model (half-space while the base is not yet felt)."""
    z_m, t_s = np.broadcast_arrays(z_m, t_s)
    x = np.pi**2 * kappa * t_s / a_m**2
    young = x < _PLATE_SWITCH
    out = _deficit_half_space(z_m, t_s, kappa)
    if not np.all(young):
        xs = np.where(young, _PLATE_SWITCH, x)
        u = z_m / a_m
        total = np.zeros(np.shape(u))
        for n in range(1, _PLATE_TERMS + 1):  # loop over series terms, each vectorised
            total += 2.0 / (n * np.pi) * np.sin(n * np.pi * u) * np.exp(-(n**2) * xs)
        out = np.where(young, out, 1.0 - u - total)
    return np.where(z_m >= a_m, 0.0, np.clip(out, 0.0, 1.0))


def temperature_deficit(depth_km, age_myr, model: str = "half_space", params=None) -> np.ndarray:
    """Non-dimensional temperature deficit ``(Tm - T) / (Tm - T0)``: 1 at the seafloor, 0 in the
    mantle.

    Examples
    --------
    >>> float(temperature_deficit(0.0, 50.0))
    1.0
    >>> temperature_deficit([0.0, 10.0], [0.0, np.nan]).tolist()   # ridge column; unknown age
    [1.0, nan]
    >>> round(float(temperature_deficit(95.0, 50.0, model="plate")), 12)
    0.0
    """
    c = model_constants(model, params)
    z, t = _depth_m(depth_km), _age_s(age_myr)
    if model == "plate":
        return _deficit_plate(z, t, c["kappa"], c["a_m"])
    return _deficit_half_space(z, t, c["kappa"])


def temperature_c(depth_km, age_myr, model: str = "half_space", params=None) -> np.ndarray:
    """Temperature (degrees C) at ``depth_km`` below the seafloor in lithosphere of ``age_myr``.

    Broadcasts: ``temperature_c(z[:, None], ages[None, :])`` is a depth x age table.

    Examples
    --------
    >>> round(float(temperature_c(0.0, 10.0)), 6)
    0.0
    >>> float(temperature_c(400.0, 10.0))      # far below the boundary layer: mantle temperature
    1300.0
    >>> temperature_c([0.0, 95.0], 300.0, model="plate").round(3).tolist()
    [0.0, 1450.0]
    """
    c = model_constants(model, params)
    return c["tm_c"] - c["dt_k"] * temperature_deficit(depth_km, age_myr, model, params)


def half_space_temperature_c(depth_km, age_myr, params=None) -> np.ndarray:
    """Half-space cooling temperature ``T0 + (Tm - T0) erf(z / 2 sqrt(kappa t))`` in degrees C.

    Examples
    --------
    >>> round(float(half_space_temperature_c(2 * (1e-6 * 3.15576e13) ** 0.5 / 1e3, 1.0)), 3)
    1095.511
    """
    return temperature_c(depth_km, age_myr, "half_space", params)


def plate_temperature_c(depth_km, age_myr, params=None) -> np.ndarray:
    """Plate-model temperature in degrees C (series solution; GDH1 defaults).

    Examples
    --------
    >>> round(float(plate_temperature_c(47.5, 1e4)), 3)   # steady state: linear profile
    725.0
    """
    return temperature_c(depth_km, age_myr, "plate", params)


def thermal_thickness_km(age_myr, model: str = "half_space", params=None, fraction: float = 0.9) -> np.ndarray:
    """Depth (km) of the isotherm ``T = T0 + fraction (Tm - T0)``: the thermal lithosphere.

    For half-space cooling this is ``2 erfinv(fraction) sqrt(kappa t)`` (2.32 sqrt(kappa t) for 0.9);
    for the plate model it is found by bisection (60 halvings, vectorised over ages) and never
    exceeds the plate thickness.

    Examples
    --------
    >>> round(float(thermal_thickness_km(100.0)), 2)
    130.68
    >>> round(float(thermal_thickness_km(0.0)), 6)
    0.0
    >>> bool(thermal_thickness_km(1000.0, model="plate") < 95.0)
    True
    >>> thermal_thickness_km([np.nan, 0.0], model="plate").tolist()   # NaN ages stay NaN
    [nan, 0.0]
    >>> thermal_thickness_km([]).shape
    (0,)
    """
    if not 0.0 < fraction < 1.0:
        raise InputError("fraction must lie strictly between 0 and 1", [problem("must lie in (0, 1)", field="fraction")])
    c = model_constants(model, params)
    t = _age_s(age_myr)
    if model == "half_space":
        return 2.0 * special.erfinv(fraction) * np.sqrt(c["kappa"] * t) / 1e3
    lo = np.zeros(np.shape(t))
    hi = np.full(np.shape(t), c["a_m"])
    target = 1.0 - fraction
    for _ in range(60):  # bisection halvings, each vectorised over all ages
        mid = 0.5 * (lo + hi)
        above = _deficit_plate(mid, t, c["kappa"], c["a_m"]) > target
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid)
    return np.where(np.isnan(t), np.nan, np.where(t > 0, 0.5 * (lo + hi), 0.0)) / 1e3


def _ierfc(x):
    """First repeated integral of erfc: exp(-x^2)/sqrt(pi) - x erfc(x)."""
    return np.exp(-(x**2)) / np.sqrt(np.pi) - x * special.erfc(x)


def column_moments(age_myr, model: str = "half_space", params=None) -> dict:
    """Depth moments of the temperature deficit ``v(s) = (Tm - T)/(Tm - T0)`` of one column.

    Returns a dict of arrays (broadcast over ``age_myr``): ``j_m`` = integral of v ds (m),
    ``i_m2`` = integral of s v ds (m^2), and their time derivatives ``dj_m_per_s`` and
    ``di_m2_per_s``. Subsidence is ``rho_m alpha (Tm - T0) j / (rho_m - rho_w)``; ridge push uses
    both moments (see :mod:`stressmap.physics.forces`).

    Half-space: ``j = 2 sqrt(kappa t / pi)``, ``i = kappa t``. Plate (above the switch):
    ``j = a [1/2 - sum_odd 4/(n^2 pi^2) e^(-n^2 x)]``,
    ``i = a^2 [1/6 - sum_n 2 (-1)^(n+1)/(n^2 pi^2) e^(-n^2 x)]``, ``x = pi^2 kappa t / a^2``.

    Examples
    --------
    >>> m = column_moments(1.0)
    >>> round(float(m["i_m2"]), 1)            # kappa t for 1 Myr
    31557600.0
    >>> m = column_moments(1e5, model="plate")  # steady plate: a/2 and a^2/6
    >>> round(float(m["j_m"]), 3), round(float(m["i_m2"] / 95e3**2), 6)
    (47500.0, 0.166667)
    """
    c = model_constants(model, params)
    t = _age_s(age_myr)
    kappa = c["kappa"]
    j = 2.0 * np.sqrt(kappa * t / np.pi)
    i = kappa * t
    with np.errstate(divide="ignore"):
        dj = np.where(t > 0, np.sqrt(kappa / (np.pi * np.maximum(t, 1e-300))), np.inf)
    di = np.full(np.shape(t), kappa)
    if model == "plate":
        a = c["a_m"]
        x = np.pi**2 * kappa * t / a**2
        young = x < _PLATE_SWITCH
        if not np.all(young):
            xs = np.where(young, _PLATE_SWITCH, x)
            sj = np.zeros(np.shape(t))
            si = np.zeros(np.shape(t))
            sdj = np.zeros(np.shape(t))
            sdi = np.zeros(np.shape(t))
            for n in range(1, _PLATE_TERMS + 1):  # loop over series terms, each vectorised
                e = np.exp(-(n**2) * xs)
                sign = 1.0 if n % 2 else -1.0
                si += 2.0 * sign / (n**2 * np.pi**2) * e
                sdi += 2.0 * sign * e
                if n % 2:
                    sj += 4.0 / (n**2 * np.pi**2) * e
                    sdj += e
            j = np.where(young, j, a * (0.5 - sj))
            i = np.where(young, i, a**2 * (1.0 / 6.0 - si))
            dj = np.where(young, dj, 4.0 * kappa / a * sdj)
            di = np.where(young, di, kappa * sdi)
    return {"j_m": j, "i_m2": i, "dj_m_per_s": dj, "di_m2_per_s": di}


def subsidence_km(age_myr, model: str = "half_space", params=None) -> np.ndarray:
    """Seafloor subsidence below the ridge crest (km), water-loaded isostasy.

    Half-space: ``2 rho_m alpha (Tm - T0) / (rho_m - rho_w) sqrt(kappa t / pi)``.

    Examples
    --------
    >>> round(float(subsidence_km(1.0)), 4)     # km per sqrt(Myr), textbook constants
    0.3547
    >>> subsidence_km([0.0, 100.0]).round(3).tolist()
    [0.0, 3.547]
    """
    c = model_constants(model, params)
    j = column_moments(age_myr, model, params)["j_m"]
    return c["rho_m"] * c["alpha"] * c["dt_k"] * j / (c["rho_m"] - c["rho_w"]) / 1e3


def seafloor_depth_km(age_myr, model: str = "half_space", params=None) -> np.ndarray:
    """Seafloor depth (km below sea level): ridge-crest depth plus subsidence.

    Examples
    --------
    >>> round(float(seafloor_depth_km(0.0, model="plate")), 3)
    2.6
    >>> round(float(seafloor_depth_km(1e4, model="plate")), 3)   # GDH1 asymptote 5651 m
    5.651
    """
    c = model_constants(model, params)
    return c["ridge_depth_m"] / 1e3 + subsidence_km(age_myr, model, params)


def integrated_density_anomaly_kg_m2(age_myr, model: str = "half_space", params=None) -> np.ndarray:
    """Excess mass per unit area of a cooled column, ``rho_m alpha (Tm - T0) * integral of v`` (kg/m^2).

    Equal to ``(rho_m - rho_w) * subsidence`` by isostasy; it is what makes a slab sink.

    Examples
    --------
    >>> round(float(integrated_density_anomaly_kg_m2(100.0)) / 1e6, 4)   # 2 rho alpha dT sqrt(kt/pi)
    8.158
    """
    c = model_constants(model, params)
    j = column_moments(age_myr, model, params)["j_m"]
    return c["rho_m"] * c["alpha"] * c["dt_k"] * j
