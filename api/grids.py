"""Uploaded grids: stored as their own resources, referenced by id from plate documents.

An upload (netCDF or GeoTIFF bytes, never a path) is decoded and validated by
:mod:`stressmap.formats.grids` (coordinates, CRS, units, plausible values, size), then stored in
canonical form as ``grids/<id>.nc`` (CF netCDF) with ``grids/<id>.json`` (metadata) under the
data directory, both written atomically. The id is the first 32 hex digits of the sha256 of the
role, units, coordinates and values, so the same grid uploaded twice is the same resource.

A plate document names an uploaded grid by its id in ``ridge_push.age_grid``,
``gpe.elevation_grid`` or ``gpe.crust_grid``; :func:`check_references` refuses anything else
(the service never opens a file named in a document) and :func:`load_document_grids` reads the
rasters for the build job, which passes them to :func:`stressmap.model.build_model` as arrays.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

import numpy as np
from stressmap_api.store import ID_PATTERN, utc_now

from stressmap.errors import InputError, NotFoundError, problem
from stressmap.formats.grids import ROLES, raster_from_bytes, raster_netcdf_bytes
from stressmap.io.grids import document_grid_references

__all__ = ["GridStore", "check_references", "load_document_grids", "DEFAULT_MAX_GRID_CELLS"]

#: Default largest grid kept (cells): a 5-arc-minute grid of a quarter of the globe.
DEFAULT_MAX_GRID_CELLS = 4_000_000


def _atomic_write(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


class GridStore:
    """Uploaded grids under ``<data_dir>/grids``."""

    def __init__(self, data_dir):
        self.dir = Path(data_dir).resolve() / "grids"
        self.dir.mkdir(parents=True, exist_ok=True)

    def _paths(self, grid_id: str) -> tuple[Path, Path]:
        if not isinstance(grid_id, str) or not ID_PATTERN.match(grid_id):
            raise NotFoundError(f"no grid with id {str(grid_id)[:64]!r} (ids are 32 lowercase hex "
                                "digits)")
        return self.dir / f"{grid_id}.nc", self.dir / f"{grid_id}.json"

    def add(self, data: bytes, role: str, variable: str | None = None, units: str = "",
            name: str = "", max_cells: int = DEFAULT_MAX_GRID_CELLS) -> tuple[dict, bool]:
        """Validate and store an upload; returns (metadata, created)."""
        raster = raster_from_bytes(data, role, variable=variable, units=units, max_cells=max_cells)
        canonical = raster_netcdf_bytes(raster, {"title": f"uploaded {role} grid"})
        h = hashlib.sha256(f"{role}\0{raster.units}\0".encode())
        for a in (raster.lon, raster.lat, raster.values.astype("float32")):
            h.update(np.ascontiguousarray(a).tobytes())
        digest = h.hexdigest()
        grid_id = digest[:32]
        nc_path, meta_path = self._paths(grid_id)
        if meta_path.is_file():
            return self.meta(grid_id), False
        finite = raster.values[np.isfinite(raster.values)]
        meta = {
            "id": grid_id, "role": role, "units": raster.units, "name": str(name)[:200],
            "shape": [int(raster.lat.size), int(raster.lon.size)],
            "bbox": [float(raster.lon[0]), float(raster.lat[0]), float(raster.lon[-1]),
                     float(raster.lat[-1])],
            "value_range": [float(finite.min()), float(finite.max())],
            "nan_cells": int(raster.values.size - finite.size),
            "sha256": digest, "created": utc_now(),
        }
        _atomic_write(nc_path, canonical)
        _atomic_write(meta_path, json.dumps(meta).encode("utf-8"))  # the grid exists once this is
        return meta, True

    def meta(self, grid_id: str) -> dict:
        _, meta_path = self._paths(grid_id)
        try:
            return json.loads(meta_path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise NotFoundError(f"no grid with id {grid_id!r}") from None

    def list(self) -> list[dict]:
        out = []
        for p in sorted(self.dir.glob("*.json")):
            if ID_PATTERN.match(p.stem):
                out.append(json.loads(p.read_text(encoding="utf-8")))
        return sorted(out, key=lambda m: m.get("created", ""))

    def load(self, grid_id: str):
        """The stored grid as a :class:`~stressmap.geo.raster.Raster`."""
        meta = self.meta(grid_id)
        nc_path, _ = self._paths(grid_id)
        return raster_from_bytes(nc_path.read_bytes(), meta["role"], variable=meta["role"],
                                 max_cells=max(meta["shape"][0] * meta["shape"][1], 1))

    def delete(self, grid_id: str) -> None:
        nc_path, meta_path = self._paths(grid_id)
        if not meta_path.is_file():
            raise NotFoundError(f"no grid with id {grid_id!r}")
        meta_path.unlink()
        nc_path.unlink(missing_ok=True)


def check_references(document, data_dir) -> None:
    """Every grid a document names must be the id of an uploaded grid of the right role.

    Raises InputError naming the field (a path or URL is refused: the service reads no server
    files named in a document).
    """
    ridge_push = document.get("ridge_push") if isinstance(document, dict) else None
    probs = []
    if isinstance(ridge_push, dict) and ridge_push.get("age_source") == "grid" \
            and not isinstance(ridge_push.get("age_grid"), str):
        probs.append(problem("age_source 'grid' needs ridge_push.age_grid: the id of an "
                             "uploaded age grid (POST /api/v1/grids)", field="ridge_push.age_grid"))
    store = GridStore(data_dir) if data_dir is not None else None
    for role, field, ref, _variable, _units, _vfield in document_grid_references(document):
        if store is None or not ID_PATTERN.match(ref):
            probs.append(problem("the service reads no server files named in a document; upload "
                                 f"the grid (POST /api/v1/grids?role={role}) and give its id",
                                 field=field))
            continue
        try:
            meta = store.meta(ref)
        except NotFoundError:
            probs.append(problem(f"no uploaded grid with id {ref!r}", field=field))
            continue
        if meta["role"] != role:
            probs.append(problem(f"grid {ref} holds {meta['role']}, not {role}", field=field))
    if probs:
        raise InputError("the document names grids the service cannot use", probs)


def load_document_grids(document, data_dir) -> dict:
    """``{id: Raster}`` of every uploaded grid the document names (for ``build_model``)."""
    store = GridStore(data_dir)
    return {ref: store.load(ref) for _r, _f, ref, *_ in document_grid_references(document)}


def roles() -> list[str]:
    return list(ROLES)
