"""Ring geometry of a plate: chaining boundary segments into one closed ring on the sphere.

Rules (README "Plate model document"):

* boundary arcs between consecutive vertices are great circles;
* segment ends join within :data:`JOIN_TOLERANCE_KM` into one closed ring, in any order and
  either direction;
* on a sphere a ring bounds two regions: the plate is the *smaller* one, unless the document's
  ``region`` is ``"left"``: then it is the region on the left walking boundary feature 0 from
  its first to its last position (how plates larger than a hemisphere are given; plates derived
  from a network always say so); the ring is stored
  counter-clockwise seen from outside the sphere (plate interior on the left);
* the plate must lie within :data:`MAX_EXTENT_DEG` degrees of arc of its centre (area
  centroid), which keeps every projection used by the mesher and the checks well conditioned.

Every function records problems (:func:`stressmap.errors.problem`, field named) in the list it
is given and returns None when the ring cannot be used.

Layer: model (numpy, scipy, shapely, :mod:`stressmap.geo.sphere`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from scipy.spatial import cKDTree

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import problem
from stressmap.geo import arcs, sphere

__all__ = [
    "MAX_EXTENT_DEG",
    "REGIONS",
    "JOIN_TOLERANCE_KM",
    "Ring",
    "fmt_lonlat",
    "join_ring",
    "build_ring",
    "self_intersections",
    "close_ring",
]

#: Every point of the ring must lie within this angle (degrees of arc) of the plate centre.
MAX_EXTENT_DEG = 165.0
#: Which of the two regions a ring bounds is the plate (the document's ``region``).
REGIONS = ("smaller", "left")
#: Segment ends closer than this join into the ring.
JOIN_TOLERANCE_KM = 1.0
#: Rings spreading beyond this angle about their vertex mean are not tested for crossings (the
#: gnomonic projection the test uses ends at 90 degrees).
_CROSSING_TEST_LIMIT_DEG = 89.0


def _add(probs: list, message: str, field: str | None = None) -> None:
    probs.append(problem(message, field=field))


def fmt_lonlat(lon: float, lat: float) -> str:
    """``(lon 1.2345, lat -6.7890)`` for messages.

    Examples
    --------
    >>> fmt_lonlat(1.23456789, -6.789)
    '(lon 1.2346, lat -6.7890)'
    """
    return f"(lon {lon:.4f}, lat {lat:.4f})"


@dataclass(frozen=True)
class Ring:
    """A closed boundary ring, counter-clockwise seen from outside (interior on the left).

    ``lonlat`` (n, 2) and ``xyz`` (n, 3) vertices, not closed; ``arc_segment`` (n,) the segment
    of the arc from vertex i to i + 1; ``bounds`` segment -> (start, stop) vertex indices;
    ``centre_xyz`` the area centroid; ``area_km2`` the exact area (great-circle arcs).
    """

    lonlat: np.ndarray
    xyz: np.ndarray
    arc_segment: np.ndarray
    bounds: dict
    centre_xyz: np.ndarray
    area_km2: float


def join_ring(seg_coords: list[np.ndarray], probs: list):
    """Chain segments into one ring. Returns list of (segment, forward) in ring order or None."""
    m = len(seg_coords)
    ends_ll = np.array([[c[0], c[-1]] for c in seg_coords]).reshape(-1, 2)  # (2m, 2)
    ends = sphere.lonlat_to_xyz(ends_ll[:, 0], ends_ll[:, 1])
    tol = 2.0 * np.sin(JOIN_TOLERANCE_KM / EARTH_RADIUS_KM / 2.0)  # chord
    tree = cKDTree(ends)
    pairs = tree.query_pairs(tol, output_type="ndarray")
    if m > 1:
        pairs = pairs[pairs[:, 0] // 2 != pairs[:, 1] // 2]
    partners: list[list[int]] = [[] for _ in range(2 * m)]
    for p, q in pairs.tolist():
        partners[p].append(q)
        partners[q].append(p)
    endname = ("start", "end")
    ok = True
    reported_gaps = set()
    k = min(2 * m, 4)
    dist, idx = tree.query(ends, k=k)
    dist = np.atleast_2d(dist)
    idx = np.atleast_2d(idx)
    for p in range(2 * m):
        seg = p // 2
        where = f"boundary.features[{seg}].geometry.coordinates"
        if len(partners[p]) == 0:
            ok = False
            cand = [(d, q) for d, q in zip(dist[p], idx[p]) if q < 2 * m and (q // 2 != seg or m == 1)
                    and q != p]
            if not cand:
                _add(probs, f"ring not closed: the {endname[p % 2]} of segment {seg} at "
                          f"{fmt_lonlat(*ends_ll[p])} joins no other segment end", where)
                continue
            d, q = cand[0]
            key = (min(p, q), max(p, q))
            if key in reported_gaps:
                continue
            reported_gaps.add(key)
            gap_km = EARTH_RADIUS_KM * float(sphere.angle_between(ends[p], ends[q]))
            _add(probs, f"ring not closed: gap of {gap_km:.1f} km between the {endname[p % 2]} of "
                      f"segment {seg} at {fmt_lonlat(*ends_ll[p])} and the {endname[q % 2]} of segment "
                      f"{q // 2} at {fmt_lonlat(*ends_ll[q])}; segment ends must join within "
                      f"{JOIN_TOLERANCE_KM:g} km", where)
        elif len(partners[p]) > 1:
            ok = False
            others = ", ".join(f"{endname[q % 2]} of segment {q // 2}" for q in partners[p])
            _add(probs, f"the boundary branches: the {endname[p % 2]} of segment {seg} at "
                      f"{fmt_lonlat(*ends_ll[p])} meets {len(partners[p])} other segment ends ({others}); "
                      "the boundary must be one simple ring", where)
    if not ok:
        return None
    order = [(0, True)]
    visited = {0}
    cur = 1  # the end of segment 0
    for _ in range(m):
        q = partners[cur][0]
        seg = q // 2
        if seg == 0:
            break
        if seg in visited:  # pragma: no cover - impossible with one partner per end
            break
        visited.add(seg)
        order.append((seg, q % 2 == 0))
        cur = q ^ 1
    if len(visited) < m:
        rest = sorted(set(range(m)) - visited)
        shown = ", ".join(map(str, rest[:20])) + (" ..." if len(rest) > 20 else "")
        _add(probs, f"the boundary forms more than one closed ring: segments {shown} are not "
                  "connected to the ring through segment 0; a plate has exactly one ring",
                  "boundary.features")
        return None
    return order


def build_ring(order, seg_coords):
    """Ring vertices (n, 2), the segment of each arc (n,) and each segment's vertex bounds."""
    parts, starts, lengths = [], {}, {}
    offset = 0
    for seg, fwd in order:
        c = seg_coords[seg] if fwd else seg_coords[seg][::-1]
        parts.append(c[:-1])
        starts[seg] = offset
        lengths[seg] = len(c) - 1
        offset += len(c) - 1
    ring = np.concatenate(parts, axis=0)
    n = len(ring)
    arc_segment = np.empty(n, dtype=np.int64)
    for seg in starts:
        arc_segment[starts[seg]: starts[seg] + lengths[seg]] = seg
    bounds = {seg: (starts[seg], (starts[seg] + lengths[seg]) % n) for seg in starts}
    return ring, arc_segment, bounds


def self_intersections(ring_xyz, arc_segment, centre, probs: list) -> None:
    """Report pairs of crossing arcs (great circles are straight in the gnomonic plane)."""
    x, y = sphere.gnomonic_forward(ring_xyz, centre)
    pts = np.column_stack([x, y])
    n = len(pts)
    nxt = np.roll(pts, -1, axis=0)
    lines = shapely.linestrings(np.stack([pts, nxt], axis=1))
    tree = shapely.STRtree(lines)
    i, j = tree.query(lines, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    adjacent = (j == i + 1) | ((i == 0) & (j == n - 1))
    # adjacent arcs share a vertex; they only offend if they overlap (the ring doubles back)
    if adjacent.any():
        inter = shapely.intersection(lines[i[adjacent]], lines[j[adjacent]])
        bad_adj = shapely.get_type_id(inter) != 0  # not a single point
        adjacent[np.flatnonzero(adjacent)[~bad_adj]] = True
        offend = ~adjacent
        offend[np.flatnonzero(adjacent)[bad_adj]] = True
    else:
        offend = np.ones(len(i), dtype=bool)
    i, j = i[offend], j[offend]
    if not len(i):
        return
    inter = shapely.intersection(lines[i], lines[j])
    cx, cy = shapely.get_coordinates(shapely.centroid(inter)).T
    ll = np.column_stack(sphere.xyz_to_lonlat(sphere.gnomonic_inverse(cx, cy, centre)))
    seen = set()
    for a, b, (lon, lat) in zip(i.tolist(), j.tolist(), ll.tolist()):
        sa, sb = int(arc_segment[a]), int(arc_segment[b])
        key = (min(sa, sb), max(sa, sb))
        if key in seen:
            continue
        seen.add(key)
        if len(seen) > 20:
            _add(probs, "the boundary ring crosses itself in more places than listed", "boundary")
            break
        what = (f"segment {sa} crosses itself" if sa == sb
                else f"segment {key[0]} crosses segment {key[1]}")
        _add(probs, f"self-intersecting ring: {what} near {fmt_lonlat(lon, lat)}",
                  f"boundary.features[{key[0]}].geometry.coordinates")


def self_crossings_sphere(ring_xyz, arc_segment, probs: list) -> None:
    """Crossing arcs of a ring too wide for a gnomonic plane, found on the sphere."""
    a, b = ring_xyz, np.roll(ring_xyz, -1, axis=0)
    n = len(a)
    pairs = arcs.near_pairs(a, b, 0.0)
    i, j = pairs[:, 0], pairs[:, 1]
    keep = ~((j == i + 1) | ((i == 0) & (j == n - 1)))
    meet, point = arcs.arc_crossings(a[i[keep]], b[i[keep]], a[j[keep]], b[j[keep]])
    seen = set()
    for ia, ib, p in zip(i[keep][meet].tolist(), j[keep][meet].tolist(), point[meet]):
        key = tuple(sorted((int(arc_segment[ia]), int(arc_segment[ib]))))
        if key in seen:
            continue
        seen.add(key)
        lon, lat = sphere.xyz_to_lonlat(p)
        _add(probs, f"self-intersecting ring: segment {key[0]} crosses segment {key[1]} near "
             f"{fmt_lonlat(float(lon), float(lat))}", f"boundary.features[{key[0]}].geometry.coordinates")


def close_ring(seg_coords: list, probs: list, region: str = "smaller") -> Ring | None:
    """Join checked segments into the plate's ring, oriented, measured and size-checked.

    ``region`` "left" takes the region on the left of the ring as given (segment 0 forward),
    whatever its size, instead of the smaller one.

    Problems (gaps, branches, several rings, crossings, no area, a plate too large) go to
    ``probs``; None is returned when any was found.
    """
    order = join_ring(seg_coords, probs)
    if order is None:
        return None
    ring, arc_segment, bounds = build_ring(order, seg_coords)
    ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
    # crossings first, about the vertex mean (area and centroid mean nothing for a ring that
    # crosses itself)
    mean = sphere.normalize(ring_xyz.sum(axis=0))
    spread = (np.degrees(np.max(sphere.angle_between(ring_xyz, mean)))
              if np.any(mean) else 180.0)
    n0 = len(probs)
    if spread < _CROSSING_TEST_LIMIT_DEG:
        self_intersections(ring_xyz, arc_segment, mean, probs)
    else:
        self_crossings_sphere(ring_xyz, arc_segment, probs)
    if len(probs) > n0:
        return None
    area = sphere.spherical_polygon_area(ring_xyz)
    if region == "left" and area < 0:  # the larger region, on the left as given
        area = 4.0 * np.pi * EARTH_RADIUS_KM**2 + area
    elif area < 0:
        order = [(s, not f) for s, f in reversed(order)]
        ring, arc_segment, bounds = build_ring(order, seg_coords)
        ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
    area_km2 = abs(area)
    centre = sphere.polygon_centroid_xyz(ring_xyz)
    extent = np.degrees(np.max(sphere.angle_between(ring_xyz, centre)))
    if len(ring) < 3 or area_km2 < 1.0:
        _add(probs, f"the boundary ring encloses no area ({area_km2:.3g} km^2)", "boundary")
        return None
    if extent > MAX_EXTENT_DEG:
        _add(probs, f"the plate is larger than supported: its ring reaches {extent:.1f} degrees "
             f"of arc from the plate centre; the limit is {MAX_EXTENT_DEG:g} degrees; split the "
             "plate", "boundary")
        return None
    return Ring(lonlat=ring, xyz=ring_xyz, arc_segment=arc_segment, bounds=bounds,
                centre_xyz=centre, area_km2=float(area_km2))
