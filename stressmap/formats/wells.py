"""Well-screening results as JSON documents and CSV tables, in SI or oilfield units.

Takes the dicts of :mod:`stressmap.analyses.wells` (numpy arrays inside) and returns plain JSON
values (NaN -> null) or CSV text whose first line is the header. Oilfield units
(:mod:`stressmap.units`) rename every ``*_mpa`` to ``*_psi`` and add ``*_emw_ppg`` (equivalent
mud weight at the true vertical depth of the row) for pressures and stresses; ``*_km`` become
``*_ft``. Pressure *changes* (stress-path columns) get psi but no mud weight.
"""

from __future__ import annotations

import csv
import io
import math

import numpy as np

from stressmap.formats.csvsafe import csv_cell
from stressmap.units import convert_stress_table, km_to_ft, mpa_to_psi

__all__ = ["csv_table", "in_units", "json_document"]

_CHANGE_COLUMNS = ("injection_", "depletion_")
def _site_units(site: dict) -> dict:
    depth = site["depth_km"]
    pressures = {k: v for k, v in site.items() if k.endswith("_mpa")}
    rest = {k: v for k, v in site.items() if not k.endswith("_mpa") and k != "depth_km"}
    out = convert_stress_table(pressures, "oilfield", depth_km=depth)
    return {**rest, "depth_ft": float(km_to_ft(depth)), **out}


def in_units(doc: dict) -> dict:
    """``doc`` with its stresses, pressures and depths in ``doc["units"]``."""
    if doc.get("units", "si") == "si":
        return doc
    out = dict(doc)
    depth = doc["site"]["depth_km"]
    out["site"] = _site_units(doc["site"])
    if "columns" in doc:
        cols = doc["columns"]
        if "depth_km" in cols:
            out["columns"] = convert_stress_table(cols, "oilfield", depth_km=cols["depth_km"])
        else:
            out["columns"] = {(k[:-4] + "_psi" if k.endswith("_mpa") and
                               k.startswith(_CHANGE_COLUMNS) else k):
                              (mpa_to_psi(v) if k.endswith("_mpa") else v)
                              for k, v in cols.items()}
    for key in ("window", "at_mud_pressure"):
        if key in doc:
            out[key] = convert_stress_table(doc[key], "oilfield", depth_km=depth)
    if "rock" in doc:
        out["rock"] = convert_stress_table(doc["rock"], "oilfield")
    if "shmax_from_breakout_mpa" in doc:
        out.pop("shmax_from_breakout_mpa")
        out["shmax_from_breakout_psi"] = float(mpa_to_psi(doc["shmax_from_breakout_mpa"]))
    if "breakout" in doc:
        out["breakout"] = convert_stress_table(doc["breakout"], "oilfield")
    return out


def _plain(value):
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    return value


def json_document(doc: dict) -> dict:
    """JSON-able copy of a result in its units (arrays to lists, NaN/inf to null)."""
    return _plain(in_units(doc))


def _cell(value):
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return "" if not math.isfinite(v) else repr(round(v, 6))
    return csv_cell(str(value))


def _rows(doc: dict) -> tuple[list[str], list[np.ndarray]]:
    if "columns" in doc:
        cols = doc["columns"]
        return list(cols), [np.asarray(v).ravel() for v in cols.values()]
    if "grid" in doc:  # window chart: one row per orientation
        az, inc = np.meshgrid(doc["grid"]["azimuth_deg"], doc["grid"]["inclination_deg"])
        names = ["azimuth_deg", "inclination_deg"] + list(doc["window"])
        return names, [az.ravel(), inc.ravel()] + [np.asarray(v).ravel()
                                                   for v in doc["window"].values()]
    if "planes" in doc:  # tendency net: the given planes and their poles
        return list(doc["planes"]), [np.asarray(v).ravel() for v in doc["planes"].values()]
    row = {**{f"well_{k}": v for k, v in doc.get("well", {}).items()},
           **doc.get("window", {}), **doc.get("at_mud_pressure", {}),
           **({"shmax_from_breakout" + ("_psi" if "shmax_from_breakout_psi" in doc else "_mpa"):
               doc.get("shmax_from_breakout_psi", doc.get("shmax_from_breakout_mpa"))}
              if "breakout" in doc else {})}
    return list(row), [np.asarray([v]) for v in row.values()]


def csv_table(doc: dict) -> str:
    """The result's table as CSV (header first; booleans true/false; empty cells for NaN)."""
    doc = in_units(doc)
    names, columns = _rows(doc)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([_cell(n) for n in names])
    n = max((c.size for c in columns), default=0)
    for i in range(n):  # serialisation of rows, not numerics
        writer.writerow([_cell(c[i]) if i < c.size else "" for c in columns])
    return buf.getvalue()
