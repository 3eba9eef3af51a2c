"""Boundary segments of a built model with the edge forces applied to them, as GeoJSON.

Each segment's line force (N/m) comes from the force laws for its document properties
(:func:`stressmap.physics.forces.segment_force_n_per_m`, the same call the model build makes), times its
load group's weight. The vector is given at the midpoint of the segment's middle arc, in the
local (east, north) frame: the normal part along the inward normal (positive pushes into the
plate), a transform's shear part along the ring direction with the sign its ``sense`` gives
(:data:`stressmap.fem.loads.SENSES`). With ``ridge_push.mode = "distributed"`` ridge push acts as a
body force through the oceanic lithosphere, so ridge segments report zero edge force and say so.
"""

from __future__ import annotations

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.fem.loads import SENSES, edge_geometry
from stressmap.geo import sphere
from stressmap.model import resolve_weights
from stressmap.model.plate import parse_plate
from stressmap.physics import forces

__all__ = ["boundary_forces"]


def boundary_forces(model, weights=None) -> dict:
    """A FeatureCollection of LineString features, one per boundary segment (document order)."""

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
    distributed = plate.ridge_push.get("mode") == "distributed"
    ring_ll = np.asarray(plate.ring_lonlat, dtype=float)
    features = []
    for seg in plate.segments:  # a handful of segments
        on = np.flatnonzero(arc_segment == seg.index)
        # ring order from the segment's start (the arcs may wrap past the ring's first vertex)
        on = np.roll(on, -int(np.flatnonzero(on == seg.start)[0])) if seg.start in on else on
        cum = np.cumsum(length[on])
        pick = on[int(np.searchsorted(cum, 0.5 * cum[-1]))]
        weight = float(w.get(seg.group, 0.0)) if seg.kind not in ("free", "fixed") else 0.0
        applied = "edge"
        if seg.kind in ("free", "fixed"):
            value, applied = 0.0, ("displacement held at zero" if seg.kind == "fixed" else "none")
        elif seg.kind == "ridge" and distributed and seg.properties.get("force_n_per_m") is None:
            value, applied = 0.0, "body force through the oceanic lithosphere"
        elif seg.kind == "ridge" and plate.ridge_push.get("mode") == "gpe":
            value, applied = 0.0, "GPE of the oceanic columns (the GPE load group)"
        else:
            value = float(forces.segment_force_n_per_m(seg.kind, seg.properties))
        normal = shear = 0.0
        if seg.kind == "transform":
            shear = SENSES[seg.properties.get("sense", "dextral")] * value * weight
        else:
            normal = value * weight
        vec = normal * inward[pick] + shear * tangent[pick]
        fe, fn = float(vec @ east[pick]), float(vec @ north[pick])
        mlon, mlat = sphere.xyz_to_lonlat(mid[pick])
        idx = np.append(on, (on[-1] + 1) % n)
        coords = ring_ll[idx]
        features.append({
            "type": "Feature",
            "geometry": {"type": "LineString", "coordinates": coords.tolist()},
            "properties": {
                "index": seg.index,
                "name": str(seg.properties.get("name", "")),
                "kind": seg.kind,
                "group": seg.group,
                "weight": weight,
                "applied_as": applied,
                "length_km": float(length[on].sum() * EARTH_RADIUS_KM),
                "normal_force_n_per_m": normal,
                "shear_force_n_per_m": shear,
                "force_east_n_per_m": fe,
                "force_north_n_per_m": fn,
                "force_magnitude_n_per_m": float(np.hypot(fe, fn)),
                "force_azimuth_deg": float(np.degrees(np.arctan2(fe, fn)) % 360.0)
                if (fe or fn) else None,
                "anchor_lon": float(mlon),
                "anchor_lat": float(mlat),
            },
        })
    return {"type": "FeatureCollection",
            "sign_convention": "normal force positive pushes into the plate; shear along the ring "
                               "direction (interior on the left); vectors at anchor_lon/anchor_lat",
            "features": features}
