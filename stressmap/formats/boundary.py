"""Boundary segments with their edge forces (:func:`stressmap.model.boundary.segment_forces`) as a
GeoJSON FeatureCollection of LineStrings (RFC 7946), one feature per segment in document order."""

from __future__ import annotations

from stressmap.model.boundary import SIGN_CONVENTION

__all__ = ["boundary_geojson"]


def boundary_geojson(segments: list[dict], meta: dict | None = None) -> dict:
    """FeatureCollection of the segment records; ``meta`` members lead the collection."""
    features = [{
        "type": "Feature",
        "geometry": {"type": "LineString", "coordinates": seg["lonlat"].tolist()},
        "properties": {k: v for k, v in seg.items() if k != "lonlat"},
    } for seg in segments]
    return {"type": "FeatureCollection", **(meta or {}), "sign_convention": SIGN_CONVENTION,
            "features": features}
