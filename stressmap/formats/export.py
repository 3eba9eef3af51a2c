"""Serialisers for prediction results: GeoJSON (RFC 7946), CSV and CF netCDF.

One GeoJSON serialiser serves the CLI, the Python API and the HTTP service. Inputs are xarray
Datasets produced by :mod:`stressmap.model` (dimension ``point``, or dimensions ``(lat, lon)``
for grids) with ``lon``/``lat`` coordinates or variables. ``meta`` holds the things every spatial
output must carry (e.g. ``caution``, ``model_id``, ``build_time``); GeoJSON puts them in top-level
foreign members, CSV in leading ``# key: value`` comment lines, netCDF in global attributes.
"""

from __future__ import annotations

import math
import os
import tempfile

import numpy as np

__all__ = [
    "points_geojson",
    "points_csv",
    "grid_geojson",
    "grid_csv",
    "grid_netcdf_bytes",
    "netcdf_bytes",
    "records",
]

_FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")


def _plain(value):
    """numpy scalar -> Python scalar; NaN/inf -> None (JSON has no NaN)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    return value


def records(ds, dim: str = "point") -> tuple[np.ndarray, np.ndarray, list[str], list[np.ndarray]]:
    """Flatten a point Dataset (or a grid, stacked) into lon, lat and per-variable 1-D arrays."""
    if dim not in ds.dims:
        ds = ds.stack({dim: list(ds.dims)})
    var = ds.variables  # the Variables themselves: ds[name] builds a DataArray each time
    lon = np.asarray(var["lon"].values, dtype=float).ravel()
    lat = np.asarray(var["lat"].values, dtype=float).ravel()
    names = [str(v) for v in ds.data_vars if v not in ("lon", "lat") and var[v].dims == (dim,)]
    cols = [np.asarray(var[v].values).ravel() for v in names]
    return lon, lat, names, cols


def points_geojson(ds, extra_properties: list[dict] | None = None, meta: dict | None = None) -> dict:
    """A FeatureCollection of Point features, one per entry of dimension ``point``.

    ``extra_properties`` (one dict per point, e.g. the properties of the caller's input features)
    are echoed; where a name clashes with a computed property, the caller's value is kept under
    ``input_<name>`` so nothing is lost.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"lon": ("point", [10.0]), "lat": ("point", [-5.0]),
    ...                  "shmax_azimuth_deg": ("point", [float("nan")])})
    >>> fc = points_geojson(ds, [{"well": "A-1"}], {"model_id": "m1"})
    >>> fc["features"][0]["geometry"], fc["features"][0]["properties"], fc["model_id"]
    ({'type': 'Point', 'coordinates': [10.0, -5.0]}, {'well': 'A-1', 'shmax_azimuth_deg': None}, 'm1')
    """
    lon, lat, names, cols = records(ds)
    # "" is how a text variable (regime) says "no value" in a Dataset; JSON says null
    columns = [[None if v == "" else _plain(v) for v in col.tolist()]
               if col.dtype.kind in "OUS" else [_plain(v) for v in col.tolist()] for col in cols]
    features = []
    for i in range(lon.size):
        props: dict = {}
        if extra_properties is not None:
            for key, value in (extra_properties[i] or {}).items():
                props[f"input_{key}" if key in names else key] = value
        for name, col in zip(names, columns):
            props[name] = col[i]
        features.append({
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [_plain(float(lon[i])), _plain(float(lat[i]))]},
            "properties": props,
        })
    out: dict = {"type": "FeatureCollection"}
    if meta:
        out.update({k: _plain(v) for k, v in meta.items()})
    out["features"] = features
    return out


def grid_geojson(ds, meta: dict | None = None, inside_only: bool = True) -> dict:
    """Grid nodes as Point features (nodes outside the plate dropped when ``inside_only``)."""
    flat = ds.stack(point=[d for d in ("lat", "lon") if d in ds.dims]).reset_index("point")
    if "lon" not in flat.data_vars:
        flat = flat.reset_coords()
    if inside_only and "inside" in flat:
        flat = flat.isel(point=np.flatnonzero(np.asarray(flat["inside"].values, dtype=bool)))
    return points_geojson(flat, meta=meta)


def _csv_safe(value):
    """Neutralise spreadsheet formula injection in echoed text cells (OWASP CSV injection)."""
    if isinstance(value, str) and value.startswith(_FORMULA_PREFIXES):
        try:
            float(value)
            return value
        except ValueError:
            return "'" + value
    return value


def points_csv(ds, meta: dict | None = None, extra_properties: list[dict] | None = None) -> str:
    """CSV text: leading ``# key: value`` comment lines from ``meta``, then lon, lat and variables.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"lon": ("point", [1.0]), "lat": ("point", [2.0]), "regime": ("point", ["reverse"])})
    >>> print(points_csv(ds, {"model_id": "m1"}, [{"well": "=cmd()"}]), end="")
    # model_id: m1
    lon,lat,well,regime
    1.0,2.0,'=cmd(),reverse
    """
    import pandas as pd

    lon, lat, names, cols = records(ds)
    table = {"lon": lon, "lat": lat}
    if extra_properties is not None:
        keys: list[str] = []
        for props in extra_properties:
            keys.extend(k for k in (props or {}) if k not in keys)
        for key in keys:
            col = f"input_{key}" if key in names or key in ("lon", "lat") else key
            table[col] = [_csv_safe((p or {}).get(key)) for p in extra_properties]
    for name, col in zip(names, cols):
        table[name] = col
    frame = pd.DataFrame(table)
    header = "".join(
        f"# {k}: {str(v).replace(chr(10), ' ')}\n" for k, v in (meta or {}).items()
    )
    return header + frame.to_csv(index=False, lineterminator="\n", na_rep="")


def grid_csv(ds, meta: dict | None = None) -> str:
    """A grid as CSV rows of its nodes inside the plate."""
    flat = ds.stack(point=[d for d in ("lat", "lon") if d in ds.dims]).reset_index("point")
    if "lon" not in flat.data_vars:
        flat = flat.reset_coords()
    if "inside" in flat:
        flat = flat.isel(point=np.flatnonzero(np.asarray(flat["inside"].values, dtype=bool)))
    return points_csv(flat, meta=meta)


def netcdf_bytes(ds, meta: dict | None = None) -> bytes:
    """Serialise any Dataset to netCDF-4 bytes (``meta`` merged into the global attributes).

    Boolean variables are stored as int8 with CF ``flag_values``/``flag_meanings`` so that every
    netCDF reader understands them.
    """
    out = ds.copy()
    for name in list(out.data_vars):
        if out[name].dtype == bool:
            attrs = dict(out[name].attrs)
            out[name] = out[name].astype("i1")
            attrs.setdefault("flag_values", np.array([0, 1], dtype="i1"))
            attrs.setdefault("flag_meanings", "false true")
            out[name].attrs = attrs
    if meta:
        out.attrs.update({k: ("" if v is None else str(v)) for k, v in meta.items()})
    fd, path = tempfile.mkstemp(suffix=".nc")
    os.close(fd)
    try:
        out.to_netcdf(path, engine="netcdf4")
        with open(path, "rb") as fh:
            return fh.read()
    finally:
        os.unlink(path)


def grid_netcdf_bytes(ds, meta: dict | None = None) -> bytes:
    """A CF grid (dimensions lat, lon) as netCDF-4 bytes."""
    return netcdf_bytes(ds, meta)
