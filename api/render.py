"""Serialising prediction Datasets into HTTP responses (GeoJSON, CSV, netCDF, PNG).

Every spatial response carries the caution, the model id and its build time: GeoJSON as
top-level members, CSV in ``X-Stressmap-*`` response headers (the body is a plain table), netCDF as global attributes, PNG in the
caption. The serialisers themselves are :mod:`stressmap.formats.export` (one GeoJSON writer for the CLI,
the Python API and the service) and :func:`stressmap.plot.maps.shmax_map`.
"""

from __future__ import annotations

import json

import numpy as np
from flask import Response, current_app

from stressmap.constants import CAUTION
from stressmap.formats import export
from stressmap.formats.table import metadata_headers
from stressmap.model import plate_outline
from stressmap.plot.maps import shmax_map

__all__ = ["output_meta", "render", "MIMETYPES"]

MIMETYPES = {
    "geojson": "application/geo+json",
    "csv": "text/csv; charset=utf-8",
    "netcdf": "application/x-netcdf",
    "png": "image/png",
}
_SUFFIX = {"geojson": "geojson", "csv": "csv", "netcdf": "nc", "png": "png"}


def output_meta(meta: dict, weights: dict | None = None) -> dict:
    """The members every spatial output carries (caution first)."""
    out = {
        "caution": CAUTION,
        "model_id": meta["id"],
        "model_name": meta.get("name"),
        "build_time": meta.get("build_time"),
    }
    if weights is not None:
        out["weights"] = weights
    return out


def _flat_meta(meta: dict) -> dict:
    return {k: (json.dumps(v, sort_keys=True) if isinstance(v, (dict, list)) else v)
            for k, v in meta.items()}


def _flatten(ds):
    """lon, lat, azimuth, regime index (and inside) of a point or grid Dataset, as 1-D arrays."""
    if "point" in ds.dims:
        get = lambda name: np.asarray(ds[name].values).ravel()  # noqa: E731
        return get("lon"), get("lat"), get("shmax_azimuth_deg"), get("regime_index")
    lon2, lat2 = np.meshgrid(np.asarray(ds["lon"].values), np.asarray(ds["lat"].values))
    az = np.asarray(ds["shmax_azimuth_deg"].transpose("lat", "lon").values).ravel()
    ri = np.asarray(ds["regime_index"].transpose("lat", "lon").values).ravel()
    return lon2.ravel(), lat2.ravel(), az, ri


def render(ds, fmt: str, meta: dict, *, grid: bool, model=None, extra_properties=None,
           stem: str = "stressmap") -> Response:
    """One prediction Dataset as a response in ``fmt`` (geojson, csv, netcdf, png)."""

    headers = {}
    if fmt == "geojson":
        doc = (export.grid_geojson(ds, meta=meta, name=stem) if grid  # name: the GIS layer name
               else export.points_geojson(ds, extra_properties=extra_properties, meta=meta,
                                          name=stem))
        body = current_app.json.dumps(doc)
    elif fmt == "csv":
        body = (export.grid_csv(ds) if grid
                else export.points_csv(ds, extra_properties=extra_properties))
        headers.update(metadata_headers(meta))  # a CSV body is a plain table: metadata in headers
        headers["Content-Disposition"] = f'attachment; filename="{stem}.csv"'
    elif fmt == "netcdf":
        body = export.netcdf_bytes(ds, _flat_meta(meta))
        headers["Content-Disposition"] = f'attachment; filename="{stem}.nc"'
    elif fmt == "png":

        lon, lat, az, ri = _flatten(ds)
        outline = plate_outline(model) if model is not None else None
        caption = (f"Model {meta['model_id']} - {meta.get('model_name')} - built "
                   f"{meta.get('build_time')}")
        if meta.get("weights"):
            caption += "; weights " + ", ".join(f"{k} {v:g}" for k, v in meta["weights"].items())
        extent = None
        if grid:  # the requested window (grid nodes span it)
            extent = (float(np.min(lon)), float(np.min(lat)), float(np.max(lon)), float(np.max(lat)))
        body = shmax_map(lon, lat, az, ri, outline, title=f"SHmax and regime: {meta.get('model_name')}",
                         caption=caption, extent=extent)
        headers["Content-Disposition"] = f'inline; filename="{stem}.png"'
    else:  # pragma: no cover - parse_format guards this
        raise ValueError(fmt)
    return Response(body, status=200, mimetype=None, content_type=MIMETYPES[fmt], headers=headers)
