"""The model endpoints through Flask's test client, on the fictional demo plate (coarse mesh).

Outputs are read back with independent libraries: GeoJSON with geopandas (pyogrio), CSV with
pandas, netCDF with xarray (netCDF4 engine), PNG with Pillow. Values are compared with the
library calls the service wraps (stressmap.model), and the boundary forces with the plate outline
by shapely geometry.
"""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from numpy.testing import assert_allclose
from service_support import coarse_demo_document, wait_for_job

from stressmap import CAUTION

API = "/api/v1"


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """A data directory holding one ready coarse demo model: (data_dir, model_id)."""
    from stressmap_api.builds import build_and_store
    from stressmap_api.store import Store, document_digest

    data = tmp_path_factory.mktemp("svc") / "data"
    store = Store(data)
    doc = coarse_demo_document()
    model_id = store.add_model(doc["name"], None, document_digest(doc))
    build_and_store(str(data), model_id, doc, progress=lambda f, m="": None)
    return data, model_id


@pytest.fixture
def svc(built):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(built[0]), "JOB_EXECUTOR": "thread"})
    yield app, app.test_client(), built[1]
    app.extensions["stressmap_jobs"].shutdown(wait=True)


@pytest.fixture(scope="module")
def library_model(built):
    from stressmap.io.modeldir import read_model

    return read_model(built[0] / "models" / built[1])


def _meta_ok(doc: dict, model_id: str):
    assert doc["caution"] == CAUTION
    assert doc["model_id"] == model_id
    assert doc["build_time"].endswith("Z")


def test_build_over_http_describe_list_and_delete(client):
    doc = coarse_demo_document()
    resp = client.post(f"{API}/models", json=doc)
    assert resp.status_code == 202
    job = resp.json
    assert job["kind"] == "build" and job["status"] in ("queued", "running", "done")
    assert resp.headers["Location"] == f"{API}/jobs/{job['id']}"
    model_id = job["model_id"]
    assert client.get(f"{API}/models/{model_id}").json["status"] in ("queued", "building", "ready")

    done = wait_for_job(lambda u: client.get(u).json, resp.headers["Location"])
    assert done["status"] == "done", done
    assert done["progress"] == 1.0
    assert done["result"]["model_id"] == model_id

    meta = client.get(f"{API}/models/{model_id}").json
    assert meta["status"] == "ready" and meta["name"] == doc["name"]
    summary = meta["summary"]
    assert summary["mesh"]["nodes"] > 50
    assert {g["name"] for g in summary["groups"]} == {
        "transform", "ridge", "collision", "overriding", "subduction"}
    # torque balance after the drag closure, relative to the driving torque (README, Conventions: torque balance)
    for g in summary["groups"]:
        assert g["torque_after_n_m"] < 1e-6 * g["torque_before_n_m"]
    assert summary["total"]["plate_speed_max_mm_yr"] > 0
    assert meta["links"]["predict"] == f"{API}/models/{model_id}/predict"

    listed = client.get(f"{API}/models").json["models"]
    assert [m["id"] for m in listed] == [model_id]

    assert client.delete(f"{API}/models/{model_id}").status_code == 204
    assert client.get(f"{API}/models/{model_id}").status_code == 404
    assert client.get(f"{API}/models").json["models"] == []


def test_job_endpoint_reports_build_validation_failures(client):
    # Valid document whose loads cannot be balanced without a closure: the solver's own
    # validation message must reach the job's error list.
    doc = coarse_demo_document()
    doc["drag"] = {"closure": "none"}
    resp = client.post(f"{API}/models", json=doc)
    assert resp.status_code == 202
    job = wait_for_job(lambda u: client.get(u).json, resp.headers["Location"])
    assert job["status"] == "failed"
    assert "torque balance" in job["error"]["reason"]
    assert job["error"]["errors"][0]["field"] == "drag.closure"
    model = client.get(f"{API}/models/{resp.json['model_id']}").json
    assert model["status"] == "failed" and "torque balance" in model["error"]


def test_points_geojson_reads_back_with_geopandas(svc, library_model):
    import geopandas

    from stressmap.model import predict_points

    app, client, model_id = svc
    pts = [[-15.0, -20.0], [-5.0, -12.0], [60.0, 60.0]]
    resp = client.post(f"{API}/models/{model_id}/predict", json={"points": pts})
    assert resp.status_code == 200
    assert resp.mimetype == "application/geo+json"
    _meta_ok(resp.json, model_id)
    frame = geopandas.read_file(io.BytesIO(resp.data))
    assert_allclose(np.c_[frame.geometry.x, frame.geometry.y], pts, atol=0)
    assert frame["inside"].tolist() == [True, True, False]
    ref = predict_points(library_model, [p[0] for p in pts], [p[1] for p in pts])
    # GeoJSON numbers carry 7 significant digits (stressmap.formats.geojson, README)
    assert_allclose(frame["shmax_azimuth_deg"][:2], ref["shmax_azimuth_deg"].values[:2], rtol=5e-7)
    assert frame["regime"][:2].tolist() == ref["regime"].values[:2].tolist()
    assert resp.json["features"][2]["properties"]["s_hmax_mpa"] is None  # outside: null


def test_feature_collection_properties_are_echoed(svc):
    app, client, model_id = svc
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"well": "W-1", "depth_m": 3200},
         "geometry": {"type": "Point", "coordinates": [-15.0, -20.0]}},
        {"type": "Feature", "properties": {"well": "W-2", "regime": "mine"},
         "geometry": {"type": "Point", "coordinates": [-5.0, -12.0]}}]}
    resp = client.post(f"{API}/models/{model_id}/predict", json={"points": fc})
    props = [f["properties"] for f in resp.json["features"]]
    assert [p["well"] for p in props] == ["W-1", "W-2"]
    assert props[0]["depth_m"] == 3200
    assert props[1]["input_regime"] == "mine" and props[1]["regime"] in (
        "normal", "strike-slip", "reverse")


def test_points_csv_is_a_plain_table_with_metadata_headers(svc):
    import pandas as pd

    app, client, model_id = svc
    resp = client.post(f"{API}/models/{model_id}/predict",
                       json={"points": [[-15.0, -20.0]], "format": "csv"})
    assert resp.status_code == 200 and resp.mimetype == "text/csv"
    text = resp.data.decode()
    assert text.startswith("lon,lat,") and "#" not in text  # header first, no comment lines
    assert resp.headers["X-Stressmap-Caution"] == CAUTION
    assert resp.headers["X-Stressmap-Model-Id"] == model_id
    table = pd.read_csv(io.StringIO(text))
    assert table.loc[0, "lon"] == -15.0 and table.loc[0, "lat"] == -20.0
    assert 0.0 <= table.loc[0, "shmax_azimuth_deg"] < 180.0


def test_region_netcdf_reads_back_with_xarray(svc, library_model, tmp_path):
    import xarray as xr

    from stressmap.model import predict_grid

    app, client, model_id = svc
    body = {"region": {"bbox": [-30.0, -30.0, 0.0, -10.0], "spacing_km": 300.0},
            "weights": {"ridge": 2.0}, "format": "netcdf"}
    resp = client.post(f"{API}/models/{model_id}/predict", json=body)
    assert resp.status_code == 200 and resp.mimetype == "application/x-netcdf"
    path = tmp_path / "grid.nc"
    path.write_bytes(resp.data)
    with xr.open_dataset(path, engine="netcdf4") as ds:
        assert ds.attrs["caution"] == CAUTION
        assert ds.attrs["model_id"] == model_id
        assert ds.attrs["build_time"].endswith("Z")
        assert json.loads(ds.attrs["weights"]) == {"ridge": 2.0}
        assert set(ds.dims) == {"lat", "lon"}
        ref = predict_grid(library_model, bbox=(-30.0, -30.0, 0.0, -10.0), spacing_km=300.0,
                           weights={"ridge": 2.0})
        assert_allclose(ds["s_hmax_mpa"].values, ref["s_hmax_mpa"].values, rtol=1e-12,
                        equal_nan=True)


def test_png_map_decodes_and_is_not_blank(svc):
    from PIL import Image

    app, client, model_id = svc
    resp = client.post(f"{API}/models/{model_id}/predict",
                       json={"region": {"bbox": [-37.0, -37.0, 9.0, -3.0]}, "spacing_km": 250.0,
                             "format": "png"})
    assert resp.status_code == 200 and resp.mimetype == "image/png"
    img = Image.open(io.BytesIO(resp.data))
    assert img.format == "PNG" and img.width > 500 and img.height > 300
    pixels = np.asarray(img.convert("RGB")).reshape(-1, 3)
    assert len(np.unique(pixels, axis=0)) > 200


def test_polygon_region_keeps_only_nodes_inside_it(svc):
    import shapely

    app, client, model_id = svc
    ring = [[-20.0, -25.0], [-8.0, -25.0], [-8.0, -14.0], [-20.0, -25.0]]
    body = {"region": {"polygon": {"type": "Polygon", "coordinates": [ring]}, "spacing_km": 120.0}}
    resp = client.post(f"{API}/models/{model_id}/predict", json=body)
    assert resp.status_code == 200
    xy = np.array([f["geometry"]["coordinates"] for f in resp.json["features"]])
    assert len(xy) > 5
    assert shapely.contains_xy(shapely.Polygon(ring).buffer(1e-9), xy[:, 0], xy[:, 1]).all()


def test_field_url_serves_a_gis_layer(svc):
    app, client, model_id = svc
    resp = client.get(f"{API}/models/{model_id}/field?bbox=-37,-37,9,-3&spacing_km=400&format=geojson")
    assert resp.status_code == 200 and resp.mimetype == "application/geo+json"
    _meta_ok(resp.json, model_id)
    feats = resp.json["features"]
    assert feats and all(f["properties"]["inside"] for f in feats)
    assert resp.json["name"] == f"stressmap-{model_id[:8]}-field"  # the layer name GDAL shows
    same = client.post(f"{API}/models/{model_id}/predict",
                       json={"region": {"bbox": [-37, -37, 9, -3], "spacing_km": 400}}).json
    assert same["features"] == feats
    csv = client.get(f"{API}/models/{model_id}/field?bbox=-37,-37,9,-3&spacing_km=400&format=csv")
    assert csv.status_code == 200 and csv.data.startswith(b"lon,lat,")
    assert csv.headers["X-Stressmap-Caution"] == CAUTION


def test_weights_scale_stress_linearly(svc):
    # Linear elasticity: doubling every load doubles every stress and keeps the orientation.
    app, client, model_id = svc
    pts = {"points": [[-15.0, -20.0], [-25.0, -25.0]]}
    one = client.post(f"{API}/models/{model_id}/predict", json=pts).json["features"]
    groups = ["transform", "ridge", "collision", "overriding", "subduction"]
    two = client.post(f"{API}/models/{model_id}/predict",
                      json={**pts, "weights": {g: 2.0 for g in groups}}).json["features"]
    for a, b in zip(one, two):
        # GeoJSON numbers carry 7 significant digits (stressmap.formats.geojson, README)
        assert_allclose(b["properties"]["s_hmax_mpa"], 2 * a["properties"]["s_hmax_mpa"], rtol=1e-6)
        assert_allclose(b["properties"]["shmax_azimuth_deg"], a["properties"]["shmax_azimuth_deg"],
                        atol=1e-4)


def test_boundary_forces_point_into_or_out_of_the_plate_by_kind(svc, library_model):
    import shapely

    app, client, model_id = svc
    resp = client.get(f"{API}/models/{model_id}/boundary")
    assert resp.status_code == 200 and resp.mimetype == "application/geo+json"
    fc = resp.json
    _meta_ok(fc, model_id)
    definition = library_model.definition["boundary"]["features"]
    assert [f["properties"]["kind"] for f in fc["features"]] == [
        f["properties"]["kind"] for f in definition]
    ring = np.array([c for f in fc["features"] for c in f["geometry"]["coordinates"][:-1]])
    plate = shapely.Polygon(ring)
    for f in fc["features"]:
        p = f["properties"]
        assert_allclose(p["force_magnitude_n_per_m"],
                        np.hypot(p["normal_force_n_per_m"], p["shear_force_n_per_m"]), rtol=1e-9)
        if p["kind"] in ("ridge", "collision", "subduction", "overriding"):
            # a 20 km step from the segment along the force: inside for pushes, outside for pulls
            az = np.radians(p["force_azimuth_deg"])
            step = 20.0 / 111.19
            lon = p["anchor_lon"] + step * np.sin(az) / np.cos(np.radians(p["anchor_lat"]))
            lat = p["anchor_lat"] + step * np.cos(az)
            pushes = p["normal_force_n_per_m"] > 0
            assert pushes == (p["kind"] in ("ridge", "collision")), p
            assert plate.contains(shapely.Point(lon, lat)) == pushes, p
    half = client.get(f"{API}/models/{model_id}/boundary?weights=ridge:0.5").json
    r0 = next(f for f in fc["features"] if f["properties"]["kind"] == "ridge")["properties"]
    r1 = next(f for f in half["features"] if f["properties"]["kind"] == "ridge")["properties"]
    assert_allclose(r1["normal_force_n_per_m"], 0.5 * r0["normal_force_n_per_m"], rtol=1e-12)


def test_job_of_unknown_id_is_404(client):
    resp = client.get(f"{API}/jobs/{'0' * 32}")
    assert resp.status_code == 404 and resp.mimetype == "application/problem+json"


def test_docs_page_is_served_from_the_package_without_cdn(client):
    resp = client.get(f"{API}/docs")
    assert resp.status_code == 200 and resp.mimetype == "text/html"
    html = resp.data.decode()
    assert 'fetch("openapi.json"' in html
    assert "http://" not in html and "https://" not in html  # nothing loaded from elsewhere
    assert "default-src 'self'" in resp.headers["Content-Security-Policy"]
