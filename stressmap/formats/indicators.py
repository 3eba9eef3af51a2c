"""Stress-indicator tables as text and GeoJSON: raw tables in, CSV / GeoJSON out (no paths).

:func:`table_from_csv_text` and :func:`table_from_geojson` return the cells as they are (strings
for CSV, JSON values for GeoJSON properties) together with ``lon``/``lat`` and any problems with
geometries; :func:`stressmap.analyses.indicators.prepare_indicators` validates and converts them
(:func:`indicators_from_csv_text` and :func:`indicators_from_geojson` do both). Rows are numbered
as data rows from 1 (a CSV header and ``#`` comment lines are not counted; in a FeatureCollection,
row N is the N-th feature). Files are read and written by :mod:`stressmap.io.indicators`.
"""

from __future__ import annotations

import io

import numpy as np

from stressmap.analyses.indicators import prepare_indicators
from stressmap.errors import IndicatorFileError, problem
from stressmap.formats.geojson import feature_collection, round_coord, round_number
from stressmap.formats.table import frame_csv, frame_csvt

__all__ = [
    "normalise_columns",
    "table_from_csv_text",
    "table_from_geojson",
    "indicators_from_csv_text",
    "indicators_from_geojson",
    "indicators_csv",
    "indicators_csvt",
    "indicators_geojson",
    "table_from_frame",
]


def normalise_columns(frame):
    """Column names stripped and lower-case (indicator columns are case-insensitive)."""
    frame.columns = [str(c).strip().lower() for c in frame.columns]
    return frame


def table_from_csv_text(text: str, name: str = "CSV"):
    """A raw table (pandas DataFrame of strings) from CSV text; ``#`` starts a comment line.

    Examples
    --------
    >>> t, probs = table_from_csv_text("# fictional\\nid,lon,lat\\nA,1,2\\n")
    >>> t.to_dict(orient="records"), probs
    ([{'id': 'A', 'lon': '1', 'lat': '2'}], [])
    """
    import pandas as pd

    try:
        frame = pd.read_csv(io.StringIO(text), comment="#", dtype=str, keep_default_na=False,
                            skipinitialspace=True)
    except pd.errors.EmptyDataError as exc:
        raise IndicatorFileError(f"{name} is empty", [problem("no header row and no data")]) from exc
    except (ValueError, pd.errors.ParserError) as exc:
        raise IndicatorFileError(f"cannot read {name} as CSV: {exc}",
                                 [problem(f"not a readable CSV table: {exc}")]) from exc
    return normalise_columns(frame), []


def table_from_geojson(doc, field: str = "indicators"):
    """A raw table from a GeoJSON FeatureCollection of Point features (properties + lon/lat).

    Returns ``(table, problems)``; a feature whose geometry is not a Point gets a problem with its
    row (1-based feature number) and NaN coordinates.

    Examples
    --------
    >>> fc = {"type": "FeatureCollection", "features": [
    ...     {"type": "Feature", "geometry": {"type": "Point", "coordinates": [5, 45]},
    ...      "properties": {"id": "W1", "type": "breakout", "azimuth_deg": 10}},
    ...     {"type": "Feature", "geometry": None, "properties": {"id": "W2"}}]}
    >>> t, probs = table_from_geojson(fc)
    >>> t["lon"].tolist(), probs[0]["row"], probs[0]["field"]
    ([5.0, nan], 2, 'geometry')
    """
    import pandas as pd

    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection" or not isinstance(
        doc.get("features"), list
    ):
        raise IndicatorFileError(
            "expected a GeoJSON FeatureCollection of Point features",
            [problem("must be a GeoJSON FeatureCollection with a 'features' list", field=field)],
        )
    feats = doc["features"]
    props, lon, lat, problems = [], [], [], []
    for i, feat in enumerate(feats):
        feat = feat if isinstance(feat, dict) else {}
        p = feat.get("properties")
        props.append({str(k).strip().lower(): v for k, v in p.items()} if isinstance(p, dict) else {})
        geom = feat.get("geometry")
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        ok = (isinstance(geom, dict) and geom.get("type") == "Point" and isinstance(coords, list)
              and len(coords) >= 2 and all(isinstance(c, (int, float)) and not isinstance(c, bool)
                                           for c in coords[:2]))
        if not ok:
            kind = geom.get("type") if isinstance(geom, dict) else None
            problems.append(problem(f"geometry must be a Point with [lon, lat] numbers, got {kind}",
                                    field="geometry", row=i + 1))
        lon.append(float(coords[0]) if ok else np.nan)
        lat.append(float(coords[1]) if ok else np.nan)
    table = pd.DataFrame.from_records(props, index=range(len(feats)))
    table = table.drop(columns=[c for c in ("lon", "lat") if c in table.columns])
    table.insert(0, "lat", lat)
    table.insert(0, "lon", lon)
    return normalise_columns(table), problems


def indicators_from_geojson(doc, skip_bad: bool = False, field: str = "indicators"):
    """Indicators from a GeoJSON FeatureCollection dict (as sent to the HTTP service)."""

    table, probs = table_from_geojson(doc, field=field)
    return prepare_indicators(table, skip_bad=skip_bad, problems=probs, name=field)


def indicators_from_csv_text(text: str, skip_bad: bool = False, name: str = "indicators"):
    """Indicators from CSV text.

    Examples
    --------
    >>> gdf = indicators_from_csv_text(
    ...     "id,lon,lat,type,azimuth_deg\\nB1,5,45,breakout,10\\nT1,5,45,tensile_fracture,10\\n")
    >>> gdf["shmax_azimuth_deg"].tolist(), gdf["sigma_deg"].tolist(), gdf["weight"].tolist()
    ([100.0, 10.0], [20.0, 20.0], [1.0, 1.0])
    """

    table, probs = table_from_csv_text(text, name)
    return prepare_indicators(table, skip_bad=skip_bad, problems=probs, name=name)


def _jsonable(v):
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not np.isfinite(v):
        return None
    if v is None or (not isinstance(v, (str, bytes, list, dict)) and _isna(v)):
        return None
    return v


def _isna(v) -> bool:
    import pandas as pd

    try:
        return bool(pd.isna(v))
    except (TypeError, ValueError):
        return False


def indicators_geojson(frame, columns=None, meta: dict | None = None, name: str = "indicators") -> dict:
    """RFC 7946 FeatureCollection of an indicator table (columns ``lon``/``lat`` become the geometry).

    ``meta`` entries go in top-level foreign members (e.g. ``caution``); ``name`` names the layer.
    Coordinates and numbers are rounded as :mod:`stressmap.formats.geojson` documents.
    """
    columns = [c for c in (columns or frame.columns) if c not in ("lon", "lat", "geometry")]
    lon = round_coord(frame["lon"].to_numpy(float))
    lat = round_coord(frame["lat"].to_numpy(float))
    values = [frame[c].to_numpy(object) for c in columns]
    feats = [
        {
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [float(lon[i]), float(lat[i])]},
            "properties": {c: round_number(_jsonable(v[i])) for c, v in zip(columns, values)},
        }
        for i in range(len(frame))
    ]
    return feature_collection(feats, name, meta)


def indicators_csv(frame, columns=None, meta: dict | None = None) -> str:
    """CSV text of an indicator table by the rules of :mod:`stressmap.formats.table`.

    The first line is the header; ``meta`` (the caution, provenance) does not go into the table:
    writers put it in a metadata sidecar (:func:`stressmap.formats.table.metadata_json`) or HTTP
    headers. Booleans are ``true``/``false``; formula-like text cells are neutralised.
    """
    del meta  # kept in the signature: callers pass it for the sidecar, never into the table
    columns = list(columns or [c for c in frame.columns if c != "geometry"])
    return frame_csv(frame[columns])


def indicators_csvt(frame, columns=None) -> str:
    """GDAL CSVT sidecar line for :func:`indicators_csv` of the same table."""
    columns = list(columns or [c for c in frame.columns if c != "geometry"])
    return frame_csvt(frame[columns])


def table_from_frame(gdf, name: str = "indicators"):
    """A raw table from a GeoDataFrame (GeoPackage, shapefile, ...): properties plus lon/lat.

    Returns ``(table, problems)`` as :func:`table_from_geojson`; layers in another CRS are
    reprojected to lon/lat.
    """
    if gdf.crs is not None and not gdf.crs.equals("EPSG:4326"):
        gdf = gdf.to_crs("EPSG:4326")
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
