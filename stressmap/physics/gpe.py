"""Gravitational potential energy (GPE) of lithospheric columns: body forces from topography.

**Definition.** The GPE of a column per unit area (N/m) is the depth integral of its vertical
(lithostatic) stress, ``U = integral_top^zc sigma_zz dz = g integral rho(z) (zc - z) dz``, with
``sigma_zz`` the weight of the overburden (positive), ``z`` positive downward from sea level and
``zc`` a compensation depth below every column. Columns in isostatic equilibrium have equal mass
above ``zc``, so the *difference* of their GPE does not depend on ``zc``. Every value returned
here is relative to a stated **reference column**: continental crust of
``reference_crust_km`` (35 km) at sea level over mantle (defaults.toml ``[gpe]``). Only
horizontal differences of U load the plate: adding a constant changes nothing.

**Sign convention and the thin-sheet equation.** With ``N`` the depth-integrated horizontal
stress relative to the lithostatic reference (the sheet's membrane force, N/m, *tension positive*
here; stressmap outputs show ``-N / h`` so compression is positive), horizontal force balance of
the depth-integrated column (no shear on the sheet's top and base other than basal drag) is

    div N = grad U        (England & McKenzie 1982; Molnar & Lyon-Caen 1988; from memory)

so the GPE acts on the sheet as the body force ``f = -grad U`` (N/m^2): high columns push toward
low ones. Across a step of GPE the membrane force jumps by ``dU``: the high side is in relative
tension (normal faulting on plateaus), the low side in relative compression, and the tectonic
stress difference is ``dU / h`` for a sheet of thickness ``h``. :mod:`stressmap.fem.loads`
(:func:`~stressmap.fem.loads.gpe_loads`) turns nodal U into equivalent nodal forces.

**Columns.**

* ``airy`` (default): a crust of density rho_c whose root compensates the elevation (Airy):
  above sea level a root ``r = e rho_c / (rho_m - rho_c)``; below sea level a water layer and a
  thinner crust, ``H = H0 - d (rho_c - rho_w) / (rho_m - rho_c)`` (Moho at ``H`` below sea level).
  For a plateau of height h this gives the closed form
  ``dU = rho_c g h (H0 + h rho_m / (2 (rho_m - rho_c)))`` (tests/physics/test_gpe.py).
* ``crust``: elevation and crustal thickness both given; the mantle between the Moho and
  ``compensation_depth_km`` takes the density that restores the reference column's mass
  (isostasy by a lithospheric-mantle density anomaly).
* oceanic columns from **age** (cooling models of :mod:`stressmap.physics.thermal`): water
  over a thermally contracted lithosphere, ``U(t) = U_airy(-ridge depth) - F(t)`` where ``F(t)``
  is the GPE drop from the ridge column to lithosphere of age t, integrated numerically from the
  temperature profile; ``F`` is the ridge push (Turcotte & Schubert; Parsons & Richter 1980).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from stressmap.constants import G_M_S2, SECONDS_PER_MYR
from stressmap.errors import InputError, problem
from stressmap.physics import thermal

__all__ = ["gpe_params", "airy_moho_m", "airy_gpe_n_per_m", "crust_gpe_n_per_m",
           "ocean_gpe_drop_n_per_m", "oceanic_gpe_n_per_m", "column_gpe_n_per_m"]

_ISOSTASY = ("airy", "crust")


def gpe_params(overrides: Mapping | None = None) -> dict:
    """The ``[gpe]`` defaults of defaults.toml with ``overrides`` (same keys) merged over them.

    Examples
    --------
    >>> p = gpe_params({"reference_crust_km": 40.0})
    >>> p["reference_crust_km"], p["crust_density_kg_m3"], p["isostasy"]
    (40.0, 2800.0, 'airy')
    """
    params = thermal.resolve_params({"gpe": dict(overrides or {})})["gpe"]
    probs = []
    for key in ("crust_density_kg_m3", "mantle_density_kg_m3", "reference_crust_km",
                "compensation_depth_km", "gravity_m_s2"):
        if not float(params[key]) > 0:
            probs.append(problem("must be positive", field=f"gpe.{key}"))
    if not 0 <= float(params["water_density_kg_m3"]) < float(params["crust_density_kg_m3"]) \
            < float(params["mantle_density_kg_m3"]):
        probs.append(problem("densities must satisfy water < crust < mantle",
                             field="gpe.crust_density_kg_m3"))
    if params["isostasy"] not in _ISOSTASY:
        probs.append(problem(f"must be one of {', '.join(_ISOSTASY)}", field="gpe.isostasy"))
    if probs:
        raise InputError(probs[0]["message"], probs)
    return params


def _layers_gpe(tops_m, bottoms_m, rho, zc_m, g):
    """g * sum_k rho_k * integral_{top_k}^{bottom_k} (zc - z) dz over layers (..., k), N/m."""
    a, b = zc_m - np.asarray(tops_m), zc_m - np.asarray(bottoms_m)
    return g * np.sum(np.asarray(rho) * 0.5 * (a * a - b * b), axis=-1)


def _column(elevation_m, moho_m, p):
    """Layers (tops, bottoms, densities), each (n, 3): water or nothing, crust, mantle to zc."""
    e = np.asarray(elevation_m, dtype=float)
    depth = np.maximum(-e, 0.0)  # water depth
    top = np.where(e > 0, -e, depth)
    moho = np.maximum(moho_m, top)
    zc = _zc(moho, p)
    tops = np.stack([np.zeros_like(e), top, moho], axis=-1)
    bottoms = np.stack([depth, moho, np.full_like(e, zc)], axis=-1)
    rho = np.array([p["water_density_kg_m3"], p["crust_density_kg_m3"],
                    p["mantle_density_kg_m3"]], dtype=float)
    return tops, bottoms, rho, zc


def _zc(moho_m, p) -> float:
    deepest = float(np.max(moho_m, initial=0.0))
    return max(float(p["compensation_depth_km"]) * 1e3, deepest + 1e3)


def _reference_gpe(p, zc) -> float:
    h0 = float(p["reference_crust_km"]) * 1e3
    return float(_layers_gpe([0.0, h0], [h0, zc], [p["crust_density_kg_m3"],
                                                   p["mantle_density_kg_m3"]], zc,
                             float(p["gravity_m_s2"])))


def airy_moho_m(elevation_m, params: Mapping | None = None) -> np.ndarray:
    """Depth of the Moho below sea level (m) of an Airy-compensated column of elevation (m).

    Examples
    --------
    >>> airy_moho_m([0.0, 1000.0, -2500.0]).round(1).tolist()   # root 5.6 km per km of height
    [35000.0, 40600.0, 26000.0]
    """
    p = gpe_params(params)
    e = np.asarray(elevation_m, dtype=float)
    rc, rm, rw = p["crust_density_kg_m3"], p["mantle_density_kg_m3"], p["water_density_kg_m3"]
    h0 = float(p["reference_crust_km"]) * 1e3
    root = np.where(e >= 0, e * rc / (rm - rc), e * (rc - rw) / (rm - rc))
    return h0 + root


def airy_gpe_n_per_m(elevation_m, params: Mapping | None = None) -> np.ndarray:
    """GPE (N/m) of Airy-compensated columns of elevation (m; negative: water depth) relative to
    the reference column. Deeper than where the crust would vanish, the column is water over
    mantle (not isostatic).

    Examples
    --------
    >>> float(airy_gpe_n_per_m(0.0))
    0.0
    >>> round(float(airy_gpe_n_per_m(3000.0)) / 1e12, 3)   # 3 km plateau, 1e12 N/m
    3.7
    """
    p = gpe_params(params)
    e = np.asarray(elevation_m, dtype=float)
    tops, bottoms, rho, zc = _column(e, airy_moho_m(e, p), p)
    return _layers_gpe(tops, bottoms, rho, zc, float(p["gravity_m_s2"])) - _reference_gpe(p, zc)


def crust_gpe_n_per_m(elevation_m, crust_km, params: Mapping | None = None) -> np.ndarray:
    """GPE (N/m) of columns of given elevation (m) and crustal thickness (km), relative to the
    reference column; the mantle down to ``compensation_depth_km`` balances the mass.

    Examples
    --------
    An Airy column given its own Airy crust gives the Airy GPE:

    >>> bool(np.isclose(crust_gpe_n_per_m(2000.0, 35.0 + 2.0 * 5.6 + 2.0),
    ...                 airy_gpe_n_per_m(2000.0), rtol=1e-9))
    True
    """
    p = gpe_params(params)
    e = np.asarray(elevation_m, dtype=float)
    h = np.asarray(crust_km, dtype=float) * 1e3
    top = np.where(e > 0, -e, np.maximum(-e, 0.0))
    tops, bottoms, rho, zc = _column(e, top + h, p)
    g = float(p["gravity_m_s2"])
    h0 = float(p["reference_crust_km"]) * 1e3
    ref_mass = p["crust_density_kg_m3"] * h0 + p["mantle_density_kg_m3"] * (zc - h0)
    above = np.sum(rho[:2] * (bottoms[..., :2] - tops[..., :2]), axis=-1)
    mantle_thick = bottoms[..., 2] - tops[..., 2]
    if np.any(mantle_thick <= 0):
        raise InputError("a column's crust reaches the compensation depth",
                         [problem("crustal thickness plus elevation exceeds gpe.compensation_depth_km",
                                  field="gpe.compensation_depth_km")])
    rho_mantle = (ref_mass - above) / mantle_thick
    rho_all = np.concatenate([np.broadcast_to(rho[:2], tops.shape[:-1] + (2,)),
                              rho_mantle[..., None]], axis=-1)
    return _layers_gpe(tops, bottoms, rho_all, zc, g) - _reference_gpe(p, zc)


def ocean_gpe_drop_n_per_m(age_myr, model: str = "half_space", params: Mapping | None = None,
                           n_depth: int = 4001) -> np.ndarray:
    """GPE drop (N/m) from the ridge column to oceanic lithosphere of age (Myr): the ridge push.

    Integrated numerically: with ``theta(s)`` the temperature deficit at depth s below the
    seafloor (:func:`stressmap.physics.thermal.temperature_deficit`) and the isostatic
    subsidence ``w = rho_m alpha dT int theta ds / (rho_m - rho_w)``, the drop is
    ``g [rho_m alpha dT int theta s ds + (rho_m - rho_w) w^2 / 2]``. ``params`` are the
    cooling-model parameters (thermal sections).

    Examples
    --------
    >>> ocean_gpe_drop_n_per_m([0.0]).tolist()
    [0.0]
    """
    c = thermal.model_constants(model, params)
    age = np.asarray(age_myr, dtype=float)
    t_s = np.maximum(age, 0.0) * SECONDS_PER_MYR
    if np.isfinite(c["a_m"]):
        depth_max = np.full(age.shape, c["a_m"])
    else:  # erfc(6) ~ 2e-17: the half-space anomaly has vanished
        depth_max = 12.0 * np.sqrt(c["kappa"] * t_s)
    frac = np.linspace(0.0, 1.0, n_depth)
    s = depth_max[..., None] * frac  # (..., n_depth) m
    theta = thermal.temperature_deficit(s / 1e3, age[..., None], model=model, params=params)
    theta = np.where(age[..., None] > 0, theta, 0.0)
    i0 = np.trapezoid(theta, s, axis=-1)
    i1 = np.trapezoid(theta * s, s, axis=-1)
    drho = c["rho_m"] * c["alpha"] * c["dt_k"]
    w = drho * i0 / (c["rho_m"] - c["rho_w"])
    return G_M_S2 * (drho * i1 + 0.5 * (c["rho_m"] - c["rho_w"]) * w * w)


def oceanic_gpe_n_per_m(age_myr, model: str | None = None, params: Mapping | None = None,
                        table_size: int = 401) -> np.ndarray:
    """GPE (N/m) of oceanic columns of age (Myr) relative to the reference column: the Airy
    column at the cooling model's ridge depth minus the ridge push (module docstring).

    Evaluated on a table of ``table_size`` ages up to the oldest and interpolated linearly
    (U(t) is smooth), so a million nodes cost a few milliseconds. NaN ages give NaN.
    """
    p = gpe_params(params)
    model = model or p["ocean_model"]
    c = thermal.model_constants(model)
    age = np.asarray(age_myr, dtype=float)
    finite = np.isfinite(age)
    top = float(np.max(age[finite], initial=0.0))
    table_age = np.linspace(0.0, max(top, 1e-6), table_size)
    drop = ocean_gpe_drop_n_per_m(table_age, model=model)
    ridge = float(airy_gpe_n_per_m(-c["ridge_depth_m"], p))
    out = np.full(age.shape, np.nan)
    out[finite] = ridge - np.interp(np.maximum(age[finite], 0.0), table_age, drop)
    return out


def column_gpe_n_per_m(elevation_m=None, crust_km=None, age_myr=None, oceanic=None,
                       params: Mapping | None = None) -> np.ndarray:
    """GPE (N/m) of every column relative to the reference column.

    Parameters
    ----------
    elevation_m : (n,) elevation or bathymetry, m (needed where a column is not oceanic-by-age).
    crust_km : (n,), optional, crustal thickness, km (with ``isostasy = "crust"``).
    age_myr : (n,), optional, lithosphere age, Myr.
    oceanic : (n,) bool, optional: columns that take the cooling-model column from ``age_myr``.
    params : mapping, optional, overrides of the ``[gpe]`` defaults.

    Examples
    --------
    >>> column_gpe_n_per_m([0.0, 2000.0], age_myr=[np.nan, 0.0], oceanic=[False, True]).shape
    (2,)
    """
    p = gpe_params(params)
    n = np.size(elevation_m) if elevation_m is not None else np.size(age_myr)
    oceanic = np.zeros(n, dtype=bool) if oceanic is None else np.asarray(oceanic, dtype=bool)
    out = np.full(n, np.nan)
    land = ~oceanic
    if land.any():
        if elevation_m is None:
            raise InputError("continental columns need an elevation",
                             [problem("give an elevation grid", field="gpe.elevation_grid")])
        e = np.asarray(elevation_m, dtype=float)[land]
        if p["isostasy"] == "crust":
            if crust_km is None:
                raise InputError("gpe.isostasy 'crust' needs a crustal-thickness grid",
                                 [problem("give gpe.crust_grid", field="gpe.crust_grid")])
            out[land] = crust_gpe_n_per_m(e, np.asarray(crust_km, dtype=float)[land], p)
        else:
            out[land] = airy_gpe_n_per_m(e, p)
    if oceanic.any():
        out[oceanic] = oceanic_gpe_n_per_m(np.asarray(age_myr, dtype=float)[oceanic], params=p)
    return out
