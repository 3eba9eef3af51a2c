"""Spec of stressmap.validate, the one field validator (edge cases also run as its doctests)."""

from __future__ import annotations

import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stressmap import validate as v
from stressmap.errors import InputError, ModelValidationError


def messages(problems):
    return [p["message"] for p in problems]


# -- numbers ------------------------------------------------------------------------------------

@pytest.mark.parametrize("value, expected", [
    (0, 0.0), (-2.5, -2.5), (np.float32(1.5), 1.5), (np.int64(7), 7.0),
    (sys.float_info.max, sys.float_info.max),
    (sys.float_info.min, sys.float_info.min),   # smallest normal double (IEEE 754 binary64)
])
def test_number_accepts_finite_normal_numbers(value, expected):
    p = []
    assert v.number(value, "x", p) == expected and p == []


@pytest.mark.parametrize("value, fragment", [
    (True, "must be a number, got a boolean"),
    ("1", "must be a number, got the string '1'"),
    (None, "must be a number, got null"),
    ([1], "must be a number, got an array"),
    (float("nan"), "must be finite, got nan"),
    (float("-inf"), "must be finite, got -inf"),
    (10**400, "too large"),                    # a JSON integer no binary64 can hold
    (5e-324, "subnormal"),                     # smallest subnormal double (IEEE 754 binary64)
])
def test_number_refuses_non_numbers_with_the_field_named(value, fragment):
    p = []
    assert v.number(value, "sheet.thickness_km", p) is None
    assert len(p) == 1 and p[0]["field"] == "sheet.thickness_km"
    assert p[0]["message"].startswith("thickness_km ") and fragment in p[0]["message"]


def test_number_subnormal_allowed_on_request():
    assert v.number(5e-324, "x", [], subnormal=True) == 5e-324


@pytest.mark.parametrize("value, kw, message", [
    (0, dict(low=0, low_inclusive=False), "x must be > 0, got 0"),
    (-1, dict(low=0), "x must be >= 0, got -1"),
    (0.5, dict(high=0.5, high_inclusive=False), "x must be < 0.5, got 0.5"),
    (1.5, dict(low=0, high=1), "x must be <= 1, got 1.5"),
    (2.5, dict(integer=True), "x must be a whole number, got 2.5"),
])
def test_number_ranges_name_the_side_broken(value, kw, message):
    p = []
    assert v.number(value, "x", p, **kw) is None
    assert messages(p) == [message]


@pytest.mark.parametrize("value, kw", [
    (0, dict(low=0)), (1, dict(high=1)), (0.0, dict(low=0, high=0)), (3.0, dict(integer=True)),
])
def test_number_inclusive_bounds_are_inclusive(value, kw):
    p = []
    assert v.number(value, "x", p, **kw) == value and p == []


def test_number_missing_null_and_text():
    p = []
    assert v.number(v.MISSING, "x", p) is None and p == []
    assert v.number(None, "x", p, nullable=True) is None and p == []
    assert v.number(v.MISSING, "depth_km", p, required="depth below the surface in km") is None
    assert messages(p) == ["missing 'depth_km' (depth below the surface in km)"]
    p = []
    assert v.number(" -3e2 ", "c", p, text=True) == -300.0
    assert v.number("abc", "c", p, text=True, row=4) is None
    assert v.number("nan", "c", p, text=True) is None
    assert messages(p) == ["c must be a number, got the string 'abc'", "c must be finite, got nan"]
    assert p[0]["row"] == 4


def test_number_pair():
    p = []
    assert v.number_pair([1, 2], "u.r", p) == (1.0, 2.0)
    assert v.number_pair([2, 1], "u.r", p) is None
    assert v.number_pair([1, float("nan")], "u.r", p) is None
    assert v.number_pair([-1, 1], "u.r", p, low=0) is None
    assert [q["field"] for q in p] == ["u.r"] * 3


# -- enumerations, flags, text --------------------------------------------------------------

def test_choice():
    p = []
    assert v.choice("normal", ("normal", "reverse"), "regime", p) == "normal"
    assert v.choice("REVERSE ", ("normal", "reverse"), "regime", p, casefold=True) == "reverse"
    assert v.choice("REVERSE", ("normal", "reverse"), "regime", p) is None
    assert v.choice(None, ("a",), "regime", p) is None
    assert messages(p) == ["unknown regime 'REVERSE'; expected one of normal, reverse",
                           "unknown regime null; expected one of a"]


def test_boolean_and_text():
    p = []
    assert v.boolean(False, "f", p) is False
    assert v.boolean("off", "f", p, text=True) is False
    assert v.boolean("maybe", "f", p, text=True) is None
    assert v.text("ab", "t", p, max_length=2) == "ab"
    assert v.text("abc", "t", p, max_length=2) is None
    assert v.text("", "t", p, empty=True) == ""
    assert [q["field"] for q in p] == ["f", "t"]


# -- positions and boxes ----------------------------------------------------------------------

@pytest.mark.parametrize("pos, ok", [
    ([180, 90], True), ([-180, -90], True), ([0, 0, 100.0], True),   # RFC 7946 3.1.1: alt allowed
    ([180.0001, 0], False), ([0, 90.0001], False), ([0, 0, 0, 0], False), ([True, 0], False),
])
def test_position_bounds(pos, ok):
    p = []
    assert (v.position(pos, "c", p) is not None) is ok
    assert (p == []) is ok


def test_position_wrapped_longitudes_when_asked():
    assert v.position([350, 10], "c", [], lon_range=None) == (350.0, 10.0)
    assert v.position([350, 10], "c", [], lon_range=(-360, 360)) == (350.0, 10.0)


def test_lonlat_arrays_limits_listed_rows():
    p = []
    lat = np.full(50, 95.0)
    assert not v.lonlat_arrays(np.zeros(50), lat, lambda i: f"points[{i}]", p, max_listed=5)
    assert len(p) == 6 and p[0]["row"] == 1 and p[4]["field"] == "points[4]"
    assert p[5]["message"] == "45 more rows with bad latitude"


def test_lonlat_arrays_names_columns_and_refuses_nan():
    p = []
    assert not v.lonlat_arrays([np.nan, 1.0, 200.0], [0.0, np.inf, 0.0], ("lon", "lat"), p,
                               first_row=2)
    assert [(q["field"], q["row"]) for q in p] == [("lat", 3), ("lon", 2), ("lon", 4)]
    assert "finite" in p[0]["message"] and "outside [-180, 180]" in p[2]["message"]


@pytest.mark.parametrize("box, width", [
    ((-10, 0, 20, 1), 30.0),
    ((170, 0, -170, 1), 20.0),     # across the antimeridian
    ((350, 0, 10, 1), 20.0),       # 0..360 longitudes, across Greenwich
    ((170, 0, 190, 1), 20.0),      # 0..360 longitudes, no crossing needed
    ((-180, 0, 180, 1), 360.0),    # the whole globe
    ((0, 0, 360, 1), 360.0),
])
def test_bbox_one_antimeridian_rule(box, width):
    p = []
    assert v.bbox(list(box), "bbox", p) == tuple(float(x) for x in box) and p == []
    assert v.bbox_width_deg(box[0], box[2]) == width


@pytest.mark.parametrize("box, fragment", [
    ([5, 0, 5, 1], "must differ"),
    ([0, 1, 5, 1], "south 1 must be below north 1"),
    ([0, -91, 5, 1], "within [-90, 90]"),
    ([-181, 0, 5, 1], "within [-180, 360]"),
    ([-90, 0, 300, 1], "span 390 degrees"),
    ([0, 0, 5], "four finite numbers"),
    ([0, 0, 5, float("inf")], "four finite numbers"),
    ("0,0,5,1", "four finite numbers"),   # text only when asked for
])
def test_bbox_refusals_name_the_field(box, fragment):
    p = []
    assert v.bbox(box, "region.bbox", p) is None
    assert p and all(q["field"] == "region.bbox" for q in p)
    assert any(fragment in m for m in messages(p)), messages(p)


# -- weights, unknown fields, raising -------------------------------------------------------------

def test_weights_and_weights_text_agree():
    p = []
    assert v.weights({"ridge": 2, "slab": 0.5}, "weights", p) == v.weights_text(
        "ridge=2,slab:0.5", "--weights", p) == {"ridge": 2.0, "slab": 0.5}
    assert p == []
    assert v.weights_text("ridge=inf", "--weights", p) is None
    assert v.weights_text("=1", "--weights", p) is None
    assert [q["field"] for q in p] == ["--weights", "--weights"]


def test_raise_problems_collects_all_into_the_given_error():
    p = []
    v.number("a", "sheet.poisson", p)
    v.number(-1, "sheet.thickness_km", p, low=0, low_inclusive=False)
    with pytest.raises(ModelValidationError) as err:
        v.raise_problems(p, "invalid plate model document", ModelValidationError)
    assert [q["field"] for q in err.value.problems] == ["sheet.poisson", "sheet.thickness_km"]
    assert isinstance(err.value, InputError)


# -- the readers use this module: the same bad value reads the same everywhere -----------------

def _demo_plate():
    import importlib.resources
    import json

    return json.loads(importlib.resources.files("stressmap.data").joinpath("demo_plate.json")
                      .read_text(encoding="utf-8"))


def _plate_problem(doc, field):
    from stressmap.model.plate import parse_plate

    with pytest.raises(ModelValidationError) as err:
        parse_plate(doc)
    hits = [p for p in err.value.problems if p.get("field") == field]
    assert len(hits) == 1, err.value.problems
    return hits[0]["message"]


def _fault_problem(tmp_path, props, field):
    import json

    from stressmap.io.faults import read_fault_file

    path = tmp_path / "faults.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": props,
         "geometry": {"type": "Point", "coordinates": [0.0, 0.0]}}]}))
    with pytest.raises(InputError) as err:
        read_fault_file(path)
    hits = [p for p in err.value.problems if p.get("field") == field]
    assert len(hits) == 1 and hits[0]["row"] == 1, err.value.problems
    return hits[0]["message"]


def _expected(value, field, **kw):
    p = []
    assert v.number(value, field, p, **kw) is None
    return p[0]["message"]


@pytest.mark.parametrize("bad", [True, [60], {"value": 60}, 10**400, 5e-324])
def test_plate_document_and_fault_file_report_a_bad_number_alike(tmp_path, bad):
    doc = _demo_plate()
    doc["boundary"]["features"][0]["properties"]["age_myr"] = bad
    plate_msg = _plate_problem(doc, "boundary.features[0].properties.age_myr")
    fault_msg = _fault_problem(tmp_path, {"strike_deg": 10, "dip_deg": bad}, "dip_deg")
    assert plate_msg == _expected(bad, "age_myr")
    assert fault_msg == _expected(bad, "dip_deg")
    assert plate_msg.removeprefix("age_myr ") == fault_msg.removeprefix("dip_deg ")


@pytest.mark.parametrize("value, plate_field, fault_field", [
    (-3.0, ("age_myr", dict(low=0, low_inclusive=False, high=400)),
     ("dip_deg", dict(low=0, high=90))),
    (120, ("pull_fraction", dict(low=0, high=1)), ("dip_deg", dict(low=0, high=90))),
])
def test_range_messages_come_from_the_validator(tmp_path, value, plate_field, fault_field):
    doc = _demo_plate()
    seg = next(i for i, f in enumerate(doc["boundary"]["features"])
               if f["properties"]["kind"] == "subduction")
    name, kw = plate_field
    doc["boundary"]["features"][seg]["properties"][name] = value
    assert _plate_problem(doc, f"boundary.features[{seg}].properties.{name}") == \
        _expected(value, name, **kw)
    name, kw = fault_field
    assert _fault_problem(tmp_path, {"strike_deg": 10, name: value}, name) == \
        _expected(value, name, **kw)


def test_plate_position_and_cli_bbox_and_grid_use_the_one_box_rule(tmp_path):
    from stressmap.cli.model import parse_bbox
    from stressmap.geo.grid import regular_grid

    with pytest.raises(InputError) as cli:
        parse_bbox("10,0,10,5")
    with pytest.raises(InputError) as grid:
        regular_grid((10, 0, 10, 5), 50.0)
    p = []
    v.bbox([10, 0, 10, 5], "--bbox", p)
    assert cli.value.problems == p
    assert [q["message"] for q in grid.value.problems] == messages(p)
    doc = _demo_plate()
    doc["boundary"]["features"][2]["geometry"]["coordinates"][0] = [10.0, 95.0]
    field = "boundary.features[2].geometry.coordinates[0]"
    p = []
    v.position([10.0, 95.0], field, p)
    assert _plate_problem(doc, field) == p[0]["message"]


# -- no JSON value makes a checker raise -------------------------------------------------------


JSON = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=20),
    lambda inner: st.lists(inner, max_size=5) | st.dictionaries(st.text(max_size=5), inner, max_size=5),
    max_leaves=12)


@settings(max_examples=300, deadline=None)
@given(JSON)
def test_any_json_value_gives_a_value_or_named_problems(value):
    checks = [
        lambda p: v.number(value, "f", p, low=0, high=1, integer=True),
        lambda p: v.number(value, "f", p, text=True, required=True),
        lambda p: v.number_pair(value, "f", p, low=0, text=","),
        lambda p: v.choice(value, ("a", "b"), "f", p, casefold=True),
        lambda p: v.boolean(value, "f", p, text=True),
        lambda p: v.text(value, "f", p, max_length=5),
        lambda p: v.position(value, "f", p, text=True, mapping=True),
        lambda p: v.positions(value, "f", p, min_count=2),
        lambda p: v.bbox(value, "f", p, text=True),
        lambda p: v.weights(value, "f", p),
    ]
    for check in checks:
        p = []
        out = check(p)
        assert (out is None) == bool(p) or (out is None and not p)
        assert all(q["field"].startswith("f") and q["message"] for q in p)
