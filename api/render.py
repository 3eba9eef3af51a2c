"""The one renderer of the service: every successful body leaves through :func:`respond`.

:func:`respond` takes what a view computed (a JSON-able document, CSV text, netCDF or PNG bytes)
and its format, and sets the media type, ``Content-Disposition`` and the caution header of
pictures. :func:`render` turns a prediction Dataset into one of those payloads first, through the
serialisers of :mod:`stressmap.formats` (one GeoJSON writer for the CLI, the Python API and the
service) and :func:`stressmap.plot.maps.shmax_map`.

Every spatial response carries the caution, the model id and its build time: GeoJSON as
top-level members, CSV in ``X-Stressmap-*`` response headers (the body is a plain table; pass
``meta`` to :func:`respond`), netCDF as global attributes, PNG in the caption (and the
``X-Stressmap-Caution`` header). Text drawn into pictures goes through
:func:`picture_text` (plain text, bounded length), so a model name cannot make a picture
arbitrarily large; :func:`init_app` turns matplotlib's mathtext off for the service, so ``$`` in
any client text is drawn as it is.
"""

from __future__ import annotations

import json

import matplotlib
import numpy as np
from flask import Response, current_app

from stressmap.constants import CAUTION
from stressmap.formats import export
from stressmap.formats.table import metadata_headers
from stressmap.model import plate_outline
from stressmap.plot.maps import shmax_map

__all__ = [
    "MAX_PICTURE_TEXT",
    "MIMETYPES",
    "init_app",
    "output_meta",
    "picture_text",
    "render",
    "respond",
]

MIMETYPES = {
    "json": "application/json",
    "geojson": "application/geo+json",
    "csv": "text/csv; charset=utf-8",
    "netcdf": "application/x-netcdf",
    "png": "image/png",
}
_SUFFIX = {"json": "json", "geojson": "geojson", "csv": "csv", "netcdf": "nc", "png": "png"}
#: Characters of one caption or title drawn into a picture.
MAX_PICTURE_TEXT = 160


def picture_text(text, limit: int = MAX_PICTURE_TEXT) -> str:
    """``text`` for a picture: control characters dropped, at most ``limit`` characters (an
    ellipsis marks a cut). ``$`` needs no escape: :func:`init_app` turns mathtext off.

    Examples
    --------
    >>> picture_text("a $b_{$ plate" + chr(27))
    'a $b_{$ plate'
    >>> len(picture_text("x" * 1000))
    160
    """
    text = "".join(ch for ch in str(text) if ch.isprintable())
    return text[: limit - 1] + "\u2026" if len(text) > limit else text


def init_app(app) -> None:
    """Draw client text in pictures as plain text: matplotlib reads ``$...$`` as mathtext, so a
    model, plane or fault name holding ``$\\frac{$`` would break every picture that shows it.
    The package's own pictures use no mathtext. Process-wide (matplotlib's rcParams)."""
    matplotlib.rcParams["text.parse_math"] = False


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
        get = lambda name: np.asarray(ds[name].values).ravel()
        return get("lon"), get("lat"), get("shmax_azimuth_deg"), get("regime_index")
    lon2, lat2 = np.meshgrid(np.asarray(ds["lon"].values), np.asarray(ds["lat"].values))
    az = np.asarray(ds["shmax_azimuth_deg"].transpose("lat", "lon").values).ravel()
    ri = np.asarray(ds["regime_index"].transpose("lat", "lon").values).ravel()
    return lon2.ravel(), lat2.ravel(), az, ri


def _png(ds, meta: dict, grid: bool, model) -> bytes:
    lon, lat, az, ri = _flatten(ds)
    outline = plate_outline(model) if model is not None else None
    caption = (f"Model {meta['model_id']} - {picture_text(meta.get('model_name'), 80)} - built "
               f"{meta.get('build_time')}")
    if meta.get("weights"):
        caption += picture_text("; weights " + ", ".join(
            f"{k} {v:g}" for k, v in meta["weights"].items()))
    extent = None
    if grid:  # the requested window (grid nodes span it)
        extent = (float(np.min(lon)), float(np.min(lat)), float(np.max(lon)), float(np.max(lat)))
    return shmax_map(lon, lat, az, ri, outline,
                     title=f"SHmax and regime: {picture_text(meta.get('model_name'), 80)}",
                     caption=caption, extent=extent)


def render(ds, fmt: str, meta: dict, *, grid: bool, model=None, extra_properties=None,
           stem: str = "stressmap"):
    """One prediction Dataset as the payload of ``fmt`` (geojson, csv, netcdf, png), ready for
    :func:`respond` (a document for GeoJSON, text for CSV, bytes otherwise)."""
    if fmt == "geojson":
        return (export.grid_geojson(ds, meta=meta, name=stem) if grid  # name: the GIS layer name
                else export.points_geojson(ds, extra_properties=extra_properties, meta=meta,
                                           name=stem))
    if fmt == "csv":  # a plain table; its metadata travel in headers (respond(..., meta=...))
        return (export.grid_csv(ds) if grid
                else export.points_csv(ds, extra_properties=extra_properties))
    if fmt == "netcdf":
        return export.netcdf_bytes(ds, _flat_meta(meta))
    if fmt == "png":
        return _png(ds, meta, grid, model)
    raise ValueError(fmt)  # pragma: no cover - requests.parse_format guards this


def respond(payload, fmt: str, *, stem: str | None = None, status: int = 200,
            headers: dict | None = None, caution_header: bool | None = None,
            meta: dict | None = None) -> Response:
    """The response for a computed ``payload`` in ``fmt`` (json, geojson, csv, netcdf, png).

    JSON and GeoJSON documents are written by the app's JSON provider (numpy types, no NaN);
    CSV, netCDF and PNG are named ``<stem>.<suffix>`` (attachment, or inline for pictures).
    Pictures carry the caution in ``X-Stressmap-Caution``; ``caution_header`` adds or drops it
    for any format.
    """
    out = dict(headers or {})
    if fmt == "csv" and meta:  # a CSV body is a plain table: metadata in headers
        out.update(metadata_headers(meta))
    if fmt in ("json", "geojson"):
        body = payload if isinstance(payload, (str, bytes)) else current_app.json.dumps(payload)
    else:
        body = payload
        if stem:
            mode = "inline" if fmt == "png" else "attachment"
            out.setdefault("Content-Disposition", f'{mode}; filename="{stem}.{_SUFFIX[fmt]}"')
    if caution_header if caution_header is not None else fmt == "png":
        out.setdefault("X-Stressmap-Caution", json.dumps(CAUTION)[1:-1])
    return Response(body, status=status, content_type=MIMETYPES[fmt], headers=out)
