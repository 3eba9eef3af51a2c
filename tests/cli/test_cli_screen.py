"""`stressmap screen`: the command's options, its JSON contract, files and errors."""

from __future__ import annotations

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.cli import main

BASE = ["screen", "--site=-15.0,-20.0", "--depth-km", "3"]
ORIENT = ["--shmax-azimuth-deg", "40", "--regime", "normal"]


def run_json(capsys, *args):
    assert main([*BASE, *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_json_contract_without_a_model(capsys):
    doc = run_json(capsys, *ORIENT, "--plane", "040/60", "--plane", "130/80")
    for key in ("sv_mpa", "pp_mpa", "shmax_mpa", "shmin_mpa", "shmax_lower_mpa",
                "shmax_upper_mpa", "shmin_lower_mpa", "shmin_upper_mpa", "caution"):
        assert key in doc
    assert doc["caution"].startswith(CAUTION)
    assert "local codes" in doc["caution"] and "licensed" in doc["caution"]
    for plane in doc["planes"]:
        for key in ("strike_deg", "dip_deg", "normal_stress_mpa", "shear_stress_mpa",
                    "slip_tendency", "dilation_tendency", "pore_pressure_margin_mpa"):
            assert isinstance(plane[key], float)
    # Sv = rho g z with the default 2450 kg/m^3 (common-practice 24 MPa/km); Pp hydrostatic
    assert_allclose(doc["sv_mpa"], 2450 * 9.81 * 3000 / 1e6, rtol=1e-12)
    assert_allclose(doc["pp_mpa"], 1000 * 9.81 * 3000 / 1e6, rtol=1e-12)
    q = (np.sqrt(0.6**2 + 1) + 0.6) ** 2  # Jaeger & Cook
    assert_allclose(doc["shmin_mpa"], doc["pp_mpa"] + (doc["sv_mpa"] - doc["pp_mpa"]) / q)
    assert doc["shmin_lower_mpa"] <= doc["shmin_mpa"] <= doc["shmin_upper_mpa"]
    assert doc["shmax_lower_mpa"] <= doc["shmax_mpa"] <= doc["shmax_upper_mpa"]
    margins = [p["pore_pressure_margin_mpa"] for p in doc["planes"]]
    assert margins == sorted(margins) and [p["rank"] for p in doc["planes"]] == [1, 2]
    # 040/60 strikes along SHmax and dips near the optimal 60.5 deg: nearly critical
    assert doc["planes"][0]["strike_deg"] == 40.0
    assert abs(doc["planes"][0]["pore_pressure_margin_mpa"]) < 0.05


def test_overrides_of_physics_and_magnitudes(capsys, tmp_path):
    prof = tmp_path / "density.csv"
    prof.write_text("# layered overburden\ntop_km,density_kg_m3\n0,2200\n1,2500\n")
    doc = run_json(capsys, *ORIENT, "--density-profile", str(prof), "--pore-pressure-mpa",
                   "33", "--shmin-mpa", "46", "--friction", "0.7", "--cohesion-mpa", "1",
                   "--plane", "040/60")
    assert_allclose(doc["sv_mpa"], (2200 + 2 * 2500) * 9.81e3 / 1e6, rtol=1e-12)
    assert doc["pp_mpa"] == 33.0 and doc["shmin_mpa"] == 46.0
    assert doc["sources"]["shmin_mpa"] == "user" and doc["sources"]["pp_mpa"] == "user"
    # normal regime, measured Shmin: SHmax = Shmin + phi (Sv - Shmin) with the default phi 0.5
    assert_allclose(doc["shmax_mpa"], 46 + 0.5 * (doc["sv_mpa"] - 46))
    p = doc["planes"][0]
    eff = p["normal_stress_mpa"] - 33.0
    assert_allclose(p["pore_pressure_margin_mpa"], eff - (p["shear_stress_mpa"] - 1.0) / 0.7)


def test_traces_from_a_geojson_file_get_right_hand_rule_strikes(capsys, tmp_path):
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "Crossing", "dip_deg": 70,
                                           "dip_direction_deg": "E"},
         # digitised southward, slightly west of south then north: strikes near 0/360
         "geometry": {"type": "LineString",
                      "coordinates": [[-15.0, -19.9], [-15.001, -19.95], [-15.0, -20.0]]}},
        {"type": "Feature", "properties": {"name": "Point plane", "strike_deg": 130,
                                           "dip_deg": 80},
         "geometry": {"type": "Point", "coordinates": [-15.02, -20.01]}},
    ]}
    path = tmp_path / "faults.geojson"
    path.write_text(json.dumps(fc))
    out_geo = tmp_path / "out.geojson"
    doc = run_json(capsys, *ORIENT, "--faults", str(path), "--geojson", str(out_geo))
    segs = [p for p in doc["planes"] if p["kind"] == "trace segment"]
    assert len(segs) == 2
    for s in segs:  # dipping east -> strike near north (0/360), dip direction near 90
        assert min(s["strike_deg"], 360 - s["strike_deg"]) < 5.0
        assert abs(s["dip_direction_deg"] - 90.0) < 5.0
    kinds = {}
    for layer in ("traces", "planes", "sites"):  # one geometry kind per layer
        geo = json.loads((tmp_path / f"out_{layer}.geojson").read_text())
        assert geo["type"] == "FeatureCollection" and geo["caution"].startswith(CAUTION)
        assert geo["name"] == layer
        kinds[layer] = sorted(f["geometry"]["type"] for f in geo["features"])
    assert kinds == {"traces": ["LineString", "LineString"], "planes": ["Point"], "sites": ["Point"]}


def test_csv_file_carries_the_caution(capsys, tmp_path):
    out = tmp_path / "planes.csv"
    assert main([*BASE, *ORIENT, "--plane", "040/60", "--csv", str(out)]) == 0
    text = out.read_text()
    assert text.startswith("lon,lat,at_site,")  # header first
    assert json.loads(out.with_suffix(".json").read_text())["caution"].startswith(CAUTION)
    import pandas as pd

    frame = pd.read_csv(out)
    assert list(frame["strike_deg"]) == [40.0]
    assert "pore_pressure_margin_mpa" in frame.columns
    printed = capsys.readouterr().out
    assert printed.startswith("CAUTION:") and printed.rstrip().endswith(CAUTION)
    assert printed.count("licensed") == 2  # once at the top, once at the end: no repeat after it


def test_sampling_reports_percentiles_and_probability(capsys):
    doc = run_json(capsys, *ORIENT, "--plane", "040/60", "--plane", "130/80",
                   "--friction-range", "0.5,0.7", "--pore-gradient-range-mpa-km", "9.8,12",
                   "--azimuth-sigma-deg", "10", "--samples", "400", "--seed", "3",
                   "--margin-threshold-mpa", "2")
    unc = doc["uncertainty"]
    assert unc["samples"] == 400 and "sigma 10 deg (user-given)" in unc["orientation_source"]
    for p in doc["planes"]:
        assert p["margin_band_low_mpa"] <= p["margin_median_mpa"] <= p["margin_band_high_mpa"]
        assert 0.0 <= p["reactivation_share"] <= 1.0
    # the near-critical plane is far more likely below 2 MPa than the steep cross plane
    assert doc["planes"][0]["reactivation_share"] > 0.3
    assert doc["planes"][1]["reactivation_share"] < 0.05
    assert unc["margin_band_percentiles"] == [10.0, 90.0]


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["--plane", "040/60"], "--shmax-azimuth-deg"),          # no model, no orientation
        ([*ORIENT, "--plane", "40-60"], "STRIKE/DIP"),
        ([*ORIENT, "--plane", "040/95"], "dip must be between 0 and 90"),
        ([*ORIENT, "--pore-pressure-mpa", "80"], "reaches the vertical stress"),
        ([*ORIENT, "--shmin-mpa", "90"], "wrong side of Sv"),
        ([*ORIENT, "--friction-range", "0.8,0.5"], "exceeds high"),
    ],
)
def test_errors_are_specific(capsys, args, fragment):
    assert main([*BASE, *args]) == 2
    assert fragment in capsys.readouterr().err


def test_dip_direction_along_the_trace_is_rejected_with_its_feature(capsys, tmp_path):
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"dip_deg": 60, "dip_direction_deg": 0},
         "geometry": {"type": "LineString", "coordinates": [[-15, -20.1], [-15, -20.0]]}}]}
    path = tmp_path / "f.geojson"
    path.write_text(json.dumps(fc))
    assert main([*BASE, *ORIENT, "--faults", str(path)]) == 2
    err = capsys.readouterr().err
    assert "dip direction" in err and "row 1" in err


def test_with_a_model_directory_and_overrides(capsys, coarse_demo_dir, coarse_demo_model):
    from stressmap.model import predict_points

    doc = run_json(capsys, "--model", str(coarse_demo_dir), "--plane", "040/60")
    pred = predict_points(coarse_demo_model, np.array([-15.0]), np.array([-20.0]))
    assert_allclose(doc["shmax_azimuth_deg"], float(pred["shmax_azimuth_deg"].values[0]))
    assert doc["regime"] == str(pred["regime"].values[0])
    assert doc["sources"] == {**doc["sources"], "shmax_azimuth_deg": "model", "regime": "model",
                              "shape_ratio": "model"}
    over = run_json(capsys, "--model", str(coarse_demo_dir), "--plane", "040/60",
                    "--regime", "reverse", "--shape-ratio", "0.2")
    assert over["regime"] == "reverse" and over["sources"]["regime"] == "user"
    assert over["shmin_mpa"] >= over["sv_mpa"]  # reverse: Sv is the least stress
    assert_allclose(over["shmax_azimuth_deg"], doc["shmax_azimuth_deg"])


def test_site_outside_the_model_plate(capsys, coarse_demo_dir):
    assert main(["screen", "--site=150,60", "--depth-km", "3", "--model",
                 str(coarse_demo_dir)]) == 2
    assert "outside" in capsys.readouterr().err


def test_density_profile_with_the_optional_gradient_left_empty(capsys, tmp_path):
    # README: `gradient_kg_m3_per_km` is optional per layer; an empty cell means no gradient
    # (it was refused as "not a number").
    prof = tmp_path / "layers.csv"
    prof.write_text("top_km,density_kg_m3,gradient_kg_m3_per_km\n0,2200,\n1,2400,100\n")
    doc = run_json(capsys, *ORIENT, "--density-profile", str(prof), "--plane", "040/60")
    # Sv = g (2200 * 1 km + 2400 * 2 km + 100 * 2^2 / 2) -- the analytic integral of the layers
    assert_allclose(doc["sv_mpa"], 9.81 * (2200 * 1e3 + 2400 * 2e3 + 100 * 4 / 2 * 1e3) / 1e6,
                    rtol=1e-12)
    assert doc["density_profile"]["gradient_kg_m3_per_km"][0] == 0.0
    bad = tmp_path / "bad.csv"
    bad.write_text("top_km,density_kg_m3,gradient_kg_m3_per_km\n0,2200,x\n")
    assert main([*BASE, *ORIENT, "--density-profile", str(bad)]) == 2
    assert "gradient_kg_m3_per_km" in capsys.readouterr().err


def test_hints_name_flags_not_request_fields(capsys, coarse_demo_dir):
    """The CLI's notes speak of --ensemble-members, not the HTTP field ensemble_members."""
    doc = run_json(capsys, "--model", str(coarse_demo_dir), "--plane", "040/60",
                   "--samples", "20")
    hint = [n for n in doc["notes"] if "ensemble" in n]
    assert hint and "--ensemble-members" in hint[0] and "--ensemble-distributions" in hint[0]
    assert not any("ensemble_members" in n or "ensemble_distributions" in n for n in doc["notes"])


def test_errors_name_the_flag_that_set_the_value(capsys):
    assert main([*BASE, *ORIENT, "--plane", "040/60", "--friction-range", "0.8,0.5"]) == 2
    err = capsys.readouterr().err
    assert "--friction-range" in err and "friction_range" not in err


def test_density_profile_errors_name_the_file_columns_not_options(tmp_path, capsys):
    # a file's column is reported as that column, even where an option of a similar name exists
    # (density_kg_m3 is both a profile column and the destination of --density-kg-m3)
    wrong = tmp_path / "wrong.csv"
    wrong.write_text("lon,lat\n1,2\n")
    assert main(["screen", "--site=-15,-20", "--depth-km", "3", *ORIENT,
                 "--density-profile", str(wrong)]) == 2
    err = capsys.readouterr().err
    assert "lacks column(s) top_km, density_kg_m3" in err
    assert "field density_kg_m3: required column missing" in err
    assert "--density-kg-m3" not in err
    bad = tmp_path / "bad.csv"
    bad.write_text("top_km,density_kg_m3\n0,2400\n1,abc\n")
    assert main(["screen", "--site=-15,-20", "--depth-km", "3", *ORIENT,
                 "--density-profile", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "row 2, field density_kg_m3: density_kg_m3 must be a number" in err
    # the option itself is still named as the option
    assert main(["screen", "--site=-15,-20", "--depth-km", "3", *ORIENT,
                 "--density-kg-m3", "-5"]) == 2
    assert "field --density-kg-m3" in capsys.readouterr().err
