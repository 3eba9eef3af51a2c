"""Sampling gridded inputs at nodes (stressmap.geo.raster) against scipy's interpolator."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.interpolate import RegularGridInterpolator

from stressmap.geo.raster import Raster, as_raster, sample_raster


def _grid(lon, lat, seed=0):
    return np.random.default_rng(seed).normal(size=(lat.size, lon.size))


def test_bilinear_matches_scipy_regular_grid_interpolator():
    lon, lat = np.linspace(-30.0, 10.0, 41), np.linspace(-40.0, -5.0, 36)
    values = _grid(lon, lat)
    rng = np.random.default_rng(1)
    plon, plat = rng.uniform(-30, 10, 500), rng.uniform(-40, -5, 500)
    ref = RegularGridInterpolator((lat, lon), values, method="linear")(np.c_[plat, plon])
    got, ok = sample_raster((lon, lat, values), plon, plat)
    assert ok.all()
    assert_allclose(got, ref, rtol=1e-12, atol=1e-12)


def test_longitude_conventions_give_the_same_samples():
    """A -180..180 grid and the same grid stored 0..360 (rolled) sample alike, across the
    antimeridian too (common practice: both conventions are CF-valid)."""
    lon = np.arange(-180.0, 180.0, 2.0)
    lat = np.arange(-60.0, 61.0, 2.0)
    values = _grid(lon, lat)
    roll = np.argsort(np.mod(lon, 360.0))
    east = Raster(np.mod(lon, 360.0)[roll], lat, values[:, roll])
    plon = np.array([-179.5, 179.5, -0.5, 0.5, 359.0 - 360.0, 123.4, -45.6])
    plat = np.array([0.0, 10.0, -20.0, 30.0, 1.0, -59.0, 59.0])
    a, ok_a = sample_raster((lon, lat, values), plon, plat)
    b, ok_b = sample_raster(east, plon + 360.0, plat)
    assert ok_a.all() and ok_b.all()
    assert_allclose(a, b, rtol=1e-12)
    # the seam cell between 178 and -180 (=180) is interpolated, not missing
    mid, _ = sample_raster((lon, lat, values), [179.0], [0.0])
    j = np.flatnonzero(lat == 0.0)[0]
    assert_allclose(mid, 0.5 * (values[j, -1] + values[j, 0]))


def test_points_off_the_grid_or_next_to_nan_are_flagged():
    lon, lat = np.arange(0.0, 10.0), np.arange(0.0, 5.0)
    values = np.ones((5, 10))
    values[2, 4] = np.nan
    v, ok = sample_raster((lon, lat, values), [4.5, 11.0, 1.0, -0.5], [2.5, 1.0, 1.0, 1.0])
    assert ok.tolist() == [False, False, True, False]
    assert np.isnan(v[0]) and v[2] == 1.0


def test_box_average_keeps_the_mean_and_removes_fine_wiggles():
    lon, lat = np.arange(0.0, 20.0, 0.05), np.arange(-10.0, 10.0, 0.05)
    x, _ = np.meshgrid(lon, lat)
    values = 1000.0 + 500.0 * np.sin(2 * np.pi * x / 0.2)  # 22 km wavelength
    plon, plat = np.linspace(5, 15, 50), np.zeros(50)
    raw, _ = sample_raster((lon, lat, values), plon, plat)
    smooth, _ = sample_raster((lon, lat, values), plon, plat, smooth_km=22.2)
    assert np.ptp(raw) > 500 and np.ptp(smooth) < 60
    assert_allclose(smooth.mean(), 1000.0, rtol=0.01)


def test_as_raster_rejects_bad_shapes():
    with pytest.raises(ValueError, match="shape"):
        as_raster(([0.0, 1.0], [0.0, 1.0, 2.0], np.zeros((2, 2))))
    with pytest.raises(ValueError, match="monotonic"):
        as_raster(([0.0, 1.0, 0.5], [0.0, 1.0], np.zeros((2, 3))))
    with pytest.raises(ValueError, match="latitudes"):
        as_raster(([0.0, 1.0], [80.0, 95.0], np.zeros((2, 2))))


@pytest.mark.parametrize("global_grid", [False, True])
def test_box_average_matches_scipy_uniform_filter(global_grid):
    """The NaN-aware box mean equals scipy.ndimage.uniform_filter of values and of the valid
    mask (edges 'nearest'; columns 'wrap' on a global grid)."""
    from scipy.ndimage import uniform_filter

    from stressmap.geo.raster import _box_average

    lon = np.arange(0.0, 360.0, 4.5) if global_grid else np.linspace(0.0, 7.9, 80)
    lat = np.linspace(-2.5, 2.4, 50)
    values = _grid(lon, lat, seed=3)
    values[10, 10] = np.nan
    r = Raster(lon, lat, values)
    smooth_km = 5 * 0.1 * 111.195 if not global_grid else 5 * 4.5 * 111.195 * np.cos(np.radians(1.2))
    got = _box_average(r, smooth_km)
    good = np.isfinite(values)
    size = (5, 5) if not global_grid else (int(round(smooth_km / (0.1 * 111.195))), 5)
    mode = ("nearest", "wrap" if global_grid else "nearest")
    num = uniform_filter(np.where(good, values, 0.0), size=size, mode=mode)
    den = uniform_filter(good.astype(float), size=size, mode=mode)
    assert_allclose(got, np.where(good, num / den, np.nan), rtol=1e-10, atol=1e-12)
