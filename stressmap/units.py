"""Oilfield units for stress outputs: psi, ft, psi/ft and equivalent mud weight in ppg.

The product computes in SI (MPa, km, MPa/km); engineers who plan wells often read pressures in
psi, depths in ft, gradients in psi/ft and downhole pressures as an *equivalent mud weight* (EMW,
the density of a static fluid column that would give the pressure at that depth) in pounds per US
gallon (ppg). Conversions use the published definitions:

- 1 psi = 6894.757 Pa (NIST Special Publication 811, pound-force per square inch);
- 1 ft = 0.3048 m exactly (international foot);
- a fluid of 1 ppg exerts 0.051948 psi/ft (from 1 lb/US gal = 119.826 kg/m^3 and g = 9.80665
  m/s^2: the oilfield constant, usually rounded to 0.052).

Examples
--------
>>> round(float(mpa_to_psi(1.0)), 2)
145.04
>>> round(float(mpa_per_km_to_psi_per_ft(10.0)), 4)      # 10 MPa/km is 0.442 psi/ft
0.4421
>>> round(float(emw_ppg(psi=4500.0, depth_ft=10000.0)), 2)  # 0.45 psi/ft
8.66
"""

from __future__ import annotations

import numpy as np

from stressmap.errors import InputError, problem

__all__ = [
    "PA_PER_PSI",
    "M_PER_FT",
    "PSI_PER_FT_PER_PPG",
    "UNIT_SYSTEMS",
    "mpa_to_psi",
    "km_to_ft",
    "mpa_per_km_to_psi_per_ft",
    "emw_ppg",
    "check_units",
    "convert_stress_table",
]

#: Pascal per psi (NIST SP 811).
PA_PER_PSI = 6894.757
#: Metre per international foot (exact).
M_PER_FT = 0.3048
#: Pressure gradient of a 1 ppg fluid column, psi/ft (oilfield constant).
PSI_PER_FT_PER_PPG = 0.051948
#: Unit systems a caller can ask for.
UNIT_SYSTEMS = ("si", "oilfield")


def mpa_to_psi(mpa):
    """MPa -> psi."""
    return np.asarray(mpa, dtype=float) * 1e6 / PA_PER_PSI


def km_to_ft(km):
    """km -> ft."""
    return np.asarray(km, dtype=float) * 1e3 / M_PER_FT


def mpa_per_km_to_psi_per_ft(mpa_per_km):
    """MPa/km -> psi/ft (1 MPa/km = 1000 Pa/m)."""
    return np.asarray(mpa_per_km, dtype=float) * 1e3 * M_PER_FT / PA_PER_PSI


def emw_ppg(*, mpa=None, depth_km=None, psi=None, depth_ft=None):
    """Equivalent mud weight (ppg) of a pressure at a depth: (P / TVD in psi/ft) / 0.051948.

    Give ``mpa`` and ``depth_km`` or ``psi`` and ``depth_ft``. NaN at zero depth.
    """
    if psi is None:
        psi, depth_ft = mpa_to_psi(mpa), km_to_ft(depth_km)
    psi, depth_ft = np.asarray(psi, dtype=float), np.asarray(depth_ft, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(depth_ft > 0, psi / np.where(depth_ft > 0, depth_ft, 1.0), np.nan) \
            / PSI_PER_FT_PER_PPG


def check_units(value, field: str = "units") -> str:
    """``si`` (default for None) or ``oilfield``; anything else is an :class:`InputError`."""
    if value is None:
        return "si"
    if isinstance(value, str) and value.lower() in UNIT_SYSTEMS:
        return value.lower()
    raise InputError(f"{field} must be one of {', '.join(UNIT_SYSTEMS)}",
                     [problem(f"unknown unit system {value!r}; use si (MPa, km) or oilfield "
                              "(psi, ft, ppg)", field=field)])


def convert_stress_table(columns: dict, units: str, depth_km=None) -> dict:
    """Columns named ``*_mpa``, ``*_km``, ``*_mpa_per_km`` converted to oilfield units.

    ``si`` returns the columns unchanged. ``oilfield`` renames ``x_mpa`` to ``x_psi``, ``x_km`` to
    ``x_ft``, ``x_mpa_per_km`` to ``x_psi_per_ft`` and, when ``depth_km`` (the true vertical depth
    of each row, same shape) is given, adds ``x_emw_ppg`` for every pressure column.
    Other columns are kept as they are.
    """
    if units == "si":
        return dict(columns)
    out = {}
    for name, values in columns.items():
        if name.endswith("_mpa_per_km"):
            out[name[: -len("_mpa_per_km")] + "_psi_per_ft"] = mpa_per_km_to_psi_per_ft(values)
        elif name.endswith("_mpa"):
            stem = name[: -len("_mpa")]
            out[stem + "_psi"] = mpa_to_psi(values)
            if depth_km is not None:
                out[stem + "_emw_ppg"] = emw_ppg(mpa=values, depth_km=depth_km)
        elif name.endswith("_km"):
            out[name[: -len("_km")] + "_ft"] = km_to_ft(values)
        else:
            out[name] = values
    return out
