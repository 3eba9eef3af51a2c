"""POST /api/v1/screen: same content as the CLI, model by id from the store, formats, errors."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.cli import main
from service_support import store_ready_model

BODY = {"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0, "regime": "normal",
        "planes": ["040/60", {"strike_deg": 130.0, "dip_deg": 80.0, "name": "cross"}]}

FAULTS = {"type": "FeatureCollection", "features": [
    {"type": "Feature", "properties": {"name": "A", "dip_deg": 60, "dip_direction_deg": "SE"},
     "geometry": {"type": "LineString", "coordinates": [[-15.0, -20.0], [-14.9, -19.9],
                                                        [-14.8, -19.85]]}}]}


@pytest.fixture
def model_id(app, coarse_demo_model):
    """The coarse fictional demo model registered as ready in this app's store."""
    from stressmap_api.store import get_store

    with app.app_context():
        store = get_store()
        mid = store_ready_model(store, coarse_demo_model)
    return mid


def test_json_answer_equals_the_cli(client, capsys):
    resp = client.post("/api/v1/screen", json=BODY)
    assert resp.status_code == 200 and resp.mimetype == "application/json"
    doc = resp.json
    assert doc["caution"] == CAUTION  # said once, with nothing after it
    assert main(["screen", "--site=-15.0,-20.0", "--depth-km", "3", "--shmax-azimuth-deg", "40",
                 "--regime", "normal", "--plane", "040/60", "--plane", "130/80", "--json"]) == 0
    cli = json.loads(capsys.readouterr().out)
    for key in ("sv_mpa", "pp_mpa", "shmax_mpa", "shmin_mpa", "shmax_lower_mpa",
                "shmin_upper_mpa", "caution"):
        assert doc[key] == cli[key]
    for a, b in zip(doc["planes"], cli["planes"]):
        for key in ("strike_deg", "dip_deg", "normal_stress_mpa", "shear_stress_mpa",
                    "slip_tendency", "dilation_tendency", "pore_pressure_margin_mpa"):
            assert_allclose(a[key], b[key], rtol=1e-12)


def test_orientation_from_the_stored_model(client, model_id, coarse_demo_model):
    from stressmap.model import predict_points

    body = {"site": [-15.0, -20.0], "depth_km": 3.0, "model_id": model_id, "planes": ["040/60"]}
    doc = client.post("/api/v1/screen", json=body).json
    pred = predict_points(coarse_demo_model, np.array([-15.0]), np.array([-20.0]))
    assert_allclose(doc["shmax_azimuth_deg"], float(pred["shmax_azimuth_deg"].values[0]))
    assert doc["regime"] == str(pred["regime"].values[0])
    assert_allclose(doc["shape_ratio"], float(pred["shape_ratio"].values[0]))
    assert doc["sources"]["shmax_azimuth_deg"] == "model"
    assert doc["model"]["id"] == model_id
    # a user azimuth overrides the model's; the regime still comes from the model
    doc2 = client.post("/api/v1/screen", json={**body, "shmax_azimuth_deg": 10.0}).json
    assert doc2["shmax_azimuth_deg"] == 10.0 and doc2["sources"]["regime"] == "model"


def test_ensemble_spread_from_the_model(client, model_id):
    body = {"site": [-15.0, -20.0], "depth_km": 3.0, "model_id": model_id, "planes": ["040/60"],
            "uncertainty": {"samples": 300, "ensemble_members": 100, "seed": 2}}
    doc = client.post("/api/v1/screen", json=body).json
    unc = doc["uncertainty"]
    assert unc["orientation_source"].startswith("model ensemble")
    assert unc["ensemble_azimuth_std_deg"] > 0.0
    assert abs(sum(unc["regime_probability"].values()) - 1.0) < 1e-12
    p = doc["planes"][0]
    assert p["margin_band_low_mpa"] <= p["margin_median_mpa"] <= p["margin_band_high_mpa"]


def test_geojson_reads_back_with_geopandas(client):
    import geopandas as gpd

    resp = client.post("/api/v1/screen?format=geojson", json={**BODY, "faults": FAULTS})
    assert resp.status_code == 200 and resp.mimetype == "application/geo+json"
    doc = resp.json
    assert doc["caution"] == CAUTION  # said once, with nothing after it
    frame = gpd.read_file(io.BytesIO(resp.data))
    assert len(frame) == 4  # two planes + two trace segments
    assert sorted(frame.geometry.geom_type) == ["LineString", "LineString", "Point", "Point"]
    assert frame["pore_pressure_margin_mpa"].is_monotonic_increasing


@pytest.mark.parametrize("layer, kinds", [("traces", ["LineString", "LineString"]),
                                          ("planes", ["Point", "Point"]), ("sites", ["Point"])])
def test_geojson_layer_holds_one_geometry_kind(client, layer, kinds):
    import geopandas as gpd

    resp = client.post("/api/v1/screen", json={**BODY, "faults": FAULTS, "format": "geojson",
                                               "layer": layer})
    assert resp.status_code == 200 and resp.json["name"] == layer
    assert resp.json["caution"].startswith(CAUTION)
    frame = gpd.read_file(io.BytesIO(resp.data))
    assert sorted(frame.geometry.geom_type) == kinds


def test_csv_and_png(client):
    resp = client.post("/api/v1/screen", json={**BODY, "format": "csv"})
    assert resp.status_code == 200 and resp.mimetype == "text/csv"
    assert resp.get_data(as_text=True).startswith("lon,lat,at_site,")  # header first
    assert resp.headers["X-Stressmap-Caution"].startswith(CAUTION)
    for picture in ("mohr", "polygon", "map"):
        resp = client.post("/api/v1/screen",
                           json={**BODY, "faults": FAULTS, "format": "png", "picture": picture})
        assert resp.status_code == 200 and resp.mimetype == "image/png"
        assert resp.data[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(
    "body, status, field",
    [
        ({**BODY, "depth_km": "deep"}, 422, "depth_km"),
        ({**BODY, "regime": "oblique"}, 422, "regime"),
        ({**BODY, "shape_ratio": 1.5}, 422, "shape_ratio"),
        ({**BODY, "color": "red"}, 422, "color"),
        ({**BODY, "planes": [{"strike_deg": 10}]}, 422, "planes"),
        ({**BODY, "format": "xlsx"}, 422, "format"),
        ({**BODY, "model_id": "0" * 32}, 404, None),
        ({**BODY, "uncertainty": {"friction_range": [0.9, 0.2]}}, 422,
         "uncertainty.friction_range"),
        ({"depth_km": 3}, 422, "site"),
        ({**BODY, "shmin_mpa": 20.0}, 422, "shmin_mpa"),  # below Pp 29.4 MPa
        ({**BODY, "faults": {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {"strike_deg": 1, "dip_deg": 50},
             "geometry": {"type": "Point", "coordinates": ["x", 1]}}]}}, 422, "faults.geometry"),
    ],
)
def test_bad_requests_are_problem_details(client, body, status, field):
    resp = client.post("/api/v1/screen", json=body)
    assert resp.status_code == status
    assert resp.mimetype == "application/problem+json"
    if field is not None:
        assert field in {e.get("field") for e in resp.json["errors"]}


def test_non_object_body_and_outside_site(client, model_id):
    resp = client.post("/api/v1/screen", json=[1, 2])
    assert resp.status_code == 422
    resp = client.post("/api/v1/screen", json={"site": [150.0, 60.0], "depth_km": 3.0,
                                               "model_id": model_id})
    assert resp.status_code == 422
    assert resp.json["errors"][0]["field"] == "site"


def test_indicator_derived_spread_against_the_model(client, model_id, coarse_demo_model):
    from stressmap.model import predict_points

    lon = -15.0 + np.array([-0.5, 0.5, 0.0, 0.3, -0.3, 0.6])
    lat = -20.0 + np.array([0.0, 0.0, 0.5, -0.4, 0.4, 0.2])
    pred = predict_points(coarse_demo_model, lon, lat)["shmax_azimuth_deg"].values
    offsets = np.array([10.0, -10.0, 10.0, -10.0, 10.0, -10.0])
    fc = {"type": "FeatureCollection", "features": [  # invented test indicators
        {"type": "Feature", "properties": {"type": "breakout", "sigma_deg": 15.0,
                                           "azimuth_deg": float((p + o + 90.0) % 180.0)},
         "geometry": {"type": "Point", "coordinates": [float(x), float(y)]}}
        for x, y, p, o in zip(lon, lat, pred, offsets)]}
    body = {"site": [-15.0, -20.0], "depth_km": 3.0, "model_id": model_id, "planes": ["040/60"],
            "uncertainty": {"indicators": fc, "samples": 100}}
    resp = client.post("/api/v1/screen", json=body)
    assert resp.status_code == 200, resp.json
    info = resp.json["uncertainty"]["indicator_spread"]
    assert_allclose(info["sigma_deg"], 10.0, atol=1e-6)  # RMS of +-10 deg misfits
    assert "RMS misfit of the model" in info["source"]


def test_margin_curves_picture_over_http(client):
    body = {"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "normal", "shmax_azimuth_deg": 40,
            "planes": ["040/60", "130/80"], "uncertainty": {"friction_range": [0.5, 0.8],
                                                            "samples": 100},
            "format": "png", "picture": "margins"}
    r = client.post("/api/v1/screen", json=body)
    assert r.status_code == 200 and r.data[:8] == b"\x89PNG\r\n\x1a\n"   # PNG spec, section 5.2
    body.pop("uncertainty")        # nothing sampled: a clear problem, not a server error
    r = client.post("/api/v1/screen", json=body)
    assert r.status_code == 422 and r.json["errors"][0]["field"] == "uncertainty.samples"
