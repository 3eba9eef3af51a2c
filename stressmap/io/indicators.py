"""Stress-indicator files: reading CSV / GeoJSON / GeoPackage into raw tables, writing CSV / GeoJSON.

Text and GeoJSON conversion is :mod:`stressmap.formats.indicators`; validation and conversion to
SHmax is :func:`stressmap.analyses.indicators.prepare_indicators`; this module only touches paths.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from stressmap.analyses.indicators import prepare_indicators
from stressmap.errors import IndicatorFileError, problem
from stressmap.formats.indicators import (
    indicators_csv,
    indicators_geojson,
    normalise_columns,
    table_from_csv_text,
    table_from_geojson,
)

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
    if suffix == ".gpkg":
        import geopandas as gpd

        try:
            gdf = gpd.read_file(path)
        except Exception as exc:  # pyogrio raises several types for unreadable files
            raise IndicatorFileError(f"cannot read {path.name} as a GeoPackage: {exc}") from exc
        geoms = gdf.geometry
        kinds = geoms.geom_type.to_numpy()
        is_point = kinds == "Point"
        problems = [problem(f"geometry must be a Point, got {kinds[i]}", field="geometry", row=int(i) + 1)
                    for i in np.flatnonzero(~is_point)]
        table = normalise_columns(gdf.drop(columns=gdf.geometry.name).reset_index(drop=True))
        table = table.drop(columns=[c for c in ("lon", "lat") if c in table.columns])
        safe = geoms.where(is_point)
        table.insert(0, "lat", np.where(is_point, safe.y.to_numpy(float), np.nan))
        table.insert(0, "lon", np.where(is_point, safe.x.to_numpy(float), np.nan))
        return table, problems
    raise IndicatorFileError(
        f"unsupported indicator file type {suffix!r}: use .csv, .geojson or .gpkg",
        [problem("unsupported file type", field=path.name)],
    )


def read_indicators(path, skip_bad: bool = False):
    """Read, validate and convert an indicator file (CSV, GeoJSON or GeoPackage).

    See :func:`stressmap.analyses.indicators.prepare_indicators` for the result.
    """
    table, probs = read_table(path)
    return prepare_indicators(table, skip_bad=skip_bad, problems=probs, name=Path(path).name)


def write_indicators(frame, path, columns=None, meta: dict | None = None) -> Path:
    """Write an indicator table as ``.csv`` or ``.geojson`` (chosen by the suffix)."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".csv":
        text = indicators_csv(frame, columns, meta)
    elif suffix in (".geojson", ".json"):
        text = json.dumps(indicators_geojson(frame, columns, meta), allow_nan=False, ensure_ascii=False)
    else:
        raise IndicatorFileError(f"unsupported output type {suffix!r}: use .csv or .geojson",
                                 [problem("output must end in .csv or .geojson", field=str(path))])
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return path
