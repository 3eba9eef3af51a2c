"""Query points from files: CSV with lon/lat columns, GeoJSON, GeoPackage or shapefile points.

This module only opens files; parsing lives in :mod:`stressmap.formats.points` (re-exported here).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from stressmap.errors import InputError, problem
from stressmap.formats.points import (
    points_from_csv_text,
    points_from_frame,
    points_from_geojson,
)

__all__ = ["read_points", "points_from_geojson", "VECTOR_SUFFIXES"]

#: Vector files read through GDAL (pyogrio): GeoJSON, GeoPackage, shapefile.
VECTOR_SUFFIXES = (".geojson", ".json", ".gpkg", ".shp")


def read_points(path) -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """Read query points: CSV (columns ``lon``, ``lat``; other columns echoed), GeoJSON,
    GeoPackage or shapefile points (properties echoed; null attributes as ``None``).

    Returns ``(lon, lat, properties)``, one properties dict per point. CSV rows are numbered as
    data rows from 1 (the header is row 0).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"points file not found: {path}", [problem("file not found", field=str(path))])
    suffix = path.suffix.lower()
    if suffix in (".csv", ".txt"):
        try:
            text = path.read_text(encoding="utf-8-sig")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read CSV {path.name}: {exc}") from exc
        return points_from_csv_text(text, path.name)
    if suffix in VECTOR_SUFFIXES:
        import geopandas as gpd

        try:
            gdf = gpd.read_file(path)
        except Exception as exc:  # pyogrio raises several types for unreadable files
            raise InputError(f"cannot read {path.name} as a vector file: {exc}") from exc
        return points_from_frame(gdf, path.name)
    raise InputError(f"unsupported points file type {suffix!r}: use .csv, .geojson, .gpkg or .shp",
                     [problem("unsupported file type", field=str(path.name))])
