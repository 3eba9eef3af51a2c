"""A site screening as GIS layers and a plain table (no paths).

Three layers, one geometry kind each, so every GIS reader keeps them apart:

- ``traces``: one LineString per straight segment of a fault trace, with the plane's results;
- ``planes``: one Point per strike/dip plane (given in the request or as a point fault), at its
  location, or at the site when it has none (``at_site`` true);
- ``sites``: one Point, the site, with its scalar results (Sv, Pp, SHmax, Shmin, ... and sources).

The CSV table holds every plane and segment (ranked) with ``lon``/``lat`` (a segment's midpoint,
a plane's location or the site), so it opens as a point layer; the site results and the caution
go in the metadata (:func:`screen_meta`).
"""

from __future__ import annotations

import numpy as np

from stressmap.analyses.sitescreen import result_json
from stressmap.formats.geojson import feature_collection, round_coord, round_number
from stressmap.formats.table import frame_csv, frame_csvt

__all__ = ["LAYERS", "screen_layers", "screen_frame", "screen_csv", "screen_csvt", "screen_meta"]

#: Layer names of a screening, in writing order.
LAYERS = ("traces", "planes", "sites")

_SITE_KEYS = ("depth_km", "sv_mpa", "pp_mpa", "shmax_mpa", "shmax_lower_mpa", "shmax_upper_mpa",
              "shmin_mpa", "shmin_lower_mpa", "shmin_upper_mpa", "shmax_azimuth_deg", "regime",
              "shape_ratio", "friction", "cohesion_mpa")


def screen_meta(result) -> dict:
    """Caution, site results, sources, notes and conventions: the metadata of every output."""
    doc = result_json(result)
    doc.pop("planes")
    doc.pop("faults")
    return doc


def _props(rec: dict) -> dict:
    return {k: round_number(v) for k, v in rec.items()}


def _locations(result, records) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """lon, lat (F,) of each record (segment midpoint, plane location or site) and at_site (F,)."""
    geom = np.asarray(result.plane_geometry, dtype=float).reshape(len(records), -1, 2)
    is_trace = np.array([r["kind"] == "trace segment" for r in records], dtype=bool)
    xy = np.where(is_trace[:, None], geom.mean(axis=1) if geom.size else geom[:, 0], geom[:, 0])
    at_site = ~is_trace & ~np.isfinite(xy).all(axis=1)
    xy[at_site] = [result.site["lon"], result.site["lat"]]
    return xy[:, 0], xy[:, 1], at_site


def screen_layers(result, meta: dict | None = None) -> dict:
    """``{"traces": FC, "planes": FC, "sites": FC}`` (see the module docstring).

    ``meta`` (default :func:`screen_meta`) goes in each collection's top-level members.
    """
    meta = screen_meta(result) if meta is None else meta
    doc = result_json(result)
    records = doc["planes"]
    traces, planes = [], []
    if records:
        lon, lat, at_site = _locations(result, records)
        geom = np.asarray(result.plane_geometry, dtype=float)
        for i, rec in enumerate(records):  # serialisation of F records (no numerics here)
            if rec["kind"] == "trace segment":
                coords = round_coord(geom[i]).tolist()
                traces.append({"type": "Feature", "properties": _props(rec),
                               "geometry": {"type": "LineString", "coordinates": coords}})
            else:
                props = _props(rec) | {"at_site": bool(at_site[i])}
                planes.append({"type": "Feature", "properties": props, "geometry": {
                    "type": "Point", "coordinates": [round_coord(lon[i]), round_coord(lat[i])]}})
    site = {k: round_number(doc.get(k)) for k in _SITE_KEYS if k in doc}
    site["sources"] = doc.get("sources")
    sites = [{"type": "Feature", "properties": site, "geometry": {
        "type": "Point", "coordinates": [round_coord(doc["site"]["lon"]),
                                         round_coord(doc["site"]["lat"])]}}]
    return {"traces": feature_collection(traces, "traces", meta),
            "planes": feature_collection(planes, "planes", meta),
            "sites": feature_collection(sites, "sites", meta)}


def screen_frame(result):
    """Every plane and trace segment as a DataFrame with lon/lat first (ranked as screened)."""
    import pandas as pd

    records = result_json(result)["planes"]
    frame = pd.DataFrame.from_records(records)
    if not records:
        return pd.DataFrame({"lon": [], "lat": []})
    lon, lat, at_site = _locations(result, records)
    frame.insert(0, "at_site", at_site)
    frame.insert(0, "lat", lat)
    frame.insert(0, "lon", lon)
    return frame


def screen_csv(result) -> str:
    """The table of :func:`screen_frame` as CSV (header first, booleans true/false)."""
    return frame_csv(screen_frame(result))


def screen_csvt(result) -> str:
    """GDAL CSVT sidecar line for :func:`screen_csv`."""
    return frame_csvt(screen_frame(result))
