"""Edge forces of a built model per boundary segment: kinds, line forces (N/m) and their vectors.

Each segment's line force comes from the force laws for its document properties
(:func:`stressmap.physics.forces.segment_force_n_per_m`, the same call the model build makes), times
its load group's weight. The vector is given at the midpoint of the segment's middle arc, in the
local (east, north) frame: the normal part along the inward normal (positive pushes into the plate),
a transform's shear part along the ring direction with the sign its ``sense`` gives
(:data:`stressmap.fem.loads.SENSES`). With ``ridge_push.mode = "distributed"`` ridge push acts as a
body force through the oceanic lithosphere, so ridge segments report zero edge force and say so.

Layer: model (core). Serialised as GeoJSON by :func:`stressmap.formats.boundary.boundary_geojson`.
"""

from __future__ import annotations

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.fem.loads import SENSES, edge_geometry
from stressmap.geo import sphere
from stressmap.model.plate import parse_plate
from stressmap.model.predict import resolve_weights
from stressmap.physics import forces

__all__ = ["SIGN_CONVENTION", "segment_forces"]

SIGN_CONVENTION = ("normal force positive pushes into the plate; shear along the ring direction "
                   "(interior on the left); vectors at anchor_lon/anchor_lat")


def _applied(seg, mode: str) -> tuple[float, str]:
    """Unweighted line force (N/m) of one segment and how it is applied (``mode``: the
    document's ``ridge_push.mode``)."""
    if seg.kind == "fixed":
        return 0.0, "displacement held at zero"
    if seg.kind == "free":
        return 0.0, "none"
    if seg.kind == "ridge" and mode == "distributed" and seg.properties.get("force_n_per_m") is None:
        return 0.0, "body force through the oceanic lithosphere"
    if seg.kind == "ridge" and mode == "gpe":
        return 0.0, "GPE of the oceanic columns (the GPE load group)"
    return float(forces.segment_force_n_per_m(seg.kind, seg.properties)), "edge"


def _segment_arcs(arc_segment: np.ndarray, seg) -> np.ndarray:
    """Indices of the ring arcs of one segment, in ring order from the segment's start."""
    on = np.flatnonzero(arc_segment == seg.index)
    # the arcs may wrap past the ring's first vertex
    return np.roll(on, -int(np.flatnonzero(on == seg.start)[0])) if seg.start in on else on


def segment_forces(model, weights=None) -> list[dict]:
    """One record per boundary segment (document order) with its line and applied force.

    Parameters
    ----------
    model : BuiltModel
    weights : dict, optional
        Load group -> weight (defaults as :func:`stressmap.model.predict.resolve_weights`).

    Returns
    -------
    list of dict
        ``lonlat`` ((k, 2) degrees, the segment's vertices) and the properties ``index``, ``name``,
        ``kind``, ``group``, ``weight``, ``applied_as``, ``length_km``, ``normal_force_n_per_m``,
        ``shear_force_n_per_m``, ``force_east_n_per_m``, ``force_north_n_per_m``,
        ``force_magnitude_n_per_m``, ``force_azimuth_deg`` (clockwise from north, None for no
        force), ``anchor_lon``, ``anchor_lat``.
    """
    plate = parse_plate(model.definition)
    w = dict(zip(model.groups, resolve_weights(model, weights).tolist()))
    ring = np.asarray(plate.ring_xyz, dtype=float)
    n = ring.shape[0]
    arcs = np.column_stack([np.arange(n), (np.arange(n) + 1) % n])
    length, tangent, inward = edge_geometry(ring, arcs)
    mid = ring[arcs[:, 0]] + ring[arcs[:, 1]]
    mid /= np.linalg.norm(mid, axis=1, keepdims=True)
    east, north = sphere.local_frame(mid)
    arc_segment = np.asarray(plate.arc_segment)
    mode = plate.ridge_push.get("mode")
    ring_ll = np.asarray(plate.ring_lonlat, dtype=float)
    out = []
    for seg in plate.segments:  # a handful of segments
        on = _segment_arcs(arc_segment, seg)
        cum = np.cumsum(length[on])
        pick = on[int(np.searchsorted(cum, 0.5 * cum[-1]))]
        value, applied = _applied(seg, mode)
        weight = 0.0 if seg.kind in ("free", "fixed") else float(w.get(seg.group, 0.0))
        sense = SENSES[seg.properties.get("sense", "dextral")] if seg.kind == "transform" else 0
        shear = sense * value * weight
        normal = 0.0 if seg.kind == "transform" else value * weight
        vec = normal * inward[pick] + shear * tangent[pick]
        fe, fn = float(vec @ east[pick]), float(vec @ north[pick])
        mlon, mlat = sphere.xyz_to_lonlat(mid[pick])
        out.append({
            "lonlat": ring_ll[np.append(on, (on[-1] + 1) % n)],
            "index": seg.index, "name": str(seg.properties.get("name", "")), "kind": seg.kind,
            "group": seg.group, "weight": weight, "applied_as": applied,
            "length_km": float(length[on].sum() * EARTH_RADIUS_KM),
            "normal_force_n_per_m": float(normal), "shear_force_n_per_m": float(shear),
            "force_east_n_per_m": fe, "force_north_n_per_m": fn,
            "force_magnitude_n_per_m": float(np.hypot(fe, fn)),
            "force_azimuth_deg": float(np.degrees(np.arctan2(fe, fn)) % 360.0) if (fe or fn) else None,
            "anchor_lon": float(mlon), "anchor_lat": float(mlat),
        })
    return out
