"""Access: the bearer token guards every change to stored data, tokens are compared in constant
time, ids cannot name files, and no response shows a stack trace or an internal path.

Sources: RFC 6750 (Bearer tokens: 401 with ``WWW-Authenticate: Bearer``), Python docs of
:func:`hmac.compare_digest` ("reduces the vulnerability to timing attacks"), OWASP "Path
Traversal" and "Improper Error Handling" (no stack traces or file paths in responses), RFC 9457.
"""

from __future__ import annotations

import hmac
import json
import re
import sqlite3
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from service_support import coarse_demo_document, wait_for_job, store_ready_model

from stressmap.errors import NotFoundError

TOKEN = "s3cret-token-for-tests-only"
AUTH = {"Authorization": f"Bearer {TOKEN}"}
REPO = str(Path(__file__).resolve().parents[2])  # this checkout, wherever it lives
LEAKS = re.compile(r"Traceback|site-packages|" + re.escape(REPO) +
                   r"|/tmp/|/root/|/home/|/usr/|\.py\b|File \"|"
                   r"line \d+, in ")


@pytest.fixture
def guarded(tmp_path, coarse_demo_model):
    """An app with a token configured and the coarse fictional demo model stored."""
    from stressmap_api import create_app
    from stressmap_api.store import get_store

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "API_TOKEN": TOKEN,
                      "JOB_EXECUTOR": "thread", "JOB_WORKERS": 1, "LOAD_DEMO": False})
    with app.app_context():
        store = get_store()
        model_id = store_ready_model(store, coarse_demo_model)
    yield app, model_id
    app.extensions["stressmap_jobs"].shutdown()


def _state(app) -> tuple:
    """Index rows (models and jobs) and every file under the data directory with its size."""
    from stressmap_api.store import get_store

    with app.app_context():
        store = get_store()
        con = sqlite3.connect(store.db_path)
        try:
            models = con.execute("SELECT * FROM models ORDER BY id").fetchall()
            jobs = con.execute("SELECT * FROM jobs ORDER BY id").fetchall()
        finally:
            con.close()
        files = sorted((str(p.relative_to(store.data_dir)), p.stat().st_size)
                       for p in store.models_dir.rglob("*") if p.is_file())
    return models, jobs, files


def _mutating_routes(app) -> list[tuple[str, str]]:
    """(method, rule) of every route that may change stored data: marked with require_token."""
    out = []
    for rule in app.url_map.iter_rules():
        view = app.view_functions[rule.endpoint]
        for method in sorted(rule.methods - {"HEAD", "OPTIONS", "GET"}):
            if getattr(view, "needs_token", False) or method in ("DELETE", "PUT", "PATCH"):
                out.append((method, rule.rule))
    return out


def _url(rule: str, model_id: str) -> str:
    return (rule.replace("<model_id>", model_id).replace("<job_id>", "0" * 32)
            .replace("<ensemble_id>", "0" * 32))


def test_creating_and_deleting_need_the_token(guarded):
    app, model_id = guarded
    routes = _mutating_routes(app)
    assert ("POST", "/api/v1/models") in routes
    assert ("DELETE", "/api/v1/models/<model_id>") in routes
    client = app.test_client()
    before = _state(app)
    bad_headers = [{}, {"Authorization": "Bearer wrong"}, {"Authorization": f"Basic {TOKEN}"},
                   {"Authorization": TOKEN}, {"Authorization": f"Bearer {TOKEN}x"},
                   {"Authorization": f"Bearer {TOKEN[:-1]}"}, {"Authorization": "Bearer "},
                   {"X-Api-Token": TOKEN}]
    for method, rule in routes:
        for headers in bad_headers:
            resp = client.open(_url(rule, model_id), method=method, headers=headers,
                               json=coarse_demo_document())
            assert resp.status_code == 401, (method, rule, headers)
            assert resp.content_type == "application/problem+json"
            assert resp.headers["WWW-Authenticate"].startswith("Bearer")  # RFC 6750 section 3
            assert TOKEN not in resp.get_data(as_text=True)
    assert _state(app) == before, "a request without the token changed stored data"
    assert client.get(f"/api/v1/models/{model_id}").get_json()["status"] == "ready"


def test_the_token_opens_create_and_delete(guarded):
    app, model_id = guarded
    client = app.test_client()
    resp = client.post("/api/v1/models", json=coarse_demo_document(), headers=AUTH)
    assert resp.status_code == 202
    job = wait_for_job(lambda u: client.get(u).get_json(), resp.headers["Location"])
    assert job["status"] == "done", job
    new_id = job["result"]["model_id"]
    assert client.delete(f"/api/v1/models/{new_id}", headers=AUTH).status_code == 204
    assert client.get(f"/api/v1/models/{new_id}").status_code == 404
    assert client.get(f"/api/v1/models/{model_id}").status_code == 200  # reads stay open


def test_token_is_compared_with_hmac_compare_digest(guarded, monkeypatch):
    """The decision is compare_digest's: a spy sees both values, and forcing it to say "equal"
    lets a wrong token in (so no other comparison, such as ==, decides)."""
    from stressmap_api import auth

    app, model_id = guarded
    calls = []
    real = hmac.compare_digest

    def spy(a, b):
        calls.append((a, b))
        return real(a, b)

    monkeypatch.setattr(auth.hmac, "compare_digest", spy)
    client = app.test_client()
    assert client.delete(f"/api/v1/models/{'f' * 32}",
                         headers={"Authorization": "Bearer nope"}).status_code == 401
    assert calls and {bytes(x) if not isinstance(x, str) else x.encode() for x in calls[-1]} == {
        b"nope", TOKEN.encode()}
    monkeypatch.setattr(auth.hmac, "compare_digest", lambda a, b: True)
    resp = client.delete(f"/api/v1/models/{'f' * 32}", headers={"Authorization": "Bearer nope"})
    assert resp.status_code == 404  # past the token check: the unknown model answers


def test_no_plain_comparison_of_the_token_in_the_source():
    """Belt and braces for the spy test: the token never meets ==, != or startswith."""
    from stressmap_api import auth

    src = Path(auth.__file__).read_text(encoding="utf-8")
    assert "compare_digest" in src
    for line in src.splitlines():
        if "token" in line.lower() and not line.lstrip().startswith("#"):
            assert not re.search(r"(==|!=|\.startswith\(|\.endswith\()\s*\S*token", line), line
            assert not re.search(r"token\w*\s*(==|!=)", line), line


# -- ids and paths ---------------------------------------------------------------------------
PATH_IDS = ["..", "../index.sqlite3", "..%2Findex.sqlite3", "%2e%2e%2f%2e%2e%2fetc%2fpasswd",
            "/etc/passwd", "%2Fetc%2Fpasswd", "models", ".", "~", "0" * 31 + "/", "0" * 32 + "/..",
            "A" * 32, "0" * 33, "0" * 31 + "g", "0" * 32 + "%00", "..\\..\\windows",
            "%252e%252e%252f", "index.sqlite3"]


@pytest.mark.parametrize("bad_id", PATH_IDS)
def test_path_like_ids_never_reach_a_file(guarded, bad_id):
    app, model_id = guarded
    client = app.test_client()
    before = _state(app)
    urls = [f"/api/v1/models/{bad_id}", f"/api/v1/models/{bad_id}/boundary",
            f"/api/v1/models/{bad_id}/field?bbox=-20,-30,0,-10&spacing_km=200",
            f"/api/v1/jobs/{bad_id}"]
    for url in urls:
        resp = client.get(url)
        if resp.status_code == 308:  # werkzeug merges '//' by redirecting within the API
            assert resp.headers["Location"].split("localhost", 1)[-1].startswith("/api/v1/")
            continue
        assert resp.status_code in (404, 405), (url, resp.status_code)
        assert resp.content_type == "application/problem+json"
        assert not LEAKS.search(resp.get_data(as_text=True))
    for method, path in [("POST", f"/api/v1/models/{bad_id}/predict"),
                         ("DELETE", f"/api/v1/models/{bad_id}")]:
        resp = client.open(path, method=method, json={"points": [[-15, -20]]}, headers=AUTH)
        if resp.status_code == 308:
            assert resp.headers["Location"].split("localhost", 1)[-1].startswith("/api/v1/")
            continue
        assert resp.status_code in (404, 405), (path, resp.status_code)
        assert resp.content_type == "application/problem+json"
    resp = client.post("/api/v1/screen", json={"site": [-15, -20], "depth_km": 2,
                                               "model_id": bad_id, "planes": ["040/60"]})
    assert resp.status_code in (404, 422)
    assert _state(app) == before


def test_static_route_does_not_serve_package_files(guarded):
    app, _ = guarded
    client = app.test_client()
    for url in ["/static/../__init__.py", "/static/..%2F__init__.py", "/static/%2e%2e/store.py",
                "/static//etc/passwd", "/api/v1/docs/../../__init__.py"]:
        resp = client.get(url)
        if resp.status_code == 308:  # '//' merged by a redirect that stays under /static
            assert resp.headers["Location"].split("localhost", 1)[-1].startswith("/static/")
            resp = client.get(resp.headers["Location"])
        assert resp.status_code == 404, url
        assert b"import" not in resp.get_data()


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(min_size=0, max_size=80))
def test_store_resolves_only_ids_inside_the_models_directory(tmp_path_factory, text):
    """Any string: either it is refused (NotFoundError) or it names a direct child of
    ``models/`` whose name is exactly 32 lowercase hex digits."""
    from stressmap_api.store import Store, check_id

    store = _hypothesis_store(tmp_path_factory)
    try:
        path = store.model_dir(text)
    except NotFoundError as exc:
        assert "32 lowercase hex digits" in str(exc)
        return
    assert check_id(text) == text and re.fullmatch(r"[0-9a-f]{32}", text)
    assert path.parent == store.models_dir and path.resolve().parent == store.models_dir


_STORE = {}


def _hypothesis_store(factory):
    from stressmap_api.store import Store

    if "store" not in _STORE:
        _STORE["store"] = Store(factory.mktemp("ids") / "data", cache_size=0)
    return _STORE["store"]


# -- no stack traces, no internal paths ------------------------------------------------------
def test_error_responses_hide_internals(guarded, monkeypatch):
    """Unexpected errors, storage errors and malformed requests: problem+json, no trace, no path."""
    from stressmap.errors import StorageError
    from stressmap_api.store import Store

    app, model_id = guarded
    client = app.test_client()
    data_dir = str(Path(app.config["DATA_DIR"]).resolve())
    bodies = []

    def check(resp, status):
        text = resp.get_data(as_text=True)
        assert resp.status_code == status, text
        assert resp.content_type == "application/problem+json", text
        assert not LEAKS.search(text), text
        assert data_dir not in text and str(Path(__file__).parent) not in text, text
        assert "<html" not in text.lower()
        bodies.append(json.loads(text))

    check(client.get("/api/v1/nowhere"), 404)
    check(client.put("/api/v1/models"), 405)
    check(client.post("/api/v1/models", data="{", content_type="application/json",
                      headers=AUTH), 400)
    check(client.post(f"/api/v1/models/{model_id}/predict", data=b"x" * (17 * 1024 * 1024),
                      content_type="application/json"), 413)

    def explode(*args, **kwargs):
        raise RuntimeError(f"boom in {__file__} at {data_dir}/index.sqlite3")

    monkeypatch.setattr(Store, "list_models", explode)
    check(client.get("/api/v1/models"), 500)

    def storage(*args, **kwargs):
        raise StorageError(f"cannot open the index database {data_dir}/index.sqlite3: "
                           "unable to open database file")

    monkeypatch.setattr(Store, "list_models", storage)
    check(client.get("/api/v1/models"), 503)
    assert "index database" in bodies[-1]["detail"]  # still says what failed

    def not_found(*args, **kwargs):
        raise FileNotFoundError(2, "No such file or directory", f"{data_dir}/models/x/fields.nc")

    monkeypatch.setattr(Store, "list_models", not_found)
    check(client.get("/api/v1/models"), 500)
