"""Reading gridded inputs from bytes (stressmap.formats.grids): CF netCDF and GeoTIFF."""

from __future__ import annotations

import io

import numpy as np
import pytest
import tifffile
import xarray as xr
from numpy.testing import assert_allclose

from stressmap.errors import InputError
from stressmap.formats import grids


def _nc_bytes(ds: xr.Dataset) -> bytes:
    return ds.to_netcdf()  # xarray returns netCDF3 bytes when no path is given


def _elev_ds(lon, lat, values, units="m", **attrs):
    return xr.Dataset({"z": (("lat", "lon"), values, {"units": units, **attrs})},
                      coords={"lat": ("lat", lat, {"standard_name": "latitude", "units": "degrees_north"}),
                              "lon": ("lon", lon, {"standard_name": "longitude", "units": "degrees_east"})})


LON = np.arange(-20.0, 20.01, 0.5)
LAT = np.arange(-10.0, 10.01, 0.5)
VALUES = 100.0 * np.add.outer(LAT, LON)  # m; -3000 .. 3000


def test_netcdf_any_axis_order_direction_and_lon_convention():
    ref = grids.raster_from_bytes(_nc_bytes(_elev_ds(LON, LAT, VALUES)), "elevation")
    # descending latitude, 0..360 longitudes, (lon, lat) order, values in km
    lon360 = np.mod(LON, 360.0)
    order = np.argsort(lon360)
    flipped = _elev_ds(lon360[order], LAT[::-1], VALUES[::-1][:, order] / 1e3, units="km")
    flipped = flipped.transpose("lon", "lat")
    got = grids.raster_from_bytes(_nc_bytes(flipped), "elevation")
    from stressmap.geo.raster import sample_raster
    plon, plat = np.array([-19.2, -0.3, 0.3, 12.7]), np.array([-9.1, 0.2, 4.4, 9.9])
    a, _ = sample_raster(ref, plon, plat)
    b, _ = sample_raster(got, plon, plat)
    assert_allclose(b, a, rtol=1e-5)  # float32 km -> m
    assert got.units == "m" and ref.shape == (LAT.size, LON.size)


def test_netcdf4_hdf5_bytes_are_read(tmp_path):
    path = tmp_path / "z.nc"
    _elev_ds(LON, LAT, VALUES).to_netcdf(path, engine="netcdf4", format="NETCDF4")
    r = grids.raster_from_bytes(path.read_bytes(), "elevation")
    assert_allclose(r.values, VALUES)


def test_subset_to_a_box_keeps_a_margin():
    r = grids.raster_from_bytes(_nc_bytes(_elev_ds(LON, LAT, VALUES)), "elevation",
                                bbox=(-5.0, -2.0, 5.0, 2.0))
    assert r.lon[0] <= -6.0 and r.lon[-1] >= 6.0 and r.lon.size < LON.size
    assert r.lat[0] <= -3.0 and r.lat[-1] >= 3.0


@pytest.mark.parametrize("make, message", [
    (lambda: xr.Dataset({"z": (("a", "b"), VALUES)}), "no coordinate"),
    (lambda: _elev_ds(LON, LAT, VALUES, units="furlong"), "furlong"),
    (lambda: _elev_ds(LON, LAT, VALUES * 100.0), "plausible"),
    (lambda: _elev_ds(LON, LAT, VALUES / 1e3, units=""), "look like km"),
    (lambda: _elev_ds(LON, LAT, VALUES, grid_mapping="crs").assign(
        crs=((), 0, {"grid_mapping_name": "transverse_mercator"})), "projected"),
    (lambda: _elev_ds(LON, LAT, np.full_like(VALUES, np.nan)), "no finite"),
    (lambda: _elev_ds(LON, LAT, VALUES).assign(w=(("lat", "lon"), VALUES)), "2-D variables"),
])
def test_bad_netcdf_grids_get_clear_errors(make, message):
    with pytest.raises(InputError, match=message):
        grids.raster_from_bytes(_nc_bytes(make()), "elevation")


def test_too_large_and_not_a_grid():
    with pytest.raises(InputError, match="cells"):
        grids.raster_from_bytes(_nc_bytes(_elev_ds(LON, LAT, VALUES)), "elevation", max_cells=100)
    with pytest.raises(InputError, match="not a netCDF or GeoTIFF"):
        grids.raster_from_bytes(b"lon,lat,z\n1,2,3\n", "elevation")
    with pytest.raises(InputError, match="cannot read"):
        grids.raster_from_bytes(b"CDF\x01" + b"\x00" * 20, "elevation")


def _geotiff(values, x0, y0, dx, dy, projected=False, nodata=None) -> bytes:
    """A GeoTIFF written with tifffile: ModelPixelScale, ModelTiepoint and GeoKeys as the
    OGC GeoTIFF standard 1.1 lays them out (pixel-is-area; tie point at the corner of the
    first pixel)."""
    keys = [1, 1, 0, 3, 1024, 0, 1, 1 if projected else 2, 1025, 0, 1, 1]
    keys += [3072, 0, 1, 32633] if projected else [2048, 0, 1, 4326]
    extratags = [(33550, "d", 3, (dx, dy, 0.0), True),
                 (33922, "d", 6, (0.0, 0.0, 0.0, x0, y0, 0.0), True),
                 (34735, "H", len(keys), tuple(keys), True)]
    if nodata is not None:
        extratags.append((42113, "s", 0, str(nodata), True))
    buf = io.BytesIO()
    tifffile.imwrite(buf, values.astype("float32"), extratags=extratags)
    return buf.getvalue()


def test_geotiff_matches_the_same_netcdf_grid():
    dx = 0.5
    # GeoTIFF rows go north to south; the first pixel's corner is half a cell from its centre
    data = _geotiff(VALUES[::-1], LON[0] - dx / 2, LAT[-1] + dx / 2, dx, dx)
    tif = grids.raster_from_bytes(data, "elevation")
    assert_allclose(tif.lon, LON)
    assert_allclose(tif.lat, LAT)
    assert_allclose(tif.values, VALUES, rtol=1e-6)


def test_geotiff_nodata_projected_and_units():
    vals = VALUES[::-1].copy()
    vals[0, 0] = -9999.0
    r = grids.raster_from_bytes(_geotiff(vals, -20.25, 10.25, 0.5, 0.5, nodata=-9999), "elevation")
    assert np.isnan(r.values[-1, 0]) and np.isfinite(r.values).sum() == VALUES.size - 1
    with pytest.raises(InputError, match="projected"):
        grids.raster_from_bytes(_geotiff(VALUES, 500000.0, 0.0, 1000.0, 1000.0, projected=True),
                                "elevation")
    crust = grids.raster_from_bytes(_geotiff(np.full((4, 4), 35000.0), 0, 4, 1, 1),
                                    "crust_thickness", units="m")
    assert_allclose(crust.values, 35.0)
