"""Plate-driving and resisting force laws (forces per unit length of boundary, N/m).

Pure numpy, vectorised over ages and parameters. Every default lives in
``stressmap/data/defaults.toml`` (see :func:`load_defaults`); every function takes ``params``,
a nested dict merged over those defaults (``{"half_space": {"mantle_temperature_c": 1350}}``).

Laws
----
Ridge push (Turcotte & Schubert, Geodynamics, ch. 6). The ridge column (hot mantle, density
``rho_m``) and a column of age ``t`` (water of depth ``w``, then cooled lithosphere of density
``rho_m (1 + alpha (Tm - T))``) are in isostatic balance at a compensation depth; ridge push is
the depth integral of their lithostatic pressure difference. With ``v = (Tm - T)/(Tm - T0)`` and
``s`` the depth below the seafloor this is exactly::

    F = (rho_m - rho_w) g w^2 / 2 + g rho_m alpha (Tm - T0) * integral(s v ds)

which for half-space cooling is the closed form::

    F = g rho_m alpha (Tm - T0) kappa t [1 + 2 rho_m alpha (Tm - T0) / (pi (rho_m - rho_w))]

:func:`ridge_push_n_per_m` evaluates the moment form (closed form for half-space cooling,
series for the plate model); :func:`ridge_push_numeric_n_per_m` integrates the two pressure
profiles on a depth grid instead, for any cooling model, as an independent route.

Distributed ridge push: the body force per unit area is ``dF/dt * grad(age)``, pointing toward
older lithosphere (:func:`ridge_push_rate_n_per_m_per_myr`, :func:`ridge_push_body_force_n_per_m2`).

Slab pull: transmitted fraction times ``g`` times the integrated thermal density anomaly of the
slab (kg/m^2, :func:`stressmap.physics.thermal.integrated_density_anomaly_kg_m2`) times its vertical
extent; the down-dip length ``L / sin(dip)`` and the down-dip component ``sin(dip)`` of gravity
cancel, so the force does not depend on dip.

Basal drag: Couette shear of a channel of thickness ``h`` and viscosity ``eta`` moving at ``v``:
traction ``eta v / h`` (Pa), force over a plate length ``L``: ``eta v L / h`` (N/m).

Collision, transform and trench-suction (overriding plate) resistance: line forces
``mean_stress_mpa * coupled_depth_km`` (our parameterisation; defaults and their sources in
defaults.toml).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from scipy import integrate

from stressmap import validate
from stressmap.constants import G_M_S2, M_PER_S_PER_MM_PER_YR, SECONDS_PER_MYR
from stressmap.errors import InputError, problem
from stressmap.physics import thermal
from stressmap.physics.thermal import load_defaults, resolve_params

__all__ = [
    "SEGMENT_KINDS",
    "load_defaults",
    "resolve_params",
    "ridge_push_n_per_m",
    "ridge_push_numeric_n_per_m",
    "ridge_push_rate_n_per_m_per_myr",
    "ridge_push_body_force_n_per_m2",
    "slab_pull_n_per_m",
    "basal_drag_traction_pa",
    "basal_drag_force_n_per_m",
    "line_force_n_per_m",
    "collision_resistance_n_per_m",
    "transform_resistance_n_per_m",
    "trench_suction_n_per_m",
    "segment_force_n_per_m",
]

#: Boundary segment kinds (README, Conventions) and the sign of their normal force (+ pushes into the plate).
SEGMENT_KINDS = {
    "ridge": 1.0,
    "subduction": -1.0,
    "overriding": -1.0,
    "collision": 1.0,
    "transform": 1.0,  # shear magnitude; its direction comes from `sense`
    "free": 0.0,
    "fixed": 0.0,  # a displacement constraint, not a force
}


def _nonneg(name, value) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if np.any(arr < 0):
        raise InputError(f"{name} must be >= 0", [problem("must be >= 0", field=name)])
    return arr


def _positive(name, value) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if np.any(arr <= 0):
        raise InputError(f"{name} must be > 0", [problem("must be > 0", field=name)])
    return arr


# ----------------------------------------------------------------------------- ridge push


def ridge_push_n_per_m(age_myr, params=None, model: str = "half_space") -> np.ndarray:
    """Ridge push (N/m, positive) of lithosphere of age ``age_myr`` (Myr).

    ``model="half_space"`` (default) is the Turcotte & Schubert closed form
    ``g rho_m alpha dT kappa t [1 + 2 rho_m alpha dT / (pi (rho_m - rho_w))]``;
    ``model="plate"`` uses the same pressure-moment expression with the plate-model series, so it
    saturates once the plate has cooled to its base.

    Examples
    --------
    >>> round(float(ridge_push_n_per_m(100.0)) / 1e12, 3)    # textbook constants, g = 9.81
    4.126
    >>> ridge_push_n_per_m([0.0, 10.0]).round(-9).tolist()
    [0.0, 413000000000.0]
    >>> bool(ridge_push_n_per_m(300.0, model="plate") < ridge_push_n_per_m(300.0))
    True
    """
    c = thermal.model_constants(model, params)
    if model == "half_space":
        t = np.asarray(age_myr, dtype=float)
        if np.any(t < 0):
            raise InputError("age_myr must be >= 0", [problem("must be >= 0", field="age_myr")])
        b = c["rho_m"] * c["alpha"] * c["dt_k"]
        return G_M_S2 * b * c["kappa"] * t * SECONDS_PER_MYR * (1.0 + 2.0 * b / (np.pi * (c["rho_m"] - c["rho_w"])))
    m = thermal.column_moments(age_myr, model, params)
    b = c["rho_m"] * c["alpha"] * c["dt_k"]
    w = b * m["j_m"] / (c["rho_m"] - c["rho_w"])
    return 0.5 * (c["rho_m"] - c["rho_w"]) * G_M_S2 * w**2 + G_M_S2 * b * m["i_m2"]


#: Ages per block in :func:`ridge_push_numeric_n_per_m` (256 x 4001 doubles = 8 MB per work array).
_NUMERIC_CHUNK = 256


def ridge_push_numeric_n_per_m(age_myr, model: str = "half_space", params=None, n_depth: int = 4001) -> np.ndarray:
    """Ridge push (N/m) by integrating the lithostatic pressure difference on a depth grid.

    For each age: the temperature profile of the cooling model gives the density excess
    ``rho_m alpha (Tm - T)`` of the aged column on ``n_depth`` points from the seafloor to the
    compensation depth (plate: the plate base; half-space: 16 sqrt(kappa t), where erfc < 1e-28);
    isostasy (trapezoid rule) gives the water depth ``w`` over it; the pressure of each column
    follows by cumulative trapezoid integration of density (water load on the aged column), and
    ridge push is the trapezoid integral of ``P_ridge - P_aged`` from the ridge crest to the
    compensation depth. Vectorised over ages, in blocks of 256 ages to bound memory.

    Examples
    --------
    >>> f = ridge_push_numeric_n_per_m([10.0, 100.0])
    >>> (f / ridge_push_n_per_m([10.0, 100.0])).round(5).tolist()
    [1.0, 1.0]
    >>> float(ridge_push_numeric_n_per_m(0.0)), float(ridge_push_numeric_n_per_m(0.0, "plate"))
    (0.0, 0.0)
    >>> ridge_push_numeric_n_per_m([]).shape
    (0,)
    """
    c = thermal.model_constants(model, params)
    t_myr = np.asarray(age_myr, dtype=float)
    if np.any(t_myr < 0):
        raise InputError("age_myr must be >= 0", [problem("must be >= 0", field="age_myr")])
    shape = t_myr.shape
    flat = t_myr.reshape(-1)
    if flat.size > _NUMERIC_CHUNK:  # bound the (ages, n_depth) work arrays; each chunk is vectorised
        parts = [ridge_push_numeric_n_per_m(flat[i:i + _NUMERIC_CHUNK], model, params, n_depth)
                 for i in range(0, flat.size, _NUMERIC_CHUNK)]
        return np.concatenate(parts).reshape(shape)
    t_flat = flat.reshape(-1, 1)
    if model == "plate":
        bottom_m = np.full_like(t_flat, c["a_m"])
    else:
        bottom_m = 16.0 * np.sqrt(c["kappa"] * t_flat * SECONDS_PER_MYR)
    s_m = bottom_m * np.linspace(0.0, 1.0, int(n_depth))[None, :]  # (ages, n) below the seafloor
    v = thermal.temperature_deficit(s_m / 1e3, t_flat, model, params)
    v = np.where(t_flat == 0, 0.0, v)  # the ridge column itself: its surface step has no mass
    rho_aged = c["rho_m"] * (1.0 + c["alpha"] * c["dt_k"] * v)  # density of the aged column
    g, rho_m, rho_w = G_M_S2, c["rho_m"], c["rho_w"]
    # Isostasy: equal mass above the compensation depth in both columns fixes the water depth.
    excess = integrate.trapezoid(rho_aged - rho_m, s_m, axis=-1)  # kg/m^2
    w = excess / (rho_m - rho_w)  # (ages,)
    # Depth z below the ridge crest. Water layer 0 < z < w: P_ridge = rho_m g z, P_aged = rho_w g z;
    # the difference is linear, so its trapezoid integral over the layer is exact.
    water_part = 0.5 * (rho_m - rho_w) * g * w**2
    # Below the seafloor, z = w + s.
    p_ridge = rho_m * g * (w[:, None] + s_m)
    p_aged = rho_w * g * w[:, None] + g * integrate.cumulative_trapezoid(rho_aged, s_m, axis=-1, initial=0.0)
    rock_part = integrate.trapezoid(p_ridge - p_aged, s_m, axis=-1)
    return (water_part + rock_part).reshape(shape)


def ridge_push_rate_n_per_m_per_myr(age_myr, params=None, model: str = "half_space") -> np.ndarray:
    """Rate of growth of ridge push with age, dF/dt (N/m per Myr).

    The distributed (body-force) form of ridge push is this rate times the age gradient
    (Myr/m), pointing toward older lithosphere (:func:`ridge_push_body_force_n_per_m2`). For
    half-space cooling ridge push is linear in age, so the rate is a constant; for the plate model
    it decays to zero as the plate reaches thermal equilibrium.

    Examples
    --------
    >>> round(float(ridge_push_rate_n_per_m_per_myr(50.0)) / 1e10, 4)
    4.1263
    >>> bool(ridge_push_rate_n_per_m_per_myr(300.0, model="plate") < 1e9)
    True
    >>> ridge_push_rate_n_per_m_per_myr([np.nan]).tolist()   # unknown age: no force
    [nan]
    """
    c = thermal.model_constants(model, params)
    m = thermal.column_moments(age_myr, model, params)
    b = c["rho_m"] * c["alpha"] * c["dt_k"]
    rho_m, rho_w = c["rho_m"], c["rho_w"]
    w = b * m["j_m"] / (rho_m - rho_w)
    dw = b * m["dj_m_per_s"] / (rho_m - rho_w)
    if model == "half_space":
        # w dw/dt = b^2 (2/pi) kappa / (rho_m - rho_w)^2 exactly (also at t = 0).
        w_dw = np.full(np.shape(w), 2.0 * b**2 * c["kappa"] / (np.pi * (rho_m - rho_w) ** 2))
    else:
        with np.errstate(invalid="ignore"):
            w_dw = np.where(m["j_m"] > 0, w * dw, 2.0 * b**2 * c["kappa"] / (np.pi * (rho_m - rho_w) ** 2))
    rate_per_s = (rho_m - rho_w) * G_M_S2 * w_dw + G_M_S2 * b * m["di_m2_per_s"]
    return np.where(np.isnan(m["j_m"]), np.nan, rate_per_s * SECONDS_PER_MYR)


def ridge_push_body_force_n_per_m2(age_myr, age_gradient_myr_per_m, params=None, model: str = "half_space") -> np.ndarray:
    """Distributed ridge push: body force per unit area (N/m^2) from an age gradient.

    ``age_gradient_myr_per_m`` has shape (..., k) (e.g. k = 2 for east, north components); the
    result has the same shape and points toward older lithosphere.

    Examples
    --------
    >>> f = ridge_push_body_force_n_per_m2(50.0, [1e-5, 0.0])   # 10 Myr per 1000 km, eastward
    >>> f.round(0).tolist()
    [412623.0, 0.0]
    """
    rate = ridge_push_rate_n_per_m_per_myr(age_myr, params, model)
    return np.asarray(rate)[..., None] * np.asarray(age_gradient_myr_per_m, dtype=float)


# ----------------------------------------------------------------------------- slab pull


def slab_pull_n_per_m(slab_age_myr, slab_depth_km, pull_fraction, params=None, model: str | None = None) -> np.ndarray:
    """Slab pull (N/m, positive magnitude of the outward pull at the trench).

    ``pull_fraction * g * (integrated thermal density anomaly of lithosphere of age
    slab_age_myr, kg/m^2) * slab_depth_km`` with the constants of ``model`` (default:
    ``slab_pull.model`` of the defaults, half-space cooling); independent of slab dip.

    Examples
    --------
    >>> round(float(slab_pull_n_per_m(100.0, 660.0, 1.0)) / 1e13, 3)   # full negative buoyancy
    5.282
    >>> round(float(slab_pull_n_per_m(100.0, 660.0, 0.1)) / 1e12, 3)
    5.282
    >>> float(slab_pull_n_per_m(100.0, 0.0, 0.5))
    0.0
    """
    p = resolve_params(params)
    model = model or p["slab_pull"]["model"]
    depth_m = _nonneg("slab_depth_km", slab_depth_km) * 1e3
    frac = np.asarray(pull_fraction, dtype=float)
    if np.any((frac < 0) | (frac > 1)):
        raise InputError("pull_fraction must lie in [0, 1]", [problem("must lie in [0, 1]", field="pull_fraction")])
    _nonneg("slab_age_myr", slab_age_myr)
    anomaly = thermal.integrated_density_anomaly_kg_m2(slab_age_myr, model, p)
    return frac * G_M_S2 * anomaly * depth_m


# ----------------------------------------------------------------------------- basal drag


def basal_drag_traction_pa(viscosity_pa_s, channel_km, velocity_mm_yr) -> np.ndarray:
    """Couette shear traction (Pa) at the base of a plate: ``viscosity * velocity / channel``.

    Examples
    --------
    >>> round(float(basal_drag_traction_pa(1e20, 100.0, 50.0)) / 1e6, 4)   # MPa
    1.5844
    """
    eta = _nonneg("viscosity_pa_s", viscosity_pa_s)
    h_m = _positive("channel_km", channel_km) * 1e3
    v = np.asarray(velocity_mm_yr, dtype=float) * M_PER_S_PER_MM_PER_YR
    return eta * np.abs(v) / h_m


def basal_drag_force_n_per_m(viscosity_pa_s, channel_km, velocity_mm_yr, length_km) -> np.ndarray:
    """Basal drag force per unit width (N/m): Couette traction integrated over ``length_km``.

    Examples
    --------
    >>> round(float(basal_drag_force_n_per_m(1e20, 100.0, 50.0, 6000.0)) / 1e12, 3)
    9.506
    """
    return basal_drag_traction_pa(viscosity_pa_s, channel_km, velocity_mm_yr) * _nonneg("length_km", length_km) * 1e3


# ----------------------------------------------------------------------------- line forces


def line_force_n_per_m(mean_stress_mpa, coupled_depth_km) -> np.ndarray:
    """Line force (N/m) of a mean stress (MPa) carried over a coupled depth (km).

    Examples
    --------
    >>> float(line_force_n_per_m(20.0, 15.0))
    300000000000.0
    """
    return _nonneg("mean_stress_mpa", mean_stress_mpa) * 1e6 * _nonneg("coupled_depth_km", coupled_depth_km) * 1e3


def _section_line_force(section: str, params, overrides) -> float:
    unknown = set(overrides) - {"mean_stress_mpa", "coupled_depth_km"}
    if unknown:
        name = sorted(unknown)[0]
        raise InputError(f"unknown {section} parameter {name}", [problem("unknown parameter (use mean_stress_mpa, coupled_depth_km)", field=name)])
    sec = dict(resolve_params(params)[section])
    sec.update({k: v for k, v in overrides.items() if v is not None})
    return line_force_n_per_m(sec["mean_stress_mpa"], sec["coupled_depth_km"])


def collision_resistance_n_per_m(params=None, **overrides) -> np.ndarray:
    """Collision resistance (N/m, positive): ``mean_stress_mpa * coupled_depth_km`` of ``[collision]``.

    Examples
    --------
    >>> float(collision_resistance_n_per_m())
    4000000000000.0
    >>> float(collision_resistance_n_per_m(coupled_depth_km=20.0))
    2000000000000.0
    """
    return _section_line_force("collision", params, overrides)


def transform_resistance_n_per_m(params=None, **overrides) -> np.ndarray:
    """Transform resistance (N/m, positive shear magnitude) from ``[transform]``.

    Examples
    --------
    >>> float(transform_resistance_n_per_m())
    300000000000.0
    """
    return _section_line_force("transform", params, overrides)


def trench_suction_n_per_m(params=None, **overrides) -> np.ndarray:
    """Trench suction on an overriding plate (N/m, positive magnitude) from ``[overriding]``.

    Examples
    --------
    >>> float(trench_suction_n_per_m())
    500000000000.0
    """
    return _section_line_force("overriding", params, overrides)


# ----------------------------------------------------------------------------- segments


def _prop(properties: Mapping, key: str, default, *, lo=0.0, hi=None, strict_lo=False):
    """One numeric segment property (``default`` when absent or null), checked by
    :func:`stressmap.validate.number`."""
    problems: list = []
    value = validate.number(properties.get(key), f"properties.{key}", problems, low=lo, high=hi,
                            low_inclusive=not strict_lo, nullable=True)
    validate.raise_problems(problems)
    return float(default) if value is None else value


def segment_force_n_per_m(kind: str, properties: Mapping | None = None, params=None) -> float:
    """Signed normal line force (N/m) of one boundary segment from its document properties.

    Sign convention (README, Conventions): positive pushes into the plate, negative pulls outward. For
    ``transform`` the result is the shear magnitude (its direction comes from ``sense``, applied
    by the load builder); ``free`` and ``fixed`` give 0 (a fixed edge is a displacement
    constraint, not a force).

    A ``force_n_per_m`` property overrides the physics: it is the magnitude (>= 0) and the kind
    supplies the sign. Otherwise, by kind:

    - ``ridge``: ridge push of lithosphere of ``age_myr``, or of age ``width_km / half_rate_mm_yr``
      (width from the properties or ``ridge_push.width_km``), or of ``ridge_push.age_myr``; the
      cooling model is the property ``cooling_model`` or ``ridge_push.model``;
    - ``subduction``: ``-`` slab pull from ``slab_age_myr``, ``slab_depth_km``, ``pull_fraction``
      (each defaulting to ``[slab_pull]``);
    - ``overriding``: ``-`` trench suction, ``collision``: ``+`` collision resistance,
      ``transform``: shear resistance, each from ``mean_stress_mpa`` and ``coupled_depth_km``
      (properties or defaults).

    Examples
    --------
    >>> round(segment_force_n_per_m("ridge", {"age_myr": 100.0}) / 1e12, 3)
    4.126
    >>> round(segment_force_n_per_m("ridge", {"half_rate_mm_yr": 20.0, "width_km": 2000.0}) / 1e12, 3)
    4.126
    >>> segment_force_n_per_m("subduction", {"force_n_per_m": 3e12})
    -3000000000000.0
    >>> segment_force_n_per_m("collision", {})
    4000000000000.0
    >>> segment_force_n_per_m("free", {})
    0.0
    >>> segment_force_n_per_m("trench", {})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: unknown segment kind 'trench' (use ridge, subduction, overriding, collision, transform, free, fixed)
    """
    if kind not in SEGMENT_KINDS:
        msg = f"unknown segment kind {kind!r} (use {', '.join(SEGMENT_KINDS)})"
        raise InputError(msg, [problem(msg, field="kind")])
    props = dict(properties or {})
    sign = SEGMENT_KINDS[kind]
    if kind in ("free", "fixed"):
        return 0.0
    if props.get("force_n_per_m") is not None:
        return sign * _prop(props, "force_n_per_m", 0.0)
    p = resolve_params(params)
    if kind == "ridge":
        rp = p["ridge_push"]
        if props.get("age_myr") is not None:
            age = _prop(props, "age_myr", rp["age_myr"])
        elif props.get("half_rate_mm_yr") is not None:
            rate = _prop(props, "half_rate_mm_yr", 1.0, strict_lo=True)
            width = _prop(props, "width_km", rp["width_km"])
            age = width / rate  # km / (mm/yr) = Myr
        else:
            age = float(rp["age_myr"])
        model = props.get("cooling_model", rp["model"])
        if model not in thermal.MODELS:
            msg = f"unknown cooling model {model!r} (use half_space or plate)"
            raise InputError(msg, [problem(msg, field="properties.cooling_model")])
        return sign * float(ridge_push_n_per_m(age, p, model=model))
    if kind == "subduction":
        sp = p["slab_pull"]
        age = _prop(props, "slab_age_myr", sp["slab_age_myr"])
        depth = _prop(props, "slab_depth_km", sp["slab_depth_km"])
        frac = _prop(props, "pull_fraction", sp["pull_fraction"], hi=1.0)
        return sign * float(slab_pull_n_per_m(age, depth, frac, p))
    section = {"overriding": "overriding", "collision": "collision", "transform": "transform"}[kind]
    stress = _prop(props, "mean_stress_mpa", p[section]["mean_stress_mpa"])
    depth = _prop(props, "coupled_depth_km", p[section]["coupled_depth_km"])
    return sign * float(line_force_n_per_m(stress, depth))
