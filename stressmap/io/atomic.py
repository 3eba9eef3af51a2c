"""Writing one file atomically: a temporary sibling, fsync, rename, fsync of the directory, so a
reader sees either no file or the whole file, never a part (and a full disk leaves no partial
file behind)."""

from __future__ import annotations

import os
from pathlib import Path

from stressmap.io.modeldir import fsync_dir

__all__ = ["write_bytes_atomic"]


def write_bytes_atomic(path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically; on any error the temporary file is removed."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    fsync_dir(path.parent)
    return path
