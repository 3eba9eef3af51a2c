"""RFC 9457 problem details for every error the service returns (never HTML, never a traceback)."""

from __future__ import annotations

import logging
import traceback

from flask import Flask, Response, json, request
from stressmap_api.errors import JobQueueFull, ModelNotReady, scrub_paths
from werkzeug.exceptions import HTTPException

from stressmap.errors import InputError, NotFoundError, StorageError

__all__ = ["ApiProblem", "problem_response", "register_error_handlers", "scrub_paths"]

PROBLEM_MIME = "application/problem+json"
_log = logging.getLogger(__name__)


class ApiProblem(Exception):
    """Raise from a view to answer with a problem document."""

    def __init__(self, status: int, title: str, detail: str, errors: list[dict] | None = None,
                 type_: str = "about:blank", headers: dict | None = None):
        super().__init__(detail)
        self.status, self.title, self.detail = status, title, detail
        self.errors, self.type_, self.headers = errors, type_, headers or {}


def problem_response(status: int, title: str, detail: str, errors: list[dict] | None = None,
                     type_: str = "about:blank", headers: dict | None = None) -> Response:
    body = {"type": type_, "title": title, "status": status, "detail": detail}
    try:
        body["instance"] = request.path
    except RuntimeError:  # outside a request
        pass
    if errors:
        body["errors"] = errors
    resp = Response(json.dumps(body), status=status, mimetype=PROBLEM_MIME)
    for k, v in (headers or {}).items():
        resp.headers[k] = v
    return resp


#: Characters of one logged traceback (the innermost frames are kept), so that no request can
#: write more than this to the log (a deep recursion otherwise logs hundreds of KB).
MAX_LOGGED_TRACEBACK = 8000


def bounded_traceback(exc: BaseException, frames: int = 12) -> str:
    """The innermost ``frames`` frames of ``exc``'s traceback, at most
    :data:`MAX_LOGGED_TRACEBACK` characters (the message itself cut to 500)."""
    head = f"{type(exc).__name__}: {str(exc)[:500]}"
    body = "".join(traceback.format_tb(exc.__traceback__, limit=-frames))
    if len(body) > MAX_LOGGED_TRACEBACK:
        body = "...\n" + body[-MAX_LOGGED_TRACEBACK:]
    return f"{head}\n{body}"


def register_error_handlers(app: Flask) -> None:
    @app.errorhandler(ApiProblem)
    def _api_problem(exc: ApiProblem):
        return problem_response(exc.status, exc.title, exc.detail, exc.errors, exc.type_, exc.headers)

    @app.errorhandler(InputError)
    def _input_error(exc: InputError):
        return problem_response(422, "Invalid input", exc.message, exc.problems)


    @app.errorhandler(ModelNotReady)
    def _not_ready(exc: ModelNotReady):
        return problem_response(409, "Model not ready", str(exc))

    @app.errorhandler(JobQueueFull)
    def _queue_full(exc: JobQueueFull):
        return problem_response(503, "Too many jobs", str(exc), headers={"Retry-After": "30"})

    @app.errorhandler(NotFoundError)
    def _not_found(exc: NotFoundError):
        return problem_response(404, "Not Found", str(exc))

    @app.errorhandler(StorageError)
    def _storage(exc: StorageError):
        _log.error("storage error: %s", exc)
        return problem_response(503, "Storage unavailable", scrub_paths(str(exc)))

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException):
        headers = {}
        if exc.code == 405 and getattr(exc, "valid_methods", None):
            headers["Allow"] = ", ".join(exc.valid_methods)
        return problem_response(exc.code or 500, exc.name, exc.description or exc.name,
                                headers=headers)

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception):
        _log.error("unhandled error on %s %s: %s", request.method, request.path[:200],
                   bounded_traceback(exc))
        return problem_response(500, "Internal Server Error",
                                "The server could not complete the request; the error was logged.")
