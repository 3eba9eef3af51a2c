"""Bearer-token access and the CORS allow-list.

Config ``API_TOKEN`` (set through the environment as ``STRESSMAP_API_TOKEN``; never stored in the
repository): when empty, the service is open. When set, endpoints decorated with
:func:`require_token` (creating and deleting models, and every other mutation) need
``Authorization: Bearer <token>``; the comparison is constant-time (:func:`hmac.compare_digest`).
With ``READS_NEED_TOKEN = true`` every other ``/api/v1`` endpoint needs it too, except the public
ones (health, the OpenAPI document and the API page).

Config ``CORS_ORIGINS``: list of origins (``"https://gis.example.org"``) allowed to call the
service from a browser; ``["*"]`` allows any origin. Origins not listed get no CORS headers.
"""

from __future__ import annotations

import functools
import hmac

from flask import current_app, request
from stressmap_api.problems import ApiProblem

__all__ = ["PUBLIC_ENDPOINTS", "check_token", "init_app", "require_token"]

#: Endpoints that never need a token (service metadata and documentation).
PUBLIC_ENDPOINTS = {"meta.health", "meta.openapi", "docs.docs_page"}

_CHALLENGE = {"WWW-Authenticate": 'Bearer realm="stressmap"'}


def check_token() -> None:
    """Raise a 401 problem unless the request carries the configured token (if any)."""
    token = str(current_app.config.get("API_TOKEN") or "")
    if not token:
        return
    header = request.headers.get("Authorization", "")
    scheme, _, given = header.partition(" ")
    if not header:
        raise ApiProblem(401, "Unauthorized",
                         "this operation needs 'Authorization: Bearer <token>'; none was sent",
                         headers=_CHALLENGE)
    if scheme.lower() != "bearer" or not given.strip():
        raise ApiProblem(401, "Unauthorized",
                         "the Authorization header must read 'Bearer <token>'",
                         headers=_CHALLENGE)
    if not hmac.compare_digest(given.strip().encode("utf-8"), token.encode("utf-8")):
        raise ApiProblem(401, "Unauthorized", "the bearer token is not valid",
                         headers={"WWW-Authenticate":
                                  'Bearer realm="stressmap", error="invalid_token"'})


def require_token(view):
    """Decorator for views that create, change or delete stored data."""

    @functools.wraps(view)
    def wrapped(*args, **kwargs):
        check_token()
        return view(*args, **kwargs)

    wrapped.needs_token = True
    return wrapped


def _reads_guard():
    if not current_app.config.get("READS_NEED_TOKEN"):
        return
    if request.method == "OPTIONS" or request.endpoint in PUBLIC_ENDPOINTS:
        return
    if request.endpoint is None:  # unknown route: let the 404/405 handler answer
        return
    check_token()
    return


def _cors_headers(response):
    origin = request.headers.get("Origin")
    allowed = current_app.config.get("CORS_ORIGINS") or []
    if isinstance(allowed, str):
        allowed = [a.strip() for a in allowed.split(",") if a.strip()]
    if origin and (origin in allowed or "*" in allowed):
        response.headers["Access-Control-Allow-Origin"] = "*" if "*" in allowed else origin
        response.headers.add("Vary", "Origin")
        response.headers["Access-Control-Expose-Headers"] = "Location, Content-Disposition"
        if request.method == "OPTIONS":
            response.headers["Access-Control-Allow-Methods"] = "GET, POST, DELETE, OPTIONS"
            response.headers["Access-Control-Allow-Headers"] = "Authorization, Content-Type"
            response.headers["Access-Control-Max-Age"] = "600"
    return response


def init_app(app) -> None:
    """Install the read guard (if configured) and the CORS response headers."""
    app.before_request(_reads_guard)
    app.after_request(_cors_headers)
