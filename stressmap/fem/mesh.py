"""Boundary-conforming triangulation of a spherical polygon (the plate), our own mesher.

Method (all steps vectorised; Python loops only run over a handful of iterations, size levels,
refinement items or ring arcs):

1. **Projection.** Work in the stereographic plane about the plate centre (conformal, so triangle
   shapes survive the map back to the sphere; plane lengths are sphere lengths times
   ``1 + r**2/4``). The target edge length in the plane is the sphere size times that scale,
   so the mesh on the sphere has the requested size everywhere.
2. **Size function** (km on the sphere): ``mesh.edge_km`` everywhere, finer near each refinement
   point (within ``radius_km``) or polygon, growing by ``mesh.grading`` km per km away from it;
   also finer near ring vertices whose adjacent arcs are shorter than the target size and where
   two parts of the ring face each other closer than the target size (narrow necks, inlets,
   and the two sides of a spike or slit near its tip, so sharp corners are graded too).
3. **Boundary nodes.** Every ring vertex is a node; nodes are added along each great-circle arc
   so that their spacing follows the size function (equal steps of the integral of 1/size).
4. **Interior nodes.** Equilateral (hexagonal) lattices whose spacing steps by a factor 0.85
   between size levels; each point is kept where the target size falls in its level's band, is
   inside the polygon and is not too close to the boundary; points too close across a level
   change are thinned.
5. **Triangulation.** ``scipy.spatial.Delaunay``; interior points that encroach a boundary edge
   (lie in its diametral circle) are removed and boundary edges encroached by other boundary
   nodes are split, which guarantees every boundary edge is a Delaunay edge; triangles whose
   centroid is outside the polygon are dropped.
6. **Smoothing.** A few force-based relaxation steps (bars repel when shorter than the local
   target, boundary nodes fixed), then a final triangulation.
7. Map back to the sphere; triangles counter-clockwise seen from outside.

Elements are flat facets between nodes on the sphere. Provinces are assigned **by element
centroid** (the province containing the centroid; later provinces win where they overlap);
province outlines are not forced into the mesh.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.spatial import Delaunay, cKDTree

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import InputError, problem
from stressmap.geo import sphere

__all__ = ["Mesh", "mesh_plate", "triangle_angles_deg", "facet_areas_km2"]

log = logging.getLogger(__name__)

_RHO = 0.85  # lattice spacing ratio between size levels
#: Ring corners with an interior angle (spikes) or exterior angle (slit tips) below this
#: (degrees) are sharp: the mesh is graded towards them and triangles within
#: CORNER_ZONE_EDGES target edge lengths of them are left out of the minimum-angle statistic.
SHARP_CORNER_DEG = 60.0
CORNER_ZONE_EDGES = 1.5
_R = EARTH_RADIUS_KM


@dataclass(frozen=True)
class Mesh:
    """Triangle mesh of a plate on the sphere (arrays fixed dtype, C-contiguous, read-only).

    Attributes
    ----------
    xyz : ndarray (n, 3) float64
        Node unit vectors.
    lonlat : ndarray (n, 2) float64
        Node longitude in [-180, 180) and latitude, degrees.
    triangles : ndarray (m, 3) int64
        Node indices, counter-clockwise seen from outside the sphere.
    boundary_edges : ndarray (k, 2) int64
        Node pairs along the ring in ring order, interior on the left.
    edge_segment : ndarray (k,) int64
        Index into ``plate.segments`` of each boundary edge.
    element_province : ndarray (m,) int64
        Index into ``plate.provinces`` by element centroid; -1 = none.
    element_stiffness : ndarray (m,) float64
        Relative stiffness of each element (province stiffness, else 1.0).
    stats : dict
        nodes, triangles, min_angle_deg, min_angle_away_from_corners_deg, max_angle_deg,
        area_km2 (sum of flat facet areas), exact_area_km2 (spherical polygon), area_error
        (relative), edge_km (target), mean_edge_km, seconds.
    """

    xyz: np.ndarray
    lonlat: np.ndarray
    triangles: np.ndarray
    boundary_edges: np.ndarray
    edge_segment: np.ndarray
    element_province: np.ndarray
    element_stiffness: np.ndarray
    stats: dict = field(default_factory=dict)

    def __post_init__(self):
        for name, dtype in (("xyz", np.float64), ("lonlat", np.float64), ("triangles", np.int64),
                            ("boundary_edges", np.int64), ("edge_segment", np.int64),
                            ("element_province", np.int64), ("element_stiffness", np.float64)):
            a = np.array(getattr(self, name), dtype=dtype, order="C", copy=True)
            a.setflags(write=False)
            object.__setattr__(self, name, a)

    @property
    def n_nodes(self) -> int:
        return len(self.xyz)

    @property
    def n_triangles(self) -> int:
        return len(self.triangles)


# --------------------------------------------------------------------------------------------
# geometry helpers


def triangle_angles_deg(xyz, triangles) -> np.ndarray:
    """Interior angles (m, 3) in degrees of flat triangles with 3-D corner points.

    Examples
    --------
    >>> p = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]])
    >>> triangle_angles_deg(p, np.array([[0, 1, 2]])).round(6)
    array([[90., 45., 45.]])
    """
    p = np.asarray(xyz, dtype=float)[np.asarray(triangles)]
    out = np.empty(p.shape[:2])
    for k in range(3):
        a = p[:, (k + 1) % 3] - p[:, k]
        b = p[:, (k + 2) % 3] - p[:, k]
        out[:, k] = np.degrees(np.arctan2(np.linalg.norm(np.cross(a, b), axis=-1),
                                          np.sum(a * b, axis=-1)))
    return out


def facet_areas_km2(xyz, triangles, radius_km: float = _R) -> np.ndarray:
    """Signed areas (km^2) of the flat facets; positive when counter-clockwise seen from outside.

    Examples
    --------
    >>> p = sphere.lonlat_to_xyz([0.0, 1.0, 0.0], [0.0, 0.0, 1.0])
    >>> a = facet_areas_km2(p, np.array([[0, 1, 2], [0, 2, 1]]))
    >>> bool(a[0] > 0), bool(np.isclose(a[0], -a[1]))
    (True, True)
    """
    p = np.asarray(xyz, dtype=float)[np.asarray(triangles)]
    n = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
    c = p.sum(axis=1)
    return 0.5 * np.linalg.norm(n, axis=-1) * np.sign(np.sum(n * c, axis=-1)) * radius_km**2


# --------------------------------------------------------------------------------------------
# size function


def _narrow_places(ring_xyz: np.ndarray, edge_km: float):
    """Places where two parts of the ring come closer than ``edge_km`` (a narrow neck, inlet or
    spike): returns (points (k, 3), local width km (k,)), sampled every edge_km / 4.

    Two samples face each other when their distance along the ring is more than twice their
    straight distance; the width there is their straight distance. Elements no larger than the
    width keep the two sides from crowding each other's triangles.
    """

    a = ring_xyz
    b = np.roll(ring_xyz, -1, axis=0)
    length = _R * sphere.angle_between(a, b)
    per = np.ceil(length / (edge_km / 4.0)).astype(np.int64)
    arc = np.repeat(np.arange(len(a)), per)
    t = (np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per)) / per[arc]
    pts = sphere.slerp(a[arc], b[arc], t)
    along = (np.cumsum(length) - length)[arc] + t * length[arc]
    perimeter = float(length.sum())
    k = min(16, len(pts))
    chord, idx = cKDTree(pts).query(pts, k=k)
    d = _R * chord
    sep = np.abs(along[idx] - along[:, None])
    sep = np.minimum(sep, perimeter - sep)
    facing = (sep > 2.0 * d) & (d > 0)
    width = np.min(np.where(facing, d, np.inf), axis=1)
    narrow = width < edge_km
    return pts[narrow], np.maximum(width[narrow], 0.01 * edge_km)


class _Size:
    """Target edge length: on the sphere (km) and in the stereographic plane (plane km)."""

    def __init__(self, plate, edge_km: float, ring_xyz: np.ndarray, centre: np.ndarray):

        self.edge = float(edge_km)
        self.grading = float(plate.mesh.get("grading", 0.25))
        self.centre = centre
        self.points = []  # (xyz, fine_km, radius_km)
        self.polygons = []  # (prepared shapely polygon in plane km, fine_km)
        for item in plate.mesh.get("refinement") or []:
            fine = min(float(item["edge_km"]), self.edge)
            if "point" in item:
                xyz = sphere.lonlat_to_xyz(*item["point"])
                self.points.append((xyz, fine, float(item.get("radius_km", 0.0))))
            else:
                ring = np.asarray(item["polygon"], dtype=float)
                x, y = _to_plane(sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1]), centre)
                poly = shapely.Polygon(np.column_stack([x, y]))
                if not poly.is_valid:
                    poly = poly.buffer(0)
                buf = float(item.get("radius_km", 0.0))
                if buf > 0:
                    poly = poly.buffer(buf)
                shapely.prepare(poly)
                self.polygons.append((poly, fine))
        # ring vertices next to short arcs (local feature size), and places where two parts of
        # the ring face each other (narrow necks and inlets; also the two sides of a spike or a
        # slit near its tip, so sharp corners are graded without sources of their own)
        arc = _R * sphere.angle_between(ring_xyz, np.roll(ring_xyz, -1, axis=0))
        lfs = np.minimum(arc, np.roll(arc, 1))
        use = lfs < self.edge
        nx, nfine = _narrow_places(ring_xyz, self.edge)
        self.vertex_xyz = np.concatenate([ring_xyz[use], nx])
        self.vertex_fine = np.maximum(np.concatenate([lfs[use], nfine]), 1e-3)
        self.max_slope = self.grading
        self.tree = None
        self.reach = 0.0
        if len(self.vertex_xyz):

            self.tree = cKDTree(self.vertex_xyz)
            # beyond this chord no source can go below edge_km
            arc = (self.edge - float(self.vertex_fine.min())) / self.grading / _R
            self.reach = 2.0 * np.sin(min(arc, np.pi) / 2.0) * (1 + 1e-9)
        fines = [self.edge] + [f for _, f, _ in self.points] + [f for _, f in self.polygons]
        if len(self.vertex_fine):
            fines.append(float(self.vertex_fine.min()))
        self.min_km = min(fines)

    def sphere_km(self, xyz: np.ndarray, plane=None) -> np.ndarray:

        h = np.full(xyz.shape[:-1], self.edge)
        g = self.grading
        for pxyz, fine, radius in self.points:
            d = _R * sphere.angle_between(xyz, pxyz)
            np.minimum(h, fine + g * np.maximum(d - radius, 0.0), out=h)
        if self.polygons:
            if plane is None:
                plane = _to_plane(xyz, self.centre)
            x, y = plane
            scale = sphere.stereographic_scale(x / _R, y / _R)
            pts = shapely.points(x, y)
            for poly, fine in self.polygons:
                d = shapely.distance(poly, pts) / scale
                np.minimum(h, fine + g * d, out=h)
        if self.tree is not None:
            # the 12 nearest sources within reach (the minimum over them is exact unless more
            # than 12 sources lie closer than the best one; they are sampled along the ring, so
            # the nearest ones are also the finest nearby)
            flat = xyz.reshape(-1, 3)
            k = min(12, len(self.vertex_fine))
            chord, idx = self.tree.query(flat, k=k, distance_upper_bound=self.reach)
            chord = chord.reshape(len(flat), -1)
            idx = idx.reshape(len(flat), -1)
            found = np.isfinite(chord)
            safe = np.where(found, idx, 0)
            d = 2.0 * _R * np.arcsin(np.minimum(np.where(found, chord, 0.0) / 2.0, 1.0))
            hv = np.where(found, self.vertex_fine[safe] + g * d, np.inf).min(axis=1)
            np.minimum(h, hv.reshape(h.shape), out=h)
        return h

    @property
    def uniform(self) -> bool:
        return not (self.points or self.polygons or self.tree is not None)

    def plane_km(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        scale = sphere.stereographic_scale(x / _R, y / _R)
        if self.uniform:
            return self.edge * scale
        xyz = sphere.stereographic_inverse(x / _R, y / _R, self.centre)
        return self.sphere_km(xyz, plane=(x, y)) * scale


def _to_plane(xyz, centre):
    x, y = sphere.stereographic_forward(xyz, centre)
    return x * _R, y * _R


# --------------------------------------------------------------------------------------------
# boundary


def _boundary_nodes(ring_xyz: np.ndarray, size: _Size):
    """Nodes along the ring: returns (xyz (k, 3), arc index (k,), fraction along the arc (k,))."""
    n = len(ring_xyz)
    a = ring_xyz
    b = np.roll(ring_xyz, -1, axis=0)
    length = _R * sphere.angle_between(a, b)
    intervals = np.ceil(length / (size.min_km / 4.0)).astype(np.int64) + 1
    counts = intervals + 1
    offsets = np.concatenate([[0], np.cumsum(counts)[:-1]])
    arc = np.repeat(np.arange(n), counts)
    local = np.arange(counts.sum()) - offsets[arc]
    t = local / intervals[arc]
    pts = sphere.slerp(a[arc], b[arc], t)
    dens = 1.0 / size.sphere_km(pts)
    step = length[arc] / intervals[arc]
    incr = 0.5 * (dens[1:] + dens[:-1]) * step[:-1]
    incr[arc[1:] != arc[:-1]] = 0.0
    cum = np.concatenate([[0.0], np.cumsum(incr)])
    total = cum[offsets + counts - 1] - cum[offsets]
    nseg = np.maximum(1, np.round(total)).astype(np.int64)
    # targets strictly inside each arc: j / nseg * total, j = 1..nseg-1
    n_inner = nseg - 1
    arc_in = np.repeat(np.arange(n), n_inner)
    j = np.arange(n_inner.sum()) - np.repeat(np.concatenate([[0], np.cumsum(n_inner)[:-1]]), n_inner)
    target = cum[offsets[arc_in]] + (j + 1) / nseg[arc_in] * total[arc_in]
    tglob = arc + t
    # cum is non-decreasing; interpolate the global arc parameter at the targets
    tg = np.interp(target, cum, tglob)
    tg = np.clip(tg, arc_in + 1e-9, arc_in + 1 - 1e-9)
    key = np.concatenate([np.arange(n, dtype=float), tg])
    order = np.argsort(key, kind="stable")
    key = key[order]
    arc_of = np.floor(key).astype(np.int64)
    frac = key - arc_of
    xyz = sphere.slerp(a[arc_of], b[arc_of], frac)
    xyz[frac == 0.0] = a[arc_of[frac == 0.0]]
    return xyz, arc_of, frac


def _split_boundary(bxyz, barc, bfrac, which, ring_xyz):
    """Insert the arc midpoint after each boundary edge in ``which`` (edge i = node i -> i+1)."""
    n = len(bxyz)
    nxt = (which + 1) % n
    a_arc = barc[which]
    f0 = bfrac[which]
    f1 = np.where(barc[nxt] == a_arc, bfrac[nxt], 1.0)
    fm = 0.5 * (f0 + f1)
    a = ring_xyz[a_arc]
    b = ring_xyz[(a_arc + 1) % len(ring_xyz)]
    mid = sphere.slerp(a, b, fm)
    key = np.concatenate([barc + bfrac, a_arc + fm])
    order = np.argsort(key, kind="stable")
    return (np.concatenate([bxyz, mid])[order], np.concatenate([barc, a_arc])[order],
            np.concatenate([bfrac, fm])[order])


# --------------------------------------------------------------------------------------------
# interior


def _cell_lattice(cx0, cy0, c, s):
    """Points of the global equilateral lattice (spacing s) inside square cells [x0, x0 + c)."""
    dy = s * np.sqrt(3.0) / 2.0
    nj = int(np.ceil(c / dy)) + 1
    ni = int(np.ceil(c / s)) + 2
    j = np.ceil(cy0 / dy)[:, None] + np.arange(nj)[None, :]  # (cells, nj)
    y = j * dy
    off = (j % 2) * (s / 2.0)
    i0 = np.floor((cx0[:, None] - off) / s)
    x = (i0[:, :, None] + np.arange(ni)[None, None, :]) * s + off[:, :, None]  # (cells, nj, ni)
    y = np.broadcast_to(y[:, :, None], x.shape)
    inside = ((x >= cx0[:, None, None]) & (x < cx0[:, None, None] + c)
              & (y >= cy0[:, None, None]) & (y < cy0[:, None, None] + c))
    return x[inside], y[inside]


def _interior_points(poly, bxy, size: _Size, base: float):
    """Lattice points inside the polygon in size levels; returns (k, 2) plane km.

    Level k has spacing ``base * 0.85**k`` and takes the places whose target plane size lies in
    [spacing, spacing / 0.85). Levels are generated cell by cell: square cells are kept (and
    subdivided for finer levels) only where the size function, which changes at most by
    ``lip`` per unit distance, can reach the level's band.
    """

    x0, y0, x1, y1 = poly.bounds
    rmax = np.sqrt(max(x0 * x0, x1 * x1) + max(y0 * y0, y1 * y1)) / _R
    scale_max = float(sphere.stereographic_scale(rmax, 0.0))
    hmax = size.edge * scale_max
    # plane size H = h * S (h the sphere size, S the scale): dH/dx = S dh/dx + h dS/dx, with
    # |dh/dx| <= grading / S and dS/dx = r / (2 R); a 1.5 margin covers the polygon distances
    lip = 1.5 * (size.max_slope + size.edge * rmax / (2.0 * _R)) + 1e-9
    kmin = min(int(np.floor(np.log(hmax * 1.0001 / base) / np.log(_RHO))), 0)
    kmax = max(int(np.ceil(np.log(size.min_km * 0.9999 / base) / np.log(_RHO))) + 1, 1)
    # cells of side ~ f * spacing: the size function changes by at most ~0.35-0.7 spacing
    # across a cell, so only cells near the level's band are visited
    f = min(2.0, 0.5 / lip)
    c = 2.0 * f * base * _RHO**kmin
    nx = int(np.ceil((x1 - x0) / c)) + 1
    ny = int(np.ceil((y1 - y0) / c)) + 1
    iy, ix = np.divmod(np.arange(nx * ny), nx)
    cx0 = x0 - 0.5 * c + ix * c
    cy0 = y0 - 0.5 * c + iy * c
    xs, ys, hs = [], [], []
    for k in range(kmin, kmax):
        s = base * _RHO**k
        upper = s / _RHO
        last = k == kmax - 1
        while c > 2.0 * f * s and len(cx0):
            cx0 = np.concatenate([cx0, cx0 + c / 2, cx0, cx0 + c / 2])
            cy0 = np.concatenate([cy0, cy0, cy0 + c / 2, cy0 + c / 2])
            c /= 2.0
        if not len(cx0):
            break
        hc = size.plane_km(cx0 + c / 2, cy0 + c / 2)
        reach = lip * c * np.sqrt(0.5)
        here = (hc - reach < upper) & ((hc + reach >= s) | last)
        if here.any():
            x, y = _cell_lattice(cx0[here], cy0[here], c, s)
            h = size.plane_km(x, y)
            band = (h < upper) & ((h >= s) | last) if k > kmin else (h >= s) | last
            x, y, h = x[band], y[band], h[band]
            inside = shapely.contains_xy(poly, x, y)
            xs.append(x[inside])
            ys.append(y[inside])
            hs.append(h[inside])
        finer = hc - reach < s
        cx0, cy0 = cx0[finer], cy0[finer]
    x = np.concatenate(xs)
    y = np.concatenate(ys)
    h = np.concatenate(hs)
    # a tiny deterministic jitter (1e-4 of the spacing) spares Qhull the exact co-circularity
    # of a perfect lattice, which makes it several times slower
    rng = np.random.default_rng(12345)
    pts = np.column_stack([x, y]) + rng.uniform(-1e-4, 1e-4, size=(len(x), 2)) * h[:, None]
    # not too close to the boundary
    bt = cKDTree(bxy)
    d, _ = bt.query(pts)
    keep = d > 0.55 * h
    pts, h = pts[keep], h[keep]
    # thin points that are too close (across level changes)
    if len(pts) > 1:
        tree = cKDTree(pts)
        dd, ii = tree.query(pts, k=min(7, len(pts)))
        close = (dd[:, 1:] < 0.6 * np.minimum(h[:, None], h[ii[:, 1:]])) & (ii[:, 1:] < np.arange(len(pts))[:, None])
        drop = close.any(axis=1)
        pts, h = pts[~drop], h[~drop]
    return pts


def _encroached(bxy, pts):
    """Boundary-edge encroachment: (edges encroached by boundary nodes, interior points to drop)."""

    nb = len(bxy)
    a = bxy
    b = np.roll(bxy, -1, axis=0)
    mid = 0.5 * (a + b)
    rad = 0.5 * np.linalg.norm(b - a, axis=1)
    drop = np.zeros(len(pts), dtype=bool)
    if len(pts):
        tree = cKDTree(pts)
        # candidates within the largest radius, then exact test per pair
        lists = tree.query_ball_point(mid, rad * (1 - 1e-9))
        lens = np.fromiter((len(v) for v in lists), dtype=np.int64, count=nb)
        if lens.sum():
            idx = np.concatenate([np.asarray(v, dtype=np.int64) for v in lists if v])
            drop[idx] = True
    btree = cKDTree(bxy)
    lists = btree.query_ball_point(mid, rad * (1 - 1e-7))
    bad = np.zeros(nb, dtype=bool)
    lens = np.fromiter((len(v) for v in lists), dtype=np.int64, count=nb)
    if lens.sum():
        e = np.repeat(np.arange(nb), lens)
        q = np.concatenate([np.asarray(v, dtype=np.int64) for v in lists if v])
        own = (q == e) | (q == (e + 1) % nb)
        bad[np.unique(e[~own])] = True
    return np.flatnonzero(bad), drop


def _delaunay_inside(p, poly):

    tri = Delaunay(p).simplices.astype(np.int64)
    c = p[tri].mean(axis=1)
    inside = shapely.contains_xy(poly, c[:, 0], c[:, 1])
    return tri[inside]


def _edges(tri):
    """Unique undirected edges (k, 2) of triangles, smaller node first."""
    e = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
    e.sort(axis=1)
    n = int(e.max()) + 1 if len(e) else 1
    key = np.unique(e[:, 0] * n + e[:, 1])
    return np.column_stack([key // n, key % n])


def _smooth(p, nfixed, size: _Size, poly, iterations: int, neighbours: int = 6):
    """Force-based relaxation: bars to the nearest neighbours repel when shorter than the local
    target (distmesh-style, Persson & Strang 2004); nodes < nfixed stay put.

    Neighbour lists come from a k-d tree (rebuilt every few steps), so no triangulation is
    needed before the single final one. Only nodes whose neighbourhood is not already a regular
    lattice at the target spacing move (the boundary zone and level changes); the rest are at
    equilibrium.
    """

    n = len(p)
    p = p.copy()
    k = min(neighbours + 1, n)
    dist, nb_idx = cKDTree(p).query(p, k=k)
    h = size.plane_km(p[:, 0], p[:, 1])
    regular = np.all(np.abs(dist[:, 1:] / dist[:, 1:2] - 1.0) < 0.02, axis=1)
    regular &= np.abs(dist[:, 1] / h - 1.0) < 0.2
    regular[:nfixed] = False
    # a node moves when it is irregular or within two rings of an irregular node
    active = ~regular
    for _ in range(2):
        active = active | active[nb_idx].any(axis=1)
    active[:nfixed] = False
    act = np.flatnonzero(active)
    if not len(act):
        return p, np.ones(n, dtype=bool)
    # the moving nodes and everything they can touch: a sub-problem for the neighbour search
    sub = np.unique(np.concatenate([act, nb_idx[act].ravel()]))
    for _ in range(2):
        sub = np.unique(np.concatenate([sub, nb_idx[sub].ravel()]))
    nbr = nb_idx[act, 1:]
    for it in range(iterations):
        if it and it % 3 == 0:
            _, loc = cKDTree(p[sub]).query(p[act], k=k)
            nbr = sub[loc[:, 1:]]
        bars = p[act][:, None, :] - p[nbr]
        length = np.linalg.norm(bars, axis=2)
        h = np.zeros(n)
        h[sub] = size.plane_km(p[sub, 0], p[sub, 1])
        hbar = 0.5 * (h[act][:, None] + h[nbr])
        l0 = hbar * 1.2 * np.sqrt(np.sum(length**2) / np.sum(hbar**2))
        force = np.maximum(l0 - length, 0.0) / np.maximum(length, 1e-12)
        step = 0.2 * np.sum(force[:, :, None] * bars, axis=1)
        mag = np.linalg.norm(step, axis=1)
        step *= np.minimum(1.0, 0.2 * h[act] / np.maximum(mag, 1e-300))[:, None]
        p[act] += step
    # interior nodes that left the polygon are dropped
    inside = shapely.contains_xy(poly, p[:, 0], p[:, 1])
    inside[:nfixed] = True
    return p, inside


def _plane_angles_deg(p, tri):
    q = np.concatenate([p, np.zeros((len(p), 1))], axis=1)
    return triangle_angles_deg(q, tri)


def _improve(p, tri, nfixed, size: _Size, iterations: int = 20, threshold_deg: float = 24.0):
    """Relax the neighbourhood (3 rings) of poorly shaped triangles along triangulation edges.

    Returns new node positions, or None when every triangle is already good (corner triangles,
    whose shape the ring fixes, do not count).
    """
    ang = _plane_angles_deg(p, tri).min(axis=1)
    bad = ang < threshold_deg
    bad &= ~(tri < nfixed).all(axis=1)
    if not bad.any():
        return None
    n = len(p)
    mark = np.zeros(n, dtype=bool)
    mark[tri[bad].ravel()] = True
    for _ in range(3):
        mark[tri[mark[tri].any(axis=1)].ravel()] = True
    mark[:nfixed] = False
    edges = _edges(tri)
    edges = edges[mark[edges].any(axis=1)]
    i, j = edges[:, 0], edges[:, 1]
    p = p.copy()
    for _ in range(iterations):
        bars = p[i] - p[j]
        length = np.linalg.norm(bars, axis=1)
        mid = 0.5 * (p[i] + p[j])
        hbar = size.plane_km(mid[:, 0], mid[:, 1])
        l0 = hbar * 1.2 * np.sqrt(np.sum(length**2) / np.sum(hbar**2))
        force = np.maximum(l0 - length, 0.0) / np.maximum(length, 1e-12)
        fvec = force[:, None] * bars
        step = np.zeros_like(p)
        for d in range(2):
            step[:, d] = 0.2 * (np.bincount(i, fvec[:, d], n) - np.bincount(j, fvec[:, d], n))
        step[~mark] = 0.0
        h = size.plane_km(p[:, 0], p[:, 1])
        mag = np.linalg.norm(step, axis=1)
        step *= np.minimum(1.0, 0.2 * h / np.maximum(mag, 1e-300))[:, None]
        p += step
    return p


# --------------------------------------------------------------------------------------------


def mesh_plate(plate, edge_km: float | None = None, smoothing_iterations: int = 20) -> Mesh:
    """Triangulate a plate (see the module docstring for the method).

    Parameters
    ----------
    plate : stressmap.model.plate.PlateModel
    edge_km : float, optional
        Target edge length on the sphere (km); default ``plate.mesh["edge_km"]``. Refinements
        of the document keep their own (finer) sizes.
    smoothing_iterations : int
        Relaxation steps before the final triangulation.

    Returns
    -------
    Mesh

    Examples
    --------
    >>> import json, importlib.resources
    >>> from stressmap.model.plate import parse_plate
    >>> doc = json.loads(importlib.resources.files("stressmap.data")
    ...                  .joinpath("demo_plate.json").read_text())
    >>> m = mesh_plate(parse_plate(doc), edge_km=100.0)
    >>> bool(m.stats["min_angle_away_from_corners_deg"] >= 20.0), abs(m.stats["area_error"]) < 1e-3
    (True, True)
    """
    t0 = time.perf_counter()
    edge = float(edge_km if edge_km is not None else plate.mesh["edge_km"])
    if not np.isfinite(edge) or edge <= 0:
        raise InputError(f"edge_km must be a positive number, got {edge_km!r}",
                         [problem(f"edge_km must be a positive number, got {edge_km!r}",
                                  field="edge_km")])
    centre = np.asarray(plate.centre_xyz, dtype=float)
    ring_xyz = np.asarray(plate.ring_xyz, dtype=float)
    size = _Size(plate, edge, ring_xyz, centre)
    bxyz, barc, bfrac, p, tri = _plane_triangulation(ring_xyz, centre, size, edge,
                                                    smoothing_iterations)
    nb = len(bxyz)
    xyz = sphere.stereographic_inverse(p[:, 0] / _R, p[:, 1] / _R, centre)
    xyz[:nb] = bxyz
    xyz = sphere.normalize(xyz)
    area = facet_areas_km2(xyz, tri)
    flip = area < 0
    tri[flip] = tri[flip][:, [0, 2, 1]]
    area = np.abs(area)

    bedges = np.column_stack([np.arange(nb), (np.arange(nb) + 1) % nb]).astype(np.int64)
    edge_segment = np.asarray(plate.arc_segment, dtype=np.int64)[barc]
    element_province, element_stiffness = _assign_provinces(plate, xyz, tri, centre)
    stats = _mesh_stats(plate, xyz, tri, area, ring_xyz, barc, bfrac, edge)
    stats["seconds"] = time.perf_counter() - t0
    log.info("meshed %s: %d nodes, %d triangles, min angle %.1f deg in %.2f s", plate.name,
             stats["nodes"], stats["triangles"], stats["min_angle_deg"], stats["seconds"])
    lon, lat = sphere.xyz_to_lonlat(xyz)
    return Mesh(xyz=xyz, lonlat=np.column_stack([lon, lat]), triangles=tri, boundary_edges=bedges,
                edge_segment=edge_segment, element_province=element_province,
                element_stiffness=element_stiffness, stats=stats)


def _plane_triangulation(ring_xyz, centre, size, edge, smoothing_iterations):
    """Boundary nodes on the arcs and a quality triangulation in the stereographic plane.

    Returns the boundary nodes (xyz, arc index, fraction along the arc), all plane points
    (boundary first) and the triangles, unused nodes removed.
    """

    bxyz, barc, bfrac = _boundary_nodes(ring_xyz, size)
    bxy = np.column_stack(_to_plane(bxyz, centre))
    poly = shapely.Polygon(bxy)
    shapely.prepare(poly)
    pts = _interior_points(poly, bxy, size, edge)   # plane spacing at the centre (scale 1)

    # encroachment: split encroached boundary edges, drop encroaching interior points
    for _ in range(12):
        bad, drop = _encroached(bxy, pts)
        pts = pts[~drop]
        if not len(bad):
            break
        bxyz, barc, bfrac = _split_boundary(bxyz, barc, bfrac, bad, ring_xyz)
        bxy = np.column_stack(_to_plane(bxyz, centre))
    nb = len(bxy)
    poly = shapely.Polygon(bxy)
    shapely.prepare(poly)

    p = np.vstack([bxy, pts])
    if smoothing_iterations:
        p, keep = _smooth(p, nb, size, poly, smoothing_iterations)
        p = p[keep]
        _, drop = _encroached(bxy, p[nb:])
        p = np.vstack([bxy, p[nb:][~drop]])
    tri = _delaunay_inside(p, poly)
    for _ in range(2):
        q = _improve(p, tri, nb, size)
        if q is None:
            break
        _, drop = _encroached(bxy, q[nb:])
        keep = shapely.contains_xy(poly, q[nb:, 0], q[nb:, 1]) & ~drop
        p = np.vstack([bxy, q[nb:][keep]])
        tri = _delaunay_inside(p, poly)

    used = np.zeros(len(p), dtype=bool)
    used[tri.ravel()] = True
    used[:nb] = True
    new = np.cumsum(used) - 1
    return bxyz, barc, bfrac, p[used], new[tri]


def _mesh_stats(plate, xyz, tri, area, ring_xyz, barc, bfrac, edge) -> dict:
    """Quality figures: sizes, angles (also away from sharp corners), area against the plate's."""
    nb = len(barc)
    angles = triangle_angles_deg(xyz, tri)
    sharp = _sharpness_deg(ring_xyz) < SHARP_CORNER_DEG
    # nodes at sharp ring vertices: the boundary nodes with fraction 0 on an arc starting there
    # "near a sharp corner": a triangle touching it, or with a node within CORNER_ZONE_EDGES
    # target edge lengths of it (where the wedge is narrower than the mesh can resolve)
    sharp_nodes = np.flatnonzero((bfrac == 0.0) & sharp[barc])
    near_corner = np.isin(tri, sharp_nodes).any(axis=1)
    if len(sharp_nodes):

        zone = 2.0 * np.sin(CORNER_ZONE_EDGES * edge / _R / 2.0)
        hit = cKDTree(xyz[sharp_nodes]).query(xyz, distance_upper_bound=zone)[0] < zone
        near_corner |= hit[tri].any(axis=1)
    exact = float(plate.area_km2)  # the plate's region, also when larger than a hemisphere
    total = float(area.sum())
    el = _edges(tri)
    elen = _R * np.linalg.norm(xyz[el[:, 0]] - xyz[el[:, 1]], axis=1)
    return {
        "nodes": int(len(xyz)),
        "triangles": int(len(tri)),
        "boundary_edges": int(nb),
        "min_angle_deg": float(angles.min()),
        "min_angle_away_from_corners_deg": float(angles[~near_corner].min())
        if (~near_corner).any() else float(angles.min()),
        "max_angle_deg": float(angles.max()),
        "area_km2": total,
        "exact_area_km2": exact,
        "area_error": (total - exact) / exact,
        "edge_km": edge,
        "mean_edge_km": float(elen.mean()),
    }


def _corner_angles_deg(ring_xyz):
    """Interior angle (degrees) of the ring at each vertex (interior on the left)."""
    prev = np.roll(ring_xyz, 1, axis=0)
    nxt = np.roll(ring_xyz, -1, axis=0)
    e, n = sphere.local_frame(ring_xyz)
    # tangent directions towards the previous and next vertices
    tp = prev - np.sum(prev * ring_xyz, axis=1, keepdims=True) * ring_xyz
    tn = nxt - np.sum(nxt * ring_xyz, axis=1, keepdims=True) * ring_xyz
    ap = np.arctan2(np.sum(tp * n, axis=1), np.sum(tp * e, axis=1))
    an = np.arctan2(np.sum(tn * n, axis=1), np.sum(tn * e, axis=1))
    # interior (left of travel) angle: from the next direction counter-clockwise to previous
    return np.degrees((ap - an) % (2.0 * np.pi))


def _sharpness_deg(ring_xyz):
    """The smaller of the interior and exterior angle at each ring vertex (degrees)."""
    a = _corner_angles_deg(ring_xyz)
    return np.minimum(a, 360.0 - a)


def _assign_provinces(plate, xyz, tri, centre):

    m = len(tri)
    prov = np.full(m, -1, dtype=np.int64)
    stiff = np.ones(m)
    if not plate.provinces:
        return prov, stiff
    c = sphere.normalize(xyz[tri].sum(axis=1))
    cx, cy = sphere.gnomonic_forward(c, centre)
    for k, pv in enumerate(plate.provinces):
        ring = np.asarray(pv.polygon_lonlat, dtype=float)
        px, py = sphere.gnomonic_forward(sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1]), centre)
        poly = shapely.Polygon(np.column_stack([px, py]))
        shapely.prepare(poly)
        inside = shapely.contains_xy(poly, cx, cy)
        prov[inside] = k
        stiff[inside] = pv.stiffness
    return prov, stiff
