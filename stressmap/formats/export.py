"""Serialisers for prediction results: GeoJSON (RFC 7946), CSV, CF netCDF and GeoPackage tables.

One GeoJSON serialiser serves the CLI, the Python API and the HTTP service. Inputs are xarray
Datasets produced by :mod:`stressmap.model` or :mod:`stressmap.analyses` (dimension ``point``, or
dimensions ``(lat, lon)`` for grids) with ``lon``/``lat`` coordinates or variables. ``meta`` holds
what every spatial output must carry (``caution``, ``model_id``, ``build_time``, ...): GeoJSON puts
it in top-level members, netCDF in global attributes; CSV tables never hold it (their first line
is the header) -- writers put it in a metadata sidecar (:mod:`stressmap.formats.table`) or HTTP
headers. Precision of GeoJSON numbers: :mod:`stressmap.formats.geojson`.
"""

from __future__ import annotations

import numpy as np

from stressmap.formats.geojson import (
    feature_collection,
    plain,
    round_array,
    round_coord,
)
from stressmap.formats.netcdf import netcdf_bytes
from stressmap.formats.points import plain_properties
from stressmap.formats.table import frame_csv, frame_csvt

__all__ = [
    "points_geojson",
    "points_csv",
    "points_csvt",
    "points_frame",
    "grid_geojson",
    "grid_csv",
    "grid_csvt",
    "grid_frame",
    "grid_points",
    "grid_netcdf_bytes",
    "netcdf_bytes",
    "records",
]


def records(ds, dim: str = "point") -> tuple[np.ndarray, np.ndarray, list[str], list[np.ndarray]]:
    """Flatten a point Dataset (or a grid, stacked) into lon, lat and per-variable 1-D arrays."""
    if dim not in ds.dims:
        ds = ds.stack({dim: list(ds.dims)})
    var = ds.variables  # the Variables themselves: ds[name] builds a DataArray each time
    lon = np.asarray(var["lon"].values, dtype=float).ravel()
    lat = np.asarray(var["lat"].values, dtype=float).ravel()
    names = [str(v) for v in ds.data_vars if v not in ("lon", "lat") and var[v].dims == (dim,)]
    cols = [_as_bool(var[v]) for v in names]
    return lon, lat, names, cols


#: flag_meanings of 0/1 integer variables that are booleans in a table (CF stores them as int8).
_BOOLEAN_FLAGS = ("false true", "outside inside")


def _as_bool(variable) -> np.ndarray:
    """A variable's values as 1-D; 0/1 flag variables (e.g. ``inside`` from netCDF) as booleans."""
    values = np.asarray(variable.values).ravel()
    if values.dtype.kind in "iu" and variable.attrs.get("flag_meanings") in _BOOLEAN_FLAGS:
        return values.astype(bool)
    return values


def _column_values(col: np.ndarray) -> list:
    """One column as JSON values: floats rounded (SIGNIFICANT_DIGITS), NaN -> None; "" (how a
    text variable such as regime says "no value" in a Dataset) -> None."""
    if col.dtype.kind == "f":
        return [plain(v) for v in round_array(col).tolist()]
    if col.dtype.kind in "OUS":
        return [None if v == "" else plain(v) for v in col.tolist()]
    return [plain(v) for v in col.tolist()]


def points_geojson(ds, extra_properties: list[dict] | None = None, meta: dict | None = None,
                   name: str = "stressmap_points") -> dict:
    """A FeatureCollection of Point features, one per entry of dimension ``point``.

    ``extra_properties`` (one dict per point, e.g. the properties of the caller's input features)
    are echoed (nulls, NaN and numpy values made plain JSON); where a name clashes with a computed
    property, the caller's value is kept under ``input_<name>`` so nothing is lost. ``name`` is the
    layer name GIS clients show.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"lon": ("point", [10.123456789]), "lat": ("point", [-5.0]),
    ...                  "shmax_azimuth_deg": ("point", [float("nan")])})
    >>> fc = points_geojson(ds, [{"well": "A-1", "depth": float("nan")}], {"model_id": "m1"}, "wells")
    >>> fc["name"], fc["model_id"], fc["features"][0]["geometry"]["coordinates"]
    ('wells', 'm1', [10.123457, -5.0])
    >>> fc["features"][0]["properties"]
    {'well': 'A-1', 'depth': None, 'shmax_azimuth_deg': None}
    """
    lon, lat, names, cols = records(ds)
    columns = [_column_values(col) for col in cols]
    lon_r, lat_r = round_coord(lon).tolist(), round_coord(lat).tolist()
    features = []
    for i in range(lon.size):  # one dict per output feature: JSON building, not numerics
        props: dict = {}
        if extra_properties is not None:
            for key, value in plain_properties(extra_properties[i]).items():
                props[f"input_{key}" if key in names else key] = value
        for col_name, col in zip(names, columns):
            props[col_name] = col[i]
        features.append({
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [plain(lon_r[i]), plain(lat_r[i])]},
            "properties": props,
        })
    return feature_collection(features, name, meta)


def grid_points(ds, inside_only: bool = True):
    """A grid Dataset (dims lat, lon) flattened to a point Dataset (outside nodes dropped)."""
    flat = ds.stack(point=[d for d in ("lat", "lon") if d in ds.dims]).reset_index("point")
    if "lon" not in flat.data_vars:
        flat = flat.reset_coords()
    if inside_only and "inside" in flat:
        flat = flat.isel(point=np.flatnonzero(np.asarray(flat["inside"].values, dtype=bool)))
    return flat


def grid_geojson(ds, meta: dict | None = None, inside_only: bool = True,
                 name: str = "stressmap_grid") -> dict:
    """Grid nodes as Point features (nodes outside the plate dropped when ``inside_only``)."""
    return points_geojson(grid_points(ds, inside_only), meta=meta, name=name)


def points_frame(ds, extra_properties: list[dict] | None = None):
    """A pandas DataFrame of a point Dataset: lon, lat, echoed properties, then the variables.

    Echoed names that clash with computed ones (or lon/lat) get an ``input_`` prefix.
    """
    import pandas as pd

    lon, lat, names, cols = records(ds)
    table = {"lon": lon, "lat": lat}
    if extra_properties is not None:
        plain_rows = [plain_properties(p) for p in extra_properties]
        keys: list[str] = []
        for props in plain_rows:
            keys.extend(k for k in props if k not in keys)
        for key in keys:
            col = f"input_{key}" if key in names or key in ("lon", "lat") else key
            table[col] = [p.get(key) for p in plain_rows]
    for col_name, col in zip(names, cols):
        table[col_name] = col
    return pd.DataFrame(table)


def grid_frame(ds):
    """A grid's nodes inside the plate as a DataFrame (see :func:`points_frame`)."""
    return points_frame(grid_points(ds))


def points_csv(ds, meta: dict | None = None, extra_properties: list[dict] | None = None) -> str:
    """CSV text whose first line is the header: lon, lat, echoed properties, then the variables.

    ``meta`` is accepted for symmetry with the other serialisers and never written into the
    table (see the module docstring).

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"lon": ("point", [1.0]), "lat": ("point", [2.0]),
    ...                  "regime": ("point", ["reverse"]), "inside": ("point", [True])})
    >>> print(points_csv(ds, {"model_id": "m1"}, [{"well": "=cmd()"}]), end="")
    lon,lat,well,regime,inside
    1.0,2.0,'=cmd(),reverse,true
    """
    del meta
    return frame_csv(points_frame(ds, extra_properties))


def points_csvt(ds, extra_properties: list[dict] | None = None) -> str:
    """GDAL CSVT sidecar line for :func:`points_csv` of the same arguments."""
    return frame_csvt(points_frame(ds, extra_properties))


def grid_csv(ds, meta: dict | None = None) -> str:
    """A grid as CSV rows of its nodes inside the plate (header first; ``meta`` not written)."""
    del meta
    return frame_csv(grid_frame(ds))


def grid_csvt(ds) -> str:
    """GDAL CSVT sidecar line for :func:`grid_csv`."""
    return frame_csvt(grid_frame(ds))


def grid_netcdf_bytes(ds, meta: dict | None = None) -> bytes:
    """A CF grid (dimensions lat, lon) as netCDF-4 bytes."""
    return netcdf_bytes(ds, meta)
