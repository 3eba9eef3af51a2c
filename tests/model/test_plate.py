"""Specification of stressmap.model.plate (plate model documents) and stressmap.io.plate_files (GIS files).

Every malformed document gets its own specific message naming the field; all problems are
collected; no exception other than ModelValidationError escapes parse_plate, whatever JSON it
is given (checked with hypothesis). Areas are checked against pyproj's geodesic polygon area on
a sphere (an independent library).
"""

import copy
import importlib.resources
import json
import random
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from stressmap.geo import sphere
from stressmap.errors import InputError, ModelValidationError
from stressmap.model.plate import MAX_EXTENT_DEG, PlateModel, parse_plate, plate_defaults
from stressmap.io.plate_files import load_plate_files

pyproj = pytest.importorskip("pyproj")
GEOD = pyproj.Geod(a=6371e3, b=6371e3)
DATA = Path(__file__).parents[1] / "data"


@pytest.fixture(scope="module")
def demo_text():
    return importlib.resources.files("stressmap.data").joinpath("demo_plate.json").read_text()


@pytest.fixture
def demo(demo_text):
    return json.loads(demo_text)


def ring_doc(ring, kinds=None, name="test", **extra):
    """A document whose ring (list of lon/lat) is cut into one free segment per arc."""
    n = len(ring)
    feats = []
    for i in range(n):
        props = {"kind": (kinds[i] if kinds else "free")}
        feats.append({"type": "Feature", "properties": props,
                      "geometry": {"type": "LineString",
                                   "coordinates": [list(ring[i]), list(ring[(i + 1) % n])]}})
    doc = {"name": name, "boundary": {"type": "FeatureCollection", "features": feats}}
    doc.update(extra)
    return doc


def problems_of(doc):
    with pytest.raises(ModelValidationError) as info:
        parse_plate(doc)
    return info.value.problems


# --------------------------------------------------------------------------------------------
# the demo plate and the geometry rules


def test_demo_plate_is_fictional_and_in_range(demo):
    plate = parse_plate(demo)
    assert isinstance(plate, PlateModel)
    assert "fictional" in plate.name.lower() and "fictional" in demo["description"].lower()
    assert 1e7 <= plate.area_km2 <= 2e7
    kinds = {s.kind for s in plate.segments}
    assert len(plate.segments) >= 12
    assert {"ridge", "subduction", "transform"} <= kinds and kinds & {"overriding", "collision"}
    assert {p.lithosphere for p in plate.provinces} == {"oceanic", "continental"}
    # not across the antimeridian (simple for GIS clients)
    assert np.all(np.abs(plate.ring_lonlat[:, 0]) < 170)


def test_demo_area_matches_pyproj(demo):
    plate = parse_plate(demo)
    ring = plate.ring_lonlat
    area_m2, _ = GEOD.polygon_area_perimeter(ring[:, 0], ring[:, 1])
    assert area_m2 > 0  # counter-clockwise, as stored
    assert_allclose(plate.area_km2, area_m2 / 1e6, rtol=1e-9)


def test_ring_is_counter_clockwise_and_segments_cover_it(demo):
    plate = parse_plate(demo)
    n = len(plate.ring_xyz)
    assert sphere.spherical_polygon_area(plate.ring_xyz) > 0
    assert_allclose(plate.ring_xyz, sphere.lonlat_to_xyz(*plate.ring_lonlat.T))
    counts = np.bincount(plate.arc_segment, minlength=len(plate.segments))
    for seg in plate.segments:
        assert (seg.stop - seg.start) % n == counts[seg.index]
        assert np.all(plate.arc_segment[np.arange(seg.start, seg.start + counts[seg.index]) % n]
                      == seg.index)
    # ring vertices are segment vertices: each segment's first/last vertex is on the ring
    for seg, feat in zip(plate.segments, demo["boundary"]["features"]):
        ends = np.array(feat["geometry"]["coordinates"])[[0, -1]]
        got = plate.ring_lonlat[[seg.start, seg.stop]]
        assert np.allclose(got, ends) or np.allclose(got, ends[::-1])


def test_segment_order_and_direction_do_not_matter(demo):
    ref = parse_plate(demo)
    doc = copy.deepcopy(demo)
    feats = doc["boundary"]["features"]
    rnd = random.Random(3)
    rnd.shuffle(feats)
    for f in feats[::2]:
        f["geometry"]["coordinates"].reverse()
    plate = parse_plate(doc)
    assert_allclose(plate.area_km2, ref.area_km2, rtol=1e-12)
    assert sphere.spherical_polygon_area(plate.ring_xyz) > 0
    # the same set of vertices
    a = {tuple(np.round(v, 9)) for v in ref.ring_lonlat}
    b = {tuple(np.round(v, 9)) for v in plate.ring_lonlat}
    assert a == b
    # segments keep document order and their properties
    assert [s.kind for s in plate.segments] == [f["properties"]["kind"] for f in feats]


def test_clockwise_ring_takes_the_smaller_region():
    ring = [(0, 0), (0, 10), (10, 10), (10, 0)]  # clockwise seen from outside
    plate = parse_plate(ring_doc(ring))
    area_m2, _ = GEOD.polygon_area_perimeter(*np.array(ring[::-1]).T)
    assert_allclose(plate.area_km2, area_m2 / 1e6, rtol=1e-9)
    assert sphere.spherical_polygon_area(plate.ring_xyz) > 0


def test_ends_join_within_one_km():
    ring = [(0, 0), (10, 0), (10, 10), (0, 10)]
    doc = ring_doc(ring)
    # move one end by about 0.5 km: still joins
    doc["boundary"]["features"][1]["geometry"]["coordinates"][0] = [10.0045, 0.0]
    parse_plate(doc)


def test_antimeridian_ring():
    ring = [(170, -10), (-170, -10), (-165, 5), (-175, 12), (175, 10)]
    plate = parse_plate(ring_doc(ring))
    area_m2, _ = GEOD.polygon_area_perimeter(*np.array(ring).T)
    assert_allclose(plate.area_km2, area_m2 / 1e6, rtol=1e-9)


def test_defaults_come_from_defaults_toml(demo):
    d = plate_defaults()
    plate = parse_plate(demo)
    assert plate.drag == d["drag"]
    assert plate.sheet["young_gpa"] == d["sheet"]["young_gpa"]
    assert plate.sheet["thickness_km"] == 100.0  # given by the document
    assert plate.mesh["edge_km"] == 50.0 and plate.mesh["grading"] == d["mesh"]["grading"]
    groups = {s.group for s in plate.segments}
    assert groups == {s.kind for s in plate.segments}  # group defaults to the kind


def test_normalised_document_reparses_to_the_same_plate(demo):
    plate = parse_plate(demo)
    doc = json.loads(json.dumps(plate.document))
    again = parse_plate(doc)
    assert again.document == plate.document
    assert_allclose(again.ring_xyz, plate.ring_xyz)


def test_model_arrays_are_read_only(demo):
    plate = parse_plate(demo)
    with pytest.raises(ValueError):
        plate.ring_xyz[0, 0] = 0.0


# --------------------------------------------------------------------------------------------
# malformed documents: one specific message each


def _set(path):
    """Mutation setting a value at a path of keys/indices."""
    *head, last = path

    def apply(value):
        def mutate(doc):
            node = doc
            for k in head:
                node = node[k]
            node[last] = value
        return mutate
    return apply


def _del(*path):
    def mutate(doc):
        node = doc
        for k in path[:-1]:
            node = node[k]
        del node[path[-1]]
    return mutate


def _feat(i, *rest):
    return ("boundary", "features", i, *rest)


def _move_end(doc):
    doc["boundary"]["features"][5]["geometry"]["coordinates"][-1] = [8.5, -20.5]


def _duplicate_vertex(doc):
    c = doc["boundary"]["features"][2]["geometry"]["coordinates"]
    c.insert(1, list(c[0]))


def _zero_length(doc):
    doc["boundary"]["features"].append({"type": "Feature", "properties": {"kind": "free"},
                                        "geometry": {"type": "LineString",
                                                     "coordinates": [[0.0, -20.0], [0.0, -20.0]]}})


def _branch(doc):
    doc["boundary"]["features"].append({"type": "Feature", "properties": {"kind": "free"},
                                        "geometry": {"type": "LineString",
                                                     "coordinates": [[4.0, -6.0], [0.0, -15.0]]}})


def _second_ring(doc):
    tri = [(60, 0), (65, 0), (62, 4)]
    doc["boundary"]["features"] += ring_doc(tri)["boundary"]["features"]


def _province_far(doc):
    doc["provinces"]["features"][0]["geometry"]["coordinates"] = [
        [[100, 40], [110, 40], [110, 50], [100, 50], [100, 40]]]


MALFORMED = [
    # (id, mutation, words in the message, field)
    ("gap", _move_end, ["ring not closed", "gap of 52.1 km", "lon 8.5000, lat -20.5000",
                        "segment 6", "within 1 km"], "boundary.features[5].geometry.coordinates"),
    ("unknown kind", _set(_feat(3, "properties", "kind"))("ridgee"),
     ["unknown kind 'ridgee'", "ridge, subduction"], "boundary.features[3].properties.kind"),
    ("missing kind", _del(*_feat(3, "properties", "kind")), ["missing 'kind'"],
     "boundary.features[3].properties.kind"),
    ("missing slab age", _del(*_feat(14, "properties", "slab_age_myr")),
     ["missing parameter", "slab_age_myr"], "boundary.features[14].properties.slab_age_myr"),
    ("missing sense", _del(*_feat(0, "properties", "sense")), ["missing parameter", "sense"],
     "boundary.features[0].properties.sense"),
    ("bad sense", _set(_feat(0, "properties", "sense"))("left"), ["unknown transform sense 'left'"],
     "boundary.features[0].properties.sense"),
    ("lon out of range", _set(_feat(9, "geometry", "coordinates", 1))([200.0, -4.6]),
     ["coordinates out of range", "longitude 200"], "boundary.features[9].geometry.coordinates[1]"),
    ("lat out of range", _set(_feat(9, "geometry", "coordinates", 1))([-2.0, -95.0]),
     ["coordinates out of range", "latitude -95"], "boundary.features[9].geometry.coordinates[1]"),
    ("nan coordinate", _set(_feat(9, "geometry", "coordinates", 1))([float("nan"), -4.6]),
     ["finite", "NaN"], "boundary.features[9].geometry.coordinates[1]"),
    ("inf force", _set(_feat(9, "properties", "force_n_per_m"))(float("inf")),
     ["force_n_per_m must be finite"], "boundary.features[9].properties.force_n_per_m"),
    ("string number", _set(_feat(14, "properties", "pull_fraction"))("0.1"),
     ["pull_fraction must be a number", "string"], "boundary.features[14].properties.pull_fraction"),
    ("fraction above one", _set(_feat(14, "properties", "pull_fraction"))(1.5),
     ["pull_fraction must be <= 1"], "boundary.features[14].properties.pull_fraction"),
    ("zero-length segment", _zero_length, ["zero-length segment"],
     "boundary.features[16].geometry.coordinates"),
    ("duplicate vertex", _duplicate_vertex, ["duplicate vertex", "position 1 repeats position 0"],
     "boundary.features[2].geometry.coordinates[1]"),
    ("point geometry", _set(_feat(4, "geometry"))({"type": "Point", "coordinates": [0, 0]}),
     ["geometry type must be 'LineString'"], "boundary.features[4].geometry.type"),
    ("branch", _branch, ["branches", "meets 2 other segment ends"], None),
    ("two rings", _second_ring, ["more than one closed ring", "16, 17, 18"], "boundary.features"),
    ("province outside", _province_far, ["lies outside the plate"],
     "provinces.features[0].geometry"),
    ("province lithosphere", _set(("provinces", "features", 1, "properties", "lithosphere"))("mantle"),
     ["unknown lithosphere 'mantle'"], "provinces.features[1].properties.lithosphere"),
    ("province stiffness", _set(("provinces", "features", 1, "properties", "stiffness"))(-1),
     ["stiffness must be > 0"], "provinces.features[1].properties.stiffness"),
    ("poisson", _set(("sheet", "poisson"))(0.6), ["poisson must be < 0.5"], "sheet.poisson"),
    ("thickness", _set(("sheet", "thickness_km"))(-5), ["thickness_km must be > 0"],
     "sheet.thickness_km"),
    ("young", _set(("sheet", "young_gpa"))("abc"), ["young_gpa must be a number"], "sheet.young_gpa"),
    ("sheet typo", _set(("sheet", "thickness"))(90), ["unknown field 'thickness'"], "sheet.thickness"),
    ("edge zero", _set(("mesh", "edge_km"))(0), ["edge_km must be >= 1"], "mesh.edge_km"),
    ("mesh too fine", _set(("mesh", "edge_km"))(1.0), ["too fine", "limit is 3,000,000"],
     "mesh.edge_km"),
    ("refinement edge", _del("mesh", "refinement", 0, "edge_km"), ["missing 'edge_km'"],
     "mesh.refinement[0].edge_km"),
    ("refinement point", _set(("mesh", "refinement", 0, "point"))([0, 100]),
     ["latitude 100 outside"], "mesh.refinement[0].point"),
    ("closure", _set(("drag", "closure"))("magic"), ["unknown closure 'magic'"], "drag.closure"),
    ("viscosity", _set(("drag", "viscosity_pa_s"))(-1e20), ["viscosity_pa_s must be > 0"],
     "drag.viscosity_pa_s"),
    ("ridge push mode", _set(("ridge_push", "mode"))("both"), ["unknown mode 'both'"],
     "ridge_push.mode"),
    ("age grid missing", _set(("ridge_push",))({"mode": "distributed", "age_source": "grid"}),
     ["needs 'age_grid'"], "ridge_push.age_grid"),
    ("top-level typo", _set(("provinice",))({}), ["unknown field 'provinice'"], "provinice"),
    ("no name", _del("name"), ["name must be a non-empty string"], "name"),
    ("boundary list", _set(("boundary",))([]), ["boundary must be a GeoJSON FeatureCollection"],
     "boundary"),
]


@pytest.mark.parametrize("mutate, words, field", [m[1:] for m in MALFORMED],
                         ids=[m[0] for m in MALFORMED])
def test_malformed_document_gets_its_specific_message(demo, mutate, words, field):
    mutate(demo)
    probs = problems_of(demo)
    hits = [p for p in probs if all(w in p["message"] for w in words)]
    assert hits, f"no problem mentions {words}: {probs}"
    if field is not None:
        assert any(p.get("field") == field for p in hits), hits


def test_self_intersecting_ring_names_the_segments():
    probs = problems_of(ring_doc([(0, 0), (10, 0), (0, 10), (10, 10)]))
    msgs = [p["message"] for p in probs]
    assert any("self-intersecting ring: segment 1 crosses segment 3 near (lon 5.0" in m
               for m in msgs), msgs


def test_ring_doubling_back_is_self_intersecting():
    probs = problems_of(ring_doc([(0, 0), (10, 0), (5, 0), (5, 5)]))
    assert any("self-intersecting" in p["message"] for p in probs)


def test_plate_larger_than_supported():
    # region "left" of a clockwise ring around a 10-degree cap: the plate is everything else,
    # reaching 170 degrees from its centre (the cap's antipode)
    cap = [((-lon + 180) % 360 - 180, 80.0) for lon in range(0, 360, 30)]
    probs = problems_of(ring_doc(cap, region="left"))
    msg = " ".join(p["message"] for p in probs)
    assert "larger than supported" in msg and f"limit is {MAX_EXTENT_DEG:g} degrees" in msg


def test_region_left_gives_the_larger_region_and_the_hemisphere_is_allowed():
    # a ring along the equator bounds a hemisphere: 2 pi R^2 (exact), on the left: the north
    half = parse_plate(ring_doc([(-120, 0), (0, 0), (120, 0)]))
    assert_allclose(half.area_km2, 2 * np.pi * 6371.0**2, rtol=1e-12)
    cap = [((-lon + 180) % 360 - 180, 40.0) for lon in range(0, 360, 30)]  # clockwise
    small = parse_plate(ring_doc(cap))
    big = parse_plate(ring_doc(cap, region="left"))
    assert_allclose(small.area_km2 + big.area_km2, 4 * np.pi * 6371.0**2, rtol=1e-12)
    assert big.document["region"] == "left" and big.area_km2 > small.area_km2
    assert problems_of(ring_doc(cap, region="biggest"))[0]["field"] == "region"


def test_every_problem_is_collected(demo):
    _move_end(demo)
    demo["sheet"]["poisson"] = 0.7
    demo["drag"]["closure"] = "nope"
    demo["boundary"]["features"][3]["properties"]["kind"] = "rift"
    probs = problems_of(demo)
    fields = {p.get("field") for p in probs}
    assert {"sheet.poisson", "drag.closure", "boundary.features[3].properties.kind"} <= fields
    # the ring is not assembled while a segment is broken, so no spurious gap message
    assert not any("ring not closed" in p["message"] for p in probs)


def test_error_is_an_input_error_with_summary(demo):
    demo["sheet"]["poisson"] = 0.7
    with pytest.raises(InputError) as info:
        parse_plate(demo)
    assert "1 problem" in str(info.value) and "sheet.poisson" in str(info.value)


@pytest.mark.parametrize("value", [None, [], "plate", 3, 2.5, True, {"boundary": None}])
def test_non_documents(value):
    with pytest.raises(ModelValidationError):
        parse_plate(value)


# --------------------------------------------------------------------------------------------
# no exception escapes (property-based)

json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6)
    | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=8),
    lambda children: st.lists(children, max_size=4)
    | st.dictionaries(st.sampled_from(["type", "features", "geometry", "properties",
                                       "coordinates", "kind", "name", "edge_km", "x"]) | st.text(max_size=4),
                      children, max_size=4),
    max_leaves=12,
)


def _paths(node, prefix=()):
    if isinstance(node, dict):
        for k, v in node.items():
            yield prefix + (k,)
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield prefix + (i,)
            yield from _paths(v, prefix + (i,))


def _only_validation_errors(doc):
    try:
        parse_plate(doc)
    except ModelValidationError as err:
        assert err.problems and all(isinstance(p["message"], str) and p["message"] for p in err.problems)


@settings(max_examples=150, deadline=None)
@given(json_values)
def test_no_exception_escapes_for_any_json(value):
    _only_validation_errors(value)


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_no_exception_escapes_for_damaged_demo(demo_text, data):
    doc = json.loads(demo_text)
    paths = sorted(_paths(doc), key=str)
    for _ in range(data.draw(st.integers(1, 3))):
        path = data.draw(st.sampled_from(paths))
        node = doc
        try:
            for k in path[:-1]:
                node = node[k]
            node[path[-1]] = data.draw(json_values)
        except (KeyError, IndexError, TypeError):
            pass  # an earlier replacement removed this path
    _only_validation_errors(doc)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.floats(-180, 180), st.floats(-90, 90)), min_size=3, max_size=7))
def test_random_rings_parse_or_fail_cleanly(ring):
    try:
        plate = parse_plate(ring_doc(ring))
    except ModelValidationError:
        return
    assert plate.area_km2 > 0
    assert sphere.spherical_polygon_area(plate.ring_xyz) > 0


# --------------------------------------------------------------------------------------------
# files: GeoJSON/GeoPackage boundary + TOML/JSON parameters


def test_geojson_and_toml_files():
    doc = load_plate_files(DATA / "square_boundary.geojson", DATA / "square_params.toml")
    plate = parse_plate(doc)
    assert plate.name == "test square"
    assert len(plate.segments) == 5  # the MultiLineString is split into its two parts
    assert plate.segments[0].properties == {"kind": "ridge", "age_myr": 60.0, "group": "ridge"}
    assert plate.segments[1].group == "north"
    assert plate.provinces[0].name == "west block" and plate.provinces[0].stiffness == 2.0
    assert plate.sheet["thickness_km"] == 80.0 and plate.mesh["refinement"][0]["edge_km"] == 10.0
    area_m2, _ = GEOD.polygon_area_perimeter([10, 15, 20, 20, 20, 10], [40, 40, 40, 42.5, 45, 45])
    assert_allclose(plate.area_km2, area_m2 / 1e6, rtol=1e-9)


def test_geopackage_in_a_projected_crs(tmp_path):
    gpd = pytest.importorskip("geopandas")
    fc = json.loads((DATA / "square_boundary.geojson").read_text())
    lines = gpd.GeoDataFrame.from_features(
        [f for f in fc["features"] if "Line" in f["geometry"]["type"]], crs=4326)
    polys = gpd.GeoDataFrame.from_features(
        [f for f in fc["features"] if f["geometry"]["type"] == "Polygon"], crs=4326)
    path = tmp_path / "plate.gpkg"
    lines.to_crs(3857).to_file(path, layer="boundary", driver="GPKG")
    polys.to_crs(3857).to_file(path, layer="provinces", driver="GPKG")
    params = tmp_path / "params.json"
    params.write_text(json.dumps({"name": "from gpkg", "mesh": {"edge_km": 40}}))
    plate = parse_plate(load_plate_files(path, params))
    assert plate.name == "from gpkg" and len(plate.provinces) == 1
    expected = {(10.0, 40.0), (10.0, 45.0), (20.0, 45.0), (20.0, 42.5), (20.0, 40.0), (15.0, 40.0)}
    got = {tuple(np.round(v, 6)) for v in plate.ring_lonlat}
    assert got == expected
    # GIS nulls (the empty slab_age_myr of the ridge row) are dropped
    assert "slab_age_myr" not in plate.segments[0].properties


def test_boundary_file_without_parameters_uses_defaults():
    doc = load_plate_files(DATA / "square_boundary.geojson")
    plate = parse_plate(doc)
    assert plate.name == "square_boundary"
    assert plate.mesh["edge_km"] == plate_defaults()["mesh"]["edge_km"]


def test_file_errors(tmp_path):
    with pytest.raises(ModelValidationError, match="boundary file not found"):
        load_plate_files(tmp_path / "missing.geojson")
    bad = tmp_path / "b.shp"
    bad.write_text("x")
    with pytest.raises(ModelValidationError, match="unsupported boundary file type"):
        load_plate_files(bad)
    broken = tmp_path / "b.geojson"
    broken.write_text("{not json")
    with pytest.raises(ModelValidationError, match="not valid GeoJSON"):
        load_plate_files(broken)
    pts = tmp_path / "p.geojson"
    pts.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {}, "geometry": {"type": "Point", "coordinates": [0, 0]}}]}))
    with pytest.raises(ModelValidationError, match="geometry type 'Point'"):
        load_plate_files(pts)
    params = tmp_path / "p.toml"
    params.write_text("[boundary]\nx = 1\n")
    with pytest.raises(ModelValidationError, match="must not hold 'boundary'"):
        load_plate_files(DATA / "square_boundary.geojson", params)
    params.write_text("provinces = []\n")
    with pytest.raises(ModelValidationError, match="provinces are given twice"):
        load_plate_files(DATA / "square_boundary.geojson", params)
    params.write_text("name = \n")
    with pytest.raises(ModelValidationError, match="cannot be parsed"):
        load_plate_files(DATA / "square_boundary.geojson", params)
