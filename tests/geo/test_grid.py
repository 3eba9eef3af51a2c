"""THE lon/lat grid and polygon mask (stressmap.geo.grid), checked against pyproj geodesics on
the sphere, matplotlib's planar point-in-polygon, and the analytic left-of-every-edge test for
convex spherical polygons."""

from __future__ import annotations

import numpy as np
import pyproj
import pytest
import shapely
from matplotlib.path import Path
from numpy.testing import assert_allclose

from stressmap.errors import InputError
from stressmap.geo import grid, sphere

GEOD = pyproj.Geod(a=6371e3, b=6371e3)  # the package's sphere, R = 6371 km


@pytest.mark.parametrize("bbox, spacing", [
    ((-30.0, -30.0, -10.0, -10.0), 200.0),
    ((5.0, 40.0, 15.0, 50.0), 75.0),
    ((170.0, -10.0, -170.0, 10.0), 300.0),
])
def test_spacing_is_the_geodesic_distance(bbox, spacing):
    lon, lat = grid.regular_grid(bbox, spacing)
    # along a meridian (pyproj geodesic on the same sphere)
    _, _, d = GEOD.inv(np.full(len(lat) - 1, lon[0]), lat[:-1], np.full(len(lat) - 1, lon[0]), lat[1:])
    assert_allclose(d / 1e3, spacing, rtol=1e-9)
    # along the middle parallel the chord of one step is spacing in arc length of a small
    # circle: cos(mid) * R * dlon (rad) = spacing
    mid = np.radians(0.5 * (bbox[1] + bbox[3]))
    assert_allclose(np.cos(mid) * np.radians(np.diff(lon)) * 6371.0, spacing, rtol=1e-12)
    assert np.all(np.diff(lon) > 0) and lon[0] == bbox[0] and lat[0] == bbox[1]
    assert lat[-1] <= bbox[3] + 1e-9


def test_same_box_in_both_longitude_frames_gives_the_same_nodes():
    a_lon, a_lat = grid.regular_grid((170.0, 0.0, -170.0, 5.0), 100.0)
    b_lon, b_lat = grid.regular_grid((170.0, 0.0, 190.0, 5.0), 100.0)
    c_lon, _ = grid.regular_grid((-190.0 + 360.0, 0.0, -170.0 + 360.0, 5.0), 100.0)
    assert_allclose(a_lon, b_lon) and assert_allclose(a_lat, b_lat) is None
    assert_allclose(b_lon, c_lon)
    assert_allclose(grid.wrap_lon(a_lon), np.where(a_lon >= 180, a_lon - 360, a_lon))


def test_size_is_known_before_allocation():
    box = (-180.0, -89.0, 180.0, 89.0)
    assert grid.grid_size(box, grid.MIN_SPACING_KM) > 10**14   # would not fit in any memory
    with pytest.raises(InputError) as err:
        grid.regular_grid(box, grid.MIN_SPACING_KM, max_nodes=10**6, spacing_field="region.spacing_km")
    assert err.value.problems[0]["field"] == "region.spacing_km"
    n_lat, n_lon = grid.grid_shape((0, 0, 10, 10), 50.0)
    lon, lat = grid.regular_grid((0, 0, 10, 10), 50.0, max_nodes=n_lat * n_lon)
    assert (lat.size, lon.size) == (n_lat, n_lon)


@pytest.mark.parametrize("bbox, spacing, fields", [
    ((5, 0, 5, 1), 10.0, ["bbox"]),                    # W == E: refused, not the globe
    ((0, 10, 5, 5), 10.0, ["bbox"]),
    ((0, 0, 5, 95), 10.0, ["bbox"]),
    ((0, 0, 5, 5), 0.0, ["spacing_km"]),
    ((0, 0, 5, 5), 1e-4, ["spacing_km"]),
    ((0, 0, 5, 5), float("nan"), ["spacing_km"]),
    ((0, 0, 5, 5), 5e-324, ["spacing_km"]),
    ((5, 0, 5, 1), -1.0, ["bbox", "spacing_km"]),     # both at once
    (("a", 0, 5, 1), 10.0, ["bbox"]),
])
def test_bad_requests_name_every_field(bbox, spacing, fields):
    with pytest.raises(InputError) as err:
        grid.regular_grid(bbox, spacing)
    assert [p["field"] for p in err.value.problems] == fields


# -- polygon mask -------------------------------------------------------------------------------

def test_lonlat_mask_matches_matplotlib_path():
    rng = np.random.default_rng(7)
    ring = np.array([(0, 0), (8, 1), (10, 7), (4, 4), (1, 9)], dtype=float)
    hole = np.array([(5, 2), (7, 2.5), (6, 4)], dtype=float)
    lon, lat = rng.uniform(-1, 11, 5000), rng.uniform(-1, 10, 5000)
    got = grid.polygon_mask(lon, lat, shapely.Polygon(ring, [hole]))
    xy = np.column_stack([lon, lat])
    want = Path(ring).contains_points(xy) & ~Path(hole).contains_points(xy)
    assert (got == want).mean() > 0.999   # points exactly on an edge may differ
    assert got.sum() > 1000


def test_lonlat_mask_across_the_antimeridian_in_either_frame():
    lon, lat = np.meshgrid(np.arange(170.0, 191.0, 5.0), [0.0])   # grid past 180
    east = shapely.box(170.5, -1, 189.5, 1)                       # 0..360 frame
    west = shapely.MultiPolygon([shapely.box(170.5, -1, 180, 1), shapely.box(-180, -1, -170.5, 1)])
    assert grid.polygon_mask(lon, lat, east).tolist() == [[False, True, True, True, False]]
    assert grid.polygon_mask(lon, lat, west)[0, [1, 3]].all()
    assert grid.polygon_mask(grid.wrap_lon(lon), lat, east).tolist() == \
        grid.polygon_mask(lon, lat, east).tolist()


def test_great_circle_mask_is_left_of_every_edge():
    # a convex spherical polygon: inside <=> (a x b) . p > 0 for every counter-clockwise edge
    ring = np.array([(-20, -10), (25, -15), (30, 30), (-10, 35)], dtype=float)
    xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
    normals = np.cross(xyz, np.roll(xyz, -1, axis=0))
    rng = np.random.default_rng(3)
    lon, lat = rng.uniform(-60, 70, 4000), rng.uniform(-50, 70, 4000)
    p = sphere.lonlat_to_xyz(lon, lat)
    want = np.all(p @ normals.T > 0, axis=1)
    assert_allclose(grid.polygon_mask(lon, lat, ring, arcs="great_circle"), want)
    # the same ring clockwise, and closed, marks the same points (the smaller region)
    assert_allclose(grid.polygon_mask(lon, lat, np.vstack([ring[::-1], ring[-1:]]),
                                      arcs="great_circle"), want)
    # points on the far side of the globe are outside
    assert not grid.polygon_mask(lon + 180, -lat, ring, arcs="great_circle").any()


def test_great_circle_mask_refuses_a_ring_too_large():
    ring = [(-100, 0), (0, -5), (100, 0), (0, 5)]
    with pytest.raises(InputError):
        grid.polygon_mask([0.0], [0.0], ring, arcs="great_circle")
