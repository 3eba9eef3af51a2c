"""Networks over HTTP: upload (201), problem+json for bad networks with positions, plates as GeoJSON,
202 with a build job while plates build, then synchronous predictions with a plate column."""

from __future__ import annotations

import copy

import pytest
from service_support import wait_for_job


def line(coords, **p):
    return {"type": "Feature", "properties": p, "geometry": {"type": "LineString", "coordinates": coords}}


def regional() -> dict:
    return {"name": "two plates", "defaults": {"mesh": {"edge_km": 300.0}},
            "lines": {"type": "FeatureCollection", "features": [
                line([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], kind="free"),
                line([[0, 10], [5, 5], [10, 0]], kind="ridge", age_myr=40.0, left="North", right="South")]}}


@pytest.fixture
def app(tmp_path):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "LOAD_DEMO": False,
                      "JOB_EXECUTOR": "thread", "API_TOKEN": "s3cret"})
    yield app
    app.extensions["stressmap_jobs"].shutdown()


AUTH = {"Authorization": "Bearer s3cret"}


def test_network_lifecycle(client):
    assert client.post("/api/v1/networks", json=regional()).status_code == 401  # token rule
    resp = client.post("/api/v1/networks", json=regional(), headers=AUTH)
    assert resp.status_code == 201
    net = resp.json
    assert resp.headers["Location"] == net["links"]["self"]
    assert net["status"] == "pending" and sorted(p["name"] for p in net["plates"]) == ["North", "South"]
    assert [n["id"] for n in client.get("/api/v1/networks").json["networks"]] == [net["id"]]
    plates = client.get(net["links"]["plates"])
    assert plates.mimetype == "application/geo+json"
    assert {f["properties"]["plate"] for f in plates.json["features"]} == {"North", "South"}
    assert all(f["geometry"]["type"] == "Polygon" for f in plates.json["features"])
    body = {"points": [[2.0, 2.0], [8.0, 8.0], [20.0, 5.0]]}
    first = client.post(net["links"]["predict"], json=body)
    assert first.status_code == 202 and first.json["kind"] == "network-build"
    # a second request while the build runs joins the same job
    again = client.post(net["links"]["predict"], json=body)
    assert again.status_code in (200, 202)
    job = wait_for_job(lambda u: client.get(u).json, first.headers["Location"])
    assert job["status"] == "done", job
    done = client.post(net["links"]["predict"], json=body)
    assert done.status_code == 200 and done.mimetype == "application/geo+json"
    props = [f["properties"] for f in done.json["features"]]
    # GeoJSON says "no plate" with null, like every value outside the plates (README)
    assert [p["plate"] for p in props] == ["South", "North", None]
    assert [p["inside"] for p in props] == [True, True, False]
    assert done.json["model_id"] == net["id"] and done.json["caution"]
    grid = client.post(net["links"]["predict"], json={"region": {"bbox": [0, 0, 10, 10]},
                                                      "spacing_km": 200, "format": "csv"})
    assert grid.status_code == 200 and b",plate" in grid.data
    assert client.get(net["links"]["self"]).json["status"] == "ready"
    assert client.delete(net["links"]["self"], headers=AUTH).status_code == 204
    assert client.get(net["links"]["self"]).status_code == 404


def test_bad_network_is_problem_json_with_positions_and_stores_nothing(client):
    bad = copy.deepcopy(regional())
    bad["lines"]["features"][1]["geometry"]["coordinates"][-1] = [10.5, 0.5]  # 55 km east of the edge
    resp = client.post("/api/v1/networks", json=bad, headers=AUTH)
    assert resp.status_code == 422 and resp.mimetype == "application/problem+json"
    errors = resp.json.get("errors") or resp.json.get("problems")
    near = [e for e in errors if e["message"].startswith("near-miss")]
    assert near and near[0]["position"] == [10.5, 0.5]
    assert client.get("/api/v1/networks").json["networks"] == []
    huge = regional()
    huge["defaults"]["mesh"]["edge_km"] = 1.0
    resp = client.post("/api/v1/networks", json=huge, headers=AUTH)
    assert resp.status_code == 422 and "mesh nodes" in str(resp.json)
    assert client.get("/api/v1/networks/" + "0" * 32).status_code == 404
    assert client.post("/api/v1/networks/" + "0" * 32 + "/predict", json={"points": [[0, 0]]}).status_code == 404
