"""Stress-indicator files: reading CSV / GeoJSON / GeoPackage into raw tables, writing CSV / GeoJSON.

The reader returns the cells as they are (strings for CSV, JSON values for GeoJSON properties)
together with ``lon``/``lat`` (from point geometries for vector files) and any problems with
geometries; :func:`stressmap.analyses.indicators.prepare_indicators` validates and converts them. Rows
are numbered as data rows from 1 (a CSV header and ``#`` comment lines are not counted; in a
vector file, row N is the N-th feature).
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np

from stressmap.errors import IndicatorFileError, problem
from stressmap.formats.csvsafe import csv_cell, csv_safe_frame

__all__ = [
    "read_table",
    "table_from_csv_text",
    "table_from_geojson",
    "indicators_csv",
    "indicators_geojson",
    "write_indicators",
]


def _normalise_columns(frame):
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
    return _normalise_columns(frame), []


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
    return _normalise_columns(table), problems


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
        table = _normalise_columns(gdf.drop(columns=gdf.geometry.name).reset_index(drop=True))
        table = table.drop(columns=[c for c in ("lon", "lat") if c in table.columns])
        safe = geoms.where(is_point)
        table.insert(0, "lat", np.where(is_point, safe.y.to_numpy(float), np.nan))
        table.insert(0, "lon", np.where(is_point, safe.x.to_numpy(float), np.nan))
        return table, problems
    raise IndicatorFileError(
        f"unsupported indicator file type {suffix!r}: use .csv, .geojson or .gpkg",
        [problem("unsupported file type", field=path.name)],
    )


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


def indicators_geojson(frame, columns=None, meta: dict | None = None) -> dict:
    """RFC 7946 FeatureCollection of an indicator table (columns ``lon``/``lat`` become the geometry).

    ``meta`` entries go in top-level foreign members (e.g. ``caution``).
    """
    columns = [c for c in (columns or frame.columns) if c not in ("lon", "lat", "geometry")]
    lon = frame["lon"].to_numpy(float)
    lat = frame["lat"].to_numpy(float)
    values = [frame[c].to_numpy(object) for c in columns]
    feats = [
        {
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [float(lon[i]), float(lat[i])]},
            "properties": {c: _jsonable(v[i]) for c, v in zip(columns, values)},
        }
        for i in range(len(frame))
    ]
    out = {"type": "FeatureCollection"}
    out.update(meta or {})
    out["features"] = feats
    return out


def indicators_csv(frame, columns=None, meta: dict | None = None) -> str:
    """CSV text of an indicator table; ``meta`` as leading ``# key: value`` comment lines.

    Cells that a spreadsheet would run as a formula (starting with ``=``, ``+``, ``-``, ``@``) are
    quoted with a leading apostrophe, except numbers.
    """
    columns = list(columns or [c for c in frame.columns if c != "geometry"])
    out = csv_safe_frame(frame[columns])
    head = "".join(f"# {csv_cell(str(k))}: {csv_cell(str(v))}\n" for k, v in (meta or {}).items())
    return head + out.to_csv(index=False, float_format="%.10g", lineterminator="\n")


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
