"""Fault files: opening GeoJSON, GeoPackage, shapefile or CSV fault files.

Parsing lives in :mod:`stressmap.formats.faults` (its public names are re-exported here).
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.errors import InputError, problem
from stressmap.formats.faults import (
    COMPASS_POINTS,
    FaultInput,
    collection_from_frame,
    faults_from_csv_text,
    faults_from_geojson,
    parse_dip_direction,
)

__all__ = ["COMPASS_POINTS", "parse_dip_direction", "read_fault_file", "faults_from_geojson",
           "FaultInput"]


def read_fault_file(path) -> tuple[FaultInput, dict]:
    """Read a fault file (GeoJSON, GeoPackage, shapefile or CSV).

    Returns
    -------
    (FaultInput, dict)
        The parsed faults and the FeatureCollection they came from (lon/lat, WGS84; None for CSV).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"fault file {path} does not exist",
                         [problem("no such file", field="--faults")])
    suffix = path.suffix.lower()
    if suffix in (".csv", ".txt"):
        try:
            text = path.read_text(encoding="utf-8-sig")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read fault table {path}: {exc}",
                             [problem(str(exc), field="faults")]) from exc
        return faults_from_csv_text(text, str(path)), None
    if suffix in (".geojson", ".json"):
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
        collection = collection_from_frame(frame)
    return faults_from_geojson(collection, field=str(path.name)), collection
