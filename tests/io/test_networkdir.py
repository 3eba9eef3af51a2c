"""Network directories: builds cached by content, one-line edits rebuild two plates, atomic writes,
and predictions over several plates (plate column, points on no plate flagged)."""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from stressmap.errors import InputError, ModelValidationError
from stressmap.io import networkdir as nd
from stressmap.io.network_files import load_network_files
from stressmap.model.network_predict import predict_network_grid, predict_network_points


def line(coords, **p):
    return {"type": "Feature", "properties": p, "geometry": {"type": "LineString", "coordinates": coords}}


def regional() -> dict:
    """Three plates in a square region bounded by free lines (a regional network)."""
    return {"name": "three", "defaults": {"mesh": {"edge_km": 250.0}},
            "lines": {"type": "FeatureCollection", "features": [
                line([[0, 0], [10, 0], [20, 0], [20, 10], [10, 10], [0, 10], [0, 0]], kind="free"),
                line([[10, 10], [10, 5]], kind="ridge", age_myr=40.0, left="B", right="A"),
                line([[10, 5], [10, 0]], kind="transform", sense="dextral", left="C", right="A"),
                line([[10, 5], [20, 5]], kind="subduction", sinks="left", left="B", right="C",
                     slab_age_myr=60.0, slab_depth_km=410.0, pull_fraction=0.1)]}}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("net") / "three"
    report = nd.build_network(regional(), out, workers=1)
    return out, report


def test_build_then_reuse_and_a_one_line_edit_rebuilds_two_plates(built, tmp_path):
    out, report = built
    assert sorted(report["built"]) == ["A", "B", "C"] and report["reused"] == []
    index = nd.read_network(out)
    assert sorted(index["built"]) == ["A", "B", "C"]
    again = nd.build_network(regional(), out, workers=1)
    assert again["built"] == [] and sorted(again["reused"]) == ["A", "B", "C"]
    edited = regional()
    edited["lines"]["features"][1]["properties"]["age_myr"] = 45.0  # the ridge between A and B
    target = tmp_path / "copy"
    import shutil

    shutil.copytree(out, target)
    third = nd.build_network(edited, target, workers=1)
    assert sorted(third["built"]) == ["A", "B"] and third["reused"] == ["C"]


def test_bad_network_writes_nothing(tmp_path):
    bad = regional()
    bad["lines"]["features"][1]["properties"]["age_myr"] = -5.0  # checked in the derived plates
    with pytest.raises(ModelValidationError) as err:
        nd.build_network(bad, tmp_path / "n", workers=1)
    fields = {p["field"] for p in err.value.problems}
    assert "lines.features[1].properties.age_myr" in fields
    assert not (tmp_path / "n").exists()
    with pytest.raises(InputError, match="unknown plate"):
        nd.build_network(regional(), tmp_path / "m", plates=["Nope"])


def test_predictions_over_plates_name_the_plate_and_flag_points_on_none(built):
    out, _ = built
    model = nd.read_network_model(out)
    lon = np.array([5.0, 15.0, 15.0, 30.0, 5.0])
    lat = np.array([5.0, 8.0, 2.0, 5.0, -20.0])
    ds = predict_network_points(model, lon, lat)
    assert ds["plate"].values.tolist() == ["A", "B", "C", "", ""]
    assert ds["inside"].values.tolist() == [True, True, True, False, False]
    assert np.isnan(ds["shmax_azimuth_deg"].values[3:]).all()
    # each plate answers as its own model would (the joined model changes nothing)
    single = nd.load_plates(out, ["B"])["B"]
    from stressmap.model import predict_points

    one = predict_points(single, lon[1:2], lat[1:2])
    np.testing.assert_allclose(ds["s_hmax_mpa"].values[1], one["s_hmax_mpa"].values[0], rtol=1e-12)
    grid = predict_network_grid(model, (-2, -2, 22, 12), 150.0)
    names = set(grid["plate"].values.ravel().tolist())
    assert names == {"A", "B", "C", ""}
    assert (grid["inside"].values == (grid["plate"].values != "")).all()


def test_network_files_demo_and_lines_file_without_params(tmp_path):
    from importlib import resources

    data = resources.files("stressmap.data")
    doc = load_network_files(data / "demo_network.geojson", data / "demo_network.toml")
    assert doc["defaults"]["mesh"]["edge_km"] == 400.0
    path = tmp_path / "lines.geojson"
    path.write_text(json.dumps(regional()["lines"]))
    plain = load_network_files(path)
    assert plain["name"] == "lines" and len(plain["lines"]["features"]) == 4
    poly = copy.deepcopy(regional()["lines"])
    poly["features"].append({"type": "Feature", "properties": {},
                             "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}})
    path.write_text(json.dumps(poly))
    with pytest.raises(ModelValidationError, match="polygons"):
        load_network_files(path)


def test_geopackage_lines_in_a_projected_crs_give_the_same_network(tmp_path):
    import geopandas as gpd
    from shapely.geometry import LineString

    from stressmap.model.network import check_network

    feats = regional()["lines"]["features"]
    frame = gpd.GeoDataFrame([f["properties"] for f in feats],
                             geometry=[LineString(f["geometry"]["coordinates"]) for f in feats],
                             crs="EPSG:4326")
    path = tmp_path / "lines.gpkg"
    frame.to_crs("EPSG:3857").to_file(path, driver="GPKG")  # read back reprojected to lon/lat
    doc = load_network_files(path)
    assert doc["name"] == "lines"
    a = check_network(doc)
    b = check_network(regional())
    assert sorted(a.plates) == sorted(b.plates) == ["A", "B", "C"]
    np.testing.assert_allclose(sorted(f.area_km2 for f in a.faces), sorted(f.area_km2 for f in b.faces),
                               rtol=1e-9)
