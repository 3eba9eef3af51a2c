"""The fictional demo plate in the service: build it (or reuse it) at start-up, example requests.

The demo document (``stressmap/data/demo_plate.json``) describes a FICTIONAL plate invented for
demonstrations and tests; its name says so wherever it appears.
"""

from __future__ import annotations

import json
import logging
from importlib import resources

import numpy as np
from stressmap_api.store import Store, document_digest
from stressmap_api.tasks import build_and_store

from stressmap.model import locate
from stressmap.model.plate import parse_plate

__all__ = ["demo_document", "ensure_demo", "example_points", "example_requests"]

_log = logging.getLogger(__name__)

#: Preferred example points (lon, lat) inside the demo plate; checked against the model.
_CANDIDATES = [(-15.0, -20.0), (-5.0, -12.0), (-25.0, -25.0), (-10.0, -30.0)]


def demo_document() -> dict:
    """The packaged demo plate document (a fresh copy)."""
    text = (resources.files("stressmap.data") / "demo_plate.json").read_text(encoding="utf-8")
    return json.loads(text)


def ensure_demo(store: Store, progress=None, max_mesh_nodes: int = 0) -> str:
    """Id of a ready demo model in ``store``: reused if the same document was built before,
    otherwise built now in this process (seconds)."""

    document = demo_document()
    digest = document_digest(document)
    found = store.find_ready(digest)
    if found:
        _log.info("reusing demo model %s", found)
        return found

    model_id = store.add_model(parse_plate(document).name, None, digest)
    try:
        build_and_store(str(store.data_dir), model_id, document, max_mesh_nodes,
                        progress=progress or (lambda fraction, message="": None))
    except Exception as exc:
        store.set_model_status(model_id, "failed", f"{type(exc).__name__}: {exc}")
        raise
    return model_id


def example_points(model, count: int = 2) -> list[list[float]]:
    """``count`` round [lon, lat] points inside the model's plate (for printed examples)."""

    cand = np.array(_CANDIDATES, dtype=float)
    inside = np.asarray(locate(model, cand[:, 0], cand[:, 1])[0], dtype=bool)
    picked = [list(map(float, p)) for p in cand[inside][:count]]
    if len(picked) < count:  # a changed demo outline: fall back to rounded mesh nodes
        lon = np.round(np.asarray(model.fields["lon"].values), 1)
        lat = np.round(np.asarray(model.fields["lat"].values), 1)
        ok = np.asarray(locate(model, lon, lat)[0], dtype=bool)
        idx = np.flatnonzero(ok)[:: max(int(ok.sum()) // (count + 1), 1)]
        picked += [[float(lon[i]), float(lat[i])] for i in idx[: count - len(picked)]]
    return picked


def example_requests(base_url: str, model_id: str, points: list[list[float]],
                     token_header: bool = False) -> list[str]:
    """Two curl commands that work as printed against a running service."""
    auth = ' -H "Authorization: Bearer $STRESSMAP_API_TOKEN"' if token_header else ""
    body = json.dumps({"points": points, "format": "geojson"})
    return [
        f"curl -s{auth} {base_url}/api/v1/models/{model_id}",
        f"curl -s{auth} -X POST {base_url}/api/v1/models/{model_id}/predict "
        f"-H 'Content-Type: application/json' -d '{body}'",
    ]
