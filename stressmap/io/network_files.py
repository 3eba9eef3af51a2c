"""Network documents from files: a lines file (GeoJSON or GeoPackage) and a parameter file.

* **Lines file**: GeoJSON (``.geojson``/``.json``) FeatureCollection or GeoPackage (``.gpkg``,
  any CRS, reprojected to WGS84) of LineString features whose attributes are the line
  properties (``kind``, ``left``, ``right``, ``sinks``, ``sense``, force parameters).
  Multi-part lines are split into one line per part; empty attributes (GIS nulls) are dropped.
  A JSON file that already is a whole network document (with ``lines``) is read as it is.
* **Parameter file** (optional): TOML or JSON with ``name``, ``description``, ``defaults``
  (``sheet``, ``drag``, ``mesh``, ``ridge_push`` tables for every plate) and ``plates``
  (the same tables, and ``provinces``, per plate name).
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.errors import ModelValidationError, problem
from stressmap.io.plate_files import read_boundary_file, read_params_file

__all__ = ["load_network_files"]


def _fail(message: str, field: str | None = None):
    raise ModelValidationError(message, [problem(message, field=field)])


def _whole_document(path: Path) -> dict | None:
    if path.suffix.lower() != ".json":
        return None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        _fail(f"{path.name} is not valid JSON: {exc}", path.name)
    return data if isinstance(data, dict) and "lines" in data else None


def load_network_files(lines_path, params_path=None) -> dict:
    """A network document (unchecked; see :func:`stressmap.model.network.check_network`).

    Without a parameter file the name is the lines file's stem (or the FeatureCollection's
    ``name``) and every plate takes the defaults.

    Examples
    --------
    >>> from importlib import resources
    >>> data = resources.files("stressmap.data")
    >>> doc = load_network_files(data / "demo_network.geojson", data / "demo_network.toml")
    >>> doc["name"], sorted(doc)
    ('Orrin (fictional demo planet)', ['defaults', 'description', 'lines', 'name', 'plates'])
    """
    p = Path(lines_path)
    if not p.is_file():
        _fail(f"lines file not found: {p}", str(p))
    whole = _whole_document(p)
    params = read_params_file(params_path) if params_path is not None else {}
    for key in params:
        if key not in ("name", "description", "defaults", "plates"):
            _fail(f"unknown field {key!r} in the parameter file; expected name, description, "
                  "defaults, plates", key)
    if whole is not None:
        doc = dict(whole)
        doc.update(params)
        return doc
    lines, polys = read_boundary_file(p)
    if polys:
        _fail(f"{p.name} holds polygons; a lines file holds only LineString boundary lines "
              "(give provinces per plate in the parameter file)", p.name)
    name = None
    if p.suffix.lower() in (".geojson", ".json"):
        try:
            raw = json.loads(p.read_text(encoding="utf-8"))
            name = raw.get("name") if isinstance(raw, dict) else None
        except ValueError:  # already reported by read_boundary_file
            name = None
    doc = {"name": params.get("name") or (name if isinstance(name, str) else None) or p.stem}
    for key in ("description", "defaults", "plates"):
        if key in params:
            doc[key] = params[key]
    doc["lines"] = {"type": "FeatureCollection", "features": lines}
    return doc
