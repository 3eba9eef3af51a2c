"""HTTP calibration and ensembles on the coarse fictional demo model (thread job executor).

Expected values come from the library path (stressmap.analyses.calibrate / stressmap.analyses.ensemble), which
tests/test_calibrate.py and tests/test_ensemble.py check against analytic values and scipy; here
the service must give the same numbers, the documented status codes and problem details, and the
caution. Result files are read back with independent readers (json, xarray/netCDF4, the PNG
signature of the PNG specification).
"""

from __future__ import annotations

import time

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap import CAUTION
from service_support import store_ready_model

API = "/api/v1"
TRUTH = {"collision": 0.5, "subduction": 2.0}


@pytest.fixture(scope="module")
def stored(coarse_demo_model, tmp_path_factory):
    """A data directory holding the coarse demo model as a ready model: (data_dir, model_id)."""
    from stressmap_api.store import Store, document_digest

    data = tmp_path_factory.mktemp("svc") / "data"
    store = Store(data)
    doc = coarse_demo_model.definition
    model_id = store_ready_model(store, coarse_demo_model, document_digest(doc))
    return data, model_id


@pytest.fixture
def svc(stored):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(stored[0]), "JOB_EXECUTOR": "thread",
                      "REQUEST_TIME_LIMIT_S": 120})
    yield app, app.test_client(), stored[1]
    app.extensions["stressmap_jobs"].shutdown(wait=True)


@pytest.fixture(scope="module")
def indicator_text(coarse_demo_model):
    from stressmap.model import predict_points

    rng = np.random.default_rng(5)
    lon, lat = rng.uniform(-30, 0, 120), rng.uniform(-32, -6, 120)
    pred = predict_points(coarse_demo_model, lon, lat, weights=TRUTH)
    az = np.mod(pred["shmax_azimuth_deg"].values + rng.normal(0, 6.0, lon.size), 180)
    az = np.where(pred["inside"].values, az, 0.0)   # points outside get an arbitrary azimuth
    rows = ["id,lon,lat,type,azimuth_deg,sigma_deg"]
    rows += [f"S{i},{x:.5f},{y:.5f},overcoring,{a:.3f},6" for i, (x, y, a)
             in enumerate(zip(lon, lat, az))]
    return "\n".join(rows) + "\n"


def test_calibrate_matches_the_library(svc, indicator_text, coarse_demo_model):
    from stressmap.analyses.calibrate import calibrate
    from stressmap.formats.indicators import indicators_from_csv_text

    app, client, model_id = svc
    body = {"indicators_csv": indicator_text, "reference": "ridge", "n_bootstrap": 30,
            "n_random": 5, "seed": 3, "bounds": {"collision": [0, 3]}}
    resp = client.post(f"{API}/models/{model_id}/calibrate", json=body)
    assert resp.status_code == 200, resp.json
    out = resp.json
    assert out["caution"] == CAUTION and out["model_id"] == model_id
    lib = calibrate(coarse_demo_model, indicators_from_csv_text(indicator_text),
                    bounds={"collision": [0, 3]}, reference="ridge", n_bootstrap=30,
                    n_random=5, seed=3).to_dict()
    for g in coarse_demo_model.groups:
        assert_allclose(out["weights"][g], lib["weights"][g], rtol=1e-12)
        assert_allclose(out["weights_ci"][g], lib["weights_ci"][g], rtol=1e-12)
    assert out["misfit_after"] < out["misfit_before"]
    assert len(out["indicators"]) == 120
    outside = [r for r in out["indicators"] if r["residual_deg"] is None]
    assert len(outside) == out["settings"]["n_outside"] > 0


@pytest.mark.parametrize(
    "body, field",
    [
        ({}, "indicators"),
        ({"indicators": "x"}, "indicators"),
        ({"indicators_csv": 5}, "indicators_csv"),
        ({"indicators": {}, "indicators_csv": "x"}, "indicators"),
        ({"indicators_csv": "x", "n_bootstrap": -1}, "n_bootstrap"),
        ({"indicators_csv": "x", "confidence": 2}, "confidence"),
        ({"indicators_csv": "x", "colour": 1}, "colour"),
    ],
)
def test_calibrate_bad_requests_name_the_field(svc, body, field):
    _, client, model_id = svc
    resp = client.post(f"{API}/models/{model_id}/calibrate", json=body)
    assert resp.status_code == 422
    assert resp.mimetype == "application/problem+json"
    assert any(e.get("field") == field for e in resp.json["errors"])


def test_calibrate_unknown_bound_group(svc, indicator_text):
    _, client, model_id = svc
    resp = client.post(f"{API}/models/{model_id}/calibrate",
                       json={"indicators_csv": indicator_text, "bounds": {"nope": [0, 1]},
                             "n_bootstrap": 0, "n_random": 0})
    assert resp.status_code == 422
    assert resp.json["errors"][0]["field"] == "bounds.nope"


def test_calibrate_unknown_model_is_404(svc):
    _, client, _ = svc
    resp = client.post(f"{API}/models/{'0' * 32}/calibrate",
                       json={"indicators_csv": "id,lon,lat,type,azimuth_deg\nA,1,1,overcoring,10\n"})
    assert resp.status_code == 404


def _wait(client, url, timeout=120.0):
    start = time.monotonic()
    while time.monotonic() - start < timeout:
        job = client.get(url).json
        if job["status"] in ("done", "failed"):
            return job
        time.sleep(0.1)
    raise AssertionError(f"job did not finish: {job}")


def test_ensemble_job_points_matches_the_library(svc, coarse_demo_model, tmp_path):
    from stressmap.analyses.ensemble import ensemble_points

    _, client, model_id = svc
    dist = {"collision": {"distribution": "log-uniform", "low": 0.3, "high": 3.0},
            "subduction": {"distribution": "uniform", "low": 0.06, "high": 0.24,
                           "parameter": "pull_fraction"}}
    points = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"site": s},
         "geometry": {"type": "Point", "coordinates": c}}
        for s, c in (("A", [-20, -20]), ("B", [-10, -15]), ("C", [60, 10]))]}
    resp = client.post(f"{API}/models/{model_id}/ensembles",
                       json={"points": points, "members": 400, "distributions": dist, "seed": 7})
    assert resp.status_code == 202, resp.json
    links = resp.json["links"]
    assert resp.headers["Location"] == links["job"]
    job = _wait(client, links["job"])
    assert job["status"] == "done", job
    assert job["result"]["points_inside"] == 2 and job["result"]["members"] == 400

    doc = client.get(links["geojson"])
    assert doc.status_code == 200 and doc.mimetype == "application/geo+json"
    fc = doc.json
    assert fc["caution"] == CAUTION and fc["model_id"] == model_id and fc["members"] == 400
    props = [f["properties"] for f in fc["features"]]
    assert [p["site"] for p in props] == ["A", "B", "C"]
    lib = ensemble_points(coarse_demo_model, [-20, -10, 60], [-20, -15, 10], members=400,
                          distributions=dist, seed=7)
    assert_allclose([p["shmax_azimuth_deg"] for p in props[:2]],  # GeoJSON: 7 significant digits
                    lib["shmax_azimuth_deg"].values[:2], rtol=5e-7)
    assert_allclose([p["s_hmax_mpa_p95"] for p in props[:2]],
                    lib["s_hmax_mpa"].values[:2, 2], rtol=5e-7)  # GeoJSON: 7 significant digits
    assert props[2]["shmax_azimuth_deg"] is None

    import xarray as xr

    nc = client.get(links["netcdf"])
    assert nc.status_code == 200 and nc.mimetype == "application/x-netcdf"
    (tmp_path / "e.nc").write_bytes(nc.data)
    with xr.open_dataset(tmp_path / "e.nc", engine="netcdf4") as ds:
        assert ds.attrs["caution"] == CAUTION
        assert ds.sizes["member"] == 400
    png = client.get(links["png"])
    assert png.status_code == 200 and png.data[:8] == b"\x89PNG\r\n\x1a\n"
    regime = client.get(links["png"] + "&picture=regime")
    assert regime.status_code == 200 and regime.data[:8] == b"\x89PNG\r\n\x1a\n"
    assert regime.data != png.data and "regime" in regime.headers["Content-Disposition"]
    bad = client.get(links["png"] + "&picture=fan")
    assert bad.status_code == 422 and bad.json["errors"][0]["field"] == "picture"


def test_ensemble_region_polygon(svc):
    _, client, model_id = svc
    poly = {"type": "Polygon", "coordinates": [[[-30, -30], [-5, -30], [-5, -5], [-30, -30]]]}
    resp = client.post(f"{API}/models/{model_id}/ensembles",
                       json={"region": {"polygon": poly, "spacing_km": 400}, "members": 30})
    assert resp.status_code == 202, resp.json
    job = _wait(client, resp.json["links"]["job"])
    assert job["status"] == "done", job
    fc = client.get(resp.json["links"]["geojson"]).json
    assert fc["features"]
    for f in fc["features"]:   # only nodes inside the triangle (lat <= lon + ... )
        lon, lat = f["geometry"]["coordinates"]
        assert lat <= lon + 1e-9 or lat <= -5


@pytest.mark.parametrize(
    "body, field",
    [
        ({"points": [[-20, -20]]}, "members"),
        ({"points": [[-20, -20]], "members": 0}, "members"),
        ({"points": [[-20, -20]], "members": 10 ** 9}, "members"),
        ({"members": 10}, "points"),
        ({"points": [[-20, -20]], "members": 10,
          "distributions": {"nope": {"distribution": "uniform", "low": 0, "high": 1}}},
         "distributions.nope"),
        ({"points": [[-20, -20]], "members": 10, "percentiles": [150]}, "percentiles"),
    ],
)
def test_ensemble_bad_requests_name_the_field(svc, body, field):
    _, client, model_id = svc
    resp = client.post(f"{API}/models/{model_id}/ensembles", json=body)
    assert resp.status_code == 422, resp.json
    assert any(e.get("field") == field for e in resp.json["errors"])


def test_ensemble_result_not_found_and_bad_format(svc):
    _, client, model_id = svc
    assert client.get(f"{API}/models/{model_id}/ensembles/{'0' * 32}").status_code == 404
    assert client.get(f"{API}/models/{model_id}/ensembles/bad-id").status_code == 404
    resp = client.get(f"{API}/models/{model_id}/ensembles/{'0' * 32}?format=xls")
    assert resp.status_code == 422 and resp.json["errors"][0]["field"] == "format"


def test_ensemble_needs_the_token_when_one_is_configured(stored):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(stored[0]), "JOB_EXECUTOR": "thread",
                      "API_TOKEN": "s3cret"})
    try:
        resp = app.test_client().post(f"{API}/models/{stored[1]}/ensembles",
                                      json={"points": [[-20, -20]], "members": 5})
        assert resp.status_code == 401
    finally:
        app.extensions["stressmap_jobs"].shutdown(wait=True)


def test_calibrate_accepts_geojson_indicators(svc):
    # Same FeatureCollection form as POST /models/{id}/compare (RFC 7946 Points).
    _, client, model_id = svc
    feats = [{"type": "Feature", "geometry": {"type": "Point", "coordinates": [lon, lat]},
              "properties": {"id": f"G{i}", "type": "breakout", "azimuth_deg": az,
                             "sigma_deg": 10}}
             for i, (lon, lat, az) in enumerate([(-20, -20, 120), (-10, -15, 130),
                                                 (-15, -25, 125), (-25, -12, 110)])]
    resp = client.post(f"{API}/models/{model_id}/calibrate",
                       json={"indicators": {"type": "FeatureCollection", "features": feats},
                             "reference": "ridge", "bounds": {"transform": [1, 1],
                                                              "overriding": [1, 1]},
                             "n_bootstrap": 10, "n_random": 5})
    assert resp.status_code == 200, resp.json
    assert [r["id"] for r in resp.json["indicators"]] == ["G0", "G1", "G2", "G3"]
    # breakouts are perpendicular to SHmax (common practice): observed SHmax = azimuth + 90
    assert_allclose([r["observed_azimuth_deg"] for r in resp.json["indicators"]],
                    [30, 40, 35, 20])
