"""The plates of a checked network as GeoJSON (one serialiser for the CLI and the service)."""

from __future__ import annotations

import numpy as np

from stressmap.geo import sphere

__all__ = ["plates_geojson"]


def plates_geojson(net, docs: dict, keys: dict) -> dict:
    """A FeatureCollection of one Polygon per plate of ``net`` (a checked Network).

    Each ring runs counter-clockwise seen from outside the sphere (the RFC 7946 right-hand
    rule), its arcs are great circles and it is not cut at the antimeridian; properties:
    ``plate``, ``area_km2``, ``neighbours`` (plates across its boundary), ``segments`` (boundary
    segments of its derived document) and ``document_key`` (content hash its build is cached by).
    """
    features = []
    for face in net.faces:
        if face.name is None:
            continue
        lon, lat = sphere.xyz_to_lonlat(face.ring_xyz)
        ring = np.round(np.column_stack([lon, lat]), 8)
        feats = docs[face.name]["boundary"]["features"]
        features.append({
            "type": "Feature",
            "properties": {"plate": face.name, "area_km2": round(float(face.area_km2), 3),
                           "neighbours": sorted({f["properties"]["neighbour"] for f in feats
                                                 if f["properties"]["neighbour"] is not None}),
                           "segments": len(feats), "document_key": keys[face.name]},
            "geometry": {"type": "Polygon", "coordinates": [np.vstack([ring, ring[:1]]).tolist()]},
        })
    return {"type": "FeatureCollection", "name": net.name, "features": features}
