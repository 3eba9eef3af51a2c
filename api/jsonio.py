"""JSON provider that serialises numpy scalars and arrays, and maps non-finite floats to null."""

from __future__ import annotations

import json
import math

import numpy as np
from flask.json.provider import DefaultJSONProvider

__all__ = ["NumpyJSONProvider", "to_jsonable"]


def to_jsonable(obj):
    """Recursively convert numpy types to plain Python; NaN/inf become None (JSON has no NaN)."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


class NumpyJSONProvider(DefaultJSONProvider):
    sort_keys = False

    def dumps(self, obj, **kwargs):
        kwargs.setdefault("allow_nan", False)
        kwargs.setdefault("ensure_ascii", False)
        return json.dumps(to_jsonable(obj), **kwargs)
