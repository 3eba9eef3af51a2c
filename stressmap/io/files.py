"""Reading and writing files: text with a clear error, and atomic writes.

Every output file is written to a temporary sibling first, fsynced and renamed into place, so a
crash or a full disk never leaves a half-written file under the final name, and an existing file
is replaced only by a complete one.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from stressmap.errors import StorageError

__all__ = ["write_atomic", "write_many_atomic"]


def write_atomic(path, data: str | bytes) -> Path:
    """Write ``data`` (text as UTF-8, or bytes) to ``path`` atomically; returns the path.

    Raises :class:`StorageError` when the location cannot be written; the target is then unchanged.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as d:
    ...     p = write_atomic(pathlib.Path(d, "sub", "a.txt"), "x")
    ...     p.read_text(), sorted(q.name for q in p.parent.iterdir())
    ('x', ['a.txt'])
    """
    path = Path(path)
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    tmp = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
        with os.fdopen(fd, "wb") as fh:
            fh.write(raw)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise StorageError(f"could not write {path.name}: {exc.strerror or exc}") from exc
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
    return path


def write_many_atomic(files: dict) -> list[Path]:
    """Write several files (``{path: data}``), each atomically; returns the paths in order."""
    return [write_atomic(path, data) for path, data in files.items()]
