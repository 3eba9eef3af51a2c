"""HTTP: POST /api/v1/models/{id}/compare and POST /api/v1/indicators/smooth."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from stressmap.cli import main
from stressmap.constants import CAUTION
from stressmap.io.indicators import indicators_geojson
from service_support import store_ready_model

API = "/api/v1"
DATA = Path(__file__).parents[1] / "data"
SMALL_CSV = (DATA / "indicators_small.csv").read_text()
BROKEN_CSV = (DATA / "indicators_broken.csv").read_text()


@pytest.fixture
def model_id(app, coarse_demo_model):
    """The coarse fictional demo model registered as ready in this app's store."""
    from stressmap_api.store import get_store

    with app.app_context():
        store = get_store()
        mid = store_ready_model(store, coarse_demo_model)
    return mid


@pytest.fixture(scope="module")
def demo_fc():
    from importlib import resources

    from stressmap.io.indicators import read_table

    path = Path(str(resources.files("stressmap.data").joinpath("demo_indicators.csv")))
    table, _ = read_table(path)
    return indicators_geojson(table.iloc[:120])


def test_compare_json_matches_cli(client, model_id, app, demo_fc, tmp_path, capsys):
    resp = client.post(f"{API}/models/{model_id}/compare", json={"indicators": demo_fc})
    assert resp.status_code == 200, resp.json
    doc = resp.json
    assert doc["caution"] == CAUTION and doc["model_id"] == model_id
    assert doc["summary"]["overall"]["count"] == 120
    assert doc["skipped"] == []
    assert len(doc["indicators"]["features"]) == 120
    props = doc["indicators"]["features"][0]["properties"]
    assert {"misfit_deg", "predicted_shmax_azimuth_deg", "regime_agreement", "province"} <= set(props)
    # The CLI on the same model directory and indicators gives the same summary.
    src = tmp_path / "ind.geojson"
    src.write_text(json.dumps(demo_fc))
    with app.app_context():
        from stressmap_api.store import get_store

        model_dir = get_store().model_dir(model_id)
    assert main(["compare", str(model_dir), str(src), "-o", str(tmp_path / "out"), "--no-pictures"]) == 0
    capsys.readouterr()
    cli = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert_allclose(doc["summary"]["overall"]["weighted_mean_abs_misfit_deg"],
                    cli["overall"]["weighted_mean_abs_misfit_deg"], rtol=1e-12)


def test_compare_csv_text_geojson_csv_png(client, model_id):
    url = f"{API}/models/{model_id}/compare"
    body = {"indicators_csv": SMALL_CSV}
    gj = client.post(url, json=body | {"format": "geojson"})
    assert gj.status_code == 200 and gj.mimetype == "application/geo+json"
    assert gj.json["caution"] == CAUTION and gj.json["summary"]["total"] == 10
    csv = client.post(url + "?format=csv", json=body)
    assert csv.status_code == 200 and csv.mimetype == "text/csv"
    assert csv.get_data(as_text=True).startswith("id,lon,lat,")  # a plain table, header first
    assert csv.headers["X-Stressmap-Caution"] == CAUTION and csv.headers["X-Stressmap-Model-Id"] == model_id
    for picture in ("map", "rose"):
        png = client.post(url, json=body | {"format": "png", "picture": picture})
        assert png.status_code == 200 and png.mimetype == "image/png"
        assert png.data[:8] == b"\x89PNG\r\n\x1a\n"


def test_compare_bad_rows_are_422_with_rows_or_skipped(client, model_id):
    url = f"{API}/models/{model_id}/compare"
    resp = client.post(url, json={"indicators_csv": BROKEN_CSV})
    assert resp.status_code == 422 and resp.mimetype == "application/problem+json"
    rows = {(e.get("row"), e.get("field")) for e in resp.json["errors"]}
    assert (2, "lon") in rows and (8, "id") in rows and len(rows) == 10
    ok = client.post(url, json={"indicators_csv": BROKEN_CSV, "skip_bad": True})
    assert ok.status_code == 200
    assert len(ok.json["skipped"]) == 10 and ok.json["summary"]["total"] == 2


@pytest.mark.parametrize("body, field", [
    ({}, "indicators"),
    ({"indicators_csv": SMALL_CSV, "indicators": {"type": "FeatureCollection", "features": []}}, "indicators"),
    ({"indicators_csv": SMALL_CSV, "weights": {"nosuch": 1.0}}, "weights.nosuch"),
    ({"indicators_csv": SMALL_CSV, "weights": {"ridge": "x"}}, "weights.ridge"),
    ({"indicators_csv": SMALL_CSV, "format": "xml"}, "format"),
    ({"indicators_csv": SMALL_CSV, "skip_bad": "yes"}, "skip_bad"),
    ({"indicators_csv": SMALL_CSV, "colour": "red"}, "colour"),
    ({"indicators": {"type": "Feature"}}, "indicators"),
])
def test_compare_input_errors_name_the_field(client, model_id, body, field):
    resp = client.post(f"{API}/models/{model_id}/compare", json=body)
    assert resp.status_code == 422, resp.json
    assert any(e.get("field") == field for e in resp.json["errors"]), resp.json


def test_compare_unknown_model_and_bad_json(client, model_id):
    from stressmap_api.store import new_id

    resp = client.post(f"{API}/models/{new_id()}/compare", json={"indicators_csv": SMALL_CSV})
    assert resp.status_code == 404 and resp.mimetype == "application/problem+json"
    resp = client.post(f"{API}/models/{model_id}/compare", data="{", content_type="application/json")
    assert resp.status_code == 400 and resp.mimetype == "application/problem+json"


def test_compare_too_many_indicators(app, client, model_id):
    app.config["MAX_POINTS"] = 5
    resp = client.post(f"{API}/models/{model_id}/compare", json={"indicators_csv": SMALL_CSV})
    assert resp.status_code == 422 and resp.json["errors"][0]["field"] == "indicators"


def test_smooth_geojson_and_netcdf(client, demo_fc):
    body = {"indicators": demo_fc, "bbox": [-36, -36, 10, -4], "radius_km": 500, "spacing_km": 400}
    resp = client.post(f"{API}/indicators/smooth", json=body)
    assert resp.status_code == 200 and resp.mimetype == "application/geo+json"
    fc = resp.json
    assert fc["caution"] == CAUTION and fc["radius_km"] == 500
    ok = [f for f in fc["features"] if f["properties"]["status"] == "ok"]
    assert ok and all(0 <= f["properties"]["shmax_azimuth_deg"] < 180 for f in ok)
    assert all(f["properties"]["count"] >= 3 for f in ok)
    nc = client.post(f"{API}/indicators/smooth?format=netcdf", json=body)
    assert nc.status_code == 200 and nc.mimetype == "application/x-netcdf"
    assert nc.data[:4] == b"\x89HDF"


def test_smooth_matches_core(client):
    import pandas as pd

    from stressmap.formats.indicators import indicators_from_csv_text
    from stressmap.analyses.observed import observed_grid

    body = {"indicators_csv": SMALL_CSV, "bbox": [9, 44, 15, 47], "radius_km": 300, "min_count": 2,
            "max_halfwidth_deg": 60}
    fc = client.post(f"{API}/indicators/smooth", json=body).json
    ds = observed_grid(indicators_from_csv_text(SMALL_CSV), bbox=(9, 44, 15, 47), radius_km=300,
                       min_count=2, max_halfwidth_deg=60)
    assert len(fc["features"]) == int((ds["count"].values > 0).sum())
    got = pd.Series([f["properties"]["count"] for f in fc["features"]])
    assert got.sum() == ds["count"].values.sum()


@pytest.mark.parametrize("change, field", [
    ({"bbox": [0, 1, 2]}, "bbox"),
    ({"bbox": [0, 50, 5, 40]}, "bbox"),
    ({"radius_km": -1}, "radius_km"),
    ({"radius_km": None}, "radius_km"),
    ({"min_count": 1.5}, "min_count"),
    ({"max_halfwidth_deg": "a"}, "max_halfwidth_deg"),
    ({"max_dispersion_deg": 25}, "max_dispersion_deg"),     # renamed: refused by name
    ({"spacing_km": 0.001}, "spacing_km"),
    ({"format": "png"}, "format"),
])
def test_smooth_input_errors(client, change, field):
    body = {"indicators_csv": SMALL_CSV, "bbox": [9, 44, 15, 47], "radius_km": 300} | change
    resp = client.post(f"{API}/indicators/smooth", json=body)
    assert resp.status_code == 422, resp.json
    assert any(e.get("field") == field for e in resp.json["errors"]), resp.json
