"""Great-circle arcs on the unit sphere: sampling, nearness, distances and crossings, vectorised.

An arc runs from unit vector ``a`` to unit vector ``b`` along the shorter great circle (arcs
shorter than 180 degrees). Every function takes arrays of arcs, shape (n, 3), so one call
serves a pair of arcs or a whole network; nothing here depends on longitude, so arcs across the
antimeridian or over a pole need no special case.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from stressmap.geo import sphere

__all__ = ["arc_samples", "near_pairs", "point_arc_distance", "arc_crossings", "on_arc",
           "chord_of_angle", "direction_angle"]

#: Angular tolerance (radians) of the on-arc test: about 0.6 mm on the Earth.
_EPS = 1e-10


def chord_of_angle(angle_rad) -> np.ndarray:
    """Straight-line distance on the unit sphere for an arc of ``angle_rad`` (for k-d trees).

    Examples
    --------
    >>> round(float(chord_of_angle(np.pi)), 12)
    2.0
    """
    return 2.0 * np.sin(0.5 * np.minimum(np.asarray(angle_rad, dtype=float), np.pi))


def arc_samples(a, b, step_rad: float):
    """Points along each arc at most ``step_rad`` apart, ends included.

    Returns
    -------
    points : (k, 3) unit vectors
    arc : (k,) int64, the arc each point lies on

    Examples
    --------
    >>> a = sphere.lonlat_to_xyz([0.0], [0.0]); b = sphere.lonlat_to_xyz([10.0], [0.0])
    >>> p, arc = arc_samples(a, b, np.radians(4.0))
    >>> np.round(sphere.xyz_to_lonlat(p)[0], 6).tolist(), arc.tolist()
    ([0.0, 3.333333, 6.666667, 10.0], [0, 0, 0, 0])
    """
    a = np.atleast_2d(np.asarray(a, dtype=float))
    b = np.atleast_2d(np.asarray(b, dtype=float))
    length = sphere.angle_between(a, b)
    intervals = np.maximum(1, np.ceil(length / step_rad)).astype(np.int64)
    counts = intervals + 1
    arc = np.repeat(np.arange(len(a)), counts)
    offsets = np.concatenate([[0], np.cumsum(counts)[:-1]])
    t = (np.arange(counts.sum()) - offsets[arc]) / intervals[arc]
    return sphere.slerp(a[arc], b[arc], t), arc


def near_pairs(a, b, reach_rad: float, step_rad: float | None = None) -> np.ndarray:
    """Pairs (i, j), i < j, of arcs that may come within ``reach_rad`` of each other.

    Every pair that truly comes that close is returned (a superset: candidates for an exact
    test). Each arc is sampled at ``step_rad`` (default ``max(reach_rad, 0.5 degree)``); two
    arcs within ``reach_rad`` have samples within ``reach_rad + step_rad``.

    Examples
    --------
    >>> ll = np.array([[[0, -1], [0, 1]], [[-1, 0], [1, 0]], [[20, 0], [21, 0]]], float)
    >>> xyz = sphere.lonlat_to_xyz(ll[..., 0], ll[..., 1])
    >>> near_pairs(xyz[:, 0], xyz[:, 1], 0.0).tolist()
    [[0, 1]]
    """

    step = float(step_rad if step_rad is not None else max(reach_rad, np.radians(0.5)))
    pts, arc = arc_samples(a, b, step)
    pairs = cKDTree(pts).query_pairs(float(chord_of_angle(reach_rad + step)), output_type="ndarray")
    if not len(pairs):
        return np.zeros((0, 2), dtype=np.int64)
    ij = np.sort(arc[pairs], axis=1)
    ij = ij[ij[:, 0] != ij[:, 1]]
    return np.unique(ij, axis=0).astype(np.int64).reshape(-1, 2)


def on_arc(p, a, b, tol_rad: float = _EPS) -> np.ndarray:
    """True where point ``p`` lies on the arc a -> b (within ``tol_rad`` of arc length).

    Examples
    --------
    >>> a, b = sphere.lonlat_to_xyz([0.0, 0.0], [0.0, 0.0]), sphere.lonlat_to_xyz([10.0, 10.0], [0.0, 0.0])
    >>> on_arc(sphere.lonlat_to_xyz([5.0, 15.0], [0.0, 0.0]), a, b).tolist()
    [True, False]
    """
    ab = sphere.angle_between(a, b)
    return sphere.angle_between(a, p) + sphere.angle_between(p, b) <= ab + tol_rad


def point_arc_distance(p, a, b):
    """Angular distance (radians) from points to arcs, with the nearest point and its place.

    Returns
    -------
    distance : (n,) radians
    foot : (n, 3) nearest point of the arc
    t : (n,) fraction of the arc's length from ``a`` to the foot, in [0, 1]

    Examples
    --------
    >>> a = sphere.lonlat_to_xyz([179.0], [0.0]); b = sphere.lonlat_to_xyz([-179.0], [0.0])
    >>> d, foot, t = point_arc_distance(sphere.lonlat_to_xyz([180.0], [1.0]), a, b)
    >>> round(float(np.degrees(d[0])), 9), round(float(t[0]), 9)  # across the antimeridian
    (1.0, 0.5)
    """
    p, a, b = (np.atleast_2d(np.asarray(x, dtype=float)) for x in (p, a, b))
    n = sphere.normalize(np.cross(a, b))
    foot = sphere.normalize(p - np.sum(p * n, axis=-1, keepdims=True) * n)
    inside = on_arc(foot, a, b, 1e-12) & np.any(foot != 0, axis=-1)
    da = sphere.angle_between(p, a)
    db = sphere.angle_between(p, b)
    end = np.where((da <= db)[:, None], a, b)
    foot = np.where(inside[:, None], foot, end)
    dist = sphere.angle_between(p, foot)
    ab = sphere.angle_between(a, b)
    t = np.where(ab > 0, sphere.angle_between(a, foot) / np.where(ab > 0, ab, 1.0), 0.0)
    return dist, foot, np.clip(t, 0.0, 1.0)


def arc_crossings(a, b, c, d):
    """Where arcs a -> b and c -> d meet (one point per pair; arcs shorter than 180 degrees).

    Returns
    -------
    meet : (n,) bool
        The arcs share a point (a crossing, a touch at an end, or an overlap along one great
        circle).
    point : (n, 3)
        The shared point (for an overlap: an end of one arc that lies on the other).

    Examples
    --------
    >>> ll = lambda lon, lat: sphere.lonlat_to_xyz(np.asarray(lon, float), np.asarray(lat, float))
    >>> meet, p = arc_crossings(ll([179.0], [-1.0]), ll([-179.0], [1.0]), ll([179.0], [1.0]), ll([-179.0], [-1.0]))
    >>> lon, lat = sphere.xyz_to_lonlat(p)  # across the antimeridian
    >>> meet.tolist(), round(abs(float(lon[0])), 6), round(float(lat[0]), 6)
    ([True], 180.0, 0.0)
    """
    a, b, c, d = (np.atleast_2d(np.asarray(x, dtype=float)) for x in (a, b, c, d))
    n1 = np.cross(a, b)
    n2 = np.cross(c, d)
    line = np.cross(n1, n2)
    size = np.linalg.norm(line, axis=-1)
    scale = np.linalg.norm(n1, axis=-1) * np.linalg.norm(n2, axis=-1)
    same_circle = size <= 1e-12 * np.maximum(scale, 1e-300)
    p = sphere.normalize(line)
    mid = sphere.normalize(a + b)
    p = np.where((np.sum(p * mid, axis=-1) < 0)[:, None], -p, p)
    meet = on_arc(p, a, b) & on_arc(p, c, d) & ~same_circle
    # overlaps along one great circle: an end of one arc on the other
    ends = np.stack([a, b, c, d])
    on = np.stack([on_arc(c, a, b), on_arc(d, a, b), on_arc(a, c, d), on_arc(b, c, d)])
    overlap_pt = ends[np.argmax(on, axis=0), np.arange(len(a))]
    p = np.where((same_circle & on.any(axis=0))[:, None], overlap_pt, p)
    meet |= same_circle & on.any(axis=0)
    return meet, p


def direction_angle(origin, toward) -> np.ndarray:
    """Angle (radians, counter-clockwise from east seen from outside) of the arc origin -> toward.

    Examples
    --------
    >>> o = sphere.lonlat_to_xyz([0.0, 0.0], [0.0, 0.0])
    >>> t = sphere.lonlat_to_xyz([0.0, 1.0], [1.0, 0.0])
    >>> np.round(np.degrees(direction_angle(o, t)), 9).tolist()  # north, east
    [90.0, 0.0]
    """
    origin = np.atleast_2d(np.asarray(origin, dtype=float))
    toward = np.atleast_2d(np.asarray(toward, dtype=float))
    e, n = sphere.local_frame(origin)
    tangent = toward - np.sum(toward * origin, axis=-1, keepdims=True) * origin
    return np.arctan2(np.sum(tangent * n, axis=-1), np.sum(tangent * e, axis=-1))
