"""Stress-indicator files: reading CSV / GeoJSON / GeoPackage into raw tables, writing CSV / GeoJSON.

Text and GeoJSON conversion is :mod:`stressmap.formats.indicators`; validation and conversion to
SHmax is :func:`stressmap.analyses.indicators.prepare_indicators`; this module only touches paths.
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.analyses.indicators import prepare_indicators
from stressmap.errors import IndicatorFileError, problem
from stressmap.formats.gpkg import frame_to_layer
from stressmap.formats.indicators import (
    indicators_csv,
    indicators_csvt,
    indicators_geojson,
    table_from_csv_text,
    table_from_frame,
    table_from_geojson,
)
from stressmap.io.files import write_atomic
from stressmap.io.outputs import write_csv_with_sidecars, write_geopackage

__all__ = [
    "read_table",
    "read_indicators",
    "table_from_csv_text",
    "table_from_geojson",
    "indicators_csv",
    "indicators_geojson",
    "write_indicators",
]


def read_table(path):
    """Read an indicator file (``.csv``/``.txt``, ``.geojson``/``.json``, ``.gpkg``) into a raw table.

    Returns ``(table, problems)`` as :func:`table_from_geojson`.
    """
    path = Path(path)
    if not path.is_file():
        raise IndicatorFileError(f"indicator file not found: {path}",
                                 [problem("file not found", field=str(path))])
    suffix = path.suffix.lower()
    if suffix in (".csv", ".txt"):
        try:
            text = path.read_text(encoding="utf-8-sig")
        except UnicodeDecodeError as exc:
            raise IndicatorFileError(f"{path.name} is not UTF-8 text: {exc}") from exc
        return table_from_csv_text(text, path.name)
    if suffix in (".geojson", ".json"):
        try:
            doc = json.loads(path.read_text(encoding="utf-8-sig"))
        except (UnicodeDecodeError, ValueError, RecursionError) as exc:  # also too deep/long
            raise IndicatorFileError(f"{path.name} is not valid JSON: {exc}",
                                     [problem(f"invalid JSON: {exc}")]) from exc
        return table_from_geojson(doc, field=path.name)
    if suffix in (".gpkg", ".shp"):
        import geopandas as gpd

        try:
            gdf = gpd.read_file(path)
        except Exception as exc:  # pyogrio raises several types for unreadable files
            raise IndicatorFileError(f"cannot read {path.name} as a vector file: {exc}") from exc
        return table_from_frame(gdf, path.name)
    raise IndicatorFileError(
        f"unsupported indicator file type {suffix!r}: use .csv, .geojson, .gpkg or .shp",
        [problem("unsupported file type", field=path.name)],
    )


def read_indicators(path, skip_bad: bool = False):
    """Read, validate and convert an indicator file (CSV, GeoJSON or GeoPackage).

    See :func:`stressmap.analyses.indicators.prepare_indicators` for the result.
    """
    table, probs = read_table(path)
    return prepare_indicators(table, skip_bad=skip_bad, problems=probs, name=Path(path).name)


def write_indicators(frame, path, columns=None, meta: dict | None = None) -> Path:
    """Write an indicator table as ``.csv`` (with sidecars), ``.geojson`` or ``.gpkg`` (by the
    suffix), atomically."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".csv":
        return write_csv_with_sidecars(path, indicators_csv(frame, columns),
                                       indicators_csvt(frame, columns), meta)
    if suffix in (".geojson", ".json"):
        text = json.dumps(indicators_geojson(frame, columns, meta, name=path.stem), allow_nan=False,
                          ensure_ascii=False)
        return write_atomic(path, text)
    if suffix == ".gpkg":
        columns = list(columns or [c for c in frame.columns if c != "geometry"])
        return write_geopackage(path, {path.stem: frame_to_layer(frame[columns])}, meta)
    raise IndicatorFileError(f"unsupported output type {suffix!r}: use .csv, .geojson or .gpkg",
                             [problem("output must end in .csv, .geojson or .gpkg", field=str(path))])
