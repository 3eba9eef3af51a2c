"""CLI: `stressmap indicators convert|summarise`, `stressmap smooth`, `stressmap compare`."""

from __future__ import annotations

import json
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from stressmap.cli import main
from stressmap.constants import CAUTION
from stressmap.analyses.indicators import CONVERT_COLUMNS
from stressmap.io.indicators import read_indicators

DATA = Path(__file__).parents[1] / "data"
SMALL = DATA / "indicators_small.csv"
BROKEN = DATA / "indicators_broken.csv"
DEMO = Path(str(resources.files("stressmap.data").joinpath("demo_indicators.csv")))

# The columns the issue names for `convert`, in our order, then the file's extra column.
ISSUE_COLUMNS = [
    "id", "lon", "lat", "depth_km", "type", "azimuth_deg", "strike_deg", "dip_deg", "rake_deg",
    "sigma_deg", "weight", "regime", "shmax_azimuth_deg", "aux_strike_deg", "aux_dip_deg",
    "aux_rake_deg", "p_trend_deg", "p_plunge_deg", "t_trend_deg", "t_plunge_deg", "b_trend_deg",
    "b_plunge_deg", "mechanism_class",
]


def test_convert_csv_has_exactly_the_issue_columns(tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert main(["indicators", "convert", str(SMALL), "-o", str(out)]) == 0
    table = pd.read_csv(out, comment="#")
    assert list(table.columns) == ISSUE_COLUMNS + ["source"]
    assert CONVERT_COLUMNS == ISSUE_COLUMNS
    row = table.set_index("id")
    assert_allclose(row.loc["B1", "shmax_azimuth_deg"], 100.0)
    assert row.loc["E2", "mechanism_class"] == "reverse"
    assert "wrote 10 indicators" in capsys.readouterr().out


def test_convert_geojson_reads_back(tmp_path):
    out = tmp_path / "out.geojson"
    assert main(["indicators", "convert", str(SMALL), "-o", str(out)]) == 0
    doc = json.loads(out.read_text())
    props = doc["features"][0]["properties"]
    assert set(ISSUE_COLUMNS) - {"lon", "lat"} <= set(props)
    again = read_indicators(out)
    assert_allclose(again["shmax_azimuth_deg"], read_indicators(SMALL)["shmax_azimuth_deg"], equal_nan=True)


def test_convert_broken_file_lists_rows(tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert main(["indicators", "convert", str(BROKEN), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    for row, col in [(2, "lon"), (3, "lat"), (4, "type"), (8, "id"), (10, "weight")]:
        assert f"row {row}, field {col}" in err
    assert not out.exists()  # nothing written on failure
    assert main(["indicators", "convert", str(BROKEN), "--skip-bad", "-o", str(out)]) == 0
    err = capsys.readouterr().err
    assert "skipped 9 bad row(s)" in err and "row 2, field lon" in err
    assert len(pd.read_csv(out)) == 2


def test_convert_rejects_unknown_output_type(tmp_path, capsys):
    assert main(["indicators", "convert", str(SMALL), "-o", str(tmp_path / "x.xlsx")]) == 2
    assert "output" in capsys.readouterr().err


def test_summarise_text_and_json(capsys):
    assert main(["indicators", "summarise", str(SMALL)]) == 0
    out = capsys.readouterr().out
    assert "10 indicators (1 without a defined SHmax)" in out and "focal_mechanism" in out
    assert main(["indicators", "summarise", str(SMALL), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    assert_allclose(s["by_type"]["breakout"]["mean_shmax_azimuth_deg"], 100.0, atol=1e-9)


def test_smooth_outputs(tmp_path, capsys):
    nc = tmp_path / "grid.nc"
    args = ["smooth", str(DEMO), "--bbox=-36,-36,10,-4", "--radius-km", "400", "--spacing-km", "300"]
    assert main(args + ["-o", str(nc)]) == 0
    import xarray as xr

    with xr.open_dataset(nc, engine="netcdf4") as ds:
        assert ds.attrs["Conventions"] == "CF-1.8"
        assert int((ds["status"].values == 0).sum()) > 10
        assert ds.attrs["caution"] == CAUTION
    capsys.readouterr()
    assert main(args) == 0
    fc = json.loads(capsys.readouterr().out)
    assert fc["type"] == "FeatureCollection" and fc["radius_km"] == 400.0
    assert main(["smooth", str(DEMO), "--bbox=-36,-36,10,-4", "--radius-km", "0"]) == 2
    assert "radius_km" in capsys.readouterr().err
    assert main(["smooth", str(DEMO), "--bbox=1,2,3", "--radius-km", "50"]) == 2


def test_compare_writes_everything(coarse_demo_dir, tmp_path, capsys):
    out = tmp_path / "cmp"
    assert main(["compare", str(coarse_demo_dir), str(DEMO), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "weighted mean |misfit|" in text and CAUTION in text
    names = {p.name for p in out.iterdir()}
    assert {"indicators.geojson", "indicators.csv", "summary.json", "map.png", "rose.png"} <= names
    assert (out / "map.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (out / "rose.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    summary = json.loads((out / "summary.json").read_text())
    assert summary["caution"] == CAUTION and summary["model_id"] == coarse_demo_dir.name
    assert summary["overall"]["count"] > 250
    csv_text = (out / "indicators.csv").read_text()
    assert csv_text.startswith("id,lon,lat,")  # header first; caution in the sidecar
    assert json.loads((out / "indicators.json").read_text())["caution"] == CAUTION
    table = pd.read_csv(out / "indicators.csv")
    assert {"misfit_deg", "predicted_shmax_azimuth_deg", "regime_agreement", "province"} <= set(table.columns)
    fc = json.loads((out / "indicators.geojson").read_text())
    assert fc["caution"] == CAUTION and len(fc["features"]) == len(table)


def test_compare_weights_and_errors(coarse_demo_dir, tmp_path, capsys):
    out = tmp_path / "cmp"
    assert main(["compare", str(coarse_demo_dir), str(SMALL), "-o", str(out), "--no-pictures",
                 "--weights", "nosuchgroup=2"]) == 2
    assert "nosuchgroup" in capsys.readouterr().err
    assert main(["compare", str(tmp_path / "missing"), str(SMALL), "-o", str(out)]) == 2
    group = "ridge"
    assert main(["compare", str(coarse_demo_dir), str(DEMO), "-o", str(out), "--no-pictures",
                 "--weights", f"{group}=2"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["weights"][group] == 2.0
    assert not (out / "map.png").exists()


def test_demo_data_is_labelled_fictional_and_complete():
    assert DEMO.read_text().startswith("id,lon,lat,")  # a plain table; the label is in the sidecar
    assert "FICTIONAL" in json.loads(DEMO.with_suffix(".json").read_text())["description"]
    gdf = read_indicators(DEMO)
    assert 250 <= len(gdf) <= 500
    assert set(gdf["type"]) == {"breakout", "tensile_fracture", "hydraulic_fracture", "overcoring",
                                "fault_slip_inversion", "geological", "focal_mechanism"}
    assert (gdf["source"].str.contains("fictional")).all()
    assert (gdf["note"].fillna("").str.contains("anomaly")).sum() >= 20
    assert np.isfinite(gdf["shmax_azimuth_deg"]).mean() > 0.95


def test_demo_indicator_ids_come_from_our_own_type_names():
    # Ids are MER-<our type name>-NNN (anomalies MER-local-anomaly-NNN, MER-random-orientation-NNN),
    # not two-letter type codes.
    import pandas as pd

    from stressmap.analyses.indicators import TYPES
    from stressmap.data.make_demo_indicators import demo_id

    table = pd.read_csv(Path(__file__).parents[2] / "stressmap" / "data" / "demo_indicators.csv",
                        comment="#", dtype=str, keep_default_na=False)
    labels = table["id"].str.extract(r"^MER-(.+)-(\d{3})$")
    assert labels.notna().all().all()
    anomaly = table["note"].str.startswith("deliberate local anomaly")
    assert (labels[0][~anomaly] == table["type"][~anomaly].str.replace("_", "-")).all()
    assert set(labels[0][anomaly]) == {"local-anomaly", "random-orientation"}
    assert set(t.replace("_", "-") for t in TYPES) <= set(labels[0])
    assert table["id"].is_unique and demo_id("breakout", 1) == "MER-breakout-001"
