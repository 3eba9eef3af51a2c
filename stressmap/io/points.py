"""Reading query points from files (CSV with lon/lat columns, GeoJSON or GeoPackage points).

Every bad row is reported with its row number and column; nothing is dropped silently.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from stressmap import validate
from stressmap.errors import InputError, problem

__all__ = ["read_points", "points_from_geojson"]


def _check_lonlat(lon, lat, first_row: int = 1) -> list[dict]:
    """Problems for non-finite or out-of-range coordinates (rows numbered from ``first_row``)."""
    problems: list = []
    validate.lonlat_arrays(lon, lat, ("lon", "lat"), problems, first_row=first_row,
                           max_listed=50)
    return problems


def points_from_geojson(doc: dict, field: str = "points") -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """(lon, lat, properties) from a GeoJSON FeatureCollection of Point features (RFC 7946).

    Examples
    --------
    >>> fc = {"type": "FeatureCollection", "features": [
    ...     {"type": "Feature", "geometry": {"type": "Point", "coordinates": [5, 45]},
    ...      "properties": {"name": "W1"}}]}
    >>> lon, lat, props = points_from_geojson(fc)
    >>> lon.tolist(), lat.tolist(), props
    ([5.0], [45.0], [{'name': 'W1'}])
    """
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        raise InputError("expected a GeoJSON FeatureCollection",
                         [problem("must be a GeoJSON FeatureCollection of Point features", field=field)])
    feats = doc.get("features")
    if not isinstance(feats, list):
        raise InputError("FeatureCollection has no features list",
                         [problem("'features' must be a list", field=f"{field}.features")])
    problems, lon, lat, props = [], [], [], []
    for i, feat in enumerate(feats):
        where = f"{field}.features[{i}]"
        geom = feat.get("geometry") if isinstance(feat, dict) else None
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        if not isinstance(geom, dict) or geom.get("type") != "Point":
            problems.append(problem("geometry must be a GeoJSON Point", field=f"{where}.geometry"))
            continue
        if (not isinstance(coords, list) or len(coords) < 2
                or not all(isinstance(c, (int, float)) and not isinstance(c, bool) for c in coords[:2])):
            problems.append(problem("coordinates must be [lon, lat] numbers",
                                    field=f"{where}.geometry.coordinates"))
            continue
        lon.append(float(coords[0]))
        lat.append(float(coords[1]))
        p = feat.get("properties")
        props.append(p if isinstance(p, dict) else {})
    lon_a, lat_a = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    validate.lonlat_arrays(lon_a, lat_a, lambda i: f"{field}.features[{i}].geometry", problems,
                           max_listed=50)
    if problems:
        raise InputError(f"{len(problems)} problem(s) in the point features", problems)
    return lon_a, lat_a, props


def read_points(path) -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """Read query points: CSV (columns ``lon``, ``lat``; other columns echoed) or GeoJSON/GeoPackage.

    Returns ``(lon, lat, properties)``, one properties dict per point. CSV rows are numbered as
    data rows from 1 (the header is row 0).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"points file not found: {path}", [problem("file not found", field=str(path))])
    suffix = path.suffix.lower()
    if suffix in (".csv", ".txt"):
        import pandas as pd

        try:
            frame = pd.read_csv(path, comment="#", dtype=str, keep_default_na=False)
        except (ValueError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read CSV {path.name}: {exc}") from exc
        cols = {c.strip().lower(): c for c in frame.columns}
        missing = [c for c in ("lon", "lat") if c not in cols]
        if missing:
            raise InputError(f"points CSV {path.name} lacks column(s) {', '.join(missing)}",
                             [problem("required column missing", field=c) for c in missing])
        lon = pd.to_numeric(frame[cols["lon"]].str.strip(), errors="coerce").to_numpy(float)
        lat = pd.to_numeric(frame[cols["lat"]].str.strip(), errors="coerce").to_numpy(float)
        problems = _check_lonlat(lon, lat)
        if problems:
            raise InputError(f"{len(problems)} bad row(s) in {path.name}", problems)
        others = [c for c in frame.columns if c not in (cols["lon"], cols["lat"])]
        props = frame[others].to_dict(orient="records") if others else [{} for _ in range(lon.size)]
        return lon, lat, props
    if suffix in (".geojson", ".json", ".gpkg"):
        import geopandas as gpd

        try:
            gdf = gpd.read_file(path)
        except Exception as exc:  # pyogrio raises several types for unreadable files
            raise InputError(f"cannot read {path.name} as a vector file: {exc}") from exc
        kinds = gdf.geometry.geom_type.to_numpy()
        bad = np.flatnonzero(kinds != "Point")
        if bad.size:
            raise InputError(f"{path.name} holds non-point geometries",
                             [problem(f"geometry is {kinds[i]}, expected Point", field="geometry",
                                      row=int(i) + 1) for i in bad[:50]])
        lon, lat = gdf.geometry.x.to_numpy(float), gdf.geometry.y.to_numpy(float)
        problems = _check_lonlat(lon, lat)
        if problems:
            raise InputError(f"{len(problems)} bad row(s) in {path.name}", problems)
        props = gdf.drop(columns=gdf.geometry.name).to_dict(orient="records")
        return lon, lat, props
    raise InputError(f"unsupported points file type {suffix!r}: use .csv, .geojson or .gpkg",
                     [problem("unsupported file type", field=str(path.name))])
