"""Indicator reader: conversion of every type to SHmax, uncertainty/weight rules, bad-row reports,
and the three file formats (CSV, GeoJSON, GeoPackage) giving the same table."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import indicators
from stressmap.errors import IndicatorFileError, InputError
from stressmap.formats.indicators import indicators_from_csv_text, indicators_from_geojson
from stressmap.io.indicators import read_indicators

DATA = Path(__file__).parents[1] / "data"


@pytest.fixture(scope="module")
def small():
    return read_indicators(DATA / "indicators_small.csv")


def test_every_type_converted(small):
    got = dict(zip(small["id"], small["shmax_azimuth_deg"]))
    # Common practice (e.g. Zoback 2007, Reservoir Geomechanics, ch. 6, from memory): breakouts
    # form perpendicular to SHmax; drilling-induced tensile and hydraulic fractures open parallel
    # to it; overcoring, fault-slip inversions and geological indicators give SHmax itself.
    expected = {
        "B1": 100.0,   # breakout 10 -> perpendicular
        "T1": 10.0,    # tensile fracture parallel
        "H1": 170.0,   # hydraulic fracture parallel
        "O1": 20.0,    # overcoring 200 -> the same axis, 20
        "F1": 150.0,   # fault-slip inversion -30 -> 150
        "G1": 95.0,    # geological (dyke) parallel
        # Focal mechanisms (Lund & Townend 2007; for these simple cases SHmax is the P trend, or
        # the B trend when P is vertical -- common practice):
        "E1": 135.0,   # left-lateral on a N-S vertical plane: P trends 135
        "E2": 0.0,     # thrust striking E-W: P horizontal N-S
        "E3": 30.0,    # normal fault striking 30: P vertical, B (SHmax) along strike
    }
    for k, v in expected.items():
        assert abs(float(np.mod(got[k] - v + 90.0, 180.0) - 90.0)) < 1e-9, k
    assert np.isnan(got["E4"])  # vertical dip-slip: undefined at shape ratio 0.5 (Lund & Townend)
    assert ((small["shmax_azimuth_deg"].dropna() >= 0) & (small["shmax_azimuth_deg"].dropna() < 180)).all()


def test_focal_columns_and_classes(small):
    e = small.set_index("id")
    for col in indicators.FOCAL_COLUMNS:
        assert col in small.columns
    assert e.loc["E1", "mechanism_class"] == "strike-slip"
    assert e.loc["E2", "mechanism_class"] == "reverse"
    assert e.loc["E3", "mechanism_class"] == "normal"
    assert e.loc["E4", "mechanism_class"] == "oblique"
    assert_allclose([e.loc["E1", "aux_strike_deg"], e.loc["E1", "aux_dip_deg"]], [270.0, 90.0], atol=1e-9)
    assert_allclose([e.loc["E2", "p_trend_deg"], e.loc["E2", "p_plunge_deg"]], [0.0, 0.0], atol=1e-9)
    assert_allclose(e.loc["E2", "t_plunge_deg"], 90.0, atol=1e-9)
    assert e.loc["B1", "mechanism_class"] == "" and np.isnan(e.loc["B1", "p_trend_deg"])
    # Regime: given (aliases accepted) or, for focal mechanisms, the class when it names a regime.
    assert e.loc["O1", "regime"] == "reverse" and e.loc["G1", "regime"] == "normal"
    assert e.loc["E1", "regime"] == "strike-slip" and e.loc["E4", "regime"] == ""


def test_sigma_and_weight_rules(small):
    e = small.set_index("id")
    assert_allclose(e.loc["B1", ["sigma_deg", "weight"]].astype(float), [15.0, (20 / 15) ** 2])
    assert_allclose(e.loc["H1", ["sigma_deg", "weight"]].astype(float), [10.0, 4.0])  # from weight
    assert_allclose(e.loc["T1", "sigma_deg"], indicators.DEFAULT_SIGMA_DEG["tensile_fracture"])
    assert_allclose(e.loc["E1", "sigma_deg"], indicators.DEFAULT_SIGMA_DEG["focal_mechanism"])


def test_geometry_lon_wrap_extras_and_index(small):
    e = small.set_index("id")
    assert_allclose(e.loc["G1", "lon"], -10.0)
    assert small.crs.to_epsg() == 4326
    assert_allclose(small.geometry.x, small["lon"])
    assert (small["source"] == "test fixture").all()       # extra columns are kept
    assert small.index.tolist() == list(range(1, 11))      # index = data row of the file


def test_broken_file_reports_every_bad_row_and_column():
    with pytest.raises(IndicatorFileError) as err:
        read_indicators(DATA / "indicators_broken.csv")
    got = {(p.get("row"), p.get("field")) for p in err.value.problems}
    expected = {
        (2, "lon"), (3, "lat"), (4, "type"), (5, "azimuth_deg"), (6, "dip_deg"), (7, "sigma_deg"),
        (8, "id"), (9, "regime"), (10, "id"), (10, "weight"),
    }
    assert got == expected
    msgs = {(p["row"], p["field"]): p["message"] for p in err.value.problems}
    assert "abc" in msgs[(2, "lon")]
    assert "first used in row 1" in msgs[(8, "id")]
    assert "borehole_thing" in msgs[(4, "type")]
    assert isinstance(err.value, InputError)


def test_skip_bad_skips_but_reports():
    gdf = read_indicators(DATA / "indicators_broken.csv", skip_bad=True)
    assert gdf.index.tolist() == [1, 11]
    skipped = {(p["row"], p["field"]) for p in gdf.attrs["skipped"]}
    assert len(skipped) == 10 and (2, "lon") in skipped


def test_missing_required_column():
    with pytest.raises(IndicatorFileError) as err:
        indicators_from_csv_text("id,lon,lat,azimuth_deg\nA,1,2,3\n")
    assert err.value.problems[0]["field"] == "type"
    with pytest.raises(IndicatorFileError):
        indicators_from_csv_text("id,lon,lat,type\nA,1,2,breakout\n")


def test_empty_table_is_an_error():
    with pytest.raises(IndicatorFileError):
        indicators_from_csv_text("id,lon,lat,type,azimuth_deg\n")


def test_geojson_and_geopackage_match_csv(small, tmp_path):
    import geopandas as gpd
    import pyogrio  # noqa: F401  (the engine geopandas uses to write GeoPackage)

    from stressmap.io.indicators import indicators_geojson

    cols = [c for c in indicators.CONVERT_COLUMNS[:12] if c not in ("lon", "lat")] + ["source"]
    fc = indicators_geojson(small.reset_index(drop=True), columns=cols)
    path = tmp_path / "ind.geojson"
    path.write_text(json.dumps(fc, allow_nan=False))
    from_json = read_indicators(path)
    assert_allclose(from_json["shmax_azimuth_deg"], small["shmax_azimuth_deg"], equal_nan=True)
    assert from_json["id"].tolist() == small["id"].tolist()

    gpkg = tmp_path / "ind.gpkg"
    raw = small[cols + ["geometry"]].copy()
    gpd.GeoDataFrame(raw, geometry="geometry", crs="EPSG:4326").to_file(gpkg, driver="GPKG")
    from_gpkg = read_indicators(gpkg)
    assert_allclose(from_gpkg["shmax_azimuth_deg"], small["shmax_azimuth_deg"], equal_nan=True)
    assert_allclose(from_gpkg["lon"], small["lon"])


def test_geojson_bad_geometry_reported_by_row():
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [1, 2]},
         "properties": {"id": "a", "type": "breakout", "azimuth_deg": 5}},
        {"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[1, 2], [3, 4]]},
         "properties": {"id": "b", "type": "breakout", "azimuth_deg": 5}},
    ]}
    with pytest.raises(IndicatorFileError) as err:
        indicators_from_geojson(fc)
    assert [(p["row"], p["field"]) for p in err.value.problems] == [(2, "geometry")]
    assert len(indicators_from_geojson(fc, skip_bad=True)) == 1
    with pytest.raises(IndicatorFileError):
        indicators_from_geojson({"type": "Feature"})


def test_unsupported_and_missing_files(tmp_path):
    with pytest.raises(IndicatorFileError):
        read_indicators(tmp_path / "nope.csv")
    p = tmp_path / "x.xlsx"
    p.write_text("x")
    with pytest.raises(IndicatorFileError):
        read_indicators(p)


def test_summarise_matches_axial_statistics(small):
    from scipy.stats import circmean

    out = indicators.summarise(small)
    assert out["total"] == 10 and out["undefined"] == 1
    assert out["by_type"]["focal_mechanism"]["count"] == 3
    b = out["by_type"]["breakout"]
    assert_allclose(b["mean_shmax_azimuth_deg"], 100.0, atol=1e-9)
    # Unweighted check of the overall mean against scipy on doubled angles: use equal weights.
    eq = small.assign(weight=1.0)
    az = eq["shmax_azimuth_deg"].dropna().to_numpy()
    ref = np.mod(circmean(2 * az, high=360, low=0) / 2, 180)
    m = indicators.summarise(eq)["all"]["mean_shmax_azimuth_deg"]
    assert abs(np.mod(m - ref + 90, 180) - 90) < 1e-9
