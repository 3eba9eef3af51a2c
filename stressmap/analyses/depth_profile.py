"""Stress with depth at a site: Sv, Pp, Shmin and SHmax from the surface to a requested depth.

Pure numpy over (samples, depths). At every depth the vertical stress integrates the density
profile, the pore pressure follows its gradient (hydrostatic by default), and the horizontal
stresses take the central estimate of :mod:`stressmap.analyses.screening` (the crust at the
Jaeger & Cook frictional limit in the site's regime, the shape ratio placing the intermediate
stress) between the frictional bounds of that regime. When uncertain inputs are sampled
(friction, pore-pressure gradient, overburden density, shape ratio), every sample gives one
profile and the result holds percentiles over the samples at every depth.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from stressmap import validate
from stressmap.analyses import screening as sc
from stressmap.errors import InputError, problem

__all__ = ["DepthProfile", "depth_grid", "stress_profile", "MAX_DEPTHS", "MAX_PROFILE_SAMPLES"]

#: Most depths one profile evaluates.
MAX_DEPTHS = 2000
#: Most samples x depths one profile evaluates (memory: a few arrays of this many doubles).
MAX_PROFILE_SAMPLES = 5_000_000


@dataclass
class DepthProfile:
    """Profiles at ``depth_km`` (D,): central values (D,), bounds (D,), percentiles (P, D)."""

    depth_km: np.ndarray
    central: dict
    bounds: dict
    percentiles: tuple = ()
    spread: dict | None = None
    samples: int = 0


def depth_grid(max_depth_km, step_km=None, count=None) -> np.ndarray:
    """Depths (km) from 0 to ``max_depth_km`` by ``step_km`` or in ``count`` steps.

    Examples
    --------
    >>> depth_grid(3.0, step_km=1.0).tolist()
    [0.0, 1.0, 2.0, 3.0]
    >>> depth_grid(-1.0, count=5)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: max_depth_km must be > 0, got -1
    """
    problems: list = []
    z = validate.number(max_depth_km, "max_depth_km", problems, low=0.0, low_inclusive=False,
                        high=40.0)
    step = None if step_km is None else validate.number(step_km, "step_km", problems, low=0.0,
                                                        low_inclusive=False)
    n = 101 if count is None else validate.number(count, "count", problems, low=2,
                                                  high=MAX_DEPTHS, integer=True)
    validate.raise_problems(problems)
    if step is not None:
        if z / step > MAX_DEPTHS:
            validate.raise_problems([problem(f"step_km {step:g} gives more than {MAX_DEPTHS} "
                                             "depths", field="step_km")])
        k = int(np.floor(z / step + 1e-9))
        grid = np.arange(k + 1) * step
        return grid if np.isclose(grid[-1], z) else np.append(grid, z)
    return np.linspace(0.0, z, n)


def _central(depth, profile, pp_gradient, friction, regime_code, shape_ratio):
    sv = sc.vertical_stress_mpa(depth, profile)
    pp = sc.pore_pressure_mpa(depth, pp_gradient)
    shmax, shmin = sc.frictional_equilibrium(sv, pp, friction, regime_code, shape_ratio)
    return {"sv_mpa": sv, "pp_mpa": pp, "shmax_mpa": shmax, "shmin_mpa": shmin}


def stress_profile(depth_km, *, regime_code: int, shape_ratio: float, friction: float = 0.6,
                   density: sc.DensityProfile | None = None, pore_gradient_mpa_km=None,
                   samples: dict | None = None, percentiles=(5.0, 50.0, 95.0)) -> DepthProfile:
    """Sv, Pp, SHmax and Shmin at every depth (MPa), with bounds and sampled percentiles.

    Parameters
    ----------
    depth_km : (D,) array
        Depths below the surface, km (>= 0).
    regime_code, shape_ratio, friction
        The site's Anderson regime (0 normal, 1 strike-slip, 2 reverse), shape ratio phi and the
        friction coefficient of the crust.
    density : DensityProfile, optional
        Overburden density (default: 2450 kg/m^3 throughout).
    pore_gradient_mpa_km : float, optional
        Pore-pressure gradient (default hydrostatic).
    samples : dict of (N,) arrays, optional
        Sampled ``friction``, ``pore_gradient_mpa_km``, ``density_kg_m3`` (a constant-density
        overburden per sample) and ``shape_ratio``; any left out keeps its central value.

    Examples
    --------
    >>> p = stress_profile([0.0, 2.0], regime_code=0, shape_ratio=0.5)
    >>> [round(float(v), 2) for v in p.central["sv_mpa"]]          # 2450 kg/m^3 x g x 2 km
    [0.0, 48.07]
    >>> p.central["shmin_mpa"][1] < p.central["shmax_mpa"][1] < p.central["sv_mpa"][1]
    np.True_
    """
    z = np.asarray(depth_km, dtype=float)
    if z.ndim != 1 or z.size == 0 or np.any(~np.isfinite(z)) or np.any(z < 0.0):
        raise InputError("depths must be finite and >= 0 km",
                         [problem("depths below the surface in km, >= 0", field="depth_km")])
    profile = density if density is not None else sc.density_profile()
    central = _central(z, profile, pore_gradient_mpa_km, friction, regime_code, shape_ratio)
    bounds = {k: np.asarray(v, dtype=float) for k, v in sc.regime_bounds(
        central["sv_mpa"], central["pp_mpa"], friction, regime_code).items()}
    result = DepthProfile(z, {k: np.asarray(v, dtype=float) for k, v in central.items()}, bounds)
    if not samples:
        return result
    n = max(np.size(v) for v in samples.values())
    if n * z.size > MAX_PROFILE_SAMPLES:
        raise InputError(f"samples x depths = {n * z.size} exceeds {MAX_PROFILE_SAMPLES}",
                         [problem("use fewer samples or fewer depths", field="samples")])
    col = z[None, :]
    mu = np.asarray(samples.get("friction", friction), dtype=float).reshape(-1, 1)
    phi = np.asarray(samples.get("shape_ratio", shape_ratio), dtype=float).reshape(-1, 1)
    grad = samples.get("pore_gradient_mpa_km", pore_gradient_mpa_km)
    grad = None if grad is None else np.asarray(grad, dtype=float).reshape(-1, 1)
    if "density_kg_m3" in samples:
        rho = np.asarray(samples["density_kg_m3"], dtype=float).reshape(-1, 1)
        sv = rho * sc.G_M_S2 * col * 1e-3                     # kg/m^3 x m/s^2 x km -> MPa
    else:
        sv = np.broadcast_to(central["sv_mpa"][None, :], (n, z.size))
    pp = sc.pore_pressure_mpa(col, grad)
    shmax, shmin = sc.frictional_equilibrium(sv, pp, mu, regime_code, phi)
    stacks = {"sv_mpa": sv, "pp_mpa": pp, "shmax_mpa": shmax, "shmin_mpa": shmin}
    q = np.asarray(percentiles, dtype=float)
    result.spread = {k: np.percentile(np.broadcast_to(v, (n, z.size)), q, axis=0)
                     for k, v in stacks.items()}
    result.percentiles, result.samples = tuple(float(v) for v in q), int(n)
    return result
