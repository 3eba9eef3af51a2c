"""JSON documents as text: strict (no NaN), numpy-aware (no paths)."""

from __future__ import annotations

import json

import numpy as np

__all__ = ["dumps", "loads", "json_default"]


def json_default(obj):
    """``json.dumps`` fallback for numpy scalars and arrays.

    Examples
    --------
    >>> dumps({"a": np.float64(1.5), "b": np.arange(2)})
    '{"a": 1.5, "b": [0, 1]}'
    """
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"not JSON serialisable: {type(obj).__name__}")


def dumps(obj, indent: int | None = None) -> str:
    """Strict JSON text (NaN and infinity refused, as RFC 8259 requires)."""
    return json.dumps(obj, indent=indent, allow_nan=False, default=json_default)


def loads(text: str):
    """Parse JSON text (``ValueError`` for bad text, ``RecursionError`` for absurd nesting)."""
    return json.loads(text)
