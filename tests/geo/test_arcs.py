"""Great-circle arc geometry against independent libraries.

* distances from pyproj's geodesic inverse on a sphere (geodesics of a sphere are great circles);
* crossings against shapely in the gnomonic plane, where great circles are straight lines.
"""

from __future__ import annotations

import numpy as np
import shapely
from numpy.testing import assert_allclose
from pyproj import Geod

from stressmap.geo import arcs, sphere

R_M = 6371.0e3
GEOD = Geod(a=R_M, b=R_M)


def _random_arcs(rng, n, centre_lonlat=(170.0, 60.0), spread=0.3):
    c = sphere.lonlat_to_xyz(*centre_lonlat)
    a = sphere.normalize(c + spread * rng.normal(size=(n, 3)))
    b = sphere.normalize(c + spread * rng.normal(size=(n, 3)))
    return c, a, b


def test_point_arc_distance_matches_pyproj():
    rng = np.random.default_rng(3)
    _, a, b = _random_arcs(rng, 200)
    p = sphere.normalize(sphere.slerp(a, b, 0.5) + 0.05 * rng.normal(size=(200, 3)))
    dist, foot, t = arcs.point_arc_distance(p, a, b)
    plon, plat = sphere.xyz_to_lonlat(p)
    flon, flat = sphere.xyz_to_lonlat(foot)
    _, _, d_m = GEOD.inv(plon, plat, flon, flat)
    assert_allclose(dist * R_M, d_m, rtol=1e-9, atol=1e-6)
    # the foot is the nearest point: no sample along the arc is closer (pyproj distances)
    ts = np.linspace(0, 1, 201)
    s = sphere.slerp(a[:, None], b[:, None], ts)
    slon, slat = sphere.xyz_to_lonlat(s)
    _, _, ds = GEOD.inv(np.repeat(plon[:, None], 201, 1), np.repeat(plat[:, None], 201, 1), slon, slat)
    assert np.all(dist * R_M <= ds.min(axis=1) + 1e-6)
    assert np.all((t >= 0) & (t <= 1))


def test_crossings_match_shapely_in_the_gnomonic_plane():
    rng = np.random.default_rng(5)
    c, a, b = _random_arcs(rng, 400)
    _, cc, d = _random_arcs(rng, 400)
    meet, point = arcs.arc_crossings(a, b, cc, d)
    xy = [np.column_stack(sphere.gnomonic_forward(v, c)) for v in (a, b, cc, d)]
    s1 = shapely.linestrings(np.stack([xy[0], xy[1]], axis=1))
    s2 = shapely.linestrings(np.stack([xy[2], xy[3]], axis=1))
    expected = shapely.intersects(s1, s2)
    assert meet.tolist() == expected.tolist()
    assert 20 < expected.sum() < 380  # both outcomes are exercised
    where = shapely.get_coordinates(shapely.intersection(s1[expected], s2[expected]))
    got = np.column_stack(sphere.gnomonic_forward(point[meet], c))
    assert_allclose(got, where, atol=1e-9)


def test_near_pairs_finds_every_crossing_pair():
    rng = np.random.default_rng(8)
    _, a, b = _random_arcs(rng, 300, spread=0.5)
    i, j = np.triu_indices(300, 1)
    meet, _ = arcs.arc_crossings(a[i], b[i], a[j], b[j])
    pairs = {tuple(p) for p in arcs.near_pairs(a, b, 0.0).tolist()}
    assert {(int(x), int(y)) for x, y in zip(i[meet], j[meet])} <= pairs
