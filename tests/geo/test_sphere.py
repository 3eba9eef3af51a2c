"""Specification of stressmap.geo.sphere: vector geometry on a sphere of radius 6371 km.

Reference values come from pyproj (PROJ's geodesic and projection code on a spherical
ellipsoid, an independent library) and from closed-form spherical trigonometry.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.geo import sphere
from stressmap.constants import EARTH_RADIUS_KM

pyproj = pytest.importorskip("pyproj")
R_M = EARTH_RADIUS_KM * 1e3
GEOD = pyproj.Geod(a=R_M, b=R_M)  # geodesics on a sphere are great circles


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def random_lonlat(rng, n):
    lon = rng.uniform(-180, 180, n)
    lat = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    return lon, lat


def test_lonlat_round_trip_and_unit_length(rng):
    lon, lat = random_lonlat(rng, 1000)
    xyz = sphere.lonlat_to_xyz(lon, lat)
    assert xyz.shape == (1000, 3)
    assert_allclose(np.linalg.norm(xyz, axis=1), 1.0, atol=1e-15)
    lon2, lat2 = sphere.xyz_to_lonlat(xyz)
    assert_allclose(lat2, lat, atol=1e-12)
    assert_allclose((lon2 - lon + 180) % 360 - 180, 0.0, atol=1e-9)


def test_longitude_range_and_antimeridian():
    lon, _ = sphere.xyz_to_lonlat(sphere.lonlat_to_xyz([180.0, -180.0, 359.0], [0.0, 10.0, 0.0]))
    assert np.all((lon >= -180) & (lon < 180))
    assert_allclose(lon, [-180.0, -180.0, -1.0], atol=1e-12)


def test_great_circle_distance_matches_pyproj(rng):
    lon1, lat1 = random_lonlat(rng, 500)
    lon2, lat2 = random_lonlat(rng, 500)
    _, _, dist_m = GEOD.inv(lon1, lat1, lon2, lat2)
    assert_allclose(sphere.great_circle_distance_km(lon1, lat1, lon2, lat2), dist_m / 1e3,
                    rtol=1e-9, atol=1e-6)


def test_great_circle_distance_analytic():
    # a quarter meridian is pi/2 R; one degree of the equator is 2 pi R / 360 (analytic)
    assert_allclose(sphere.great_circle_distance_km(10, 0, 10, 90), np.pi / 2 * EARTH_RADIUS_KM)
    assert_allclose(sphere.great_circle_distance_km(179.5, 0, -179.5, 0),
                    2 * np.pi * EARTH_RADIUS_KM / 360, rtol=1e-12)
    assert_allclose(sphere.great_circle_distance_km(0, 0, 180, 0), np.pi * EARTH_RADIUS_KM)
    assert sphere.great_circle_distance_km(5, 5, 5, 5) == 0.0


def test_local_frame_is_east_north(rng):
    lon, lat = random_lonlat(rng, 200)
    lat = np.clip(lat, -89, 89)
    p = sphere.lonlat_to_xyz(lon, lat)
    e, n = sphere.local_frame(p)
    # orthonormal, tangent, right-handed (east x north = up)
    assert_allclose(np.sum(e * n, axis=1), 0, atol=1e-14)
    assert_allclose(np.sum(e * p, axis=1), 0, atol=1e-14)
    assert_allclose(np.cross(e, n), p, atol=1e-14)
    # along increasing longitude and latitude (finite differences, analytic directions)
    d = 1e-6
    de = sphere.lonlat_to_xyz(lon + d, lat) - p
    dn = sphere.lonlat_to_xyz(lon, lat + d) - p
    assert_allclose(sphere.normalize(de), e, atol=1e-6)
    assert_allclose(sphere.normalize(dn), n, atol=1e-6)


def test_triangle_area_girard():
    # Girard's theorem: area = (A + B + C - pi) R^2 with corner angles from the spherical law of
    # cosines (closed-form spherical trigonometry).
    a, b, c = sphere.lonlat_to_xyz([0.0, 40.0, 10.0], [0.0, 5.0, 50.0])
    sa = sphere.angle_between(b, c)
    sb = sphere.angle_between(a, c)
    sc = sphere.angle_between(a, b)
    A = np.arccos((np.cos(sa) - np.cos(sb) * np.cos(sc)) / (np.sin(sb) * np.sin(sc)))
    B = np.arccos((np.cos(sb) - np.cos(sa) * np.cos(sc)) / (np.sin(sa) * np.sin(sc)))
    C = np.arccos((np.cos(sc) - np.cos(sa) * np.cos(sb)) / (np.sin(sa) * np.sin(sb)))
    assert_allclose(sphere.spherical_triangle_area(a, b, c), A + B + C - np.pi, rtol=1e-12)


POLYGONS = {
    "octant": [(0, 0), (90, 0), (0, 90)],
    "antimeridian": [(170, -10), (-170, -10), (-165, 5), (-175, 12), (175, 10)],
    "polar cap": [(0, 70), (90, 70), (180, 70), (-90, 70)],
    "non-convex": [(0, 0), (30, 0), (30, 20), (25, 20), (25, 5), (5, 5), (5, 20), (0, 20)],
    "small": [(10.0, 45.0), (10.01, 45.0), (10.01, 45.01)],
}


@pytest.mark.parametrize("name", sorted(POLYGONS))
@pytest.mark.parametrize("reverse", [False, True])
def test_polygon_area_matches_pyproj(name, reverse):
    ring = np.array(POLYGONS[name], dtype=float)
    if reverse:
        ring = ring[::-1]
    # pyproj: signed area, positive counter-clockwise (PROJ geodesic polygon area on a sphere)
    area_m2, _ = GEOD.polygon_area_perimeter(ring[:, 0], ring[:, 1])
    assert_allclose(sphere.spherical_polygon_area(ring), area_m2 / 1e6, rtol=1e-9)


def test_polygon_area_smaller_region_and_closing_vertex():
    ring = np.array(POLYGONS["octant"])
    closed = np.vstack([ring, ring[:1]])
    assert_allclose(sphere.spherical_polygon_area(closed, radius_km=1.0), np.pi / 2)
    # a ring around the equator splits the sphere into two hemispheres of 2 pi
    eq = [(lon, 0.0) for lon in range(0, 360, 30)]
    assert_allclose(abs(sphere.spherical_polygon_area(eq, radius_km=1.0)), 2 * np.pi)
    assert sphere.spherical_polygon_area([(0, 0), (1, 1)]) == 0.0


def test_centroid_of_symmetric_polygon():
    # a regular 12-gon around (30 E, 40 N): vertices 500 km away on evenly spaced azimuths
    lon, lat, _ = GEOD.fwd(np.full(12, 30.0), np.full(12, 40.0), np.arange(0, 360, 30.0),
                           np.full(12, 500e3))
    ring = np.column_stack([lon, lat])  # azimuths increase clockwise seen from outside
    c = sphere.polygon_centroid_xyz(ring[::-1])
    assert_allclose(sphere.xyz_to_lonlat(c), [30.0, 40.0], atol=1e-9)
    # clockwise: the region on the left is the large one, whose centroid is the antipode
    c = sphere.polygon_centroid_xyz(ring)
    assert_allclose(sphere.xyz_to_lonlat(c), [-150.0, -40.0], atol=1e-9)


@pytest.mark.parametrize("centre", [(0.0, 0.0), (-170.0, 60.0), (45.0, -89.0)])
def test_projections_match_pyproj(rng, centre):
    lon0, lat0 = centre
    c = sphere.lonlat_to_xyz(lon0, lat0)
    # points within 60 degrees of the centre
    dist = rng.uniform(0, 60 * np.pi / 180 * R_M, 300)
    lon, lat, _ = GEOD.fwd(np.full(300, lon0), np.full(300, lat0), rng.uniform(0, 360, 300), dist)
    p = sphere.lonlat_to_xyz(lon, lat)
    for proj, fwd, inv in (("gnom", sphere.gnomonic_forward, sphere.gnomonic_inverse),
                           ("stere", sphere.stereographic_forward, sphere.stereographic_inverse)):
        tr = pyproj.Proj(proj=proj, lat_0=lat0, lon_0=lon0, R=R_M)
        ex, ey = tr(lon, lat)
        x, y = fwd(p, c)
        assert_allclose(x * R_M, ex, atol=1e-3 * max(1.0, np.abs(ex).max() * 1e-9), rtol=1e-9)
        assert_allclose(y * R_M, ey, atol=1e-3, rtol=1e-9)
        assert_allclose(inv(x, y, c), p, atol=1e-12)


def test_gnomonic_maps_great_circles_to_lines():
    c = sphere.lonlat_to_xyz(20.0, 30.0)
    a, b = sphere.lonlat_to_xyz([0.0, 40.0], [10.0, 45.0])
    pts = sphere.slerp(a, b, np.linspace(0, 1, 7))
    x, y = sphere.gnomonic_forward(pts, c)
    # collinear: the cross product of successive differences vanishes
    cross = (x[1:] - x[0]) * (y[-1] - y[0]) - (y[1:] - y[0]) * (x[-1] - x[0])
    assert_allclose(cross, 0.0, atol=1e-14)
    # beyond the hemisphere there is no image
    assert np.isnan(sphere.gnomonic_forward(-c, c)[0])


def test_stereographic_is_conformal_with_known_scale():
    c = sphere.lonlat_to_xyz(0.0, 0.0)
    p = sphere.lonlat_to_xyz(50.0, 20.0)
    e, n = sphere.local_frame(p)
    h = 1e-7
    x0, y0 = sphere.stereographic_forward(p, c)
    xe, ye = sphere.stereographic_forward(sphere.normalize(p + h * e), c)
    xn, yn = sphere.stereographic_forward(sphere.normalize(p + h * n), c)
    de = np.array([xe - x0, ye - y0]) / h
    dn = np.array([xn - x0, yn - y0]) / h
    k = sphere.stereographic_scale(x0, y0)
    assert_allclose(np.linalg.norm(de), k, rtol=1e-6)
    assert_allclose(np.linalg.norm(dn), k, rtol=1e-6)
    assert_allclose(de @ dn, 0.0, atol=1e-6)


def test_slerp_stays_on_the_arc():
    a, b = sphere.lonlat_to_xyz([0.0, 60.0], [0.0, 30.0])
    t = np.linspace(0, 1, 11)
    pts = sphere.slerp(a, b, t)
    assert_allclose(pts @ np.cross(a, b), 0.0, atol=1e-15)
    assert_allclose(sphere.angle_between(a, pts), t * sphere.angle_between(a, b), atol=1e-14)
