"""Plate model documents from GIS files: a boundary file plus a small parameter file.

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
from pathlib import Path

from stressmap.errors import ModelValidationError, problem

__all__ = ["load_plate_files", "read_boundary_file", "read_params_file"]

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


def _split_parts(features: list, where: str) -> tuple[list, list]:
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


def read_boundary_file(path) -> tuple[list, list]:
    """Boundary segments and provinces (lists of GeoJSON Features) from a GeoJSON/GeoPackage file.

    Examples
    --------
    >>> import json, tempfile, pathlib
    >>> fc = {"type": "FeatureCollection", "features": [
    ...     {"type": "Feature", "properties": {"kind": "free", "age_myr": None},
    ...      "geometry": {"type": "MultiLineString", "coordinates": [[[0, 0], [1, 0]], [[1, 0], [0, 1]]]}}]}
    >>> with tempfile.TemporaryDirectory() as d:
    ...     path = pathlib.Path(d, "b.geojson")
    ...     _ = path.write_text(json.dumps(fc))
    ...     lines, polys = read_boundary_file(path)
    >>> len(lines), len(polys), lines[0]["properties"]
    (2, 0, {'kind': 'free'})
    """
    p = Path(path)
    if not p.is_file():
        _fail(f"boundary file not found: {p}", str(p))
    suffix = p.suffix.lower()
    if suffix in (".geojson", ".json"):
        try:
            data = json.loads(p.read_text(encoding="utf-8"))
        except (UnicodeDecodeError, ValueError, RecursionError) as exc:  # also too deep/long
            _fail(f"{p.name} is not valid GeoJSON: {exc}", p.name)
        if isinstance(data, dict) and data.get("type") == "Feature":
            data = {"type": "FeatureCollection", "features": [data]}
        if not isinstance(data, dict) or data.get("type") != "FeatureCollection" or not isinstance(
                data.get("features"), list):
            _fail(f"{p.name} must hold a GeoJSON FeatureCollection", p.name)
        return _split_parts(data["features"], f"{p.name}: features")
    if suffix == ".gpkg":
        return _read_gpkg(p)
    _fail(f"unsupported boundary file type {suffix!r}: use GeoJSON (.geojson) or GeoPackage (.gpkg)",
          p.name)


def _read_gpkg(p: Path) -> tuple[list, list]:
    import pyogrio

    try:
        layers = pyogrio.list_layers(p)
    except Exception as exc:  # pyogrio raises its own error types for unreadable files
        _fail(f"{p.name} cannot be read as a GeoPackage: {exc}", p.name)
    lines, polys = [], []
    for name, gtype in layers:
        gtype = str(gtype or "")
        if not any(t in gtype for t in ("LineString", "Polygon")):
            continue
        try:
            gdf = pyogrio.read_dataframe(p, layer=name)
        except Exception as exc:
            _fail(f"layer {name!r} of {p.name} cannot be read: {exc}", f"{p.name}:{name}")
        if gdf.crs is not None and gdf.crs.to_epsg() != 4326:
            gdf = gdf.to_crs(4326)
        fc = json.loads(gdf.to_json(na="drop", drop_id=True))
        ln, pl = _split_parts(fc["features"], f"{p.name}:{name}")
        lines += ln
        polys += pl
    if not lines:
        _fail(f"{p.name} has no layer of LineString boundary segments", p.name)
    return lines, polys


def read_params_file(path) -> dict:
    """The non-geometric document fields from a TOML or JSON file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as d:
    ...     path = pathlib.Path(d, "p.toml")
    ...     _ = path.write_text('name = "x"\\n[mesh]\\nedge_km = 30\\n')
    ...     read_params_file(path)
    {'name': 'x', 'mesh': {'edge_km': 30}}
    """
    import tomllib

    p = Path(path)
    if not p.is_file():
        _fail(f"parameter file not found: {p}", str(p))
    suffix = p.suffix.lower()
    try:
        text = p.read_text(encoding="utf-8")
        if suffix == ".toml":
            data = tomllib.loads(text)
        elif suffix == ".json":
            data = json.loads(text)
        else:
            _fail(f"unsupported parameter file type {suffix!r}: use TOML (.toml) or JSON (.json)",
                  p.name)
    except (UnicodeDecodeError, ValueError, RecursionError, tomllib.TOMLDecodeError) as exc:
        _fail(f"{p.name} cannot be parsed: {exc}", p.name)
    if not isinstance(data, dict):
        _fail(f"{p.name} must hold an object (table) of document fields", p.name)
    if "boundary" in data:
        _fail(f"{p.name} must not hold 'boundary': the boundary comes from the boundary file",
              f"{p.name}: boundary")
    return data


def load_plate_files(boundary_path, params_path=None) -> dict:
    """A plate model document from a boundary file (GeoJSON/GeoPackage) and a parameter file.

    Parameters
    ----------
    boundary_path : path
        GeoJSON or GeoPackage with LineString segments (and optionally Polygon provinces).
    params_path : path, optional
        TOML or JSON with ``name``, ``description``, ``ridge_push``, ``gpe``, ``drag``,
        ``sheet``, ``mesh`` and optionally ``provinces``. Without it the name is the boundary file's stem
        and everything else takes its defaults.

    Returns
    -------
    dict
        A plate model document (unchecked: pass it to :func:`stressmap.model.plate.parse_plate`).

    Raises
    ------
    ModelValidationError
        Missing or unreadable files, wrong geometry types, provinces given twice.
    """
    lines, polys = read_boundary_file(boundary_path)
    params = read_params_file(params_path) if params_path is not None else {}
    doc = dict(params)
    doc.setdefault("name", Path(boundary_path).stem)
    doc["boundary"] = {"type": "FeatureCollection", "features": lines}
    if polys:
        if "provinces" in params:
            _fail("provinces are given twice: as polygons in the boundary file and in the "
                  "parameter file; keep one", "provinces")
        doc["provinces"] = {"type": "FeatureCollection", "features": polys}
    return doc
