"""`stressmap build` / `stressmap predict` and the model directory they share.

The checks here are about the file contract (atomic model directories, outputs readable by
independent libraries: geopandas, pandas, xarray) and about agreement with the Python API; the
mechanics themselves are checked in test_sheet.py / test_model.py.
"""

from __future__ import annotations

import copy
import json
import os
from importlib import resources

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.cli import main
from stressmap.errors import NotFoundError, StorageError
from stressmap.model import build_model, predict_points
from stressmap.io.modeldir import MODEL_FILES, read_model, write_model


@pytest.fixture(scope="module")
def coarse_doc():
    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json").read_text())
    doc = copy.deepcopy(doc)
    doc["mesh"] = {"edge_km": 150.0}  # coarse: these tests are about files, not accuracy
    return doc


@pytest.fixture(scope="module")
def built_dir(tmp_path_factory, coarse_doc):
    root = tmp_path_factory.mktemp("cli")
    src = root / "plate.json"
    src.write_text(json.dumps(coarse_doc))
    assert main(["build", str(src), "-o", str(root / "model")]) == 0
    return root / "model"


def test_build_writes_a_complete_model_directory(built_dir):
    assert sorted(p.name for p in built_dir.iterdir()) == sorted(MODEL_FILES)
    # No temporary siblings are left behind by the atomic write.
    assert [p.name for p in built_dir.parent.iterdir() if p.name.startswith(".")] == []


def test_model_directory_round_trip_predicts_identically(built_dir, coarse_doc):
    back = read_model(built_dir)
    fresh = build_model(coarse_doc)
    lon, lat = np.array([-20.0, -10.0, 0.0]), np.array([-20.0, -25.0, -15.0])
    a = predict_points(back, lon, lat)
    b = predict_points(fresh, lon, lat)
    assert back.groups == fresh.groups
    assert_allclose(a["s_hmax_mpa"].values, b["s_hmax_mpa"].values, rtol=1e-10, equal_nan=True)


def test_rewrite_replaces_atomically(built_dir, tmp_path):
    model = read_model(built_dir)
    target = tmp_path / "m"
    write_model(model, target)
    before = (target / "summary.json").read_text()
    write_model(model, target)  # replacing an existing model keeps one complete copy
    assert (target / "summary.json").read_text() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m"]


def test_failed_write_leaves_nothing_visible(built_dir, tmp_path, monkeypatch):
    model = read_model(built_dir)

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(type(model.fields), "to_netcdf", broken)
    with pytest.raises(StorageError, match="No space left"):
        write_model(model, tmp_path / "m")
    assert list(tmp_path.iterdir()) == []


def test_read_missing_or_incomplete(tmp_path):
    with pytest.raises(NotFoundError):
        read_model(tmp_path / "nope")
    (tmp_path / "half").mkdir()
    (tmp_path / "half" / "definition.json").write_text("{}")
    with pytest.raises(StorageError, match="incomplete"):
        read_model(tmp_path / "half")


def test_predict_points_to_geojson_csv_netcdf(built_dir, tmp_path):
    import geopandas as gpd
    import pandas as pd

    pts = tmp_path / "wells.csv"
    pts.write_text("well,lon,lat\nW1,-20,-20\nW2,-10,-25\nFAR,100,60\n")
    for suffix in ("geojson", "csv", "nc"):
        out = tmp_path / f"pred.{suffix}"
        assert main(["predict", str(built_dir), "--points", str(pts), "-o", str(out)]) == 0
    gdf = gpd.read_file(tmp_path / "pred.geojson")
    assert list(gdf["well"]) == ["W1", "W2", "FAR"]
    for col in ("shmax_azimuth_deg", "regime", "s_hmax_mpa", "s_hmin_mpa", "shape_ratio", "max_shear_mpa"):
        assert col in gdf.columns
    assert gdf["shmax_azimuth_deg"][:2].between(0, 180).all()
    assert np.isnan(gdf["shmax_azimuth_deg"][2])  # outside the plate: reported, not extrapolated
    assert json.loads((tmp_path / "pred.geojson").read_text())["caution"] == CAUTION
    csv_text = (tmp_path / "pred.csv").read_text()
    assert csv_text.startswith("lon,lat,well,")  # header first; the caution is in the sidecar
    assert json.loads((tmp_path / "pred.json").read_text())["caution"] == CAUTION
    assert "CoordX" in (tmp_path / "pred.csvt").read_text()
    frame = pd.read_csv(tmp_path / "pred.csv", comment="#")
    assert_allclose(frame["s_hmax_mpa"][:2], gdf["s_hmax_mpa"][:2], rtol=1e-6)
    with xr.open_dataset(tmp_path / "pred.nc", engine="netcdf4") as ds:
        assert_allclose(ds["s_hmax_mpa"].values[:2], gdf["s_hmax_mpa"][:2], rtol=1e-6)


def test_predict_grid_netcdf_is_cf(built_dir, tmp_path):
    out = tmp_path / "grid.nc"
    assert main(["predict", str(built_dir), "--bbox=-30,-35,5,-5", "--spacing-km", "400",
                 "-o", str(out)]) == 0
    with xr.open_dataset(out, engine="netcdf4") as ds:
        assert ds["lon"].attrs.get("units") == "degrees_east"  # CF-1.8 coordinate units
        assert ds["lat"].attrs.get("units") == "degrees_north"
        assert "shmax_azimuth_deg" in ds and ds.attrs["caution"] == CAUTION
        az = ds["shmax_azimuth_deg"].values
        assert np.nanmin(az) >= 0 and np.nanmax(az) < 180


def test_weights_scale_the_stress(built_dir, tmp_path):
    pts = tmp_path / "p.csv"
    pts.write_text("lon,lat\n-20,-20\n")
    model = read_model(built_dir)
    twice = ",".join(f"{g}=2" for g in model.groups)
    for name, w in (("one", None), ("two", twice)):
        args = ["predict", str(built_dir), "--points", str(pts), "-o", str(tmp_path / f"{name}.csv")]
        assert main(args + (["--weights", w] if w else [])) == 0
    import pandas as pd

    one = pd.read_csv(tmp_path / "one.csv", comment="#")
    two = pd.read_csv(tmp_path / "two.csv", comment="#")
    assert_allclose(two["s_hmax_mpa"], 2 * one["s_hmax_mpa"], rtol=1e-9)  # linear sheet


@pytest.mark.parametrize("args, text", [
    (["--bbox", "1,2,3", "--spacing-km", "50"], "W,S,E,N"),
    (["--bbox=-30,-35,5,-5"], "--spacing-km"),
    (["--points", "missing.csv"], "not found"),
])
def test_predict_bad_arguments_are_specific(built_dir, tmp_path, capsys, args, text):
    code = main(["predict", str(built_dir), *args, "-o", str(tmp_path / "x.geojson")])
    assert code == 2
    assert text in capsys.readouterr().err


def test_predict_unknown_weight_group(built_dir, tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text("lon,lat\n-20,-20\n")
    code = main(["predict", str(built_dir), "--points", str(pts), "--weights", "nosuchgroup=2",
                 "-o", str(tmp_path / "x.csv")])
    assert code == 2
    assert "nosuchgroup" in capsys.readouterr().err


def test_build_reports_validation_problems(tmp_path, coarse_doc, capsys):
    doc = copy.deepcopy(coarse_doc)
    doc["boundary"]["features"][0]["properties"]["kind"] = "wormhole"
    src = tmp_path / "bad.json"
    src.write_text(json.dumps(doc))
    assert main(["build", str(src), "-o", str(tmp_path / "m")]) == 2
    err = capsys.readouterr().err
    assert "wormhole" in err
    assert not os.path.exists(tmp_path / "m")


@pytest.mark.parametrize("text", ["[" * 100_000 + "]" * 100_000, '{"name": 1' + "0" * 5000 + "}",
                                  "{not json"])
def test_build_unreadable_json_is_a_file_problem(tmp_path, capsys, text):
    # Python's json recurses per nesting level and refuses integers over 4300 digits
    # (CPython int max_str_digits): both must surface as a file problem, not a traceback.
    src = tmp_path / "bad.json"
    src.write_text(text)
    assert main(["build", str(src), "-o", str(tmp_path / "m")]) == 2
    assert "not valid JSON" in capsys.readouterr().err


def test_predict_refuses_to_overwrite_its_points_file(tmp_path, coarse_demo_dir, capsys):
    from stressmap.cli import main

    pts = tmp_path / "wells.csv"
    pts.write_text("lon,lat\n-15,-20\n")
    assert main(["predict", str(coarse_demo_dir), "--points", str(pts), "-o", str(pts)]) == 2
    assert "overwritten" in capsys.readouterr().err
    assert pts.read_text() == "lon,lat\n-15,-20\n"
