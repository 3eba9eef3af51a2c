"""Schema fuzzing: schemathesis generates requests from the service's own OpenAPI document and
sends them to the Flask app (WSGI), for every operation, with positive data (what the document
allows) and negative data (what it forbids).

Specification (issue 8): zero 5xx responses, and every response matches the document: its status
code is documented for the operation, its content type is the documented one, its body validates
against the documented schema, and documented headers are present. Negative data must be
rejected with a 4xx. Sources: OpenAPI 3.1 specification (responses, media types), schemathesis
documentation of its checks.

Budget: seeded (``derandomize=True``, so every run sends the same requests), a fixed number of
examples per operation and mode, no shrinking; about half a minute in total. Limits of the test
app are small (points, grid nodes, mesh nodes) so that no generated request can run for long.
A path parameter ``model_id`` is replaced by the id of a stored model (the coarse fictional demo)
in half of the cases, so that the fuzzer reaches past "unknown model" into the real work.
"""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, Phase, given, settings

schemathesis = pytest.importorskip("schemathesis")

from schemathesis import GenerationMode  # noqa: E402
from schemathesis.checks import (  # noqa: E402
    content_type_conformance,
    negative_data_rejection,
    not_a_server_error,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from stressmap_api.openapi_doc import openapi_document  # noqa: E402

EXAMPLES = {GenerationMode.POSITIVE: 16, GenerationMode.NEGATIVE: 10}
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_headers_conformance, response_schema_conformance]

_DOC = openapi_document()
OPERATIONS = sorted((method.upper(), path) for path, item in _DOC["paths"].items()
                    for method in item if method in ("get", "post", "put", "patch", "delete"))


def _has_inputs(method: str, path: str) -> bool:
    item = _DOC["paths"][path]
    op = item[method.lower()]
    return bool(op.get("parameters") or item.get("parameters") or op.get("requestBody"))


#: (method, path, mode): negative data exists only for operations that take parameters or a body
#: (GET /health, /docs, /openapi.json, /models take nothing that could be wrong).
RUNS = [(m, p, mode) for m, p in OPERATIONS for mode in (GenerationMode.POSITIVE,
                                                          GenerationMode.NEGATIVE)
        if mode is GenerationMode.POSITIVE or _has_inputs(m, p)]


@pytest.fixture(scope="module")
def fuzz_target(tmp_path_factory, coarse_demo_model):
    """(schema, app, stored model id) for the whole module."""
    from stressmap.modeldir import write_model
    from stressmap_api import create_app
    from stressmap_api.store import get_store

    app = create_app({
        "TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("fuzz") / "data"),
        "JOB_EXECUTOR": "thread", "JOB_WORKERS": 1, "MAX_QUEUED_JOBS": 10_000,
        "MAX_POINTS": 500, "MAX_GRID_POINTS": 3000, "MAX_MESH_NODES": 3000,
        "MAX_CONTENT_LENGTH": 1_000_000, "API_TOKEN": "", "LOAD_DEMO": False,
    })
    with app.app_context():
        store = get_store()
        model_id = store.add_model("Meridia (fictional demo plate)", None)
        write_model(coarse_demo_model, store.model_dir(model_id))
        store.mark_model_ready(model_id, coarse_demo_model.summary)
    schema = schemathesis.openapi.from_wsgi("/api/v1/openapi.json", app)
    yield schema, app, model_id
    app.extensions["stressmap_jobs"].shutdown()


def _path_is_negative(case) -> bool:
    """Whether the generated path parameters are the invalid part of a negative case (then the
    stored model's id must not replace them)."""
    from schemathesis.core.parameters import ParameterLocation

    meta = case.meta
    component = meta.components.get(ParameterLocation.PATH) if meta is not None else None
    return component is not None and component.mode.is_negative


def test_every_route_is_fuzzed(fuzz_target):
    """The operations fuzzed below are all the app's API routes (nothing left out)."""
    _, app, _ = fuzz_target
    routes = set()
    for rule in app.url_map.iter_rules():
        if not rule.rule.startswith("/api/v1/"):
            continue
        path = rule.rule.removeprefix("/api/v1").replace("<", "{").replace(">", "}")
        routes |= {(m, path) for m in rule.methods - {"HEAD", "OPTIONS"}}
    assert routes == set(OPERATIONS)


def test_negative_runs_cover_every_operation_with_inputs():
    with_inputs = {(m, p) for m, p in OPERATIONS if _has_inputs(m, p)}
    assert with_inputs == {(m, p) for m, p, mode in RUNS if mode is GenerationMode.NEGATIVE}
    assert len(with_inputs) >= len(OPERATIONS) - 4


@pytest.mark.parametrize("method,path,mode", RUNS,
                         ids=[f"{m} {p} {mode.value}" for m, p, mode in RUNS])
def test_operation_fuzz(fuzz_target, method, path, mode):
    schema, _, model_id = fuzz_target
    operation = schema[path][method]
    checks = CHECKS + ([negative_data_rejection] if mode is GenerationMode.NEGATIVE else [])
    seen = []

    @settings(max_examples=EXAMPLES[mode], derandomize=True, deadline=None, database=None,
              phases=[Phase.explicit, Phase.generate],
              suppress_health_check=list(HealthCheck))
    @given(case=operation.as_strategy(generation_mode=mode))
    def run(case):
        params = case.path_parameters or {}
        if (len(seen) % 2 == 0 and "model_id" in params and method != "DELETE"
                and not _path_is_negative(case)):
            params["model_id"] = model_id  # every other case: the stored model
        response = case.call()
        seen.append(response.status_code)
        case.validate_response(response, checks=checks)

    run()
    assert seen, "no request was sent"
    assert all(code < 500 for code in seen)
