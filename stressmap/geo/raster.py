"""Gridded input fields on a regular lon/lat raster (elevation, crustal thickness, age) and
their sampling at mesh nodes.

A :class:`Raster` is the core's view of a grid read at the edge (:mod:`stressmap.io.grids`,
:mod:`stressmap.formats.grids`): 1-D strictly monotonic longitudes and latitudes of the cell
centres (degrees) and a 2-D array of values (lat, lon). The core never opens files; it takes
rasters as arrays.

Resampling method (documented contract, used for every grid):

* longitudes are unwrapped to the raster's own convention (0..360 or -180..180, or any window),
  so a plate that crosses the antimeridian samples a 0..360 grid without a seam, and a global
  grid whose columns cover the full circle wraps around (the last column neighbours the first);
* optional **box pre-averaging**: with ``smooth_km`` the values are first averaged over a
  moving box of about ``smooth_km`` x ``smooth_km`` (cells with NaN excluded), so a grid much
  finer than the mesh is not aliased by point sampling;
* then **bilinear interpolation** between the four cell centres around each point. A point
  outside the raster or next to a NaN cell is reported, never extrapolated.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM

__all__ = ["Raster", "as_raster", "sample_raster"]

_KM_PER_DEG = np.pi * EARTH_RADIUS_KM / 180.0


@dataclass(frozen=True)
class Raster:
    """A regular lon/lat grid of values.

    Attributes
    ----------
    lon : (nx,) float array, degrees east of the cell centres, strictly increasing.
    lat : (ny,) float array, degrees north of the cell centres, strictly increasing.
    values : (ny, nx) float array.
    name : str, what the values are (e.g. ``"elevation"``).
    units : str, units of the values (e.g. ``"m"``).
    """

    lon: np.ndarray
    lat: np.ndarray
    values: np.ndarray
    name: str = ""
    units: str = ""

    @property
    def shape(self) -> tuple[int, int]:
        return self.values.shape

    @property
    def is_global(self) -> bool:
        """True when the columns span the whole circle (360 degrees including one spacing)."""
        if self.lon.size < 2:
            return False
        step = (self.lon[-1] - self.lon[0]) / (self.lon.size - 1)
        return bool(abs(self.lon[-1] - self.lon[0] + step - 360.0) < 0.5 * step)


def as_raster(grid, name: str = "") -> Raster:
    """A :class:`Raster` from a Raster, a mapping with ``lon``, ``lat``, ``values`` (or
    ``value``) or a ``(lon, lat, values)`` tuple. Decreasing axes are flipped.

    Raises ValueError naming what is wrong.

    Examples
    --------
    >>> r = as_raster(([0.0, 1.0], [10.0, 5.0], [[1.0, 2.0], [3.0, 4.0]]))
    >>> r.lat.tolist(), r.values.tolist()
    ([5.0, 10.0], [[3.0, 4.0], [1.0, 2.0]])
    """
    if isinstance(grid, Raster):
        lon, lat, values, name, units = grid.lon, grid.lat, grid.values, grid.name, grid.units
    elif isinstance(grid, Mapping):
        lon, lat = grid.get("lon"), grid.get("lat")
        values = grid.get("values", grid.get("value"))
        units = str(grid.get("units", ""))
        name = str(grid.get("name", name))
    elif isinstance(grid, (tuple, list)) and len(grid) == 3:
        (lon, lat, values), units = grid, ""
    else:
        raise ValueError("a grid must be a Raster, a mapping with lon, lat and values, "
                         "or a (lon, lat, values) tuple")
    lon = np.asarray(lon, dtype=float).reshape(-1)
    lat = np.asarray(lat, dtype=float).reshape(-1)
    values = np.asarray(values, dtype=float)
    if values.ndim != 2 or values.shape != (lat.size, lon.size):
        raise ValueError(f"grid values have shape {values.shape}; expected (lat, lon) = "
                         f"({lat.size}, {lon.size})")
    if lon.size < 2 or lat.size < 2:
        raise ValueError("a grid needs at least two longitudes and two latitudes")
    if not (np.all(np.isfinite(lon)) and np.all(np.isfinite(lat))):
        raise ValueError("grid coordinates must be finite numbers")
    if np.any(np.abs(lat) > 90.0):
        raise ValueError("grid latitudes must lie in [-90, 90] degrees")
    for axis, c in ((1, lon), (0, lat)):
        d = np.diff(c)
        if np.all(d < 0):
            c = c[::-1]
            values = np.flip(values, axis=axis)
        elif not np.all(d > 0):
            raise ValueError("grid coordinates must be strictly monotonic")
        if axis == 1:
            lon = c
        else:
            lat = c
    if lon[-1] - lon[0] > 360.0 + 1e-9:
        raise ValueError("grid longitudes span more than 360 degrees")
    lon, values = _contiguous(lon, values)
    return Raster(np.ascontiguousarray(lon), np.ascontiguousarray(lat),
                  np.ascontiguousarray(values), name or "", units)


def _contiguous(lon, values):
    """Roll a grid whose columns wrap around (e.g. 340..359.5 and 0..20 stored as 0..360) so
    its longitudes run without a gap (-20..20)."""
    d = np.diff(lon)
    k = int(np.argmax(d))
    step = float(np.median(d))
    if d[k] <= 1.5 * step or abs((lon[0] + 360.0) - lon[-1] - step) > 0.5 * step:
        return lon, values
    order = np.r_[np.arange(k + 1, lon.size), np.arange(k + 1)]
    new = np.r_[lon[k + 1:] - 360.0, lon[: k + 1]]
    return new, values[:, order]


def _box_mean_axis(a: np.ndarray, size: int, axis: int, wrap: bool) -> np.ndarray:
    """Moving sum over ``size`` cells along one axis (edges repeated, or wrapped), same shape."""
    if size <= 1:
        return a
    lo, hi = size // 2, size - 1 - size // 2
    pad = [(0, 0), (0, 0)]
    pad[axis] = (lo + 1, hi)
    c = np.cumsum(np.pad(a, pad, mode="wrap" if wrap else "edge"), axis=axis)
    n = a.shape[axis]
    upper = np.take(c, np.arange(size, size + n), axis=axis)
    lower = np.take(c, np.arange(0, n), axis=axis)
    return upper - lower


def _box_average(raster: Raster, smooth_km: float) -> np.ndarray:
    """Values averaged over a moving box of about ``smooth_km`` (NaN cells excluded)."""
    dlat_km = np.abs(np.diff(raster.lat)).mean() * _KM_PER_DEG
    mid = np.radians(np.clip(np.abs(raster.lat).mean(), 0.0, 80.0))
    dlon_km = np.abs(np.diff(raster.lon)).mean() * _KM_PER_DEG * np.cos(mid)
    size = (max(1, int(round(smooth_km / dlat_km))), max(1, int(round(smooth_km / dlon_km))))
    if size == (1, 1):
        return raster.values
    good = np.isfinite(raster.values)
    num, den = np.where(good, raster.values, 0.0), good.astype(float)
    for axis, wrap in ((0, False), (1, raster.is_global)):
        num = _box_mean_axis(num, size[axis], axis, wrap)
        den = _box_mean_axis(den, size[axis], axis, wrap)
    return np.where(good, num / np.where(den > 0, den, 1.0), np.nan)


def sample_raster(grid, lon, lat, smooth_km: float | None = None):
    """Bilinear samples of a raster at points (module docstring: the resampling method).

    Parameters
    ----------
    grid : Raster or anything :func:`as_raster` takes.
    lon, lat : (n,) degrees, any longitude convention.
    smooth_km : float, optional
        Box pre-averaging width (km); ``None`` or 0 samples the raw cells.

    Returns
    -------
    values : (n,) float array, NaN where ``ok`` is False.
    ok : (n,) bool, False outside the raster or next to a NaN cell.

    Examples
    --------
    A 0..360 grid sampled at a negative longitude, and a point off the grid:

    >>> r = Raster(np.array([340.0, 350.0]), np.array([0.0, 10.0]),
    ...            np.array([[0.0, 10.0], [20.0, 30.0]]))
    >>> v, ok = sample_raster(r, [-15.0, 0.0], [5.0, 5.0])
    >>> v.round(6).tolist()[0], ok.tolist()
    (15.0, [True, False])
    """
    r = as_raster(grid)
    values = r.values if not smooth_km else _box_average(r, float(smooth_km))
    lon = np.asarray(lon, dtype=float).reshape(-1)
    lat = np.asarray(lat, dtype=float).reshape(-1)
    x = r.lon[0] + np.mod(lon - r.lon[0], 360.0)  # unwrapped into [lon0, lon0 + 360)
    nx, ny = r.lon.size, r.lat.size
    if r.is_global:  # one extra column: the first one again, 360 degrees on
        lon_axis = np.r_[r.lon, r.lon[0] + 360.0]
        values = np.concatenate([values, values[:, :1]], axis=1)
        nx += 1
    else:
        lon_axis = r.lon
    inside = ((x >= lon_axis[0] - 1e-9) & (x <= lon_axis[-1] + 1e-9)
              & (lat >= r.lat[0] - 1e-9) & (lat <= r.lat[-1] + 1e-9))
    i = np.clip(np.searchsorted(lon_axis, x, side="right") - 1, 0, nx - 2)
    j = np.clip(np.searchsorted(r.lat, lat, side="right") - 1, 0, ny - 2)
    tx = np.clip((x - lon_axis[i]) / (lon_axis[i + 1] - lon_axis[i]), 0.0, 1.0)
    ty = np.clip((lat - r.lat[j]) / (r.lat[j + 1] - r.lat[j]), 0.0, 1.0)
    v = ((1 - tx) * (1 - ty) * values[j, i] + tx * (1 - ty) * values[j, i + 1]
         + (1 - tx) * ty * values[j + 1, i] + tx * ty * values[j + 1, i + 1])
    ok = inside & np.isfinite(v)
    return np.where(ok, v, np.nan), ok
