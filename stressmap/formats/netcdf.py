"""CF-1.8 netCDF that GDAL and CF checkers read completely, from xarray Datasets (bytes, no paths).

:func:`cf_dataset` turns any output Dataset of stressmap (a grid with dimensions ``lat``/``lon``,
possibly with ``percentile``; or points along ``point``) into its CF form:

- a ``crs`` grid-mapping variable, ``latitude_longitude`` on the sphere of radius 6371 km that the
  mechanics uses, with ``crs_wkt`` (WKT2) and ``spatial_ref`` (the WKT1 GDAL reads), referenced by
  every data variable's ``grid_mapping``;
- categorical text variables (``regime``, ...) as ``int8`` codes with ``flag_values`` and
  ``flag_meanings`` (``-1`` = no value); booleans as ``int8`` 0/1 flags;
- coordinate variables without ``_FillValue``, with ``standard_name``, ``long_name``, ``units`` and
  ``axis``; grid variables ordered ``(percentile, lat, lon)`` so each percentile is one raster band;
- points as a CF discrete sampling geometry (``featureType = "point"``, ``lon``/``lat`` auxiliary
  coordinates);
- ``meta`` (caution, model id, build time, ...) as global attributes.
"""

from __future__ import annotations

import numpy as np

__all__ = ["EARTH_RADIUS_M", "SPHERE_WKT", "SPHERE_WKT1", "REGIME_CODES", "cf_dataset",
           "netcdf_bytes"]

#: Radius of the sphere the mechanics uses (WGS84 read as a sphere), metres.
EARTH_RADIUS_M = 6371000.0

_DEG = 'ANGLEUNIT["degree",0.0174532925199433]'
#: The model's CRS, WKT2 (ISO 19162:2019): geographic lon/lat on a sphere of radius 6371 km.
SPHERE_WKT = (
    'GEOGCRS["Sphere R=6371 km (stressmap)",'
    'DATUM["Sphere R=6371 km",ELLIPSOID["Sphere R=6371 km",6371000,0,LENGTHUNIT["metre",1]]],'
    f'PRIMEM["Greenwich",0,{_DEG}],CS[ellipsoidal,2],'
    f'AXIS["longitude",east,ORDER[1],{_DEG}],AXIS["latitude",north,ORDER[2],{_DEG}]]'
)
#: The same CRS as WKT1 (GDAL's ``spatial_ref`` attribute).
SPHERE_WKT1 = (
    'GEOGCS["Sphere R=6371 km (stressmap)",DATUM["Sphere_R_6371_km",'
    'SPHEROID["Sphere R=6371 km",6371000,0]],PRIMEM["Greenwich",0],'
    'UNIT["degree",0.0174532925199433],AXIS["Longitude",EAST],AXIS["Latitude",NORTH]]'
)

#: Integer codes of the Anderson regime (flag_meanings need single words).
REGIME_CODES = {"normal": 0, "strike-slip": 1, "reverse": 2}

_COORD_ATTRS = {
    "lat": {"standard_name": "latitude", "long_name": "latitude", "units": "degrees_north",
            "axis": "Y"},
    "lon": {"standard_name": "longitude", "long_name": "longitude", "units": "degrees_east",
            "axis": "X"},
    "percentile": {"long_name": "percentile over ensemble members", "units": "percent"},
}


def _categories(name: str, values: np.ndarray) -> list[str]:
    present = sorted({str(v) for v in values.ravel().tolist() if v not in ("", None)})
    if name.endswith("regime") or set(present) <= set(REGIME_CODES):
        extra = [v for v in present if v not in REGIME_CODES]
        return list(REGIME_CODES) + extra
    return present


def _encode_categorical(name: str, var):
    """A text variable as int8/int16 codes with CF flag attributes (-1 = empty)."""
    import xarray as xr

    values = np.asarray(var.values, dtype=object)
    cats = _categories(name, values)
    lookup = {c: i for i, c in enumerate(cats)}
    codes = np.vectorize(lambda v: lookup.get(str(v), -1) if v not in ("", None) else -1,
                         otypes=[np.int16])(values) if values.size else values.astype(np.int16)
    dtype = np.int8 if len(cats) < 127 else np.int16
    attrs = {k: v for k, v in var.attrs.items() if k not in ("_FillValue", "units")}
    attrs["flag_values"] = np.arange(len(cats), dtype=dtype)
    attrs["flag_meanings"] = " ".join(c.replace(" ", "_").replace("-", "_") for c in cats)
    out = xr.Variable(var.dims, codes.astype(dtype), attrs)
    out.encoding = {"_FillValue": dtype(-1)}
    return out


def _encode_bool(var):
    import xarray as xr

    attrs = {k: v for k, v in var.attrs.items() if k != "_FillValue"}
    attrs.setdefault("flag_values", np.array([0, 1], dtype=np.int8))
    attrs.setdefault("flag_meanings", "false true")
    return xr.Variable(var.dims, np.asarray(var.values, dtype=np.int8), attrs)


def cf_dataset(ds, meta: dict | None = None):
    """The CF-1.8 form of an output Dataset (see the module docstring); ``ds`` is not changed."""
    import xarray as xr

    out = ds.copy()
    for name in [n for n in out.coords if n in out.dims and out[n].dtype.kind in "OUS"]:
        # text labels of a dimension (e.g. load groups) are an auxiliary variable in CF, not a
        # coordinate variable (which must be numeric and monotonic)
        out = out.rename_vars({name: f"{name}_name"})
        out[f"{name}_name"].attrs.setdefault("long_name", f"{name} names")
    grid = "lat" in out.dims and "lon" in out.dims
    points = not grid and "point" in out.dims and "lon" in out.variables and "lat" in out.variables
    if points:
        out = out.set_coords([c for c in ("lon", "lat") if c in out.data_vars])
    for name in list(out.data_vars):
        var = out[name].variable
        if var.dtype == bool:
            out[name] = _encode_bool(var)
        elif var.dtype.kind in "OUS":
            out[name] = _encode_categorical(name, var)
        elif var.dtype.kind == "f" and "_FillValue" not in var.attrs:
            out[name].encoding["_FillValue"] = np.nan
        elif var.dtype.kind in "iu" and "flag_values" in var.attrs:
            out[name].attrs["flag_values"] = np.asarray(var.attrs["flag_values"], dtype=var.dtype)
        if "long_name" not in out[name].attrs and "standard_name" not in out[name].attrs:
            out[name].attrs["long_name"] = name.replace("_", " ")
    for name in ("lat", "lon", "percentile"):
        if name in out.variables:
            attrs = {k: v for k, v in out[name].attrs.items() if k != "_FillValue"}
            attrs = {**attrs, **{k: v for k, v in _COORD_ATTRS[name].items()
                                 if not (points and k == "axis")}}
            out[name].attrs = attrs
            out[name].encoding["_FillValue"] = None
    for name in out.coords:
        out[name].encoding["_FillValue"] = None
    out["crs"] = xr.Variable((), np.int32(0), {
        "grid_mapping_name": "latitude_longitude",
        "earth_radius": EARTH_RADIUS_M,
        "longitude_of_prime_meridian": 0.0,
        "crs_wkt": SPHERE_WKT,
        "spatial_ref": SPHERE_WKT1,
        "long_name": "coordinate reference system: lon/lat on a sphere of radius 6371 km",
    })
    spatial = {"lat", "lon"} if grid else {"point"}
    for name in list(out.data_vars):
        if name == "crs" or not spatial <= set(out[name].dims):
            continue
        dims = out[name].dims
        if grid:
            rest = [d for d in dims if d not in ("lat", "lon")]
            out[name] = out[name].transpose(*rest, "lat", "lon")
        out[name].attrs["grid_mapping"] = "crs"
        if points:
            out[name].attrs["coordinates"] = "lat lon"
    out.attrs = {k: v for k, v in out.attrs.items() if v is not None}
    out.attrs["Conventions"] = "CF-1.8"
    out.attrs.setdefault("history", f"written by stressmap {_version()} as CF-1.8 netCDF")
    if points:
        out.attrs["featureType"] = "point"
    if meta:
        out.attrs.update({k: ("" if v is None else str(v)) for k, v in meta.items()})
    for k, v in list(out.attrs.items()):  # netCDF attributes: text, numbers or arrays of numbers
        if isinstance(v, (bool, np.bool_)):
            out.attrs[k] = str(bool(v)).lower()
        elif isinstance(v, (dict, list, tuple)) and not _numeric_list(v):
            out.attrs[k] = str(v)
    return out


def _numeric_list(v) -> bool:
    return isinstance(v, (list, tuple)) and all(isinstance(x, (int, float)) and not isinstance(x, bool)
                                                 for x in v)


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("stressmap")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "(source)"


def netcdf_bytes(ds, meta: dict | None = None) -> bytes:
    """A Dataset as CF-1.8 netCDF-4 bytes (via :func:`cf_dataset`)."""
    return bytes(cf_dataset(ds, meta).to_netcdf(engine="netcdf4"))
