"""Fault files: traces and strike/dip points from GeoJSON, GeoPackage and CSV."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from stressmap.errors import InputError
from stressmap.io.faults import faults_from_geojson, parse_dip_direction, read_fault_file


@pytest.mark.parametrize("text, deg", [("N", 0.0), ("ene", 67.5), ("SW", 225.0),
                                       ("NNW", 337.5), (" 95 ", 95.0), (-30, 330.0)])
def test_dip_direction_compass_points(text, deg):
    assert parse_dip_direction(text) == deg


def test_multilinestring_parts_become_separate_traces():
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "M", "dip_deg": 45, "dip_direction": "W"},
         "geometry": {"type": "MultiLineString",
                      "coordinates": [[[0, 0], [0, 1]], [[1, 0], [1, 1], [1, 2]]]}}]}
    out = faults_from_geojson(fc)
    assert [len(a) for a in out["traces"]["lines"]] == [2, 3]
    assert out["traces"]["dip_direction_deg"] == [270.0, 270.0]
    assert out["traces"]["feature"] == [0, 0]


def test_problems_name_the_feature_and_field():
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"dip_deg": 60},
         "geometry": {"type": "LineString", "coordinates": [[0, 0], [0, 1]]}},
        {"type": "Feature", "properties": {"dip_deg": 120, "dip_direction_deg": "up"},
         "geometry": {"type": "LineString", "coordinates": [[0, 0], [0, 1]]}},
        {"type": "Feature", "properties": {"strike_deg": 10},
         "geometry": {"type": "Point", "coordinates": [0, 0]}},
        {"type": "Feature", "properties": {},
         "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}},
    ]}
    with pytest.raises(InputError) as err:
        faults_from_geojson(fc)
    got = {(p["row"], p["field"]) for p in err.value.problems}
    assert got == {(2, "dip_deg"), (2, "dip_direction_deg"), (3, "dip_deg"), (4, "geometry")}


def test_geopackage_and_csv_files(tmp_path):
    # independent writer: geopandas/pyogrio writes the GeoPackage that we read back
    import geopandas as gpd
    from shapely.geometry import LineString

    frame = gpd.GeoDataFrame({"name": ["G"], "dip_deg": [70.0], "dip_direction_deg": [135.0]},
                             geometry=[LineString([(0, 0), (0.1, -0.1)])], crs="EPSG:4326")
    path = tmp_path / "faults.gpkg"
    frame.to_file(path, driver="GPKG")
    parsed, collection = read_fault_file(path)
    assert parsed["traces"]["name"] == ["G"] and parsed["traces"]["dip_deg"] == [70.0]
    assert collection["type"] == "FeatureCollection"
    csv = tmp_path / "planes.csv"
    csv.write_text("# planes from a borehole image log\nname,strike_deg,dip_deg\nF1,30,60\n"
                   "F2,210,75\n")
    parsed, collection = read_fault_file(csv)
    assert collection is None
    assert parsed["planes"]["strike_deg"] == [30.0, 210.0]
    assert math.isnan(parsed["planes"]["lon"][0])


def test_missing_file_and_bad_json(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_fault_file(tmp_path / "nope.geojson")
    bad = tmp_path / "bad.geojson"
    bad.write_text("{not json")
    with pytest.raises(InputError, match="cannot read"):
        read_fault_file(bad)
    empty = tmp_path / "empty.geojson"
    empty.write_text(json.dumps({"type": "FeatureCollection", "features": []}))
    with pytest.raises(InputError, match="no faults"):
        read_fault_file(empty)


def test_demo_faults_are_fictional_and_lie_on_the_demo_plate():
    from importlib import resources

    import shapely

    from stressmap.model.plate import parse_plate

    data = resources.files("stressmap.data")
    fc = json.loads(data.joinpath("demo_faults.geojson").read_text(encoding="utf-8"))
    assert "FICTIONAL" in fc["description"] and "fictional" in fc["name"]
    assert all(f["properties"]["fictional"] is True for f in fc["features"])
    assert all("(fictional)" in f["properties"]["name"] for f in fc["features"])
    plate = parse_plate(json.loads(data.joinpath("demo_plate.json").read_text(encoding="utf-8")))
    ring = shapely.Polygon(plate.ring_lonlat)
    parsed = faults_from_geojson(fc)
    pts = [xy for line in parsed["traces"]["lines"] for xy in line]
    pts += list(zip(parsed["planes"]["lon"], parsed["planes"]["lat"]))
    pts.append((fc["site"]["lon"], fc["site"]["lat"]))
    assert shapely.contains_xy(ring, *np.array(pts).T).all()


def test_shapefile_truncated_column_names_are_read(tmp_path):
    # A shapefile's dBASE table keeps at most 10 characters of a field name (dBASE III format,
    # common practice): dip_direction_deg comes back as dip_direct. It used to be ignored, and
    # the demo's Ashvale fault flipped from dipping NE (45) to 225 with only a note.
    import warnings
    from pathlib import Path

    import geopandas as gpd

    demo = Path(__file__).parents[2] / "stressmap" / "data" / "demo_faults.geojson"
    shp = tmp_path / "demo_faults.shp"
    with warnings.catch_warnings():  # mixed-type column read as text; the driver truncates names
        warnings.simplefilter("ignore")
        frame = gpd.read_file(demo)
        frame = frame[frame.geom_type == "LineString"]  # a shapefile holds one geometry type
        frame["dip_direction_deg"] = frame["dip_direction_deg"].astype(str)
        frame.to_file(shp)
    assert "dip_direct" in gpd.read_file(shp).columns         # the format did truncate it
    parsed, _ = read_fault_file(shp)
    reference = faults_from_geojson(json.loads(demo.read_text(encoding="utf-8")))
    assert parsed["traces"]["dip_direction_deg"] == reference["traces"]["dip_direction_deg"]
    assert parsed["traces"]["dip_direction_deg"][0] == 45.0   # Ashvale: "NE"
