"""Tables and GeoJSON layers as GeoDataFrames ready for GeoPackage (no paths: the GeoPackage file
itself is written by :func:`stressmap.io.outputs.write_geopackage`).

Layers are WGS84 lon/lat (EPSG:4326), one geometry kind per layer. Booleans stay booleans (the
GeoPackage boolean subtype); text columns that mix types become text; echoed nulls stay nulls.
"""

from __future__ import annotations

import numpy as np

__all__ = ["frame_to_layer", "geojson_to_layer", "layer_name"]


def layer_name(text: str) -> str:
    """A GeoPackage-safe layer name (letters, digits, underscore; starts with a letter).

    Examples
    --------
    >>> layer_name("wells-2026 out"), layer_name("3d")
    ('wells_2026_out', 'l_3d')
    """
    out = "".join(c if c.isalnum() or c == "_" else "_" for c in str(text)) or "layer"
    return out if out[0].isalpha() else "l_" + out


def _tidy(frame):
    """Columns GDAL can type: object columns of mixed values as text, nulls kept."""
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    frame = frame.copy()
    for c in frame.columns:
        if c == "geometry" or is_bool_dtype(frame[c].dtype) or is_numeric_dtype(frame[c].dtype):
            continue
        values = [v for v in frame[c].tolist() if v is not None and not (isinstance(v, float) and v != v)]
        if values and all(isinstance(v, (bool, np.bool_)) for v in values):
            frame[c] = frame[c].astype("boolean")
        elif values and all(isinstance(v, (int, float, np.number)) and not isinstance(v, bool)
                            for v in values):
            frame[c] = frame[c].astype(float)
        else:
            frame[c] = [None if v is None or (isinstance(v, float) and v != v) else str(v)
                        for v in frame[c].tolist()]
    return frame


def frame_to_layer(frame):
    """A DataFrame with ``lon``/``lat`` columns as a point GeoDataFrame (lon/lat kept as columns)."""
    import geopandas as gpd

    geometry = gpd.points_from_xy(frame["lon"].to_numpy(float), frame["lat"].to_numpy(float))
    return gpd.GeoDataFrame(_tidy(frame), geometry=geometry, crs="EPSG:4326")


def geojson_to_layer(collection: dict):
    """A FeatureCollection (one geometry kind) as a GeoDataFrame in EPSG:4326."""
    import geopandas as gpd

    feats = collection.get("features") or []
    if not feats:
        return gpd.GeoDataFrame({"geometry": []}, geometry="geometry", crs="EPSG:4326")
    gdf = gpd.GeoDataFrame.from_features(feats, crs="EPSG:4326")
    return _tidy(gdf)
