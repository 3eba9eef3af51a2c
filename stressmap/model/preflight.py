"""Checks of a parsed plate before any build work: the mesh size it asks for, refinements
included, and material values too small for the sheet to be solved.

Both run in milliseconds on a :class:`~stressmap.model.plate.Plate`, so a service or a script can
refuse an impossible build before meshing (a point refinement of 0.1 km with a 20,000 km radius
asks for billions of nodes; a Young's modulus of 5e-324 GPa makes the stiffness matrix singular).

Mesh estimate. A mesh of near-equilateral triangles of side ``h`` has one node per
``sqrt(3)/2 h**2`` of area (Euler's formula for a large planar triangulation: about two triangles
per node). The mesher's size function (:mod:`stressmap.fem.mesh`) is ``edge_km`` everywhere,
``fine = refinement.edge_km`` within ``radius_km`` of a refinement point or polygon, growing by
``grading`` km per km beyond it. The node count is the integral of the node density over the plate:
the uniform part plus, for each refinement, the excess over the uniform density of its core and its
graded ring, in closed form (each capped at the plate's area at the finest size, so overlapping or
oversized refinements never count more nodes than the plate can hold). Layer: model (core).
"""

from __future__ import annotations

import math

import numpy as np

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import InputError, problem

__all__ = ["MIN_SHEET", "check_solvable", "estimate_mesh_nodes", "refinement_nodes"]

_NODE_AREA = math.sqrt(3.0) / 2.0  # km^2 per node per km^2 of edge
#: Smallest values accepted for the sheet and drag (common practice: lithospheric Young's modulus
#: is tens of GPa, elastic thickness tens of km, asthenosphere viscosity 1e18-1e21 Pa s and the
#: sheared channel ~100 km; these floors are orders of magnitude below any physical plate and far
#: above the values that make the factorisation singular in float64).
MIN_SHEET = {"sheet.young_gpa": 1e-3, "sheet.thickness_km": 1e-2,
             "drag.viscosity_pa_s": 1e10, "drag.channel_km": 1e-2}


def uniform_mesh_nodes(area_km2: float, edge_km: float) -> float:
    """Nodes of a uniform mesh of near-equilateral triangles of side ``edge_km`` over
    ``area_km2`` (one node per sqrt(3)/2 edge^2).

    Examples
    --------
    >>> round(uniform_mesh_nodes(1.3e7, 50.0))
    6004
    """
    return float(area_km2) / (_NODE_AREA * float(edge_km) ** 2)


def _ring_integral(fine: float, edge: float, grading: float, inner: float, perimeter: float) -> float:
    """Excess node-area integral of a graded ring around a core of size ``fine``.

    Over the ring where the size grows from ``fine`` to ``edge`` (distance s from the core in
    [0, (edge - fine) / grading]), integrates ``(1/h**2 - 1/edge**2) * L(s)`` with
    ``h = fine + grading * s`` and ring length ``L(s) = perimeter + 2 pi s`` (``inner`` is unused
    by the polygon form and is the core radius for a disk, whose perimeter is 2 pi inner).
    """
    if fine >= edge:
        return 0.0
    g = grading
    log = math.log(edge / fine)
    inv = 1.0 / fine - 1.0 / edge
    width = (edge - fine) / g
    # int_0^W L(s)/h(s)^2 ds with u = fine + g s
    core = perimeter / g * inv + 2.0 * math.pi / g * (log / g - fine / g * inv)
    uniform = (perimeter * width + math.pi * width * width) / edge ** 2
    return max(core - uniform, 0.0)


def _polygon_geometry_km(ring: np.ndarray) -> tuple[float, float]:
    """Area (km^2) and perimeter (km) of a small lon/lat polygon (local equirectangular)."""
    lon = np.radians(np.asarray(ring[:, 0], dtype=float))
    lat = np.radians(np.asarray(ring[:, 1], dtype=float))
    lon = np.unwrap(lon)
    x = EARTH_RADIUS_KM * lon * math.cos(float(np.mean(lat)))
    y = EARTH_RADIUS_KM * lat
    area = 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))
    perimeter = float(np.hypot(np.diff(x, append=x[:1]), np.diff(y, append=y[:1])).sum())
    return area, perimeter


def refinement_nodes(item: dict, edge_km: float, grading: float, plate_area_km2: float) -> float:
    """Nodes one refinement adds to a uniform mesh of ``edge_km`` (see the module docstring).

    Examples
    --------
    >>> round(refinement_nodes({"point": [0, 0], "edge_km": 5.0, "radius_km": 0.0}, 5.0, 0.25, 1e6))
    0
    """
    fine = min(float(item["edge_km"]), float(edge_km))
    radius = float(item.get("radius_km", 0.0) or 0.0)
    if "point" in item:
        core_area, perimeter = math.pi * radius ** 2, 2.0 * math.pi * radius
    else:
        area, perim = _polygon_geometry_km(np.asarray(item["polygon"], dtype=float))
        core_area = area + perim * radius + math.pi * radius ** 2
        perimeter = perim + 2.0 * math.pi * radius
    core = min(core_area, plate_area_km2) * (1.0 / fine ** 2 - 1.0 / edge_km ** 2)
    ring = _ring_integral(fine, edge_km, grading, radius, perimeter)
    excess = (core + ring) / _NODE_AREA
    return min(excess, plate_area_km2 / (_NODE_AREA * fine ** 2))


def estimate_mesh_nodes(plate) -> float:
    """Nodes the mesher will make for ``plate`` (uniform part plus every refinement).

    Examples
    --------
    A plate of 1.3 million km^2 at 50 km edges has about 6,000 nodes:

    >>> from types import SimpleNamespace
    >>> plate = SimpleNamespace(area_km2=1.3e7, mesh={"edge_km": 50.0})
    >>> round(estimate_mesh_nodes(plate))
    6004
    """
    edge = float(plate.mesh.get("edge_km") or 50.0)
    grading = float(plate.mesh.get("grading") or 0.25)
    area = float(plate.area_km2)
    total = uniform_mesh_nodes(area, edge)
    finest = edge
    for item in plate.mesh.get("refinement") or []:
        total += refinement_nodes(item, edge, grading, area)
        finest = min(finest, float(item["edge_km"]))
    return min(total, area / (_NODE_AREA * finest ** 2))


def check_solvable(plate) -> None:
    """Raise :class:`InputError` (every field named) for sheet or drag values so small that the
    sheet cannot be factorised or the torque closure divides by nearly zero (:data:`MIN_SHEET`)."""
    tables = {"sheet": plate.sheet, "drag": plate.drag}
    torque = plate.drag.get("closure", "torque_balance") == "torque_balance" and not any(
        seg.kind == "fixed" for seg in plate.segments)  # fixed edges need no closure
    probs = []
    for field, low in MIN_SHEET.items():
        table, key = field.split(".")
        if table == "drag" and not torque:
            continue
        value = tables[table].get(key)
        if value is not None and float(value) < low:
            probs.append(problem(f"{key} {float(value):g} is below {low:g}; the sheet could not be "
                                 "solved with it (physical plates are orders of magnitude above)",
                                 field=field))
    if probs:
        raise InputError("the model's sheet or drag values are degenerate", probs)
