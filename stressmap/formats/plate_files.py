"""Plate model documents from GIS content: boundary features plus a small parameter text.

No paths here (:mod:`stressmap.io.plate_files` opens the files).

* **Boundary file**: GeoJSON (``.geojson``/``.json``, RFC 7946, WGS84 lon/lat) or GeoPackage
  (``.gpkg``; any layer CRS, reprojected to WGS84 lon/lat). LineString features are boundary
  segments (their attributes are the segment properties: ``kind``, ``group``,
  ``force_n_per_m``, ``age_myr``, ...); Polygon features, in the same GeoJSON or in a polygon
  layer of the GeoPackage, are provinces (attributes ``lithosphere``, ``age_myr``,
  ``stiffness``, ``name``). Multi-part lines and polygons are split into one feature per part.
  Empty attributes (nulls of a GIS table) are left out, so each feature carries only the
  parameters that apply to it.
* **Parameter file**: TOML (``.toml``) or JSON (``.json``) with the other document fields:
  ``name``, ``description``, ``ridge_push``, ``gpe``, ``drag``, ``sheet``, ``mesh`` (and ``provinces``
  if the boundary file has none).

The result is a plate model document (dict) for :func:`stressmap.model.plate.parse_plate`, which
checks it.
"""

from __future__ import annotations

import json
import math
import tomllib

from stressmap.errors import ModelValidationError, problem

__all__ = ["split_parts", "boundary_from_geojson", "boundary_from_frames", "params_from_text",
           "assemble_document"]

_LINE = ("LineString", "MultiLineString")
_POLY = ("Polygon", "MultiPolygon")


def _fail(message: str, field: str | None = None):
    raise ModelValidationError(message, [problem(message, field=field)])


def _clean(value):
    """JSON-able plain Python values; NaN attributes (GIS nulls) become None."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def split_parts(features: list, where: str) -> tuple[list, list]:
    """Sort features into boundary lines and province polygons (multi-parts split)."""
    lines, polys = [], []
    for i, feat in enumerate(features):
        if not isinstance(feat, dict):
            _fail(f"feature {i} is not a GeoJSON Feature object", f"{where}[{i}]")
        geom = feat.get("geometry") or {}
        gtype = geom.get("type") if isinstance(geom, dict) else None
        props = {k: v for k, v in (_clean(feat.get("properties")) or {}).items() if v is not None}
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        if gtype in ("MultiLineString", "MultiPolygon") and isinstance(coords, list):
            parts = [{"type": gtype[5:], "coordinates": c} for c in coords]
        else:
            parts = [geom]
        for part in parts:
            out = {"type": "Feature", "properties": dict(props), "geometry": part}
            if gtype in _LINE:
                lines.append(out)
            elif gtype in _POLY:
                polys.append(out)
            else:
                _fail(f"feature {i} has geometry type {gtype!r}; boundary files hold LineString "
                      "segments and Polygon provinces", f"{where}[{i}].geometry.type")
    return lines, polys


def boundary_from_geojson(data, name: str) -> tuple[list, list]:
    """Boundary segments and provinces (lists of Features) from a parsed GeoJSON document.

    Examples
    --------
    >>> fc = {"type": "FeatureCollection", "features": [
    ...     {"type": "Feature", "properties": {"kind": "free", "age_myr": None},
    ...      "geometry": {"type": "MultiLineString", "coordinates": [[[0, 0], [1, 0]], [[1, 0], [0, 1]]]}}]}
    >>> lines, polys = boundary_from_geojson(fc, "b.geojson")
    >>> len(lines), len(polys), lines[0]["properties"]
    (2, 0, {'kind': 'free'})
    """
    if isinstance(data, dict) and data.get("type") == "Feature":
        data = {"type": "FeatureCollection", "features": [data]}
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection" or not isinstance(
            data.get("features"), list):
        _fail(f"{name} must hold a GeoJSON FeatureCollection", name)
    return split_parts(data["features"], f"{name}: features")


def boundary_from_frames(frames, name: str) -> tuple[list, list]:
    """Boundary segments and provinces from ``(layer name, GeoDataFrame)`` pairs (any CRS)."""
    lines, polys = [], []
    for layer, gdf in frames:
        if gdf.crs is not None and gdf.crs.to_epsg() != 4326:
            gdf = gdf.to_crs(4326)
        fc = json.loads(gdf.to_json(na="drop", drop_id=True))
        ln, pl = split_parts(fc["features"], f"{name}:{layer}")
        lines += ln
        polys += pl
    if not lines:
        _fail(f"{name} has no layer of LineString boundary segments", name)
    return lines, polys


def params_from_text(text: str, suffix: str, name: str) -> dict:
    """The non-geometric document fields from TOML (``suffix`` ``.toml``) or JSON text.

    Examples
    --------
    >>> params_from_text('name = "x"\\n[mesh]\\nedge_km = 30\\n', ".toml", "p.toml")
    {'name': 'x', 'mesh': {'edge_km': 30}}
    """
    try:
        if suffix == ".toml":
            data = tomllib.loads(text)
        elif suffix == ".json":
            data = json.loads(text)
        else:
            _fail(f"unsupported parameter file type {suffix!r}: use TOML (.toml) or JSON (.json)", name)
    except (ValueError, RecursionError, tomllib.TOMLDecodeError) as exc:
        _fail(f"{name} cannot be parsed: {exc}", name)
    if not isinstance(data, dict):
        _fail(f"{name} must hold an object (table) of document fields", name)
    if "boundary" in data:
        _fail(f"{name} must not hold 'boundary': the boundary comes from the boundary file",
              f"{name}: boundary")
    return data


def assemble_document(lines: list, polys: list, params: dict, default_name: str) -> dict:
    """A plate model document from boundary lines, province polygons and parameter fields."""
    doc = dict(params)
    doc.setdefault("name", default_name)
    doc["boundary"] = {"type": "FeatureCollection", "features": lines}
    if polys:
        if "provinces" in params:
            _fail("provinces are given twice: as polygons in the boundary file and in the "
                  "parameter file; keep one", "provinces")
        doc["provinces"] = {"type": "FeatureCollection", "features": polys}
    return doc
