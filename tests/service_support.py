"""Helpers shared by the service tests (not a test module)."""

from __future__ import annotations

import copy
import json
import time
from importlib import resources


def demo_document() -> dict:
    text = resources.files("stressmap.data").joinpath("demo_plate.json").read_text(encoding="utf-8")
    return json.loads(text)


def coarse_demo_document(edge_km: float = 250.0) -> dict:
    """The fictional demo plate with a coarse uniform mesh, so that a build takes about a second."""
    doc = copy.deepcopy(demo_document())
    doc["mesh"] = {"edge_km": float(edge_km)}
    return doc


def wait_for_job(get, job_url: str, states=("done", "failed"), timeout: float = 120.0) -> dict:
    """Poll ``get(job_url)`` (returning the job JSON) until its status is in ``states``."""
    deadline = time.monotonic() + timeout
    job = get(job_url)
    while job["status"] not in states:
        if time.monotonic() > deadline:
            raise AssertionError(f"job still {job['status']} after {timeout} s: {job}")
        time.sleep(0.05)
        job = get(job_url)
    return job


def store_ready_model(store, model, digest: str | None = None) -> str:
    """Register a built model in ``store`` as ready (the end state of a build job); its id."""
    from stressmap.io.modeldir import write_model

    model_id = store.add_model(model.summary.get("name") or model.definition["name"], None, digest)
    write_model(model, store.model_dir(model_id))
    store.mark_model_ready(model_id, model.summary)
    return model_id
