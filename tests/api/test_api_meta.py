"""The service's metadata endpoints and its OpenAPI document (validated by openapi-spec-validator)."""

from __future__ import annotations

import re

from openapi_spec_validator import validate

from stressmap import CAUTION


def test_health(client):
    resp = client.get("/api/v1/health")
    assert resp.status_code == 200
    assert resp.json["status"] == "ok"
    assert resp.json["caution"] == CAUTION


def test_openapi_document_validates_as_3_1(client):
    doc = client.get("/api/v1/openapi.json").json
    assert doc["openapi"].startswith("3.1")
    validate(doc)  # raises on an invalid document (openapi-spec-validator, OpenAPI 3.1 schema)


def test_every_route_is_documented(app, client):
    doc = client.get("/api/v1/openapi.json").json
    documented = {
        (path, method.upper())
        for path, item in doc["paths"].items()
        for method in item
        if method in {"get", "post", "put", "patch", "delete"}
    }
    for rule in app.url_map.iter_rules():
        if not rule.rule.startswith("/api/v1/"):
            continue
        path = re.sub(r"<(?:[^:>]+:)?([^>]+)>", r"{\1}", rule.rule[len("/api/v1"):])
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            assert (path, method) in documented, f"{method} {path} missing from OpenAPI document"


def test_unknown_route_is_problem_json(client):
    resp = client.get("/api/v1/no-such-thing")
    assert resp.status_code == 404
    assert resp.mimetype == "application/problem+json"
    assert resp.json["status"] == 404


def test_wrong_method_is_problem_json(client):
    resp = client.delete("/api/v1/health")
    assert resp.status_code == 405
    assert resp.mimetype == "application/problem+json"
