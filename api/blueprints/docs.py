"""The human-readable API page, rendered in the browser from /api/v1/openapi.json.

The page and its script ship inside the package (``stressmap_api/static``); it loads nothing from
any other site.
"""

from __future__ import annotations

from importlib import resources

from flask import Blueprint, Response

__all__ = ["bp"]

bp = Blueprint("docs", __name__)


@bp.get("/docs")
def docs_page():
    html = (resources.files("stressmap_api") / "static" / "docs.html").read_text(encoding="utf-8")
    resp = Response(html, mimetype="text/html")
    resp.headers["Content-Security-Policy"] = (
        "default-src 'self'; script-src 'self' 'unsafe-inline'; style-src 'self' 'unsafe-inline'; "
        "img-src 'self' data:")
    resp.headers["X-Content-Type-Options"] = "nosniff"
    return resp
