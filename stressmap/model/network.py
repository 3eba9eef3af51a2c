"""Boundary networks: typed plate-boundary lines that partition the sphere (or a region) into plates.

A network document (README "Boundary networks") is a JSON object::

    {"name": ..., "description": ...,
     "lines": {"type": "FeatureCollection", "features": [LineString features with properties
               kind, left, right, sinks, sense, group and the force parameters of plate segments]},
     "defaults": {"sheet": ..., "drag": ..., "mesh": ..., "ridge_push": ...},
     "plates": {"<plate name>": {"provinces": ..., "sheet": ..., "mesh": ..., ...}}}

:func:`check_network` finds the plates: it splits the lines at junctions (line ends within
:data:`JUNCTION_TOLERANCE_KM` of each other, or of another line: triple and T-junctions), traces
every face of the network on the sphere (great-circle arcs; nothing depends on longitude, so the
antimeridian and the poles need no special case), names each face from the ``left``/``right``
names of the lines around it and reports every defect at once, each with its position: dangling
ends, near-misses, crossings and overlaps, faces with two names or none, a name on two faces,
networks in separate pieces. :func:`plate_documents` turns each named face into a plate model
document of the existing format (``stressmap.model.plate``), so building and everything
downstream is unchanged; :func:`document_key` is the content hash that keys built plates.

Side rules (seen walking along a line from its first to its last position):

* ``ridge``, ``collision``, ``transform`` and ``free`` apply to both sides (a transform's
  ``sense`` is the same seen from either side);
* ``subduction``: the side named by ``sinks`` (``"left"`` or ``"right"``) gets a
  ``subduction`` segment with the line's slab parameters; the other side an ``overriding``
  segment (group ``overriding_group``, default ``"overriding"``; force ``overriding_force_n_per_m``
  when given);
* a face bounded only by ``free`` lines and named by none is the outside of a regional network.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import ModelValidationError, problem
from stressmap.geo import arcs, sphere

__all__ = [
    "LINE_KINDS",
    "JUNCTION_TOLERANCE_KM",
    "NEAR_MISS_KM",
    "Network",
    "Face",
    "check_network",
    "plate_documents",
    "document_key",
]

#: Kinds of network lines (plate segments add ``overriding`` and ``fixed``, which a network
#: derives or does not use).
LINE_KINDS = ("ridge", "subduction", "collision", "transform", "free")
#: Line ends closer than this (km) to each other, or to another line, meet at a junction.
JUNCTION_TOLERANCE_KM = 1.0
#: A dangling end this close (km) to another line is reported as a near-miss.
NEAR_MISS_KM = 100.0
_SIDES = ("left", "right")
_SENSES = ("dextral", "sinistral")
_TOP_FIELDS = ("name", "description", "lines", "defaults", "plates")
_TABLES = ("sheet", "drag", "mesh", "ridge_push")
_PLATE_FIELDS = _TABLES + ("provinces", "description")
#: Line properties that describe the network, not a plate's segment.
_NETWORK_ONLY = ("left", "right", "sinks", "overriding_group", "overriding_force_n_per_m")
_SLAB_ONLY = ("slab_age_myr", "slab_depth_km", "pull_fraction", "force_n_per_m", "group")
_R = EARTH_RADIUS_KM


@dataclass(frozen=True)
class Face:
    """One face of the network: its half-edges in order (plate on the left) and its name."""

    half_edges: tuple
    name: str | None
    ring_xyz: np.ndarray = field(repr=False)
    area_km2: float
    centre_lonlat: tuple


@dataclass(frozen=True)
class Network:
    """A checked network (see :func:`check_network`).

    Attributes
    ----------
    name : str
    document : dict
        The document as given (lines, defaults, plates).
    nodes_xyz : ndarray (V, 3)
        Junctions and line ends after snapping (unit vectors).
    edges : tuple of dict
        Line pieces between junctions: ``line`` (feature index), ``nodes`` (start, end) and
        ``xyz`` ((k, 3) vertices in the line's direction, ends on the nodes).
    faces : tuple of Face
        Every face, the outside of a regional network included (its name is None).
    outside : int or None
        Index of the outside face, None for a closed network.
    components : int
        Connected pieces of the network (1 when valid).
    """

    name: str
    document: dict
    nodes_xyz: np.ndarray = field(repr=False)
    edges: tuple = field(repr=False)
    faces: tuple = field(repr=False)
    outside: int | None
    components: int

    @property
    def plates(self) -> list[str]:
        """Plate names, in face order."""
        return [f.name for f in self.faces if f.name is not None]


# --------------------------------------------------------------------------------------------
# document checks


def _fmt_xyz(xyz) -> str:
    lon, lat = sphere.xyz_to_lonlat(np.asarray(xyz, dtype=float))
    return f"(lon {float(lon):.4f}, lat {float(lat):.4f})"


def _lonlat(xyz) -> list[float]:
    lon, lat = sphere.xyz_to_lonlat(np.asarray(xyz, dtype=float))
    return [round(float(lon), 6), round(float(lat), 6)]


def _coords(raw, where: str, probs: list) -> np.ndarray | None:
    """(k, 2) lon/lat of a LineString, or None with the problem recorded."""
    try:
        arr = np.asarray(raw, dtype=float)
    except (TypeError, ValueError, OverflowError):
        arr = None
    if arr is None or arr.ndim != 2 or arr.shape[1] not in (2, 3) or len(arr) < 2:
        probs.append(problem("coordinates must be an array of at least two [lon, lat] positions",
                             field=where))
        return None
    arr = arr[:, :2]
    bad = ~np.isfinite(arr).all(axis=1) | (np.abs(arr[:, 0]) > 180.0) | (np.abs(arr[:, 1]) > 90.0)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        probs.append(problem(f"position {k} {raw[k]!r} is not a finite lon in [-180, 180], lat in "
                             f"[-90, 90]" + (f" (and {int(bad.sum()) - 1} more)" if bad.sum() > 1 else ""),
                             field=f"{where}[{k}]"))
        return None
    xyz = sphere.lonlat_to_xyz(arr[:, 0], arr[:, 1])
    step = sphere.angle_between(xyz[:-1], xyz[1:])
    if np.any(step * _R < 1e-3):
        k = int(np.flatnonzero(step * _R < 1e-3)[0]) + 1
        probs.append(problem(f"position {k} repeats position {k - 1} at {_fmt_xyz(xyz[k])}",
                             field=f"{where}[{k}]"))
        return None
    if np.any(step > np.radians(170.0)):
        k = int(np.flatnonzero(step > np.radians(170.0))[0]) + 1
        probs.append(problem(f"the arc from position {k - 1} to {k} spans "
                             f"{np.degrees(step[k - 1]):.1f} degrees; nearly antipodal positions "
                             "do not define a great circle, add positions", field=f"{where}[{k}]"))
        return None
    return arr


def _check_line(i: int, feat, probs: list):
    """(lon/lat (k, 2) or None, properties or None) of one line feature."""
    base = f"lines.features[{i}]"
    if not isinstance(feat, dict) or feat.get("type") != "Feature":
        probs.append(problem("each line must be a GeoJSON Feature", field=base))
        return None, None
    geom = feat.get("geometry")
    coords = None
    if not isinstance(geom, dict) or geom.get("type") != "LineString":
        got = geom.get("type") if isinstance(geom, dict) else type(geom).__name__
        probs.append(problem(f"geometry must be a LineString, got {got!r}"
                             + (" (split MultiLineStrings into one feature per line)"
                                if got == "MultiLineString" else ""), field=f"{base}.geometry"))
    else:
        coords = _coords(geom.get("coordinates"), f"{base}.geometry.coordinates", probs)
    props = feat.get("properties")
    if not isinstance(props, dict):
        probs.append(problem("properties must be an object with at least 'kind'",
                             field=f"{base}.properties"))
        return coords, None
    pb = f"{base}.properties"
    n0 = len(probs)
    kind = props.get("kind")
    if kind not in LINE_KINDS:
        probs.append(problem(f"kind must be one of {', '.join(LINE_KINDS)}, got {kind!r}"
                             + (" (a network derives overriding sides from subduction lines)"
                                if kind == "overriding" else ""), field=f"{pb}.kind"))
    for side in _SIDES:
        v = props.get(side)
        if v is not None and (not isinstance(v, str) or not v.strip()):
            probs.append(problem(f"{side} must be a plate name (non-empty text), got {v!r}",
                                 field=f"{pb}.{side}"))
    if kind == "subduction" and props.get("sinks") not in _SIDES:
        probs.append(problem("a subduction line needs 'sinks': 'left' or 'right' (the side that "
                             f"goes down, seen walking along the line), got {props.get('sinks')!r}",
                             field=f"{pb}.sinks"))
    if kind == "transform" and props.get("sense") not in _SENSES:
        probs.append(problem(f"a transform needs 'sense': dextral or sinistral, got "
                             f"{props.get('sense')!r}", field=f"{pb}.sense"))
    return coords, (dict(props) if len(probs) == n0 else None)


def _check_params(doc: dict, probs: list) -> tuple[dict, dict]:
    """The ``defaults`` and ``plates`` tables (shapes only; values are checked per plate)."""
    defaults = doc.get("defaults") or {}
    plates = doc.get("plates") or {}
    if not isinstance(defaults, dict):
        probs.append(problem("defaults must be an object of plate tables", field="defaults"))
        defaults = {}
    for key in defaults:
        if key not in _TABLES + ("provinces",):
            probs.append(problem(f"unknown table {key!r}; expected {', '.join(_TABLES)}",
                                 field=f"defaults.{key}"))
    if not isinstance(plates, dict):
        probs.append(problem("plates must be an object mapping plate name to its tables",
                             field="plates"))
        plates = {}
    for name, table in plates.items():
        if not isinstance(table, dict):
            probs.append(problem("must be an object of plate tables", field=f"plates.{name}"))
            continue
        for key in table:
            if key not in _PLATE_FIELDS:
                probs.append(problem(f"unknown field {key!r}; expected {', '.join(_PLATE_FIELDS)}",
                                     field=f"plates.{name}.{key}"))
    return defaults, plates


# --------------------------------------------------------------------------------------------
# junctions


def _clusters(n: int, pairs: np.ndarray) -> np.ndarray:
    """Connected-component label of each of n items joined by index pairs."""

    pairs = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    g = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    return connected_components(g, directed=False)[1]


def _arcs_of(lines: list) -> tuple:
    """All arcs of all lines: a, b (m, 3), line (m,), position of the arc in its line (m,)."""
    a = np.concatenate([x[:-1] for x in lines])
    b = np.concatenate([x[1:] for x in lines])
    line = np.repeat(np.arange(len(lines)), [len(x) - 1 for x in lines])
    k = np.concatenate([np.arange(len(x) - 1) for x in lines])
    return a, b, line, k


def _near_arcs(points, a, b, reach_rad: float):
    """Candidate (point, arc) pairs within ``reach_rad``, with exact distance, foot and t."""

    step = max(reach_rad, np.radians(0.5))
    samples, arc = arcs.arc_samples(a, b, step)
    hits = cKDTree(samples).query_ball_point(points, float(arcs.chord_of_angle(reach_rad + step)))
    counts = np.array([len(h) for h in hits], dtype=np.int64)
    p = np.repeat(np.arange(len(points)), counts)
    s = np.concatenate([np.asarray(h, dtype=np.int64) for h in hits]) if counts.sum() else \
        np.zeros(0, dtype=np.int64)
    pa = np.unique(np.column_stack([p, arc[s]]), axis=0).reshape(-1, 2)
    dist, foot, t = arcs.point_arc_distance(points[pa[:, 0]], a[pa[:, 1]], b[pa[:, 1]])
    keep = dist <= reach_rad
    return pa[keep, 0], pa[keep, 1], dist[keep], foot[keep], t[keep]


def _junctions(lines: list, tol: float):
    """Cluster line ends into nodes and find T-junction cuts.

    Returns (end_node (2L,), node_xyz (V, 3), cuts) where cuts are (line, param, node) with
    ``param`` the position along the line in arcs (vertex k at param k).
    """
    n_lines = len(lines)
    ends = np.concatenate([[x[0], x[-1]] for x in lines])
    end_line = np.repeat(np.arange(n_lines), 2)
    a, b, arc_line, arc_k = _arcs_of(lines)
    e, arc, dist, foot, t = _near_arcs(ends, a, b, tol)
    n_arcs = np.array([len(x) - 1 for x in lines])
    # an end is not near the arc it ends (a closed loop finds its start on its first arc)
    own_end = arc_line[arc] == end_line[e]
    mine = own_end & (arc_k[arc] == np.where(e % 2 == 0, 0, n_arcs[arc_line[arc]] - 1))
    e, arc, dist, foot, t, own_end = e[~mine], arc[~mine], dist[~mine], foot[~mine], t[~mine], own_end[~mine]
    # the nearest point of each line to each end: one hit per (end, line)
    order = np.lexsort((dist, arc_line[arc], e))
    _, first = np.unique(np.column_stack([e, arc_line[arc]])[order], axis=0, return_index=True)
    keep = order[first]
    e, arc, foot, t, own_end = e[keep], arc[keep], foot[keep], t[keep], own_end[keep]
    param = arc_k[arc] + t
    last = n_arcs[arc_line[arc]]
    # snap to a vertex of the other line when within the tolerance of it
    da = sphere.angle_between(foot, a[arc])
    db = sphere.angle_between(foot, b[arc])
    param = np.where(da <= tol, np.floor(param + 1e-9), np.where(db <= tol, arc_k[arc] + 1.0, param))
    starts = np.stack([lines[k][0] for k in arc_line[arc]]) if len(arc) else np.zeros((0, 3))
    stops = np.stack([lines[k][-1] for k in arc_line[arc]]) if len(arc) else np.zeros((0, 3))
    here = ends[e]  # line ends within the tolerance of each other meet there
    param = np.where(sphere.angle_between(here, starts) <= tol, 0.0,
                     np.where(sphere.angle_between(here, stops) <= tol, last.astype(float), param))
    at_end = (param <= 0) | (param >= last)
    # end meets end of a line (its own other end too: a closed loop)
    end_of_other = 2 * arc_line[arc] + (param >= last)
    join = at_end & (end_of_other != e)
    pairs = np.column_stack([e[join], end_of_other[join]])
    label = _clusters(len(ends), pairs)
    inner = ~at_end & ~(own_end & (np.abs(param - np.where(e % 2 == 0, 0, last)) < 1))
    cut_line, cut_param, cut_end = arc_line[arc][inner], param[inner], e[inner]
    cut_node = label[cut_end]
    # one cut per (line, node)
    _, first = np.unique(np.column_stack([cut_line, cut_node]), axis=0, return_index=True)
    first = np.sort(first)
    cut_line, cut_param, cut_node = cut_line[first], cut_param[first], cut_node[first]
    cut_xyz = foot[inner][first]
    node_xyz = np.zeros((label.max() + 1, 3))
    node_xyz[label[::-1]] = ends[::-1]          # the first end of each cluster
    node_xyz[cut_node[::-1]] = cut_xyz[::-1]    # on the through line at a T-junction
    return label, node_xyz, list(zip(cut_line.tolist(), cut_param.tolist(), cut_node.tolist()))


def _pieces(lines: list, end_node, node_xyz, cuts):
    """Split every line at its ends and cuts into edges between nodes."""
    by_line: dict[int, list] = {i: [] for i in range(len(lines))}
    for line, param, node in cuts:
        by_line[line].append((param, node))
    edges = []
    for i, xyz in enumerate(lines):  # lines of a network: hundreds, not mesh elements
        last = len(xyz) - 1
        stops = sorted([(0.0, int(end_node[2 * i]))] + by_line[i] + [(float(last), int(end_node[2 * i + 1]))])
        for (p0, n0), (p1, n1) in zip(stops[:-1], stops[1:]):
            if p1 - p0 < 1e-12:
                continue
            k = np.arange(int(np.floor(p0)) + 1, int(np.ceil(p1)))
            k = k[(k > p0 + 1e-9) & (k < p1 - 1e-9)]
            inner = xyz[k]
            ends = np.stack([node_xyz[n0], node_xyz[n1]])
            if len(inner):
                near = (sphere.angle_between(inner, ends[0]) < 1e-9) | (
                    sphere.angle_between(inner, ends[1]) < 1e-9)
                inner = inner[~near]
            if n0 == n1 and len(inner) < 2:
                continue
            if n0 != n1 and not len(inner) and sphere.angle_between(ends[0], ends[1]) < 1e-9:
                continue
            edges.append({"line": i, "nodes": (n0, n1), "xyz": np.vstack([ends[:1], inner, ends[1:]])})
    return edges


def _dangling(edges, node_xyz, lines, tol: float, probs: list) -> int:
    """Report dangling ends (near-misses when another line passes close). Returns the count."""
    degree = np.bincount(np.array([e["nodes"] for e in edges]).ravel(), minlength=len(node_xyz))
    loose = np.flatnonzero(degree == 1)
    if not len(loose):
        return 0
    owner = {}
    for k, e in enumerate(edges):
        for n in e["nodes"]:
            owner.setdefault(n, e["line"])
    a, b, arc_line, _ = _arcs_of(lines)
    reach = NEAR_MISS_KM / _R
    p, arc, dist, foot, _ = _near_arcs(node_xyz[loose], a, b, reach)
    other = arc_line[arc] != np.array([owner[n] for n in loose.tolist()])[p]
    p, arc, dist, foot = p[other], arc[other], dist[other], foot[other]
    for j, n in enumerate(loose.tolist()):
        line = owner[n]
        where = f"lines.features[{line}].geometry.coordinates"
        mine = np.flatnonzero(p == j)
        if len(mine):
            best = mine[np.argmin(dist[mine])]
            probs.append(problem(
                f"near-miss: line {line} ends at {_fmt_xyz(node_xyz[n])}, {dist[best] * _R:.1f} km from "
                f"line {int(arc_line[arc[best]])} at {_fmt_xyz(foot[best])}; lines meet only within "
                f"{JUNCTION_TOLERANCE_KM:g} km", field=where, position=_lonlat(node_xyz[n])))
        else:
            probs.append(problem(f"dangling end: line {line} ends at {_fmt_xyz(node_xyz[n])} and "
                                 "meets no other line", field=where, position=_lonlat(node_xyz[n])))
    return len(loose)


def _crossings(edges, probs: list) -> int:
    """Report arcs of different places that cross, touch or overlap away from a junction."""
    a = np.concatenate([e["xyz"][:-1] for e in edges])
    b = np.concatenate([e["xyz"][1:] for e in edges])
    edge = np.repeat(np.arange(len(edges)), [len(e["xyz"]) - 1 for e in edges])
    # vertex ids: nodes keep their id, inner vertices get fresh ones
    n_nodes = 1 + max(max(e["nodes"]) for e in edges)
    vid, nxt = [], n_nodes
    for e in edges:
        inner = np.arange(nxt, nxt + len(e["xyz"]) - 2)
        nxt += len(inner)
        v = np.concatenate([[e["nodes"][0]], inner, [e["nodes"][1]]])
        vid.append(np.column_stack([v[:-1], v[1:]]))
    vid = np.concatenate(vid)
    pairs = arcs.near_pairs(a, b, 0.0)
    if not len(pairs):
        return 0
    i, j = pairs[:, 0], pairs[:, 1]
    meet, point = arcs.arc_crossings(a[i], b[i], a[j], b[j])
    share = vid[i][:, :, None] == vid[j][:, None, :]  # (P, 2, 2)
    shared = share.any(axis=(1, 2))
    # arcs sharing a vertex offend only when they leave it in the same direction (overlap)
    flat = np.argmax(share.reshape(len(i), 4), axis=1)
    pi, qj = (flat // 2)[:, None], (flat % 2)[:, None]
    origin = np.where(pi == 0, a[i], b[i])
    far_i = np.where(pi == 0, b[i], a[i])
    far_j = np.where(qj == 0, b[j], a[j])
    turn = np.abs(np.angle(np.exp(1j * (arcs.direction_angle(origin, far_i)
                                        - arcs.direction_angle(origin, far_j)))))
    bad = np.where(shared, turn < 1e-7, meet)
    seen = set()
    count = 0
    for k in np.flatnonzero(bad).tolist():
        li, lj = edges[int(edge[i[k]])]["line"], edges[int(edge[j[k]])]["line"]
        key = (min(li, lj), max(li, lj), tuple(np.round(point[k], 6)))
        if key in seen:
            continue
        seen.add(key)
        count += 1
        what = ("overlap" if shared[k] else "cross") if li != lj else "crosses itself"
        msg = (f"line {li} crosses itself at {_fmt_xyz(point[k])}" if li == lj else
               f"lines {min(li, lj)} and {max(li, lj)} {what} at {_fmt_xyz(point[k])} away from a "
               "junction; end lines where they meet")
        probs.append(problem(msg, field=f"lines.features[{min(li, lj)}].geometry",
                             position=_lonlat(point[k])))
    return count


# --------------------------------------------------------------------------------------------
# faces


def _next_half_edges(edges) -> np.ndarray:
    """For each half-edge (2e forward, 2e+1 backward) the next one around the face on its left.

    At the node where a half-edge ends, the next one is the outgoing half-edge met first turning
    clockwise from the way back (the sharpest left turn), with directions measured in the local
    east/north frame seen from outside the sphere.
    """
    origin = np.array([[e["nodes"][0], e["nodes"][1]] for e in edges]).ravel()
    at = np.concatenate([[e["xyz"][0], e["xyz"][-1]] for e in edges])
    toward = np.concatenate([[e["xyz"][1], e["xyz"][-2]] for e in edges])
    angle = arcs.direction_angle(at, toward)
    order = np.lexsort((angle, origin))
    pos = np.empty_like(order)
    pos[order] = np.arange(len(order))
    sorted_origin = origin[order]
    start = np.searchsorted(sorted_origin, sorted_origin, side="left")
    stop = np.searchsorted(sorted_origin, sorted_origin, side="right")
    twin = np.arange(len(origin)) ^ 1
    p = pos[twin]
    prev = np.where(p > start[p], p - 1, stop[p] - 1)
    return order[prev]


def _cycles(nxt: np.ndarray) -> list[list[int]]:
    """Cycles of a permutation (the faces), each starting at its smallest half-edge."""
    seen = np.zeros(len(nxt), dtype=bool)
    out = []
    for h in range(len(nxt)):  # half-edges of a network: thousands at most
        if seen[h]:
            continue
        cyc = []
        while not seen[h]:
            seen[h] = True
            cyc.append(h)
            h = int(nxt[h])
        out.append(cyc)
    return out


def _half_xyz(edges, h: int) -> np.ndarray:
    xyz = edges[h // 2]["xyz"]
    return xyz if h % 2 == 0 else xyz[::-1]


def _left_area_km2(ring: np.ndarray) -> float:
    """Area (km^2) of the region on the left of a closed ring of great-circle arcs, any size."""
    ref = sphere.normalize(ring.sum(axis=0))
    if not np.any(ref):
        ref = sphere.normalize(ring[0] + 0.5 * ring[len(ring) // 3])
    total = float(np.sum(sphere.spherical_triangle_area(ref, ring, np.roll(ring, -1, axis=0))))
    return (total % (4.0 * np.pi)) * _R**2


def _faces(edges, lines_props, nxt):
    faces = []
    for cyc in _cycles(nxt):
        ring = np.concatenate([_half_xyz(edges, h)[:-1] for h in cyc])
        names = {}
        for h in cyc:
            props = lines_props[edges[h // 2]["line"]]
            name = props.get("left" if h % 2 == 0 else "right")
            if name is not None:
                names.setdefault(name.strip(), []).append(
                    (edges[h // 2]["line"], "left" if h % 2 == 0 else "right"))
        centre = sphere.polygon_centroid_xyz(ring) if len(ring) >= 3 else ring[0]
        faces.append((tuple(cyc), names, ring, _left_area_km2(ring), tuple(_lonlat(centre))))
    return faces


def _name_faces(faces, edges, lines_props, probs: list):
    """One name per face; the outside face of a regional network. Returns (names, outside)."""
    out_names, outside = [], None
    owner: dict[str, int] = {}
    for k, (cyc, names, ring, area, centre) in enumerate(faces):
        lines = sorted({edges[h // 2]["line"] for h in cyc})
        shown = ", ".join(map(str, lines[:12])) + (" ..." if len(lines) > 12 else "")
        near = f"(lon {centre[0]:.4f}, lat {centre[1]:.4f})"
        if len(names) > 1:
            detail = "; ".join(f"{n!r} from line {v[0][0]} ({v[0][1]})" for n, v in names.items())
            probs.append(problem(f"the face near {near} bounded by lines {shown} has "
                                 f"{len(names)} names: {detail}",
                                 field=f"lines.features[{next(iter(names.values()))[0][0]}].properties",
                                 position=list(centre)))
            out_names.append(None)
            continue
        if not names:
            free = all(lines_props[edges[h // 2]["line"]]["kind"] == "free" for h in cyc)
            if free and outside is None:
                outside = k
            else:
                probs.append(problem(f"the face near {near} bounded by lines {shown} has no name: "
                                     "give 'left' or 'right' on one of its lines",
                                     field=f"lines.features[{lines[0]}].properties",
                                     position=list(centre)))
            out_names.append(None)
            continue
        name = next(iter(names))
        if name in owner:
            other = faces[owner[name]][4]
            probs.append(problem(f"the plate name {name!r} is on two faces: near {near} and near "
                                 f"(lon {other[0]:.4f}, lat {other[1]:.4f}); each plate is one face",
                                 field=f"lines.features[{names[name][0][0]}].properties."
                                       f"{names[name][0][1]}", position=list(centre)))
        owner[name] = k
        out_names.append(name)
    return out_names, outside


def _side_two_faces(edges, nxt, cycles_of, probs: list) -> None:
    """Report line pieces with the same face on both sides (they bound nothing)."""
    same = cycles_of[0::2] == cycles_of[1::2]
    for e in np.flatnonzero(same).tolist():
        mid = edges[e]["xyz"][len(edges[e]["xyz"]) // 2]
        probs.append(problem(f"line {edges[e]['line']} has the same face on both sides near "
                             f"{_fmt_xyz(mid)}: it separates no plates",
                             field=f"lines.features[{edges[e]['line']}]", position=_lonlat(mid)))


# --------------------------------------------------------------------------------------------
# public


def _check_top(document, probs: list):
    if not isinstance(document, dict):
        probs.append(problem(f"a network document must be a JSON object, got {type(document).__name__}"))
        return None, []
    for key in document:
        if key not in _TOP_FIELDS:
            probs.append(problem(f"unknown field {key!r}; expected {', '.join(_TOP_FIELDS)}",
                                 field=str(key)))
    name = document.get("name")
    if not isinstance(name, str) or not name.strip():
        probs.append(problem(f"name must be a non-empty string, got {name!r}", field="name"))
        name = None
    lines = document.get("lines")
    if not isinstance(lines, dict) or lines.get("type") != "FeatureCollection" or not isinstance(
            lines.get("features"), list):
        probs.append(problem("lines must be a GeoJSON FeatureCollection of LineString features",
                             field="lines"))
        return name, []
    if not lines["features"]:
        probs.append(problem("the network needs at least one line", field="lines.features"))
    return name, lines["features"]


def check_network(document) -> Network:
    """Check a network document and find its plates (faces).

    Raises
    ------
    ModelValidationError
        Listing every problem found, each with its ``field`` and, for geometric problems, its
        ``position`` [lon, lat].

    Examples
    --------
    Two ridges from pole to pole along the meridians 0 and 180 split the sphere into an
    eastern and a western hemisphere:

    >>> line = lambda coords, **p: {"type": "Feature", "properties": p,
    ...     "geometry": {"type": "LineString", "coordinates": coords}}
    >>> doc = {"name": "toy", "lines": {"type": "FeatureCollection", "features": [
    ...     line([[0, 90], [0, 0], [0, -90]], kind="ridge", age_myr=50, left="East", right="West"),
    ...     line([[180, 90], [180, 0], [180, -90]], kind="ridge", age_myr=50, left="West", right="East"),
    ... ]}}
    >>> net = check_network(doc)
    >>> sorted(net.plates), net.outside, net.components
    (['East', 'West'], None, 1)
    >>> [round(f.area_km2 / (2 * np.pi * 6371.0**2), 12) for f in net.faces]
    [1.0, 1.0]
    """
    probs: list = []
    name, features = _check_top(document, probs)
    checked = [_check_line(i, f, probs) for i, f in enumerate(features)]
    defaults, plates = _check_params(document if isinstance(document, dict) else {}, probs)
    if probs or not checked:
        raise ModelValidationError(_summary(probs), probs)
    props = [c[1] for c in checked]
    lines = [sphere.lonlat_to_xyz(c[0][:, 0], c[0][:, 1]) for c in checked]
    tol = JUNCTION_TOLERANCE_KM / _R
    end_node, node_xyz, cuts = _junctions(lines, tol)
    edges = _pieces(lines, end_node, node_xyz, cuts)
    if not edges:
        probs.append(problem("the lines bound no face: each closes on itself within "
                             f"{JUNCTION_TOLERANCE_KM:g} km or folds back", field="lines.features"))
        raise ModelValidationError(_summary(probs), probs)
    n_dangling = _dangling(edges, node_xyz, lines, tol, probs)
    _crossings(edges, probs)
    comps = _clusters(len(node_xyz), np.array([e["nodes"] for e in edges]))
    used = np.unique(np.array([e["nodes"] for e in edges]).ravel())
    n_comp = len(np.unique(comps[used]))
    if n_comp > 1:
        sizes = np.bincount(comps[used])
        probs.append(problem(f"the network falls into {n_comp} separate pieces (a plate with a "
                             "hole is not supported); connect them with lines",
                             field="lines.features", pieces=int((sizes > 0).sum())))
    if probs:
        raise ModelValidationError(_summary(probs), probs)
    nxt = _next_half_edges(edges)
    raw_faces = _faces(edges, props, nxt)
    face_of = np.empty(len(nxt), dtype=np.int64)
    for k, f in enumerate(raw_faces):
        face_of[list(f[0])] = k
    if not n_dangling:
        _side_two_faces(edges, nxt, face_of, probs)
    names, outside = _name_faces(raw_faces, edges, props, probs)
    known = set(n for n in names if n)
    for pname in plates:
        if pname not in known:
            probs.append(problem(f"no face of the network is named {pname!r}", field=f"plates.{pname}"))
    if probs:
        raise ModelValidationError(_summary(probs), probs)
    faces = tuple(Face(half_edges=f[0], name=n, ring_xyz=f[2], area_km2=f[3], centre_lonlat=f[4])
                  for f, n in zip(raw_faces, names))
    return Network(name=name.strip(), document=document, nodes_xyz=node_xyz, edges=tuple(edges),
                   faces=faces, outside=outside, components=n_comp)


def _summary(probs: list) -> str:
    n = len(probs)
    return f"invalid network: {n} problem{'s' if n != 1 else ''}"


def _segment(props: dict, side: str, other: str | None, line: int) -> dict:
    """Plate segment properties for the plate on ``side`` of a line."""
    kind = props["kind"]
    out = {k: v for k, v in props.items() if k not in _NETWORK_ONLY}
    if kind == "subduction" and props["sinks"] != side:
        out = {k: v for k, v in out.items() if k not in _SLAB_ONLY}
        kind = "overriding"
        out["group"] = props.get("overriding_group", "overriding")
        if props.get("overriding_force_n_per_m") is not None:
            out["force_n_per_m"] = props["overriding_force_n_per_m"]
    out["kind"] = kind
    out["line"] = line
    out["neighbour"] = other
    return out


def _merge_tables(defaults: dict, own: dict) -> dict:
    doc = {}
    for key in _TABLES:
        table = dict(defaults.get(key) or {}) if isinstance(defaults.get(key) or {}, dict) else {}
        mine = own.get(key)
        if isinstance(mine, dict):
            table.update(mine)
        if table:
            doc[key] = table
    for key in ("provinces", "description"):
        if own.get(key) is not None:
            doc[key] = own[key]
        elif key == "provinces" and defaults.get(key) is not None:
            doc[key] = defaults[key]
    return doc


def plate_documents(network: Network) -> dict[str, dict]:
    """Plate model documents (the ``stressmap.model.plate`` format) of every plate, by name.

    Each document's ring is the face traced with the plate on the left, and its boundary
    features are the line pieces in that order, so ``region: "left"`` makes the plate the
    region on the left of the ring whatever its size. Each segment carries ``line`` (the index
    of the network line it comes from) and ``neighbour`` (the plate across it, None outside).
    """
    doc = network.document
    defaults = doc.get("defaults") or {}
    plates = doc.get("plates") or {}
    props = [f["properties"] for f in doc["lines"]["features"]]
    face_of = {}
    for k, f in enumerate(network.faces):
        for h in f.half_edges:
            face_of[h] = k
    out = {}
    for face in network.faces:
        if face.name is None:
            continue
        features = []
        for h in face.half_edges:
            edge = network.edges[h // 2]
            side = "left" if h % 2 == 0 else "right"
            other = network.faces[face_of[h ^ 1]].name
            xyz = _half_xyz(network.edges, h)
            lon, lat = sphere.xyz_to_lonlat(xyz)
            features.append({"type": "Feature",
                             "properties": _segment(props[edge["line"]], side, other, edge["line"]),
                             "geometry": {"type": "LineString",
                                          "coordinates": np.round(np.column_stack([lon, lat]), 10).tolist()}})
        plate = {"name": face.name,
                 "description": f"plate {face.name} of the network {network.name}",
                 "region": "left",
                 "boundary": {"type": "FeatureCollection", "features": features}}
        plate.update(_merge_tables(defaults, plates.get(face.name) or {}))
        out[face.name] = plate
    return out


def document_key(document: dict, salt: str = "") -> str:
    """Content hash (sha256 hex) of a JSON document: canonical JSON, keys sorted, plus ``salt``.

    Examples
    --------
    >>> document_key({"b": 1, "a": [1.0, 2]}) == document_key({"a": [1.0, 2], "b": 1})
    True
    >>> document_key({"a": 1}) == document_key({"a": 2})
    False
    """
    canonical = json.dumps(document, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256((salt + canonical).encode("utf-8")).hexdigest()
