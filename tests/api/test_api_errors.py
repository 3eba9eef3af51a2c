"""Every error path answers with an RFC 9457 problem document (application/problem+json) and the
right HTTP status (RFC 9110 status semantics; RFC 6750 for bearer-token challenges): malformed
JSON, wrong types, unknown model, invalid plate geometry (each validation message of
stressmap.model.plate surfaces), too many points, body too large, missing or wrong token, limits,
unexpected failures."""

from __future__ import annotations

import copy

import pytest
from service_support import coarse_demo_document

API = "/api/v1"
TOKEN = "s3cret-test-token"


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    from stressmap_api.tasks import build_and_store
    from stressmap_api.store import Store

    data = tmp_path_factory.mktemp("svc-errors") / "data"
    store = Store(data)
    doc = coarse_demo_document()
    model_id = store.add_model(doc["name"], None)
    build_and_store(str(data), model_id, doc, progress=lambda f, m="": None)
    return data, model_id


@pytest.fixture
def make_client(built):
    from stressmap_api import create_app

    apps = []

    def make(**config):
        app = create_app({"TESTING": True, "DATA_DIR": str(built[0]), "JOB_EXECUTOR": "thread",
                          **config})
        apps.append(app)
        return app.test_client()

    yield make
    for app in apps:
        app.extensions["stressmap_jobs"].shutdown(wait=True)


@pytest.fixture
def model_id(built):
    return built[1]


def problem_of(resp, status: int) -> dict:
    assert resp.status_code == status, resp.data[:500]
    assert resp.mimetype == "application/problem+json"
    body = resp.json
    assert body["status"] == status
    assert {"type", "title", "detail"} <= set(body)
    assert "Traceback" not in resp.data.decode()
    return body


# -- request bodies ------------------------------------------------------------------------

@pytest.mark.parametrize("raw", [b"{", b"[1, 2", b'{"points": [[1, 2]]', b"\xff\xfe", b""])
def test_malformed_json_is_400(make_client, model_id, raw):
    client = make_client()
    body = problem_of(client.post(f"{API}/models/{model_id}/predict", data=raw,
                                  content_type="application/json"), 400)
    assert body["title"] == "Malformed JSON"
    body = problem_of(client.post(f"{API}/models", data=raw, content_type="application/json"), 400)


@pytest.mark.parametrize("payload, field, words", [
    ({"points": "here"}, "points", "list"),
    ({"points": [[1.0, 2.0], ["x", 3.0]]}, "points[1]", "two finite numbers"),
    ({"points": [[1.0, 2.0, 3.0]]}, "points[0]", "two finite numbers"),
    ({"points": [[1.0, 95.0]]}, "points[0]", "outside [-90, 90]"),
    ({"points": []}, "points", "at least one"),
    ({"points": {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {}, "geometry": {"type": "LineString",
                                                           "coordinates": [[0, 0], [1, 1]]}}]}},
     "points.features[0].geometry", "Point"),
    ({"points": [[1.0, 2.0]], "weights": {"ridge": "strong"}}, "weights.ridge", "must be a number"),  # stressmap.validate wording
    ({"points": [[1.0, 2.0]], "weights": [1, 2]}, "weights", "object"),
    ({"points": [[1.0, 2.0]], "format": "xlsx"}, "format", "geojson, csv, netcdf, png"),
    ({"points": [[1.0, 2.0]], "colour": "red"}, "colour", "unknown member"),
    ({}, "points", "either points or region"),
    ({"region": {"bbox": [0, 0, 10]}, "spacing_km": 50}, "region.bbox", "four finite numbers"),
    ({"region": {"bbox": [0, 10, 10, 0]}, "spacing_km": 50}, "region.bbox", "below north"),
    ({"region": {"bbox": [-20, -30, 0, -10]}}, "region.spacing_km", "missing"),
    ({"region": {"bbox": [-20, -30, 0, -10], "spacing_km": -5}}, "region.spacing_km", ">= 0.001"),
    ({"region": {"polygon": {"type": "Point", "coordinates": [0, 0]}, "spacing_km": 50}},
     "region.polygon", "Polygon"),
    ({"region": {"polygon": {"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [1, 0], [0, 1],
                                                                 [0, 0]]]}, "spacing_km": 50}},
     "region.polygon.coordinates", "Self-intersection"),
    ({"points": [[1.0, 2.0]], "region": {"bbox": [0, 0, 1, 1]}}, "points", "exactly one"),
    ({"points": [[-15.0, -20.0]], "weights": {"no_such_group": 1.0}}, None, "no_such_group"),
])
def test_wrong_types_and_values_are_422_naming_the_field(make_client, model_id, payload, field,
                                                         words):
    body = problem_of(make_client().post(f"{API}/models/{model_id}/predict", json=payload), 422)
    text = body["detail"] + " ".join(e["message"] for e in body["errors"])
    assert words in text
    if field is not None:
        assert field in [e.get("field") for e in body["errors"]]


@pytest.mark.parametrize("query, field", [
    ("spacing_km=100", "bbox"),
    ("bbox=1,2,3&spacing_km=100", "bbox"),
    ("bbox=-20,-30,0,-10", "spacing_km"),
    ("bbox=-20,-30,0,-10&spacing_km=abc", "spacing_km"),
    ("bbox=-20,-30,0,-10&spacing_km=100&format=tiff", "format"),
    ("bbox=-20,-30,0,-10&spacing_km=100&weights=ridge", "weights"),
])
def test_field_query_errors_are_422(make_client, model_id, query, field):
    body = problem_of(make_client().get(f"{API}/models/{model_id}/field?{query}"), 422)
    assert field in [e.get("field") for e in body["errors"]]


# -- unknown things ------------------------------------------------------------------------

@pytest.mark.parametrize("path", ["/models/{u}", "/models/{u}/boundary", "/models/{u}/field?bbox=0,0,1,1&spacing_km=50",
                                  "/jobs/{u}"])
@pytest.mark.parametrize("unknown", ["0" * 32, "not-an-id", "ABCDEF" + "0" * 26, "..%2F..%2Fetc"])
def test_unknown_or_malformed_ids_are_404(make_client, path, unknown):
    body = problem_of(make_client().get(API + path.format(u=unknown)), 404)
    assert "no " in body["detail"] or "Not Found" in body["title"]


def test_unknown_model_predict_and_delete_are_404(make_client):
    client = make_client()
    problem_of(client.post(f"{API}/models/{'a' * 32}/predict", json={"points": [[0, 0]]}), 404)
    problem_of(client.delete(f"{API}/models/{'a' * 32}"), 404)


def test_model_not_ready_is_409(make_client, built):
    from stressmap_api.store import Store

    client = make_client()  # (its start-up recovery fails builds that no job runs)
    store = Store(built[0])
    waiting = store.add_model("waiting plate (fictional)", None)
    body = problem_of(client.post(f"{API}/models/{waiting}/predict", json={"points": [[0, 0]]}),
                      409)
    assert "queued" in body["detail"]
    problem_of(client.delete(f"{API}/models/{waiting}"), 409)
    store.set_model_status(waiting, "failed", "test over")


# -- invalid plate documents -----------------------------------------------------------------

def _bad_documents():
    base = coarse_demo_document()
    crossing = copy.deepcopy(base)  # swap two vertices so that the ring crosses itself
    coords = crossing["boundary"]["features"][0]["geometry"]["coordinates"]
    coords[1] = [coords[1][0], coords[1][1] + 40.0]
    kinds = copy.deepcopy(base)
    kinds["boundary"]["features"][3]["properties"]["kind"] = "trench"
    kinds["sheet"] = {"thickness_km": -5}
    gap = copy.deepcopy(base)
    gap["boundary"]["features"][5]["geometry"]["coordinates"][0] = [50.0, 50.0]
    return [("crossing ring", crossing), ("unknown kind and negative thickness", kinds),
            ("gap between segments", gap), ("not an object", [1, 2, 3]),
            ("no boundary", {"name": "empty (fictional)"})]


@pytest.mark.parametrize("label, document", _bad_documents(), ids=[b[0] for b in _bad_documents()])
def test_invalid_plate_documents_are_422_with_every_validation_message(make_client, label,
                                                                       document):
    from stressmap.errors import InputError
    from stressmap.model.plate import parse_plate

    body = problem_of(make_client().post(f"{API}/models", json=document), 422)
    with pytest.raises(InputError) as exc:  # the solver issue's own validation ...
        parse_plate(document)
    assert body["errors"] == exc.value.problems  # ... reaches the client message for message
    assert body["detail"] == exc.value.message


def test_mesh_too_large_for_the_service_is_422(make_client):
    body = problem_of(make_client(MAX_MESH_NODES=100).post(
        f"{API}/models", json=coarse_demo_document(edge_km=100.0)), 422)
    assert body["errors"][0]["field"] == "mesh.edge_km"
    assert "at most 100" in body["errors"][0]["message"]


# -- limits ----------------------------------------------------------------------------------

def test_too_many_points_is_422(make_client, model_id):
    body = problem_of(make_client(MAX_POINTS=3).post(
        f"{API}/models/{model_id}/predict", json={"points": [[0.0, 0.0]] * 4}), 422)
    assert "at most 3" in body["detail"] and body["errors"][0]["field"] == "points"


def test_too_many_grid_points_is_422(make_client, model_id):
    body = problem_of(make_client(MAX_GRID_POINTS=50).post(
        f"{API}/models/{model_id}/predict",
        json={"region": {"bbox": [-30, -30, 0, -10], "spacing_km": 50}}), 422)
    assert "at most 50" in body["detail"]


def test_body_too_large_is_413(make_client, model_id):
    client = make_client(MAX_CONTENT_LENGTH=1000)
    payload = {"points": [[-15.0, -20.0]] * 200}
    problem_of(client.post(f"{API}/models/{model_id}/predict", json=payload), 413)
    problem_of(client.post(f"{API}/models", json=coarse_demo_document()), 413)


def test_time_limit_is_503_with_retry_after(make_client, model_id):
    resp = make_client(REQUEST_TIME_LIMIT_S=1e-6).post(
        f"{API}/models/{model_id}/predict",
        json={"region": {"bbox": [-37, -37, 9, -3], "spacing_km": 30}})
    body = problem_of(resp, 503)
    assert "limit" in body["detail"] and resp.headers["Retry-After"]


def test_unexpected_failure_is_500_without_internals(make_client, model_id, monkeypatch, caplog):
    import stressmap_api.blueprints.models as models_views

    def broken(*args, **kwargs):
        raise RuntimeError("secret internal state")

    monkeypatch.setattr(models_views, "predict_points", broken)
    body = problem_of(make_client().post(f"{API}/models/{model_id}/predict",
                                         json={"points": [[-15.0, -20.0]]}), 500)
    assert "secret" not in body["detail"]
    assert any("unhandled error" in r.message for r in caplog.records)  # logged for operators


# -- access ----------------------------------------------------------------------------------

@pytest.mark.parametrize("header, detail", [
    (None, "none was sent"),
    ("Bearer wrong-token", "not valid"),
    ("Basic czNjcmV0", "Bearer <token>"),
    ("Bearer ", "Bearer <token>"),
])
def test_create_and_delete_need_the_token(make_client, model_id, header, detail):
    client = make_client(API_TOKEN=TOKEN)
    headers = {"Authorization": header} if header else {}
    for resp in (client.post(f"{API}/models", json=coarse_demo_document(), headers=headers),
                 client.delete(f"{API}/models/{model_id}", headers=headers)):
        body = problem_of(resp, 401)
        assert detail in body["detail"]
        assert resp.headers["WWW-Authenticate"].startswith("Bearer")
    assert client.get(f"{API}/models/{model_id}").status_code == 200  # reads stay open


def test_the_right_token_is_accepted(make_client):
    client = make_client(API_TOKEN=TOKEN)
    bad = coarse_demo_document()
    bad["sheet"] = {"thickness_km": -1}
    # Past the token check, the document itself is judged (422, not 401).
    resp = client.post(f"{API}/models", json=bad, headers={"Authorization": f"Bearer {TOKEN}"})
    problem_of(resp, 422)


def test_reads_can_be_closed_by_config(make_client, model_id):
    client = make_client(API_TOKEN=TOKEN, READS_NEED_TOKEN=True)
    problem_of(client.get(f"{API}/models"), 401)
    problem_of(client.get(f"{API}/models/{model_id}/field?bbox=0,0,1,1&spacing_km=50"), 401)
    assert client.get(f"{API}/models", headers={"Authorization": f"Bearer {TOKEN}"}).status_code == 200
    assert client.get(f"{API}/health").status_code == 200  # public
    assert client.get(f"{API}/openapi.json").status_code == 200
    assert client.get(f"{API}/docs").status_code == 200


def test_cors_allow_list(make_client):
    client = make_client(CORS_ORIGINS=["https://gis.example.org"])
    ok = client.get(f"{API}/health", headers={"Origin": "https://gis.example.org"})
    assert ok.headers["Access-Control-Allow-Origin"] == "https://gis.example.org"
    other = client.get(f"{API}/health", headers={"Origin": "https://elsewhere.example.com"})
    assert "Access-Control-Allow-Origin" not in other.headers
    pre = client.options(f"{API}/models", headers={
        "Origin": "https://gis.example.org", "Access-Control-Request-Method": "POST"})
    assert pre.status_code == 200
    assert "Authorization" in pre.headers["Access-Control-Allow-Headers"]
    assert "POST" in pre.headers["Access-Control-Allow-Methods"]
