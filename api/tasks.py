"""Job bodies: the long work the service queues (:mod:`stressmap_api.jobs`), one function each.

Every body is a module-level function (a worker process receives it by pickling) that takes the
data directory and its own arguments, a ``progress(fraction, message)`` keyword, does its work
through the core, writes its files through :mod:`stressmap.io` (atomically) and returns a JSON-able
result. Views never hold job bodies; they validate, queue one of these, and answer 202.

- :func:`build_and_store`: build a plate document, write ``models/<id>`` atomically, mark ready.
- :func:`run_ensemble_job`: an ensemble of force magnitudes at points or on a (masked) grid,
  stored as ``jobs/<id>/ensemble.nc``.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from stressmap_api.grids import load_document_grids
from stressmap_api.store import Store

from stressmap.analyses.ensemble import ensemble_grid, ensemble_points
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats import export
from stressmap.geo.grid import mask_dataset, polygon_mask
from stressmap.io.atomic import write_bytes_atomic
from stressmap.io.modeldir import write_model
from stressmap.model import build_model

__all__ = ["ENSEMBLE_FILE", "build_and_store", "ensemble_links", "mesh_nodes", "run_ensemble_job"]

ENSEMBLE_FILE = "ensemble.nc"


def mesh_nodes(model) -> int:
    """Number of mesh nodes of a built model (from its summary, else from its fields)."""
    summary = getattr(model, "summary", {}) or {}
    mesh = summary.get("mesh") if isinstance(summary, dict) else None
    if isinstance(mesh, dict) and mesh.get("nodes") is not None:
        return int(mesh["nodes"])
    fields = model.fields
    for dim in ("node", "nodes"):
        if dim in fields.sizes:
            return int(fields.sizes[dim])
    return 0


def build_and_store(data_dir: str, model_id: str, document: dict, max_mesh_nodes: int = 0, *,
                    progress) -> dict:
    """Build ``document``, write it atomically as ``models/<model_id>``, mark it ready.

    Returns ``{"model_id": ..., "build_time": ...}``.
    """
    store = Store(data_dir, cache_size=0)
    store.set_model_status(model_id, "building")
    progress(0.0, "building")

    def build_progress(fraction, message=""):
        progress(0.95 * float(fraction), message)

    grids = load_document_grids(document, data_dir)  # uploaded grids named by id, as arrays
    extra = {"grids": grids} if grids else {}  # plain documents call build_model as before
    model = build_model(document, progress=build_progress, **extra)
    nodes = mesh_nodes(model)
    if max_mesh_nodes and nodes > max_mesh_nodes:
        raise InputError("the model's mesh is too large",
                         [problem(f"the mesh has {nodes:,} nodes; this service keeps at most "
                                  f"{int(max_mesh_nodes):,} (use a larger edge_km or fewer "
                                  "refinement regions)", field="mesh.edge_km")])
    progress(0.96, "writing model")
    write_model(model, store.model_dir(model_id))
    store.mark_model_ready(model_id, model.summary)
    progress(1.0, "ready")
    return {"model_id": model_id, "build_time": model.summary.get("build_time")}


def ensemble_links(model_id: str, ensemble_id: str, prefix: str) -> dict:
    """Where a client follows an ensemble job and fetches its result."""
    base = f"{prefix}/models/{model_id}/ensembles/{ensemble_id}"
    return {"job": f"{prefix}/jobs/{ensemble_id}", "geojson": f"{base}?format=geojson",
            "netcdf": f"{base}?format=netcdf", "png": f"{base}?format=png"}


def _num(value):
    value = float(value)
    return value if math.isfinite(value) else None


def run_ensemble_job(data_dir: str, model_id: str, job_id: str, spec: dict, progress=None,
                     scheduler: str | None = None, prefix: str = "/api/v1") -> dict:
    """Compute an ensemble, store it as ``jobs/<job_id>/ensemble.nc``, return its summary and
    links."""
    store = Store(data_dir, cache_size=0)
    model = store.load(model_id)
    meta = store.meta(model_id)
    kwargs = dict(members=spec["members"], distributions=spec["distributions"],
                  seed=spec["seed"], percentiles=spec["percentiles"], progress=progress,
                  scheduler=scheduler)
    if "points" in spec:
        ds = ensemble_points(model, np.asarray(spec["points"][0]), np.asarray(spec["points"][1]),
                             **kwargs)
    else:
        ds = ensemble_grid(model, spec["bbox"], spec["spacing_km"], **kwargs)
        if spec.get("polygon_wkt"):
            keep = polygon_mask(ds["lon"].values[None, :], ds["lat"].values[:, None],
                                shapely.from_wkt(spec["polygon_wkt"]))
            ds = mask_dataset(ds, keep)
    attrs = {"caution": CAUTION, "model_id": model_id, "model_name": meta.get("name") or "",
             "build_time": meta.get("build_time") or ""}
    write_bytes_atomic(store.job_dir(job_id) / ENSEMBLE_FILE, export.netcdf_bytes(ds, attrs))
    inside = np.asarray(ds["inside"].values).astype(bool)
    return {
        "model_id": model_id,
        "ensemble_id": job_id,
        "members": int(spec["members"]),
        "seed": int(spec["seed"]),
        "points": int(inside.size),
        "points_inside": int(inside.sum()),
        "mean_shmax_std_deg": _num(np.nanmean(np.where(inside, ds["shmax_std_deg"].values, np.nan))
                                   if inside.any() else float("nan")),
        "links": ensemble_links(model_id, job_id, prefix),
        "caution": CAUTION,
    }
