"""Query points from text and tables: CSV text with lon/lat columns, GeoJSON documents and
GeoDataFrames read from GeoJSON, GeoPackage or shapefile (no paths here: :mod:`stressmap.io.points`
opens the files).

Every bad row is reported with its row number and column; nothing is dropped silently. Property
values come back as plain JSON values: nulls of a GIS table (NaN, NaT, None) become ``None``, numpy
scalars Python numbers, dates ISO 8601 text, so echoing them into any output never fails.
"""

from __future__ import annotations

import io
import math

import numpy as np

from stressmap import validate
from stressmap.errors import InputError, problem

__all__ = ["check_lonlat", "points_from_geojson", "points_from_csv_text", "points_from_frame",
           "plain_properties"]


def _plain_value(value):
    """One property value as a JSON value (None for any kind of null)."""
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or isinstance(value, (str, bool, int)):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, (list, tuple)):
        return [_plain_value(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _plain_value(v) for k, v in value.items()}
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if hasattr(value, "isoformat"):  # datetime, date, pandas Timestamp
        try:
            return None if value != value else value.isoformat()  # NaT != NaT
        except (TypeError, ValueError):
            return str(value)
    try:
        import pandas as pd

        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return str(value)


def plain_properties(props) -> dict:
    """A properties mapping with every value a plain JSON value (see the module docstring).

    Examples
    --------
    >>> import numpy as np
    >>> plain_properties({"a": np.float64("nan"), "b": np.int64(3), "c": None, "d": "x"})
    {'a': None, 'b': 3, 'c': None, 'd': 'x'}
    >>> plain_properties(None)
    {}
    """
    if not isinstance(props, dict):
        return {}
    return {str(k): _plain_value(v) for k, v in props.items()}


def check_lonlat(lon, lat, first_row: int = 1) -> list[dict]:
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
    ...      "properties": {"name": "W1", "depth": None}}]}
    >>> lon, lat, props = points_from_geojson(fc)
    >>> lon.tolist(), lat.tolist(), props
    ([5.0], [45.0], [{'name': 'W1', 'depth': None}])
    """
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        raise InputError("expected a GeoJSON FeatureCollection",
                         [problem("must be a GeoJSON FeatureCollection of Point features", field=field)])
    feats = doc.get("features")
    if not isinstance(feats, list):
        raise InputError("FeatureCollection has no features list",
                         [problem("'features' must be a list", field=f"{field}.features")])
    problems, lon, lat, props = [], [], [], []
    for i, feat in enumerate(feats):  # parsing at the edge: one dict per feature
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
        props.append(plain_properties(feat.get("properties")))
    lon_a, lat_a = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    validate.lonlat_arrays(lon_a, lat_a, lambda i: f"{field}.features[{i}].geometry", problems,
                           max_listed=50)
    if problems:
        raise InputError(f"{len(problems)} problem(s) in the point features", problems)
    return lon_a, lat_a, props


def points_from_csv_text(text: str, name: str = "CSV") -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """(lon, lat, properties) from CSV text with ``lon`` and ``lat`` columns (``#`` lines skipped).

    Other columns are echoed as text; empty cells become ``None``. Rows are numbered as data rows
    from 1 (the header is row 0).

    Examples
    --------
    >>> lon, lat, props = points_from_csv_text("lon,lat,well\\n5,45,A\\n6,46,\\n")
    >>> lon.tolist(), props
    ([5.0, 6.0], [{'well': 'A'}, {'well': None}])
    """
    import pandas as pd

    try:
        frame = pd.read_csv(io.StringIO(text), comment="#", dtype=str, keep_default_na=False)
    except (ValueError, pd.errors.ParserError) as exc:  # EmptyDataError is a ValueError
        raise InputError(f"cannot read CSV {name}: {exc}") from exc
    cols = {c.strip().lower(): c for c in frame.columns}
    missing = [c for c in ("lon", "lat") if c not in cols]
    if missing:
        raise InputError(f"points CSV {name} lacks column(s) {', '.join(missing)}",
                         [problem("required column missing", field=c) for c in missing])
    lon = pd.to_numeric(frame[cols["lon"]].str.strip(), errors="coerce").to_numpy(float)
    lat = pd.to_numeric(frame[cols["lat"]].str.strip(), errors="coerce").to_numpy(float)
    problems = check_lonlat(lon, lat)
    if problems:
        raise InputError(f"{len(problems)} bad row(s) in {name}", problems)
    others = [c for c in frame.columns if c not in (cols["lon"], cols["lat"])]
    if not others:
        return lon, lat, [{} for _ in range(lon.size)]
    records = frame[others].to_dict(orient="records")
    return lon, lat, [{k: (v if v != "" else None) for k, v in r.items()} for r in records]


def points_from_frame(gdf, name: str = "points") -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """(lon, lat, properties) from a GeoDataFrame of points (any CRS; reprojected to lon/lat).

    Null attributes (NaN, NaT, None) come back as ``None``.
    """
    if gdf.crs is not None and not gdf.crs.equals("EPSG:4326"):
        gdf = gdf.to_crs("EPSG:4326")
    kinds = gdf.geometry.geom_type.to_numpy()
    bad = np.flatnonzero(kinds != "Point")
    if bad.size:
        raise InputError(f"{name} holds non-point geometries",
                         [problem(f"geometry is {kinds[i]}, expected Point", field="geometry",
                                  row=int(i) + 1) for i in bad[:50]])
    lon, lat = gdf.geometry.x.to_numpy(float), gdf.geometry.y.to_numpy(float)
    problems = check_lonlat(lon, lat)
    if problems:
        raise InputError(f"{len(problems)} bad row(s) in {name}", problems)
    records = gdf.drop(columns=gdf.geometry.name).to_dict(orient="records")
    return lon, lat, [plain_properties(r) for r in records]
