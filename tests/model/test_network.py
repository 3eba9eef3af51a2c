"""Boundary networks: faces on the sphere, checks against outside facts, problems by position.

Outside facts used here:
* the faces of a closed network tile the sphere: their areas, each computed independently with
  pyproj's geodesic polygon area on a sphere of radius 6371 km (geodesics of a sphere are great
  circles), add up to 4 pi R^2;
* Euler's formula for a connected graph drawn on the sphere: V - E + F = 2;
* every line of a valid network separates exactly two faces (a face boundary is a closed walk).
"""

from __future__ import annotations

import copy
import json
from importlib import resources

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from pyproj import Geod

from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import ModelValidationError
from stressmap.geo import sphere
from stressmap.model import network as nw
from stressmap.model.plate import parse_plate

SPHERE_KM2 = 4.0 * np.pi * EARTH_RADIUS_KM**2
GEOD = Geod(a=EARTH_RADIUS_KM * 1e3, b=EARTH_RADIUS_KM * 1e3)


def line(coords, **props):
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "LineString", "coordinates": [list(map(float, c)) for c in coords]}}


def network(*features, **extra):
    return {"name": "test", "lines": {"type": "FeatureCollection", "features": list(features)}, **extra}


def demo_document() -> dict:
    import tomllib

    data = resources.files("stressmap.data")
    doc = {"lines": json.loads((data / "demo_network.geojson").read_text())}
    doc.update(tomllib.loads((data / "demo_network.toml").read_text()))
    return doc


def voronoi_network(seed: int, n: int = 12) -> dict:
    """A closed network from a spherical Voronoi diagram (scipy), one plate per cell."""
    from scipy.spatial import SphericalVoronoi

    rng = np.random.default_rng(seed)
    pts = sphere.normalize(rng.normal(size=(n, 3)))
    sv = SphericalVoronoi(pts)
    sv.sort_vertices_of_regions()
    edges = {}
    for c, region in enumerate(sv.regions):
        for a, b in zip(region, region[1:] + region[:1]):
            edges.setdefault((min(a, b), max(a, b)), []).append(c)
    feats = []
    for (a, b), cells in sorted(edges.items()):
        va, vb = sv.vertices[a], sv.vertices[b]
        mid = sphere.normalize(va + vb)
        left = sphere.normalize(np.cross(mid, vb - va))
        cl, cr = sorted(cells, key=lambda c: -float(pts[c] @ left))
        ll = np.column_stack(sphere.xyz_to_lonlat(sphere.slerp(va, vb, np.linspace(0, 1, 4))))
        feats.append(line(ll, kind="ridge", age_myr=60.0, left=f"P{cl}", right=f"P{cr}"))
    return network(*feats)


def pyproj_area_km2(ring_xyz) -> float:
    lon, lat = sphere.xyz_to_lonlat(ring_xyz)
    area, _ = GEOD.polygon_area_perimeter(lon, lat)  # signed: counter-clockwise positive
    return (area / 1e6) % SPHERE_KM2  # the region on the left, whatever its size


@pytest.mark.parametrize("doc", [demo_document(), voronoi_network(1), voronoi_network(7, 20)],
                         ids=["demo", "voronoi12", "voronoi20"])
def test_closed_networks_tile_the_sphere(doc):
    net = nw.check_network(doc)
    # areas from pyproj (independent): the faces tile the sphere to 1e-9 relative
    areas = np.array([pyproj_area_km2(f.ring_xyz) for f in net.faces])
    assert_allclose(areas.sum(), SPHERE_KM2, rtol=1e-9)
    assert_allclose([f.area_km2 for f in net.faces], areas, rtol=1e-8)
    # Euler: V - E + F = 2 for a connected graph on the sphere
    used = np.unique([n for e in net.edges for n in e["nodes"]])
    assert len(used) - len(net.edges) + len(net.faces) == 2
    # every line piece bounds exactly two faces
    face_of = {h: k for k, f in enumerate(net.faces) for h in f.half_edges}
    assert all(face_of[2 * e] != face_of[2 * e + 1] for e in range(len(net.edges)))
    assert net.outside is None and len(net.plates) == len(net.faces)


def test_demo_planet_has_a_plate_larger_than_a_hemisphere():
    net = nw.check_network(demo_document())
    assert 8 <= len(net.plates) <= 14
    largest = max(net.faces, key=lambda f: f.area_km2)
    assert largest.area_km2 > SPHERE_KM2 / 2
    doc = nw.plate_documents(net)[largest.name]
    plate = parse_plate(doc)
    assert_allclose(plate.area_km2, largest.area_km2, rtol=1e-9)


def polar_network():
    """Lines across the antimeridian and over the north pole: a polar cap split in two."""
    ring = [[lon, 70.0] for lon in range(0, 181, 30)]
    ring2 = [[lon, 70.0] for lon in range(180, 361, 30)]
    ring2 = [[(x + 180) % 360 - 180, y] for x, y in ring2]
    return network(
        line(ring, kind="collision", left="Boreas", right="Notia"),
        line(ring2, kind="subduction", sinks="right", left="Austra", slab_age_myr=60,
             slab_depth_km=400, pull_fraction=0.1),
        line([[0, 70], [0, 80], [0, 90], [180, 80], [180, 70]], kind="transform", sense="dextral",
             left="Austra", right="Boreas"),
        line([[0, 70], [0, 0], [0, -89.0]], kind="free"),
    )


def test_faces_across_the_antimeridian_and_over_a_pole():
    doc = polar_network()
    doc["lines"]["features"].pop()  # only the cap lines: a closed network of three faces
    net = nw.check_network(doc)
    names = {f.name for f in net.faces}
    assert names == {"Boreas", "Austra", "Notia"}
    # the lines at 70 N bound the polar cap, whose two halves are on either side of the
    # pole-crossing transform; their area from pyproj, the whole sphere between all faces
    total = sum(pyproj_area_km2(f.ring_xyz) for f in net.faces)
    assert_allclose(total, SPHERE_KM2, rtol=1e-9)
    cap = sum(f.area_km2 for f in net.faces if f.area_km2 < SPHERE_KM2 / 2)
    # exact area of a cap 20 degrees around the pole bounded by great-circle arcs (not the
    # parallel): compare with pyproj on the same ring
    ring = sphere.lonlat_to_xyz(np.arange(0, 360, 30.0), np.full(12, 70.0))
    assert_allclose(cap, pyproj_area_km2(ring), rtol=1e-9)


def test_subduction_and_transform_sides():
    doc = polar_network()
    doc["lines"]["features"].pop()
    docs = nw.plate_documents(nw.check_network(doc))
    kinds = {n: sorted(f["properties"]["kind"] for f in d["boundary"]["features"])
             for n, d in docs.items()}
    # the subduction line sinks to its right: Austra is on its left, so Austra overrides
    assert "overriding" in kinds["Austra"] and "subduction" not in kinds["Austra"]
    assert "subduction" in kinds["Notia"] and "overriding" not in kinds["Notia"]
    over = [f for f in docs["Austra"]["boundary"]["features"] if f["properties"]["kind"] == "overriding"]
    assert all("slab_age_myr" not in f["properties"] for f in over)
    # the transform's sense is the same from both sides; ridges/collisions keep their kind
    senses = {n: [f["properties"]["sense"] for f in d["boundary"]["features"]
                  if f["properties"]["kind"] == "transform"] for n, d in docs.items()}
    assert senses["Austra"] == senses["Boreas"] == ["dextral"]
    assert "collision" in kinds["Boreas"]
    # the ring runs with the plate on its left: parse_plate (region left) agrees on the area
    for name, d in docs.items():
        net_face = next(f for f in nw.check_network(doc).faces if f.name == name)
        assert_allclose(parse_plate(d).area_km2, net_face.area_km2, rtol=1e-9)


def test_regional_network_with_free_lines_and_a_t_junction():
    # a square region cut by a ridge whose north end is on a vertex of the free edge and whose
    # south end stops within 1 km of the (equatorial) southern edge: two T-junctions
    doc = network(
        line([[0, 0], [10, 0], [10, 10], [5, 10], [0, 10], [0, 0]], kind="free"),
        line([[5, 10], [5.0, 0.000005]], kind="ridge", age_myr=40, left="East", right="West"),
    )
    net = nw.check_network(doc)
    assert net.outside is not None and sorted(net.plates) == ["East", "West"]
    docs = nw.plate_documents(net)
    west = parse_plate(docs["West"])
    assert_allclose(west.area_km2, pyproj_area_km2(west.ring_xyz), rtol=1e-9)
    # the free square was split at both ends of the ridge (and starts at a corner of West)
    assert sorted(f["properties"]["kind"] for f in docs["West"]["boundary"]["features"]) == [
        "free", "free", "ridge"]
    neighbours = {f["properties"]["neighbour"] for f in docs["West"]["boundary"]["features"]}
    assert neighbours == {"East", None}


def test_every_problem_is_reported_at_once_with_its_position():
    doc = network(
        line([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], kind="free", left="A"),
        # dangling: ends in the middle of the square (its other end, on the great circle
        # from (10, 10) to (0, 10) that bulges 4.2 km north of lat 10, is a near-miss too)
        line([[5, 10], [5, 5]], kind="ridge", age_myr=30, left="B"),
        # near-miss: stops 11 km short of the square's west edge
        line([[-5, 5], [-0.1, 5]], kind="transform", sense="dextral"),
        # crossing: cuts the square's east edge without a junction
        line([[8, 3], [12, 3]], kind="collision"),
        line([[20, 0], [30, 0], [25, 5], [20, 0]], kind="ridge", age_myr=10, left="C"),
        line([[0, 0], [1, 1]], kind="subduction"),  # no 'sinks'
    )
    with pytest.raises(ModelValidationError) as err:
        nw.check_network(doc)
    msgs = [p["message"] for p in err.value.problems]
    assert any("sinks" in m for m in msgs)
    doc["lines"]["features"].pop()
    with pytest.raises(ModelValidationError) as err:
        nw.check_network(doc)
    probs = err.value.problems
    text = " | ".join(p["message"] for p in probs)
    assert "dangling end: line 1 ends at (lon 5.0000, lat 5.0000)" in text
    near = next(p for p in probs if p["message"].startswith("near-miss: line 2"))
    assert near["field"] == "lines.features[2].geometry.coordinates"
    # 0.1 degree of longitude on the equator: 11.1 km (great-circle, R = 6371 km)
    assert "11.1 km from line 0" in near["message"]
    cross = next(p for p in probs if "cross" in p["message"])
    assert_allclose(cross["position"], [10.0, 3.0], atol=0.05)
    assert any("separate pieces" in m for m in (p["message"] for p in probs))
    assert all("field" in p for p in probs)


def test_faces_with_two_names_none_and_a_name_twice():
    two = network(
        line([[0, 0], [10, 0], [10, 10]], kind="free", left="A"),
        line([[10, 10], [0, 10], [0, 0]], kind="free", left="B"),
    )
    with pytest.raises(ModelValidationError, match="1 problem") as err:
        nw.check_network(two)
    assert "has 2 names: 'A' from line 0 (left); 'B' from line 1 (left)" in err.value.problems[0]["message"]
    assert_allclose(err.value.problems[0]["position"], [5.0, 5.0], atol=0.3)
    none = network(line([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], kind="ridge", age_myr=9))
    with pytest.raises(ModelValidationError, match="no name"):
        nw.check_network(none)
    twice = network(
        line([[0, 0], [10, 0], [10, 10], [5, 10], [0, 10], [0, 0]], kind="ridge", age_myr=9,
             right="Out"),
        line([[5, 10], [5, 0]], kind="ridge", age_myr=9, left="A", right="A"),
    )
    with pytest.raises(ModelValidationError) as err:
        nw.check_network(twice)
    assert any("is on two faces" in p["message"] for p in err.value.problems)


def test_bad_documents_get_field_errors_not_exceptions():
    for bad in (None, [], {"name": "x"}, {"name": "x", "lines": {"type": "FeatureCollection",
                                                                   "features": [1, {"type": "Feature"}]}},
                network(line([[0, 0], [200, 0]], kind="ridge")),
                network(line([[0, 0], [0, 0], [1, 1]], kind="rift"))):
        with pytest.raises(ModelValidationError) as err:
            nw.check_network(bad)
        assert err.value.problems


def test_one_line_edit_changes_only_the_two_adjacent_plates():
    doc = demo_document()
    keys = {n: nw.document_key(d) for n, d in nw.plate_documents(nw.check_network(doc)).items()}
    edited = copy.deepcopy(doc)
    props = next(f["properties"] for f in edited["lines"]["features"] if f["properties"]["kind"] == "ridge")
    props["age_myr"] = props["age_myr"] + 5.0
    keys2 = {n: nw.document_key(d) for n, d in nw.plate_documents(nw.check_network(edited)).items()}
    changed = sorted(n for n in keys if keys[n] != keys2[n])
    assert changed == sorted([props["left"], props["right"]])


_json_scalar = st.one_of(st.none(), st.booleans(), st.integers(-10**30, 10**30),
                         st.floats(allow_nan=True), st.text(max_size=5))
_lonlat = st.lists(st.sampled_from([0.0, 5.0, 10.0, -5.0, 180.0, -180.0, 90.0, -90.0, 1e-4]),
                   min_size=2, max_size=2)
_feature = st.fixed_dictionaries({
    "type": st.sampled_from(["Feature", "Feature", "feature"]),
    "properties": st.one_of(_json_scalar, st.fixed_dictionaries({
        "kind": st.sampled_from(["ridge", "subduction", "free", "transform", "collision", "rift"]),
        "left": st.one_of(st.none(), st.sampled_from(["A", "B", ""]), st.integers()),
        "right": st.one_of(st.none(), st.sampled_from(["A", "C"])),
        "sinks": st.sampled_from(["left", "right", "up"]),
        "sense": st.sampled_from(["dextral", "sinistral", None]),
        "age_myr": _json_scalar})),
    "geometry": st.fixed_dictionaries({
        "type": st.sampled_from(["LineString", "LineString", "MultiLineString", "Point"]),
        "coordinates": st.one_of(_json_scalar, st.lists(st.one_of(_lonlat, _json_scalar), max_size=5))}),
})


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(features=st.lists(_feature, max_size=5), name=st.one_of(_json_scalar, st.just("n")))
def test_no_json_value_makes_the_checker_raise_anything_else(features, name):
    doc = {"name": name, "lines": {"type": "FeatureCollection", "features": features}}
    try:
        nw.plate_documents(nw.check_network(doc))
    except ModelValidationError as err:
        assert err.problems and all("message" in p for p in err.problems)


def test_two_junctions_closer_than_twice_the_tolerance_stay_apart():
    # P and Q 1.5 km apart, joined by a short line whose middle vertex is within 1 km of both:
    # each spoke's end must join its own junction, not be cut into the short line's middle
    q = 1.5 / (np.pi * 6371.0 / 180.0)
    ridge = {"kind": "ridge", "age_myr": 10.0}
    doc = network(
        line([[0, 0], [q / 2, 0], [q, 0]], kind="transform", sense="dextral", left="North", right="South"),
        line([[0, 0], [-10, 10]], left="West", right="North", **ridge),
        line([[0, 0], [-10, -10]], left="South", right="West", **ridge),
        line([[q, 0], [10, 10]], left="North", right="East", **ridge),
        line([[q, 0], [10, -10]], left="East", right="South", **ridge),
        line([[-10, 10], [10, 10], [10, -10], [-10, -10], [-10, 10]], kind="free"),
    )
    net = nw.check_network(doc)
    assert sorted(net.plates) == ["East", "North", "South", "West"]
    used = np.unique([n for e in net.edges for n in e["nodes"]])
    assert len(used) - len(net.edges) + len(net.faces) == 2  # Euler, the outside included
    docs = nw.plate_documents(net)
    assert [f["properties"]["kind"] for f in docs["North"]["boundary"]["features"]].count("transform") == 1
