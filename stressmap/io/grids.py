"""Grid files named by a plate model document: read at the edge, passed to the core as arrays.

:func:`read_grid` reads one netCDF or GeoTIFF file (:mod:`stressmap.formats.grids` decodes it)
and :func:`read_document_grids` reads every grid a document names -- ``ridge_push.age_grid``,
``gpe.elevation_grid``, ``gpe.crust_grid`` -- into the ``grids`` mapping that
:func:`stressmap.model.build_model` takes, subset to the plate's bounding box. Relative paths are
tried from the working directory first, then from ``base_dir`` (the document's folder).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from stressmap.errors import InputError, problem
from stressmap.formats.grids import MAX_GRID_CELLS, raster_from_bytes
from stressmap.geo.raster import Raster

__all__ = ["read_grid", "read_document_grids", "document_grid_references", "document_bbox"]

#: (role, table, reference field, variable field, units field) of every grid a document can name.
_REFERENCES = (
    ("age", "ridge_push", "age_grid", "age_variable", None),
    ("elevation", "gpe", "elevation_grid", "elevation_variable", "elevation_units"),
    ("crust_thickness", "gpe", "crust_grid", "crust_variable", "crust_units"),
)


def read_grid(path, role: str, variable: str | None = None, units: str = "", bbox=None,
              field: str | None = None, variable_field: str | None = None,
              max_cells: int = MAX_GRID_CELLS) -> Raster:
    """Read a netCDF or GeoTIFF grid file into a :class:`~stressmap.geo.raster.Raster`.

    ``bbox`` (W, S, E, N) degrees keeps only the cells around it. Errors name ``field`` (and
    ``variable_field`` for a missing or ambiguous variable).
    """
    p = Path(path)
    field = field or role
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the {role} grid {str(path)!r}: {exc.strerror or exc}",
                         [problem(f"cannot read the grid file: {exc.strerror or exc}",
                                  field=field)]) from None
    try:
        return raster_from_bytes(data, role, variable=variable, units=units, bbox=bbox,
                                 max_cells=max_cells)
    except InputError as exc:  # name the document's fields, not the reader's
        problems = [dict(q, field=(variable_field or field) if q.get("field") == f"{role}_variable"
                         else field) for q in exc.problems]
        raise InputError(f"{p.name}: {exc.args[0]}", problems) from None


def document_grid_references(document) -> list[tuple]:
    """(role, field, reference, variable, units, variable field) of every grid the document
    names."""
    out = []
    if not isinstance(document, dict):
        return out
    for role, table, ref, var, units in _REFERENCES:
        t = document.get(table)
        if isinstance(t, dict) and isinstance(t.get(ref), str) and t.get(ref):
            variable = t.get(var) if isinstance(t.get(var), str) else None
            unit = t.get(units) if units and isinstance(t.get(units), str) else ""
            out.append((role, f"{table}.{ref}", t[ref], variable, unit, f"{table}.{var}"))
    return out


def document_bbox(document):
    """(W, S, E, N) degrees around every boundary coordinate of a document, or None.

    A box across the antimeridian has W > E. Examples: see tests/io/test_grids.py.
    """
    try:
        coords = np.concatenate([np.asarray(f["geometry"]["coordinates"], dtype=float).reshape(-1, 2)
                                 for f in document["boundary"]["features"]])
    except (KeyError, TypeError, ValueError):
        return None
    if coords.size == 0 or not np.all(np.isfinite(coords)):
        return None
    lon = np.mod(coords[:, 0] + 180.0, 360.0) - 180.0
    s, n = float(coords[:, 1].min()), float(coords[:, 1].max())
    # the smallest longitude window: the largest gap between sorted longitudes is outside
    srt = np.sort(lon)
    gaps = np.diff(np.r_[srt, srt[0] + 360.0])
    k = int(np.argmax(gaps))
    w, e = float(srt[(k + 1) % srt.size]), float(srt[k])
    return (w, s, e, n)


def read_document_grids(document, base_dir=None) -> dict:
    """Read every grid file a document names; ``{reference: Raster}`` for ``build_model``.

    Raises InputError (naming the document field) when a file is missing or unusable.
    """
    bbox = document_bbox(document)
    out = {}
    for role, field, ref, variable, units, var_field in document_grid_references(document):
        path = Path(ref)
        if not path.is_absolute() and not path.exists() and base_dir is not None:
            path = Path(base_dir) / path
        out[ref] = read_grid(path, role, variable=variable, units=units, bbox=bbox, field=field,
                             variable_field=var_field)
    return out
