"""Fault files: GIS line traces or strike/dip points (GeoJSON, GeoPackage, shapefile) or CSV
tables, read into plane sets.

Only the file access lives here; the accepted contents, the parsing and the errors (which name the
feature or row and the field) are :mod:`stressmap.formats.faults`.
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.errors import InputError, problem
from stressmap.formats.faults import (
    COMPASS_POINTS,
    FaultInput,
    faults_from_geojson,
    faults_from_records,
    parse_dip_direction,
)
from stressmap.io.tables import read_csv_table

__all__ = ["COMPASS_POINTS", "FaultInput", "faults_from_geojson", "parse_dip_direction",
           "read_fault_file"]


def _read_csv(path: Path) -> FaultInput:
    frame = read_csv_table(path, ("strike_deg", "dip_deg"), what="fault table", field="faults")
    return faults_from_records(frame.to_dict("records"), field=str(path))


def read_fault_file(path) -> tuple[FaultInput, dict]:
    """Read a fault file (GeoJSON, GeoPackage, shapefile or CSV).

    Returns
    -------
    (FaultInput, dict)
        The parsed faults and the FeatureCollection they came from (lon/lat, WGS84).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"fault file {path} does not exist",
                         [problem("no such file", field="--faults")])
    if path.suffix.lower() in (".csv", ".txt"):
        out = _read_csv(path)
        return out, None
    if path.suffix.lower() in (".geojson", ".json"):
        try:
            collection = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, RecursionError) as exc:  # RecursionError: nested too deeply
            raise InputError(f"cannot read fault file {path}: {exc}",
                             [problem(str(exc), field="--faults")]) from exc
    else:
        import geopandas as gpd

        try:
            frame = gpd.read_file(path)
        except Exception as exc:  # noqa: BLE001 - any driver failure is the user's file
            raise InputError(f"cannot read fault file {path}: {exc}",
                             [problem(str(exc), field="--faults")]) from exc
        if frame.crs is not None and not frame.crs.equals("EPSG:4326"):
            frame = frame.to_crs("EPSG:4326")
        collection = json.loads(frame.to_json(na="null"))
    return faults_from_geojson(collection, field=str(path.name)), collection
