"""Model builds: checks done before a build is accepted, and the build job itself.

:func:`check_document` runs in the request (fast: document validation and a mesh-size estimate)
so that a bad document is answered at once with 422 and every validation problem.
:func:`build_and_store` runs in a job worker: it builds the model, checks the real mesh size,
writes the model directory atomically and only then marks the model ready.
"""

from __future__ import annotations

import math

from stressmap_api.grids import check_references, load_document_grids
from stressmap_api.store import Store, document_digest

from stressmap.errors import InputError, problem
from stressmap.io.modeldir import write_model
from stressmap.model import build_model
from stressmap.model.plate import parse_plate

__all__ = ["check_document", "build_and_store", "estimated_mesh_nodes", "mesh_nodes"]


def estimated_mesh_nodes(area_km2: float, edge_km: float) -> float:
    """Nodes of a uniform mesh of equilateral triangles of side ``edge_km`` over ``area_km2``.

    Each node carries two triangles of area sqrt(3)/4 edge^2 (Euler's formula for a large planar
    triangulation: triangles ~ 2 x nodes).

    Examples
    --------
    >>> round(estimated_mesh_nodes(1.3e7, 50.0))
    6004
    """
    return float(area_km2) / (math.sqrt(3.0) / 2.0 * float(edge_km) ** 2)


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


#: Most boundary vertices accepted in an uploaded document (checked before it is parsed).
MAX_BOUNDARY_VERTICES = 20_000


def _boundary_vertex_count(document) -> int:
    """Positions in the boundary's LineStrings (0 where the structure is not as expected)."""
    boundary = document.get("boundary") if isinstance(document, dict) else None
    feats = boundary.get("features") if isinstance(boundary, dict) else None
    total = 0
    for feat in feats if isinstance(feats, list) else []:
        geom = feat.get("geometry") if isinstance(feat, dict) else None
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        total += len(coords) if isinstance(coords, list) else 0
    return total


def check_document(document, max_mesh_nodes: int, data_dir=None) -> dict:
    """Validate a plate model document before accepting its build.

    Returns ``{"name": ..., "digest": ..., "estimated_nodes": ...}``. Raises
    :class:`~stressmap.errors.ModelValidationError` (every problem of the document) or
    :class:`~stressmap.errors.InputError` when the mesh would exceed ``max_mesh_nodes`` or the
    document names a grid that is not an uploaded grid of ``data_dir`` (none without it).
    """

    # Grids are uploaded resources named by id; a path or URL would make the service open any
    # file it can reach, so it is refused (stressmap_api.grids.check_references).
    check_references(document, data_dir)
    vertices = _boundary_vertex_count(document)
    if vertices > MAX_BOUNDARY_VERTICES:
        # Checked before parsing: validation and meshing grow with the vertex count (a mesh has
        # about 4-5 nodes per boundary vertex), so a huge outline must not reach either.
        raise InputError("the model's boundary has too many vertices",
                         [problem(f"{vertices:,} boundary vertices; this service takes at most "
                                  f"{MAX_BOUNDARY_VERTICES:,} (simplify the outline)",
                                  field="boundary.features")])
    plate = parse_plate(document)  # its ModelValidationError lists every problem
    edge_km = float(plate.mesh.get("edge_km") or 50.0)
    estimate = estimated_mesh_nodes(plate.area_km2, edge_km)
    if max_mesh_nodes and estimate > max_mesh_nodes:
        msg = (f"mesh.edge_km {edge_km:g} km would give about {estimate:,.0f} mesh nodes for a "
               f"plate of {plate.area_km2:,.0f} km^2; this service builds at most "
               f"{int(max_mesh_nodes):,} (use a larger edge_km)")
        raise InputError("the model's mesh would be too large", [problem(msg, field="mesh.edge_km")])
    return {"name": plate.name, "digest": document_digest(document), "estimated_nodes": estimate}


def build_and_store(data_dir: str, model_id: str, document: dict, max_mesh_nodes: int = 0, *,
                    progress) -> dict:
    """Job body: build ``document``, write it atomically as ``models/<model_id>``, mark ready.

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
