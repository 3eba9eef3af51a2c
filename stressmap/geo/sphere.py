"""Vector geometry on the sphere (pure numpy; lon/lat in degrees, lengths in km on a sphere of
radius :data:`stressmap.constants.EARTH_RADIUS_KM`).

Points on the sphere are unit 3-vectors in an Earth-centred frame: x towards (0 E, 0 N),
y towards (90 E, 0 N), z towards the north pole; arrays of them have shape (..., 3).
Every function takes arrays of any shape and broadcasts; a scalar point and a million points
share one code path.

Map projections used by the mesher and the plate validator:

* **gnomonic** about a centre: great circles map to straight lines (exact boundary arcs,
  self-intersection tests); defined on the open hemisphere around the centre.
* **stereographic** about a centre: conformal (angles, hence triangle shapes, are kept), scale
  ``1 + r**2 / 4`` at plane radius ``r`` (plane units are sphere radii); defined everywhere but
  the antipode.
"""

from __future__ import annotations

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM

__all__ = [
    "lonlat_to_xyz",
    "xyz_to_lonlat",
    "local_frame",
    "normalize",
    "angle_between",
    "great_circle_distance_km",
    "slerp",
    "spherical_triangle_area",
    "spherical_polygon_area",
    "polygon_centroid_xyz",
    "gnomonic_forward",
    "gnomonic_inverse",
    "stereographic_forward",
    "stereographic_inverse",
    "stereographic_scale",
]


def lonlat_to_xyz(lon, lat) -> np.ndarray:
    """Unit vectors (..., 3) from longitude and latitude in degrees.

    Examples
    --------
    >>> lonlat_to_xyz(0.0, 0.0)
    array([1., 0., 0.])
    >>> np.round(lonlat_to_xyz([90.0, 0.0], [0.0, 90.0]), 12)
    array([[0., 1., 0.],
           [0., 0., 1.]])
    """
    lon = np.radians(np.asarray(lon, dtype=float))
    lat = np.radians(np.asarray(lat, dtype=float))
    clat = np.cos(lat)
    return np.stack(np.broadcast_arrays(clat * np.cos(lon), clat * np.sin(lon), np.sin(lat)), axis=-1)


def xyz_to_lonlat(xyz) -> tuple[np.ndarray, np.ndarray]:
    """Longitude in [-180, 180) and latitude in degrees from vectors (..., 3) (any length).

    Examples
    --------
    >>> lon, lat = xyz_to_lonlat([[0.0, -2.0, 0.0], [-1.0, 0.0, 0.0]])
    >>> lon, lat
    (array([ -90., -180.]), array([0., 0.]))
    """
    xyz = np.asarray(xyz, dtype=float)
    x, y, z = xyz[..., 0], xyz[..., 1], xyz[..., 2]
    lon = np.degrees(np.arctan2(y, x))
    lon = np.where(lon >= 180.0, lon - 360.0, lon)
    lat = np.degrees(np.arctan2(z, np.hypot(x, y)))
    return lon, lat


def normalize(v) -> np.ndarray:
    """Vectors (..., 3) scaled to unit length (zero vectors stay zero).

    Examples
    --------
    >>> normalize([3.0, 0.0, 4.0])
    array([0.6, 0. , 0.8])
    """
    v = np.asarray(v, dtype=float)
    n = np.linalg.norm(v, axis=-1, keepdims=True)
    return np.divide(v, n, out=np.zeros_like(v), where=n > 0)


def local_frame(xyz) -> tuple[np.ndarray, np.ndarray]:
    """Local (east, north) unit vectors (..., 3) at points (..., 3).

    At the poles, where east is undefined, east is taken as the +y direction rotated as if
    approached along the 0 degree meridian (east = (0, 1, 0), north = (-z, 0, 0) * sign).

    Examples
    --------
    >>> e, n = local_frame(lonlat_to_xyz(0.0, 0.0))
    >>> e + 0.0, n + 0.0
    (array([0., 1., 0.]), array([0., 0., 1.]))
    >>> e, n = local_frame([0.0, 0.0, 1.0])
    >>> e, n
    (array([0., 1., 0.]), array([-1.,  0.,  0.]))
    """
    p = normalize(xyz)
    x, y = p[..., 0], p[..., 1]
    h = np.hypot(x, y)
    pole = h < 1e-12
    ex = np.where(pole, 0.0, -y / np.where(pole, 1.0, h))
    ey = np.where(pole, 1.0, x / np.where(pole, 1.0, h))
    east = np.stack([ex, ey, np.zeros_like(ex)], axis=-1)
    north = np.cross(p, east)
    return east, north


def angle_between(a, b) -> np.ndarray:
    """Angle in radians between vectors (..., 3); accurate for tiny and near-antipodal angles.

    Examples
    --------
    >>> float(angle_between([1.0, 0, 0], [0, 1.0, 0]))  # doctest: +ELLIPSIS
    1.5707963...
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    return np.arctan2(np.linalg.norm(np.cross(a, b), axis=-1), np.sum(a * b, axis=-1))


def great_circle_distance_km(lon1, lat1, lon2, lat2, radius_km: float = EARTH_RADIUS_KM):
    """Great-circle distance in km between points given in degrees (broadcasting).

    Examples
    --------
    >>> round(float(great_circle_distance_km(0, 0, 90, 0)), 3)  # quarter of 2*pi*6371
    10007.543
    >>> great_circle_distance_km(179.5, 0.0, -179.5, 0.0).round(3)  # across the antimeridian
    np.float64(111.195)
    """
    return radius_km * angle_between(lonlat_to_xyz(lon1, lat1), lonlat_to_xyz(lon2, lat2))


def slerp(a, b, t) -> np.ndarray:
    """Points on the great-circle arc from a to b (unit vectors (..., 3)) at fractions t.

    ``a``, ``b`` and ``t[..., None]`` broadcast; t = 0 gives a, t = 1 gives b.

    Examples
    --------
    >>> np.round(slerp([1.0, 0, 0], [0, 1.0, 0], np.array([0.0, 0.5, 1.0])), 6)
    array([[1.      , 0.      , 0.      ],
           [0.707107, 0.707107, 0.      ],
           [0.      , 1.      , 0.      ]])
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    t = np.asarray(t, dtype=float)[..., None]
    omega = angle_between(a, b)[..., None]
    s = np.sin(omega)
    small = s < 1e-12
    safe = np.where(small, 1.0, s)
    wa = np.where(small, 1.0 - t, np.sin((1.0 - t) * omega) / safe)
    wb = np.where(small, t, np.sin(t * omega) / safe)
    return normalize(wa * a + wb * b)


def spherical_triangle_area(a, b, c) -> np.ndarray:
    """Signed solid angle (steradians) of spherical triangles with unit-vector corners (..., 3).

    Positive when a, b, c run counter-clockwise seen from outside the sphere (formula of
    Van Oosterom & Strackee 1983, IEEE Trans. Biomed. Eng. 30:125, for the solid angle of a
    triangle).

    Examples
    --------
    >>> x, y, z = np.eye(3)
    >>> float(spherical_triangle_area(x, y, z) / np.pi)  # one octant = 4*pi/8
    0.5
    >>> float(spherical_triangle_area(x, z, y) / np.pi)
    -0.5
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    c = np.asarray(c, dtype=float)
    # a . (b x c) written with differences keeps full relative precision for tiny triangles
    num = np.sum(a * np.cross(b - a, c - a), axis=-1)
    den = 1.0 + np.sum(a * b, axis=-1) + np.sum(b * c, axis=-1) + np.sum(c * a, axis=-1)
    return 2.0 * np.arctan2(num, den)


def _ring_xyz(ring) -> np.ndarray:
    ring = np.asarray(ring, dtype=float)
    if ring.shape[-1] == 2:
        ring = lonlat_to_xyz(ring[..., 0], ring[..., 1])
    ring = normalize(ring)
    if len(ring) > 1 and np.allclose(ring[0], ring[-1], atol=1e-15, rtol=0):
        ring = ring[:-1]
    return ring


def _fan_areas(ring: np.ndarray, ref: np.ndarray) -> np.ndarray:
    nxt = np.roll(ring, -1, axis=0)
    return spherical_triangle_area(ref, ring, nxt)


def spherical_polygon_area(ring, radius_km: float = EARTH_RADIUS_KM) -> float:
    """Signed area (km^2) of the *smaller* region bounded by a ring of great-circle arcs.

    Parameters
    ----------
    ring : array (n, 2) of (lon, lat) degrees or (n, 3) unit vectors
        Ring vertices; the closing vertex may be repeated or not.
    radius_km : float
        Sphere radius.

    Returns
    -------
    float
        Area of the smaller of the two regions the ring bounds; positive when the ring runs
        counter-clockwise around it seen from outside (region on the left), negative otherwise.

    Examples
    --------
    >>> octant = [(0, 0), (90, 0), (0, 90)]
    >>> round(spherical_polygon_area(octant, radius_km=1.0) / np.pi, 12)
    0.5
    >>> round(spherical_polygon_area(octant[::-1], radius_km=1.0) / np.pi, 12)
    -0.5
    >>> ring = [(179, -1), (-179, -1), (-179, 1), (179, 1)]  # across the antimeridian
    >>> round(spherical_polygon_area(ring))  # about 222.4 km x 222.4 km
    49460
    """
    ring = _ring_xyz(ring)
    if len(ring) < 3:
        return 0.0
    ref = normalize(ring.sum(axis=0))
    if not np.any(ref):
        ref = ring[0]
    total = float(np.sum(_fan_areas(ring, ref)))
    # the region on the left has area total (mod 4 pi); keep the smaller region, signed
    if abs(total) > 2.0 * np.pi:  # (reduce only when needed: it would cost precision)
        total = (total + 2.0 * np.pi) % (4.0 * np.pi) - 2.0 * np.pi
    return total * radius_km**2


def polygon_centroid_xyz(ring) -> np.ndarray:
    """Unit vector towards the area centroid of the region on the left of a ring (n, 3)/(n, 2).

    The centroid is the normalised area-weighted sum of the centroids of a triangle fan, which
    is exact in the limit of small triangles and always lies inside convex regions.

    Examples
    --------
    >>> c = polygon_centroid_xyz([(-10, -10), (10, -10), (10, 10), (-10, 10)])
    >>> np.round(xyz_to_lonlat(c), 9) + 0.0
    array([0., 0.])
    """
    ring = _ring_xyz(ring)
    ref = normalize(ring.sum(axis=0))
    if not np.any(ref):
        ref = ring[0]
    nxt = np.roll(ring, -1, axis=0)
    w = spherical_triangle_area(ref, ring, nxt)
    c = normalize(np.sum(w[:, None] * normalize(ref + ring + nxt), axis=0))
    if not np.any(c):
        c = ref
    # a clockwise ring has negative weights: the sum then points to the centroid of the region
    # on its left, the far side (the first moment of the whole sphere is zero)
    return c


def _frame(center) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    c = normalize(center)
    e, n = local_frame(c)
    return c, e, n


def gnomonic_forward(xyz, center) -> tuple[np.ndarray, np.ndarray]:
    """Gnomonic plane coordinates (x east, y north; units of sphere radius) about ``center``.

    Great circles map to straight lines. Points at or beyond 90 degrees from the centre have
    no image and give NaN.

    Examples
    --------
    >>> x, y = gnomonic_forward(lonlat_to_xyz(45.0, 0.0), lonlat_to_xyz(0.0, 0.0))
    >>> round(float(x), 12), round(float(y), 12)
    (1.0, 0.0)
    """
    c, e, n = _frame(center)
    p = np.asarray(xyz, dtype=float)
    d = p @ c
    d = np.where(d > 1e-12, d, np.nan)
    return (p @ e) / d, (p @ n) / d


def gnomonic_inverse(x, y, center) -> np.ndarray:
    """Unit vectors (..., 3) from gnomonic plane coordinates about ``center``.

    Examples
    --------
    >>> c = lonlat_to_xyz(30.0, 20.0)
    >>> p = lonlat_to_xyz([31.0, 50.0], [25.0, -10.0])
    >>> np.allclose(gnomonic_inverse(*gnomonic_forward(p, c), c), p)
    True
    """
    c, e, n = _frame(center)
    x = np.asarray(x, dtype=float)[..., None]
    y = np.asarray(y, dtype=float)[..., None]
    return normalize(c + x * e + y * n)


def stereographic_forward(xyz, center) -> tuple[np.ndarray, np.ndarray]:
    """Stereographic plane coordinates (x east, y north; sphere radii) about ``center``.

    Conformal; plane lengths are sphere lengths times :func:`stereographic_scale`.

    Examples
    --------
    >>> x, y = stereographic_forward(lonlat_to_xyz(0.0, 90.0), lonlat_to_xyz(0.0, 0.0))
    >>> round(float(x), 12), round(float(y), 12)  # 90 degrees maps to radius 2 tan(45) = 2
    (0.0, 2.0)
    """
    c, e, n = _frame(center)
    p = np.asarray(xyz, dtype=float)
    d = 1.0 + p @ c
    d = np.where(d > 1e-12, d, np.nan)
    return 2.0 * (p @ e) / d, 2.0 * (p @ n) / d


def stereographic_inverse(x, y, center) -> np.ndarray:
    """Unit vectors (..., 3) from stereographic plane coordinates about ``center``.

    Examples
    --------
    >>> c = lonlat_to_xyz(-170.0, 60.0)
    >>> p = lonlat_to_xyz([175.0, -120.0], [40.0, 10.0])
    >>> np.allclose(stereographic_inverse(*stereographic_forward(p, c), c), p)
    True
    """
    c, e, n = _frame(center)
    x = np.asarray(x, dtype=float)[..., None]
    y = np.asarray(y, dtype=float)[..., None]
    r2 = x * x + y * y
    return (4.0 * x * e + 4.0 * y * n + (4.0 - r2) * c) / (4.0 + r2)


def stereographic_scale(x, y) -> np.ndarray:
    """Plane length per sphere length at stereographic plane coordinates: ``1 + r**2 / 4``.

    Examples
    --------
    >>> float(stereographic_scale(0.0, 2.0))  # 90 degrees from the centre
    2.0
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return 1.0 + 0.25 * (x * x + y * y)
