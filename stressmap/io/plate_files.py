"""Plate model documents from GIS files: a boundary file plus a small parameter file.

* **Boundary file**: GeoJSON (``.geojson``/``.json``, RFC 7946, WGS84 lon/lat) or GeoPackage
  (``.gpkg``; any layer CRS, reprojected to WGS84 lon/lat).
* **Parameter file**: TOML (``.toml``) or JSON (``.json``) with the other document fields.

This module opens the files; :mod:`stressmap.formats.plate_files` parses their content (what the
features and fields mean is documented there). The result is a plate model document (dict) for
:func:`stressmap.model.plate.parse_plate`, which checks it.
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.errors import ModelValidationError, problem
from stressmap.formats.plate_files import (
    assemble_document,
    boundary_from_frames,
    boundary_from_geojson,
    params_from_text,
)

__all__ = ["load_plate_files", "read_boundary_file", "read_params_file"]


def _fail(message: str, field: str | None = None):
    raise ModelValidationError(message, [problem(message, field=field)])


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
        return boundary_from_geojson(data, p.name)
    if suffix == ".gpkg":
        return boundary_from_frames(_gpkg_layers(p), p.name)
    _fail(f"unsupported boundary file type {suffix!r}: use GeoJSON (.geojson) or GeoPackage (.gpkg)",
          p.name)


def _gpkg_layers(p: Path):
    """(layer name, GeoDataFrame) for each line or polygon layer of a GeoPackage."""
    import pyogrio

    try:
        layers = pyogrio.list_layers(p)
    except Exception as exc:  # pyogrio raises its own error types for unreadable files
        _fail(f"{p.name} cannot be read as a GeoPackage: {exc}", p.name)
    out = []
    for name, gtype in layers:
        gtype = str(gtype or "")
        if not any(t in gtype for t in ("LineString", "Polygon")):
            continue
        try:
            out.append((name, pyogrio.read_dataframe(p, layer=name)))
        except Exception as exc:
            _fail(f"layer {name!r} of {p.name} cannot be read: {exc}", f"{p.name}:{name}")
    return out


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
    p = Path(path)
    if not p.is_file():
        _fail(f"parameter file not found: {p}", str(p))
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        _fail(f"{p.name} cannot be parsed: {exc}", p.name)
    return params_from_text(text, p.suffix.lower(), p.name)


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
    return assemble_document(lines, polys, params, Path(boundary_path).stem)
