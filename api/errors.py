"""The service's own exceptions and message hygiene; the lowest module of the service.

Everything else in the service may import this module; it imports only the library's error tree,
so the store, the jobs and the problem handlers can share exceptions without import cycles.
"""

from __future__ import annotations

import re
from pathlib import Path

from flask import current_app

from stressmap.errors import NotFoundError, StressmapError

__all__ = ["JobQueueFull", "ModelNotReady", "scrub_paths"]


class ModelNotReady(NotFoundError):
    """A model that exists but cannot be used yet (queued, building) or failed to build."""

    def __init__(self, model_id: str, status: str, error: str | None = None):
        self.model_id, self.status, self.error = model_id, status, error
        detail = f"model {model_id} is {status}"
        if error:
            detail += f": {error}"
        super().__init__(detail)


class JobQueueFull(StressmapError):
    """Too many jobs are waiting; the client should retry later."""


_ABS_PATH = re.compile(r"(?<![\w.:/>])/(?:[^\s'\"/:]+/)*[^\s'\":,;]+")


def scrub_paths(text: str) -> str:
    """``text`` with the data directory and other absolute file paths replaced by placeholders,
    so that messages about storage say what failed without showing the server's layout.

    Examples
    --------
    >>> scrub_paths("cannot open /srv/x/index.sqlite3: disk I/O error")
    'cannot open <path>/index.sqlite3: disk I/O error'
    """
    try:
        data_dir = str(Path(current_app.config["DATA_DIR"]).resolve())
        text = text.replace(data_dir, "<data directory>")
    except (RuntimeError, KeyError):  # outside an app context
        pass
    return _ABS_PATH.sub(lambda m: "<path>/" + m.group(0).rsplit("/", 1)[-1]
                         if "/" in m.group(0)[1:] else "<path>", text)
