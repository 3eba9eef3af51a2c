"""A built model on disk: one directory holding ``definition.json``, ``summary.json`` and
``fields.nc`` (the unit stress fields per load group, CF netCDF).

Writes are atomic: everything is written into a temporary sibling directory, each file is fsynced,
the directory is renamed into place and the parent directory is fsynced, so a crash never leaves a
half-written model visible under the final name. Replacing an existing model renames the old one
aside first and removes it only after the new one is in place.
"""

from __future__ import annotations

import os
import shutil
import uuid
from pathlib import Path

from stressmap.errors import NotFoundError, StorageError
from stressmap.formats import jsontext
from stressmap.formats.hdf5lock import NETCDF_LOCK
from stressmap.model import BuiltModel

__all__ = ["write_model", "read_model", "MODEL_FILES", "fsync_dir"]

#: The files every complete model directory holds.
MODEL_FILES = ("definition.json", "summary.json", "fields.nc")


def fsync_dir(path: Path) -> None:
    """fsync a directory so that a rename inside it is durable (no-op where unsupported)."""
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory fds
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(fd)


def _write_json(path: Path, data) -> None:
    with path.open("w", encoding="utf-8") as fh:
        fh.write(jsontext.dumps(data, indent=1))
        fh.flush()
        os.fsync(fh.fileno())


def write_model(model, directory) -> Path:
    """Write ``model`` (a :class:`stressmap.model.BuiltModel`) to ``directory`` atomically.

    Returns the final directory path. Raises :class:`StorageError` when the location cannot be
    written (read-only, full disk); in that case nothing under ``directory`` has changed.
    """
    final = Path(directory)
    parent = final.parent
    tmp = parent / f".{final.name}.tmp-{uuid.uuid4().hex}"
    try:
        parent.mkdir(parents=True, exist_ok=True)
        tmp.mkdir()
        _write_json(tmp / "definition.json", model.definition)
        _write_json(tmp / "summary.json", model.summary)
        nc_path = tmp / "fields.nc"
        with NETCDF_LOCK:  # HDF5 is not thread-safe
            model.fields.to_netcdf(nc_path, engine="netcdf4")
        with nc_path.open("rb+") as fh:
            os.fsync(fh.fileno())
        fsync_dir(tmp)
        old = None
        if final.exists():
            old = parent / f".{final.name}.old-{uuid.uuid4().hex}"
            os.rename(final, old)
        os.rename(tmp, final)
        fsync_dir(parent)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    except (OSError, ValueError, TypeError) as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise StorageError(f"could not write model to {final.name}: {exc.__class__.__name__}: "
                           f"{getattr(exc, 'strerror', None) or exc}") from exc
    return final


def read_model(directory):
    """Read a model directory written by :func:`write_model` into a ``BuiltModel``."""
    import xarray as xr


    path = Path(directory)
    if not path.is_dir():
        raise NotFoundError(f"no model directory at {path}")
    missing = [name for name in MODEL_FILES if not (path / name).is_file()]
    if missing:
        raise StorageError(f"model directory {path.name} is incomplete: missing {', '.join(missing)}")
    try:
        definition = jsontext.loads((path / "definition.json").read_text(encoding="utf-8"))
        summary = jsontext.loads((path / "summary.json").read_text(encoding="utf-8"))
        with NETCDF_LOCK:  # HDF5 is not thread-safe; the whole file is loaded inside the lock
            fields = xr.load_dataset(path / "fields.nc", engine="netcdf4")
    except (OSError, ValueError) as exc:
        raise StorageError(f"model directory {path.name} cannot be read: {exc}") from exc
    return BuiltModel(definition=definition, fields=fields, summary=summary)
