"""Query-point files: CSV and GeoJSON readers report bad rows by number and column."""

from __future__ import annotations

import json

import pytest
from numpy.testing import assert_allclose

from stressmap.errors import InputError
from stressmap.io.points import points_from_geojson, read_points


def test_csv_points_with_echoed_columns(tmp_path):
    p = tmp_path / "wells.csv"
    p.write_text("name,lon,lat\nA,10.5,45\nB,-3,-12.25\n")
    lon, lat, props = read_points(p)
    assert_allclose(lon, [10.5, -3.0])
    assert_allclose(lat, [45.0, -12.25])
    assert props == [{"name": "A"}, {"name": "B"}]


def test_csv_bad_rows_reported_by_row_and_column(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text("lon,lat\n1,2\nabc,3\n4,95\n")
    with pytest.raises(InputError) as err:
        read_points(p)
    found = {(q["row"], q["field"]) for q in err.value.problems}
    assert found == {(2, "lon"), (3, "lat")}


def test_csv_missing_column(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text("x,y\n1,2\n")
    with pytest.raises(InputError, match="lacks column"):
        read_points(p)


def test_geojson_file_points(tmp_path):
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [179.5, -10]},
         "properties": {"id": 7}}]}
    p = tmp_path / "p.geojson"
    p.write_text(json.dumps(fc))
    lon, lat, props = read_points(p)
    assert_allclose([lon[0], lat[0]], [179.5, -10.0])
    assert props[0]["id"] == 7


@pytest.mark.parametrize("feature, field", [
    ({"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[0, 0], [1, 1]]}}, "geometry"),
    ({"type": "Feature", "geometry": {"type": "Point", "coordinates": ["a", 1]}}, "coordinates"),
    ({"type": "Feature", "geometry": {"type": "Point", "coordinates": [200, 1]}}, "geometry"),
])
def test_geojson_bad_features_named(feature, field):
    with pytest.raises(InputError) as err:
        points_from_geojson({"type": "FeatureCollection", "features": [feature]})
    assert field in err.value.problems[0]["field"]
