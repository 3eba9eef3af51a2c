"""Masking a lon/lat grid by a polygon: which nodes are inside, and a Dataset with the outside
blanked. Layer: geo (core; shapely and xarray objects in, no files).
"""

from __future__ import annotations

import numpy as np
import shapely
import xarray as xr

__all__ = ["polygon_keep", "mask_dataset"]


def polygon_keep(polygon, lon_deg: np.ndarray, lat_deg: np.ndarray) -> np.ndarray:
    """(lat, lon) boolean: grid nodes inside ``polygon`` (a shapely (Multi)Polygon in degrees).

    Longitudes are tried as given and wrapped to [-180, 180), so a grid laid out east of 180
    (across the antimeridian) still meets a polygon given in [-180, 180].

    Examples
    --------
    >>> square = shapely.box(170.0, -5.0, 180.0, 5.0)
    >>> polygon_keep(square, np.array([175.0, 185.0]), np.array([0.0])).tolist()
    [[True, False]]
    >>> polygon_keep(shapely.box(-180.0, -5.0, -170.0, 5.0), np.array([185.0]), np.array([0.0]))
    array([[ True]])
    """
    lon2, lat2 = np.meshgrid(np.asarray(lon_deg, dtype=float), np.asarray(lat_deg, dtype=float))
    return shapely.contains_xy(polygon, lon2, lat2) | shapely.contains_xy(
        polygon, np.mod(lon2 + 180.0, 360.0) - 180.0, lat2)


def mask_dataset(ds: xr.Dataset, keep_lat_lon: np.ndarray) -> xr.Dataset:
    """``ds`` with every variable on (lat, lon) blanked outside ``keep``: False for booleans, 0
    for integers (an ``inside`` flag), "" for text, NaN otherwise; attributes kept."""
    keep = xr.DataArray(np.asarray(keep_lat_lon, dtype=bool), dims=("lat", "lon"),
                        coords={"lat": ds["lat"], "lon": ds["lon"]})
    out = ds.copy()
    for name, var in ds.data_vars.items():
        if not {"lat", "lon"} <= set(var.dims):
            continue
        if var.dtype == bool:
            new = var & keep
        elif var.dtype.kind in "iu":
            new = var.where(keep, 0).astype(var.dtype)
        elif var.dtype.kind in "USO":
            new = var.where(keep, "")
        else:
            new = var.where(keep)
        out[name] = new.transpose(*var.dims)
        out[name].attrs = var.attrs
    return out
