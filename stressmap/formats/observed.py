"""The gridded observed SHmax field as GeoJSON points and CF netCDF bytes (no paths)."""

from __future__ import annotations

import numpy as np

from stressmap.analyses.observed import STATUS
from stressmap.constants import CAUTION
from stressmap.formats.export import netcdf_bytes

__all__ = ["observed_geojson", "observed_netcdf_bytes"]


def observed_geojson(ds, meta: dict | None = None, with_empty: bool = False) -> dict:
    """Grid nodes as GeoJSON Point features (nodes without indicators left out unless ``with_empty``).

    Properties: ``shmax_azimuth_deg`` (null where rejected), ``count``, ``effective_count``,
    ``dispersion_deg``, ``halfwidth_deg``, ``mean_resultant_length``, ``status`` (words). Top-level members: ``caution`` and the
    smoothing parameters, plus ``meta``.
    """
    lon2, lat2 = np.meshgrid(ds["lon"].values, ds["lat"].values)
    flat = {k: ds[k].values.ravel() for k in ("shmax_azimuth_deg", "count", "effective_count",
                                                "dispersion_deg", "halfwidth_deg",
                                                "mean_resultant_length", "status")}
    idx = np.arange(lon2.size) if with_empty else np.flatnonzero(flat["count"] > 0)

    def num(v):
        v = float(v)
        return v if np.isfinite(v) else None

    lon_f = np.mod(lon2.ravel() + 180.0, 360.0) - 180.0
    feats = [
        {
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [float(lon_f[i]), float(lat2.ravel()[i])]},
            "properties": {
                "shmax_azimuth_deg": num(flat["shmax_azimuth_deg"][i]),
                "count": int(flat["count"][i]),
                "effective_count": num(flat["effective_count"][i]),
                "dispersion_deg": num(flat["dispersion_deg"][i]),
                "halfwidth_deg": num(flat["halfwidth_deg"][i]),
                "mean_resultant_length": num(flat["mean_resultant_length"][i]),
                "status": STATUS[int(flat["status"][i])],
            },
        }
        for i in idx
    ]
    out = {"type": "FeatureCollection", "caution": CAUTION}
    out.update({k: ds.attrs[k] for k in ("radius_km", "spacing_km", "min_count", "max_halfwidth_deg")
                if k in ds.attrs})
    out.update(meta or {})
    out["features"] = feats
    return out


def observed_netcdf_bytes(ds, meta: dict | None = None) -> bytes:
    """The grid as CF netCDF-4 bytes (via :func:`stressmap.formats.export.netcdf_bytes`)."""
    return netcdf_bytes(ds, meta)
