"""Regressions of a hostile and careless client against the service (in process).

Each test names the failure it guards against: a crash or 5xx from input, unbounded work, stale
state after a race, orphan rows or directories, CSV injection, cross-site requests, log floods.

Sources: RFC 9457 (problem details), RFC 8259 section 8.2 (strings of unpaired surrogates are not
interoperable text), RFC 9110 section 15.5.16 (415 Unsupported Media Type), OWASP "CSV
Injection" (cells starting with = + - @ tab CR are formulas; a bare CR starts a new row), the
Fetch standard's CORS-safelisted request content types (text/plain, form and multipart posts need
no preflight), DNS rebinding defence by Host checking (common practice).
"""

from __future__ import annotations

import dataclasses
import logging
import multiprocessing
import sys
import threading
import time
import traceback

import pytest
from service_support import coarse_demo_document, store_ready_model
from stressmap_api import create_app
from stressmap_api.store import Store, get_store

API = "/api/v1"
PROBLEM = "application/problem+json"


@pytest.fixture(scope="module")
def stored(tmp_path_factory, coarse_demo_model):
    data = tmp_path_factory.mktemp("hard") / "data"
    model_id = store_ready_model(Store(data), coarse_demo_model)
    return data, model_id


@pytest.fixture
def svc(stored):
    app = create_app({"TESTING": True, "DATA_DIR": str(stored[0]), "JOB_EXECUTOR": "thread"})
    yield app, app.test_client(), stored[1]
    app.extensions["stressmap_jobs"].shutdown(wait=True)


def problem_of(resp, status):
    assert resp.status_code == status, resp.get_data(as_text=True)[:500]
    assert resp.content_type == PROBLEM
    return resp.get_json()


def raw_post(client, url, text, **kw):
    return client.post(url, data=text.encode("utf-8"), content_type="application/json", **kw)


# -- 5xx from input ------------------------------------------------------------------------------

@pytest.mark.parametrize("where", ["points", "weights", "unknown", "nested"])
def test_lone_surrogate_anywhere_is_a_400_naming_where(svc, where):
    _, client, mid = svc
    bodies = {
        "points": '{"points": {"type": "FeatureCollection", "features": [{"type": "Feature", '
                  '"geometry": {"type": "Point", "coordinates": [-15, -20]}, '
                  '"properties": {"well": "\\ud800"}}]}}',
        "weights": '{"points": [[-15, -20]], "weights": {"\\ud800": 1}}',
        "unknown": '{"points": [[-15, -20]], "\\udfff": 1}',
        "nested": '{"points": [[-15, -20]], "format": ["\\ud800"]}',
    }
    body = problem_of(raw_post(client, f"{API}/models/{mid}/predict", bodies[where]), 400)
    assert "surrogate" in body["detail"]


@pytest.mark.parametrize("url", ["/models", "/models/{mid}/predict", "/screen",
                                 "/models/{mid}/compare", "/indicators/smooth"])
def test_deep_nesting_is_refused_before_use(svc, url):
    _, client, mid = svc
    text = '{"name": ' + "[" * 600 + "]" * 600 + "}"
    body = problem_of(raw_post(client, API + url.format(mid=mid), text), 400)
    assert "nested too deeply" in body["detail"]


def test_screen_null_depth_empty_regime_and_bad_fault_properties(svc):
    _, client, _ = svc
    base = {"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0,
            "regime": "normal", "planes": ["040/60"]}
    for key, value, field in [("depth_km", None, "depth_km"), ("regime", [], "regime")]:
        body = dict(base, **{key: value})
        assert field in str(problem_of(client.post(f"{API}/screen", json=body), 422)["errors"])
    faults = {"type": "FeatureCollection", "features": [{"type": "Feature", "properties": 5,
              "geometry": {"type": "LineString", "coordinates": [[-15, -20], [-14.9, -19.9]]}}]}
    body = dict(base, faults=faults)
    body.pop("planes")
    assert "properties must be an object" in str(
        problem_of(client.post(f"{API}/screen", json=body), 422)["errors"])


@pytest.mark.parametrize("polygon", [
    {"type": "Polygon", "coordinates": [[[0, 0], [1e308, 0], [1e308, 1e308], [0, 0]]]},
    {"type": "Polygon"},
    {"type": "Polygon", "coordinates": {"a": 1}},
])
def test_hostile_region_polygons(svc, polygon):
    _, client, mid = svc
    body = {"region": {"polygon": polygon, "spacing_km": 50}}
    body = problem_of(client.post(f"{API}/models/{mid}/predict", json=body), 422)
    assert "region.polygon" in str(body["errors"])


def test_denormal_spacing_huge_bounds_and_repeated_percentiles(svc):
    _, client, mid = svc
    ind = "id,lon,lat,type,azimuth_deg\nA,-15,-20,overcoring,40\nB,-14,-19,overcoring,45\n"
    smooth = {"indicators_csv": ind, "bbox": [-20, -25, -10, -15], "radius_km": 200,
              "spacing_km": 5e-324}
    assert "spacing_km" in str(problem_of(client.post(f"{API}/indicators/smooth", json=smooth),
                                          422)["errors"])
    cal = {"indicators_csv": ind, "bounds": {"ridge": [1e308, 1e308]}}
    assert "bounds.ridge" in str(problem_of(client.post(f"{API}/models/{mid}/calibrate",
                                                        json=cal), 422)["errors"])
    ens = {"points": [[-15, -20]], "members": 10, "percentiles": [10, 10, 20]}
    assert "percentiles" in str(problem_of(client.post(f"{API}/models/{mid}/ensembles",
                                                       json=ens), 422)["errors"])


# -- names, pictures, mesh estimate, degenerate values -------------------------------------------

def test_model_name_length_is_limited(svc):
    _, client, _ = svc
    doc = coarse_demo_document()
    doc["name"] = "x" * 20_000
    body = problem_of(client.post(f"{API}/models", json=doc), 422)
    assert body["errors"][0]["field"] == "name"


@pytest.mark.parametrize("name", ["$\\frac{$ (fictional)", "y" * 20_000])
def test_pictures_of_a_model_with_a_hostile_name(tmp_path, coarse_demo_model, name):
    model = dataclasses.replace(coarse_demo_model,
                                summary=dict(coarse_demo_model.summary, name=name))
    store = Store(tmp_path / "data")
    mid = store_ready_model(store, model)
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                      "JOB_EXECUTOR": "thread"})
    try:
        t0 = time.monotonic()
        resp = app.test_client().get(f"{API}/models/{mid}/field?bbox=-30,-32,0,-6&spacing_km=400"
                                     "&format=png")
        assert resp.status_code == 200 and resp.data[:8] == b"\x89PNG\r\n\x1a\n"
        body = {"site": [-15.0, -20.0], "depth_km": 3.0, "model_id": mid, "format": "png",
                "picture": "mohr", "planes": ["040/60"]}
        resp = app.test_client().post(f"{API}/screen", json=body)
        assert resp.status_code == 200 and resp.data[:4] == b"\x89PNG"
        assert time.monotonic() - t0 < 30.0
    finally:
        app.extensions["stressmap_jobs"].shutdown(wait=True)


def test_mesh_estimate_counts_refinements_and_degenerate_values_are_refused(svc):
    _, client, _ = svc
    doc = coarse_demo_document(250.0)
    doc["mesh"]["refinement"] = [{"point": [-15, -20], "edge_km": 0.1, "radius_km": 20000}]
    body = problem_of(client.post(f"{API}/models", json=doc), 422)
    assert body["errors"][0]["field"] == "mesh.refinement"
    doc = coarse_demo_document(250.0)
    doc["mesh"]["refinement"] = [{"point": [-15, -20], "edge_km": 1.0, "radius_km": 400}]
    assert "mesh nodes" in problem_of(client.post(f"{API}/models", json=doc), 422)["detail"] + \
        str(problem_of(client.post(f"{API}/models", json=doc), 422)["errors"])
    for table, key in [("sheet", "young_gpa"), ("sheet", "thickness_km"),
                       ("drag", "viscosity_pa_s")]:
        doc = coarse_demo_document(250.0)
        doc.setdefault(table, {})[key] = 5e-324
        body = problem_of(client.post(f"{API}/models", json=doc), 422)
        assert f"{table}.{key}" in str(body["errors"])
    with client.application.app_context():
        assert all(m["status"] == "ready" for m in get_store().list_models())  # no rows left


# -- bounded work --------------------------------------------------------------------------------

def test_calibration_stops_at_the_time_limit(stored):
    app = create_app({"TESTING": True, "DATA_DIR": str(stored[0]), "JOB_EXECUTOR": "thread",
                      "REQUEST_TIME_LIMIT_S": 3.0})
    rows = "\n".join(f"S{i},{-25 + 0.1 * i:.2f},-20,overcoring,{(7 * i) % 180}" for i in range(150))
    body = {"indicators_csv": "id,lon,lat,type,azimuth_deg\n" + rows, "n_bootstrap": 2000,
            "n_random": 2000, "n_starts": 64}
    try:
        t0 = time.monotonic()
        resp = app.test_client().post(f"{API}/models/{stored[1]}/calibrate", json=body)
        elapsed = time.monotonic() - t0
        problem_of(resp, 503)
        assert elapsed < 10.0
        time.sleep(0.5)
        # the work was stopped, not abandoned: no process of it, no thread still calibrating
        assert not [p for p in multiprocessing.active_children()
                    if p.name == "stressmap-isolated"]
        busy = [fs.filename for frame in sys._current_frames().values()
                for fs in traceback.extract_stack(frame) if "analyses/calibrate" in fs.filename]
        assert not busy
    finally:
        app.extensions["stressmap_jobs"].shutdown(wait=True)


# -- consistency ---------------------------------------------------------------------------------

def test_delete_while_loading_leaves_nothing_cached(svc, monkeypatch):
    app, client, first = svc
    import stressmap_api.store as store_module

    real_read = store_module.read_model
    with app.app_context():
        store = get_store()
        mid = store_ready_model(store, real_read(store.model_dir(first)))
    reading, release = threading.Event(), threading.Event()

    def slow_read(path):
        model = real_read(path)
        reading.set()
        release.wait(10)
        return model

    monkeypatch.setattr(store_module, "read_model", slow_read)
    results = {}

    def predict():
        results["predict"] = client.post(f"{API}/models/{mid}/predict",
                                         json={"points": [[-15, -20]]}).status_code

    t = threading.Thread(target=predict)
    t.start()
    assert reading.wait(10)
    assert app.test_client().delete(f"{API}/models/{mid}").status_code == 204
    release.set()
    t.join(10)
    assert results["predict"] == 404
    monkeypatch.setattr(store_module, "read_model", real_read)
    for url in (f"/models/{mid}", f"/models/{mid}/boundary"):
        assert app.test_client().get(API + url).status_code == 404


def test_refused_build_leaves_no_row(svc, monkeypatch):
    app, client, _ = svc
    from stressmap_api.errors import JobQueueFull

    def full(*args, **kwargs):
        raise JobQueueFull("32 jobs are already queued or running; retry later")

    monkeypatch.setattr(app.extensions["stressmap_jobs"], "submit_as", full)
    with app.app_context():
        before = len(get_store().list_models())
    problem_of(client.post(f"{API}/models", json=coarse_demo_document()), 503)
    with app.app_context():
        assert len(get_store().list_models()) == before


def test_restart_removes_a_model_directory_whose_row_is_not_ready(tmp_path, coarse_demo_model):
    from stressmap.io.modeldir import write_model

    store = Store(tmp_path / "data")
    mid = store.add_model("killed between rename and mark-ready (fictional)", None)
    write_model(coarse_demo_model, store.model_dir(mid))  # complete directory, row not ready
    store.set_model_status(mid, "failed", "interrupted")
    Store(tmp_path / "data").recover()
    assert not store.model_dir(mid).exists()


def test_a_job_whose_end_cannot_be_stored_does_not_read_running_forever(svc, monkeypatch):
    app, client, _ = svc
    from stressmap.errors import StorageError

    runner = app.extensions["stressmap_jobs"]
    job_id = runner.submit("probe", _sleep_briefly)
    real_failed = runner.store.job_failed

    def disk_full(*args, **kwargs):
        raise StorageError("index database error: database or disk is full")

    monkeypatch.setattr(runner.store, "job_failed", disk_full)
    runner._finished(job_id, _failed_future(StorageError("database or disk is full")))
    job = client.get(f"{API}/jobs/{job_id}").get_json()
    assert job["status"] == "failed" and "could not be stored" in job["error"]["reason"]
    monkeypatch.setattr(runner.store, "job_failed", real_failed)
    client.get(f"{API}/jobs/{job_id}")  # the index takes writes again: the state is written
    assert not runner._unrecorded


def _sleep_briefly(progress):
    time.sleep(0.2)
    return {}


def _failed_future(exc):
    from concurrent.futures import Future

    fut = Future()
    fut.set_exception(exc)
    return fut


# -- cross-site requests, CSV injection, logs ----------------------------------------------------

def test_non_json_bodies_and_foreign_hosts_are_refused(svc):
    _, client, mid = svc
    for ctype in ("text/plain", "application/x-www-form-urlencoded", "multipart/form-data"):
        resp = client.post(f"{API}/models", data='{"name": "x"}', content_type=ctype)
        assert problem_of(resp, 415)["title"] == "Unsupported Media Type"
    resp = client.get(f"{API}/models", headers={"Host": "attacker.example"})
    assert problem_of(resp, 400)["title"] == "Host not served"
    assert client.get(f"{API}/models", headers={"Host": "127.0.0.1:8000"}).status_code == 200


def test_csv_cells_and_headers_cannot_start_formulas(svc):
    _, client, mid = svc
    fc = {"type": "FeatureCollection", "features": [{
        "type": "Feature", "geometry": {"type": "Point", "coordinates": [-15, -20]},
        "properties": {"=HYPERLINK(\"http://x\")": "ok\r=1+2", "well": "a\n@SUM(1)"}}]}
    resp = client.post(f"{API}/models/{mid}/predict", json={"points": fc, "format": "csv"})
    assert resp.status_code == 200
    text = resp.get_data(as_text=True)
    assert "\r" not in text
    for line in text.split("\n"):
        for cell in line.split(","):
            assert not cell.strip('"').startswith(("=", "@", "+")), line


def test_an_unexpected_error_logs_a_bounded_record(svc, monkeypatch, caplog):
    _, client, mid = svc
    import stressmap_api.blueprints.models as views

    def deep(n):
        return deep(n + 1)

    monkeypatch.setattr(views, "predict_points", lambda *a, **k: deep(0))
    with caplog.at_level(logging.ERROR):
        problem_of(client.post(f"{API}/models/{mid}/predict", json={"points": [[-15, -20]]}),
                   500)
    logged = "".join(r.getMessage() for r in caplog.records)
    assert "RecursionError" in logged and len(logged) < 10_000


@pytest.mark.parametrize("url, body", [
    ("/wells/tendency-net", {"site": [5.0, 50.0], "depth_km": 3.0, "regime": "strike-slip",
                             "shmax_azimuth_deg": 30.0, "format": "png",
                             "planes": [{"strike_deg": 40.0, "dip_deg": 60.0,
                                         "name": "$\\frac{$"}]}),
    ("/screen", {"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0,
                 "regime": "normal", "format": "png", "picture": "mohr",
                 "planes": [{"strike_deg": 40.0, "dip_deg": 60.0, "name": "$\\frac{$"}]}),
])
def test_mathtext_in_client_names_is_drawn_as_text(svc, url, body):
    resp = svc[1].post(API + url, json=body)
    assert resp.status_code == 200 and resp.data[:4] == b"\x89PNG"
