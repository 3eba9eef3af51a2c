"""Up-front mesh-size estimate (refinements included) and degenerate sheet/drag values.

References: the node density of a triangulation of near-equilateral triangles of side h is
1 / (sqrt(3)/2 h^2) (Euler's formula V - E + F = 2 with about two triangles per node; common
practice of mesh generation); the graded-ring integral is checked against scipy.integrate.quad
(an independent quadrature) and the whole estimate against the project's mesher on real plates.
"""

from __future__ import annotations

import copy
import json
import math
from importlib import resources

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad

from stressmap.errors import InputError
from stressmap.fem.mesh import mesh_plate
from stressmap.model.plate import parse_plate
from stressmap.model.preflight import (
    check_solvable,
    estimate_mesh_nodes,
    refinement_nodes,
)

NODE_AREA = math.sqrt(3.0) / 2.0


def demo(edge_km, refinement=None, **tables):
    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json")
                     .read_text(encoding="utf-8"))
    doc = copy.deepcopy(doc)
    doc["mesh"] = {"edge_km": edge_km, **({"refinement": refinement} if refinement else {})}
    doc.update(tables)
    return parse_plate(doc)


@pytest.mark.parametrize("fine, edge, grading, radius", [(5.0, 100.0, 0.25, 50.0),
                                                         (1.0, 250.0, 0.5, 0.0),
                                                         (20.0, 60.0, 0.1, 300.0)])
def test_point_refinement_matches_quadrature(fine, edge, grading, radius):
    item = {"point": [0.0, 0.0], "edge_km": fine, "radius_km": radius}

    def excess_density(d):  # nodes per km of radius: (1/h^2 - 1/edge^2) 2 pi d / NODE_AREA
        h = min(edge, fine + grading * max(d - radius, 0.0))
        return (1.0 / h ** 2 - 1.0 / edge ** 2) * 2.0 * math.pi * d / NODE_AREA

    reach = radius + (edge - fine) / grading
    expected = quad(excess_density, 0.0, radius, limit=200)[0] + quad(
        excess_density, radius, reach, limit=200)[0]
    assert_allclose(refinement_nodes(item, edge, grading, 1e12), expected, rtol=1e-6)


def test_uniform_estimate_and_cap():
    plate = demo(100.0)
    assert_allclose(estimate_mesh_nodes(plate), plate.area_km2 / (NODE_AREA * 100.0 ** 2))
    # a refinement larger than the plate never counts more nodes than the plate holds at it
    huge = demo(250.0, [{"point": [-15, -20], "edge_km": 0.1, "radius_km": 20000}])
    assert_allclose(estimate_mesh_nodes(huge), huge.area_km2 / (NODE_AREA * 0.1 ** 2))


@pytest.mark.parametrize("refinement", [
    None,
    [{"point": [-15.0, -20.0], "edge_km": 40.0, "radius_km": 200.0}],
    [{"polygon": [[-20, -25], [-12, -25], [-12, -18], [-20, -18], [-20, -25]], "edge_km": 50.0}],
])
def test_estimate_is_within_a_factor_of_the_real_mesh(refinement):
    plate = demo(150.0, refinement)
    nodes = mesh_plate(plate, smoothing_iterations=2).n_nodes
    ratio = estimate_mesh_nodes(plate) / nodes
    assert 0.5 < ratio < 2.0, (estimate_mesh_nodes(plate), nodes)


def test_refinement_raises_the_estimate_like_the_mesh():
    base = demo(150.0)
    refined = demo(150.0, [{"point": [-15.0, -20.0], "edge_km": 30.0, "radius_km": 300.0}])
    est = estimate_mesh_nodes(refined) / estimate_mesh_nodes(base)
    real = (mesh_plate(refined, smoothing_iterations=2).n_nodes
            / mesh_plate(base, smoothing_iterations=2).n_nodes)
    assert est > 1.5 and 0.5 < est / real < 2.0


@pytest.mark.parametrize("table, key", [("sheet", "young_gpa"), ("sheet", "thickness_km"),
                                        ("drag", "viscosity_pa_s"), ("drag", "channel_km")])
def test_degenerate_values_are_refused(table, key):
    plate = demo(250.0, **{table: {key: 1e-20}})  # normal floats the parser takes (it refuses
    # subnormals such as 5e-324 itself), far below any physical plate
    with pytest.raises(InputError) as info:
        check_solvable(plate)
    assert info.value.problems[0]["field"] == f"{table}.{key}"
    check_solvable(demo(250.0))  # the demo's own values pass
    assert np.isfinite(estimate_mesh_nodes(plate))
