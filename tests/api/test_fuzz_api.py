"""Schema fuzzing: schemathesis generates requests from the service's own OpenAPI document and
sends them to the Flask app (WSGI), for every operation, in its three generation phases:
documented examples, coverage (boundary values, missing and malformed parameters, positive and
negative) and fuzzing (random positive and negative data).

Specification (issue 8): zero 5xx responses, and every response matches the document: its status
code is documented for the operation, its content type is the documented one, its body validates
against the documented schema, and documented headers are present; negative data is rejected
with a 4xx. Sources: OpenAPI 3.1 specification (responses, media types), schemathesis
documentation of its checks and phases.

Budget: seeded (``derandomize=True``: every run sends the same requests), the coverage phase
(bounded by the document itself) plus :data:`FUZZ_EXAMPLES` random cases per operation, no
shrinking; well under a minute in total. Limits of the test app are small (points, grid nodes,
mesh nodes) so that no generated request can run for long. A path parameter ``model_id`` is
replaced by the id of a stored model (the coarse fictional demo) in every other case whose path is
not the negative part, so the fuzzer reaches past "unknown model" into the real work; a token is
configured and sent, except where a case is about a missing or wrong header.

The runner is schemathesis' own test builder (``create_test``, as its pytest plugin uses it),
called per operation, because the plugin's fixture loader does not run under pytest 9.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

schemathesis = pytest.importorskip("schemathesis")

import hypothesis  # noqa: E402
from hypothesis import HealthCheck, Phase  # noqa: E402
from schemathesis.checks import (  # noqa: E402
    content_type_conformance,
    negative_data_rejection,
    not_a_server_error,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)
from schemathesis.core.parameters import ParameterLocation  # noqa: E402
from schemathesis.generation.hypothesis.builder import (  # noqa: E402
    HypothesisTestConfig,
    HypothesisTestMode,
    create_test,
)

from stressmap_api.openapi_doc import openapi_document  # noqa: E402
from service_support import store_ready_model

FUZZ_EXAMPLES = 10
REPO = str(Path(__file__).resolve().parents[2])  # this checkout, wherever it lives
LEAKS = re.compile(r"Traceback|site-packages|" + re.escape(REPO) +
                   r"|/tmp/|/root/|/home/|\.py\b|File \"")
TOKEN = "fuzz-token"
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_headers_conformance, response_schema_conformance, negative_data_rejection]

OPERATIONS = sorted((method.upper(), path) for path, item in openapi_document()["paths"].items()
                    for method in item if method in ("get", "post", "put", "patch", "delete"))


@pytest.fixture(scope="module")
def fuzz_target(tmp_path_factory, coarse_demo_model):
    """(schema, app, stored model id) for the whole module."""
    from stressmap_api import create_app
    from stressmap_api.store import get_store

    app = create_app({
        "TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("fuzz") / "data"),
        "JOB_EXECUTOR": "thread", "JOB_WORKERS": 1, "MAX_QUEUED_JOBS": 10_000,
        "MAX_POINTS": 500, "MAX_GRID_POINTS": 3000, "MAX_MESH_NODES": 3000,
        "MAX_CONTENT_LENGTH": 1_000_000, "API_TOKEN": TOKEN, "LOAD_DEMO": False,
    })
    with app.app_context():
        store = get_store()
        model_id = store_ready_model(store, coarse_demo_model)
    schema = schemathesis.openapi.from_wsgi("/api/v1/openapi.json", app)
    yield schema, app, model_id
    app.extensions["stressmap_jobs"].shutdown()


def _negative(case, location) -> bool:
    """Whether this part of the request is what a negative case made invalid."""
    meta = case.meta
    component = meta.components.get(location) if meta is not None else None
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


@pytest.mark.parametrize("method,path", OPERATIONS, ids=[f"{m} {p}" for m, p in OPERATIONS])
def test_operation_fuzz(fuzz_target, method, path):
    schema, app, model_id = fuzz_target
    operation = schema[path][method]
    seen: dict[tuple[str, str], list[int]] = {}

    def run(case):
        phase = case.meta.phase.name.value if case.meta else "?"
        mode = case.meta.generation.mode.value if case.meta else "?"
        codes = seen.setdefault((phase, mode), [])
        params = case.path_parameters or {}
        if ("model_id" in params and len(codes) % 2 == 0 and method != "DELETE"
                and not _negative(case, ParameterLocation.PATH)):
            params["model_id"] = model_id  # every other case: the stored model
        headers = dict(case.headers or {})
        if not _negative(case, ParameterLocation.HEADER):  # the real token, not a generated one
            headers = {k: v for k, v in headers.items() if k.lower() != "authorization"}
            headers["Authorization"] = f"Bearer {TOKEN}"
        response = case.call(headers=headers)
        codes.append(response.status_code)
        case.validate_response(response, checks=CHECKS, headers=headers)
        if response.status_code >= 400:  # no trace, no server path in any error (OWASP)
            assert not LEAKS.search(response.text), response.text[:500]

    test = create_test(operation=operation, test_func=run, config=HypothesisTestConfig(
        project=schema.config,
        modes=[HypothesisTestMode.EXAMPLES, HypothesisTestMode.COVERAGE,
               HypothesisTestMode.FUZZING],
        settings=hypothesis.settings(max_examples=FUZZ_EXAMPLES, derandomize=True, deadline=None,
                                     database=None, phases=[Phase.explicit, Phase.generate],
                                     suppress_health_check=list(HealthCheck))))
    test()
    codes = [c for v in seen.values() for c in v]
    assert ("fuzzing", "positive") in seen and any(k[0] == "coverage" for k in seen), seen.keys()
    assert codes and max(codes) < 500
