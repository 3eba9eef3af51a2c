"""Gridded inputs from bytes: CF netCDF and GeoTIFF -> :class:`stressmap.geo.raster.Raster`.

No paths here (:mod:`stressmap.io.grids` reads files, the service reads uploads). Both readers
check what the core cannot: that the grid has geographic lon/lat coordinates (CF
``standard_name``/``units``/``axis`` or usual names; a GeoTIFF in a geographic CRS), that the
values are in the units of their role (converting km <-> m where a unit says so), that they are
plausible for it, and that the grid is not too large. Every failure is an
:class:`~stressmap.errors.InputError` whose problem names the field (the grid's role or the
variable).

Supported:

* **netCDF** (classic and netCDF-4/HDF5) following CF: a 2-D variable on latitude/longitude
  coordinates, any longitude convention (0..360 or -180..180), either axis order and direction;
  ``scale_factor``/``add_offset``/``_FillValue`` applied.
* **GeoTIFF**: one band, a north-up geographic grid (ModelPixelScale + ModelTiepoint, no
  rotation), GeographicTypeGeoKey WGS 84 (4326) or unspecified geographic; pixel-is-area
  (cell centres half a pixel in) or pixel-is-point; GDAL_NODATA honoured. Read with ``tifffile``.
"""

from __future__ import annotations

import io

import netCDF4
import numpy as np
import tifffile
import xarray as xr

from stressmap.errors import InputError, problem
from stressmap.formats.hdf5lock import NETCDF_LOCK
from stressmap.geo.raster import Raster, as_raster

__all__ = ["ROLES", "MAX_GRID_CELLS", "sniff", "raster_from_bytes", "raster_from_dataset",
           "netcdf_raster", "geotiff_raster", "subset_indices", "subset_raster",
           "raster_netcdf_bytes"]

#: Largest grid (cells, after subsetting) a reader accepts: a global 2-arc-minute grid.
MAX_GRID_CELLS = 10800 * 5400

#: Per role: the unit of the core, accepted unit spellings -> factor to it, plausible range.
ROLES = {
    "elevation": ("m", {"m": 1.0, "meter": 1.0, "meters": 1.0, "metre": 1.0, "metres": 1.0,
                        "km": 1e3, "kilometer": 1e3, "kilometers": 1e3, "kilometre": 1e3},
                  (-11500.0, 9000.0)),
    "crust_thickness": ("km", {"km": 1.0, "kilometer": 1.0, "kilometers": 1.0, "kilometre": 1.0,
                               "kilometres": 1.0, "m": 1e-3, "meter": 1e-3, "meters": 1e-3,
                               "metre": 1e-3, "metres": 1e-3}, (0.0, 100.0)),
    "age": ("Myr", {"myr": 1.0, "ma": 1.0, "my": 1.0, "million years": 1.0, "m.y.": 1.0},
            (0.0, 400.0)),
}

_LON_NAMES = ("lon", "longitude", "x", "long", "lng")
_LAT_NAMES = ("lat", "latitude", "y")


def _fail(message: str, field: str) -> InputError:
    return InputError(message, [problem(message, field=field)])


def sniff(data: bytes, field: str = "grid") -> str:
    """``'netcdf'`` or ``'geotiff'`` from the first bytes; InputError otherwise.

    Examples
    --------
    >>> sniff(b"CDF\\x01rest"), sniff(b"II*\\x00rest")
    ('netcdf', 'geotiff')
    """
    head = bytes(data[:8])
    if head.startswith((b"CDF\x01", b"CDF\x02", b"CDF\x05", b"\x89HDF\r\n\x1a\n")):
        return "netcdf"
    if head[:4] in (b"II*\x00", b"MM\x00*", b"II+\x00", b"MM\x00+"):
        return "geotiff"
    raise _fail("not a netCDF or GeoTIFF file (unrecognised first bytes)", field)


def _convert_units(values, units: str, role: str, field: str):
    unit, factors, (lo, hi) = ROLES[role]
    key = (units or "").strip().lower()
    if key:
        if key not in factors:
            raise _fail(f"{role} values are in {units!r}; expected {unit} (or one of "
                        f"{', '.join(sorted(factors))})", field)
        values = values * factors[key]
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        raise _fail(f"the {role} grid has no finite values", field)
    vmin, vmax = float(finite.min()), float(finite.max())
    if vmin < lo - 1e-9 or vmax > hi + 1e-9:
        raise _fail(f"{role} values range over [{vmin:g}, {vmax:g}] {unit}, outside the "
                    f"plausible [{lo:g}, {hi:g}] {unit}: wrong units or wrong variable?", field)
    if role == "elevation" and not key and max(abs(vmin), abs(vmax)) < 10.0:
        raise _fail("elevations within +-10 look like km, not m: give the variable "
                    "units = 'km' or convert it", field)
    return values, unit


def _is_lon(name, var) -> bool:
    a = var.attrs
    return (a.get("standard_name") == "longitude" or a.get("axis") == "X"
            or str(a.get("units", "")).lower() in ("degrees_east", "degree_east", "degrees_e")
            or str(name).lower() in _LON_NAMES)


def _is_lat(name, var) -> bool:
    a = var.attrs
    return (a.get("standard_name") == "latitude" or a.get("axis") == "Y"
            or str(a.get("units", "")).lower() in ("degrees_north", "degree_north", "degrees_n")
            or str(name).lower() in _LAT_NAMES)


def _check_crs(ds, da, field: str) -> None:
    gm = da.attrs.get("grid_mapping")
    if gm and gm in ds.variables:
        name = str(ds[gm].attrs.get("grid_mapping_name", ""))
        if name and name != "latitude_longitude":
            raise _fail(f"the grid is in a projected CRS ({name!r}); give it on geographic "
                        "lon/lat coordinates (WGS 84)", field)


def subset_indices(lon, lat, bbox, margin_deg: float = 1.0):
    """Column and row indices (i, j) of the cells covering ``bbox`` = (W, S, E, N) degrees plus a
    margin and one cell each side. ``W`` > ``E`` is a box across the antimeridian; when the
    box wraps inside the grid's own window every column is kept."""
    w, s, e, n = (float(v) for v in bbox)
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    j = np.flatnonzero((lat >= s - margin_deg) & (lat <= n + margin_deg))
    if j.size:
        j = np.arange(max(j.min() - 1, 0), min(j.max() + 2, lat.size))
    width = (e - w) % 360.0 + 2 * margin_deg
    i = np.flatnonzero(np.mod(lon - (w - margin_deg), 360.0) <= width)
    if width >= 360.0 or (i.size and np.any(np.diff(i) != 1)):
        i = np.arange(lon.size)
    elif i.size:
        i = np.arange(max(i[0] - 1, 0), min(i[-1] + 2, lon.size))
    return i, j


def subset_raster(raster: Raster, bbox, margin_deg: float = 1.0) -> Raster:
    """The part of a raster that covers ``bbox`` (see :func:`subset_indices`)."""
    i, j = subset_indices(raster.lon, raster.lat, bbox, margin_deg)
    _check_cover(i, j, raster.name, bbox)
    return Raster(raster.lon[i], raster.lat[j], np.ascontiguousarray(raster.values[np.ix_(j, i)]),
                  raster.name, raster.units)


def _check_cover(i, j, name, bbox) -> None:
    if i.size < 2 or j.size < 2:
        w, s, e, n = bbox
        raise _fail(f"the {name or 'grid'} does not cover the plate (box W {w:g}, S {s:g}, "
                    f"E {e:g}, N {n:g})", name or "grid")


def _check_size(ny: int, nx: int, field: str, max_cells: int) -> None:
    if ny * nx > max_cells:
        raise _fail(f"the grid has {ny} x {nx} = {ny * nx:,} cells; at most {max_cells:,} are "
                    "read (subset or coarsen it)", field)


def raster_from_dataset(ds, role: str, variable: str | None = None, bbox=None,
                        max_cells: int = MAX_GRID_CELLS) -> Raster:
    """A Raster from an xarray Dataset following CF (see module docstring)."""
    field = role if variable is None else variable
    names = [v for v in ds.data_vars if ds[v].ndim == 2]
    name = variable or (names[0] if len(names) == 1 else None)
    if name is None:
        raise _fail(f"the grid has {len(names)} 2-D variables ({', '.join(map(str, names)) or 'none'}); "
                    "name the one to use", f"{role}_variable")
    if name not in ds.data_vars:
        raise _fail(f"the grid has no variable {name!r} (variables: "
                    f"{', '.join(map(str, ds.data_vars)) or 'none'})", f"{role}_variable")
    da = ds[name]
    if da.ndim != 2:
        raise _fail(f"variable {name!r} has dimensions {da.dims}; expected 2-D (lat, lon)", field)
    _check_crs(ds, da, field)
    ydim, xdim = da.dims
    coords = {d: ds[d] if d in ds.variables else None for d in da.dims}
    if any(c is None for c in coords.values()):
        raise _fail(f"variable {name!r} has no coordinate values for {da.dims}; a grid needs "
                    "latitude and longitude coordinates", field)
    if _is_lon(ydim, coords[ydim]) and _is_lat(xdim, coords[xdim]):
        da = da.transpose()
        ydim, xdim = xdim, ydim
    if not (_is_lon(xdim, coords[xdim]) and _is_lat(ydim, coords[ydim])):
        raise _fail(f"cannot tell longitude and latitude among {da.dims}: give the coordinates "
                    "standard_name longitude/latitude or units degrees_east/degrees_north", field)
    lon = np.asarray(ds[xdim].values, dtype=float)
    lat = np.asarray(ds[ydim].values, dtype=float)
    if bbox is not None:  # subset by index first so only the needed cells are read
        i, j = subset_indices(lon, lat, bbox)
        _check_cover(i, j, role, bbox)
        da = da.isel({xdim: i, ydim: j})
        lon, lat = lon[i], lat[j]
    _check_size(lat.size, lon.size, field, max_cells)
    values = np.asarray(da.values, dtype=float)
    values, unit = _convert_units(values, str(da.attrs.get("units", "")), role, field)
    try:
        return as_raster(Raster(lon, lat, values, role, unit))
    except ValueError as exc:
        raise _fail(f"unusable grid coordinates: {exc}", field) from None


def netcdf_raster(data: bytes, role: str, variable: str | None = None, bbox=None,
                  max_cells: int = MAX_GRID_CELLS) -> Raster:
    """A Raster from the bytes of a netCDF file (read in memory with netCDF4, under the
    process-wide HDF5 lock)."""
    with NETCDF_LOCK:
        return _netcdf_raster(data, role, variable, bbox, max_cells)


def _netcdf_raster(data: bytes, role: str, variable, bbox, max_cells) -> Raster:
    try:
        nc = netCDF4.Dataset("upload.nc", mode="r", memory=bytes(data))
    except (OSError, ValueError, RuntimeError) as exc:
        raise _fail(f"cannot read the netCDF grid: {exc}", role) from None
    try:
        ds = xr.open_dataset(xr.backends.NetCDF4DataStore(nc))
    except (ValueError, KeyError, TypeError, RuntimeError) as exc:
        nc.close()
        raise _fail(f"cannot decode the netCDF grid: {exc}", role) from None
    with ds:  # closes nc too
        return raster_from_dataset(ds, role, variable, bbox, max_cells)


def _geotiff_axes(page, field: str):
    """Cell-centre lon (nx,) and lat (ny,) of a north-up geographic GeoTIFF page."""
    tags = page.tags
    geo = page.geotiff_tags or {}
    scale = tags.get("ModelPixelScaleTag")
    tie = tags.get("ModelTiepointTag")
    if "ModelTransformationTag" in tags and scale is None:
        raise _fail("rotated or sheared GeoTIFF grids are not supported; warp it to a north-up "
                    "lon/lat grid first", field)
    if scale is None or tie is None:
        raise _fail("the GeoTIFF has no georeferencing (ModelPixelScale and ModelTiepoint)", field)
    model = geo.get("GTModelTypeGeoKey")
    epsg = geo.get("GeographicTypeGeoKey")
    projected = geo.get("ProjectedCSTypeGeoKey")
    model_code = int(getattr(model, "value", model)) if model is not None else 2
    epsg_code = int(getattr(epsg, "value", epsg)) if epsg is not None else 4326
    if projected is not None or model_code != 2:
        raise _fail("the GeoTIFF is in a projected CRS; give it in geographic lon/lat "
                    "(EPSG:4326)", field)
    if epsg_code not in (4326, 32767, 4030, 4047):  # WGS 84, user-defined, WGS 84 / sphere ellipsoids
        raise _fail(f"the GeoTIFF's geographic CRS is EPSG:{epsg_code}; expected WGS 84 "
                    "(EPSG:4326)", field)
    sx, sy = float(scale.value[0]), float(scale.value[1])
    i0, j0, _, x0, y0, _ = (float(v) for v in tie.value[:6])
    raster_type = geo.get("GTRasterTypeGeoKey")
    point = int(getattr(raster_type, "value", raster_type) or 1) == 2
    half = 0.0 if point else 0.5
    ny, nx = page.shape[:2]
    lon = x0 + (np.arange(nx) - i0 + half) * sx
    lat = y0 - (np.arange(ny) - j0 + half) * sy
    return lon, lat


def geotiff_raster(data: bytes, role: str, units: str = "", bbox=None,
                   max_cells: int = MAX_GRID_CELLS) -> Raster:
    """A Raster from the bytes of a single-band geographic GeoTIFF (read with tifffile).

    GeoTIFF carries no units: ``units`` says them (default: the role's unit).
    """
    field = role
    try:
        with tifffile.TiffFile(io.BytesIO(bytes(data))) as tif:
            page = tif.pages.first
            if len(page.shape) != 2:
                raise _fail(f"the GeoTIFF has shape {page.shape}; expected one band", field)
            _check_size(*page.shape, field, max_cells * 4)
            lon, lat = _geotiff_axes(page, field)
            values = page.asarray().astype(float)
            nodata = page.tags.get("GDAL_NODATA")
    except InputError:
        raise
    except (tifffile.TiffFileError, ValueError, KeyError, IndexError, OSError) as exc:
        raise _fail(f"cannot read the GeoTIFF grid: {exc}", field) from None
    if nodata is not None:
        try:
            values[values == float(str(nodata.value).strip("\x00 "))] = np.nan
        except ValueError:
            pass
    raster = as_raster(Raster(lon, lat, values, role, units))
    if bbox is not None:
        raster = subset_raster(raster, bbox)
    _check_size(*raster.shape, field, max_cells)
    values, unit = _convert_units(raster.values, units, role, field)
    return Raster(raster.lon, raster.lat, values, role, unit)


def raster_from_bytes(data: bytes, role: str, variable: str | None = None, units: str = "",
                      bbox=None, max_cells: int = MAX_GRID_CELLS) -> Raster:
    """A Raster from netCDF or GeoTIFF bytes (format from the first bytes)."""
    if role not in ROLES:
        raise _fail(f"unknown grid role {role!r}; expected one of {', '.join(ROLES)}", "role")
    kind = sniff(data, role)
    if kind == "netcdf":
        return netcdf_raster(data, role, variable, bbox, max_cells)
    return geotiff_raster(data, role, units, bbox, max_cells)


def raster_netcdf_bytes(raster: Raster, attrs: dict | None = None) -> bytes:
    """A Raster as CF netCDF bytes (variable named by its role; float32 values)."""
    ds = xr.Dataset(
        {raster.name or "value": (("lat", "lon"), np.asarray(raster.values, dtype="float32"),
                                  {"units": raster.units})},
        coords={"lat": ("lat", raster.lat, {"standard_name": "latitude", "units": "degrees_north"}),
                "lon": ("lon", raster.lon, {"standard_name": "longitude", "units": "degrees_east"})},
        attrs={"Conventions": "CF-1.8", **(attrs or {})})
    with NETCDF_LOCK:  # HDF5 is not thread-safe
        return bytes(ds.to_netcdf())
