"""Service metadata: health and the OpenAPI document."""

from __future__ import annotations

from flask import Blueprint, jsonify
from stressmap_api.openapi_doc import openapi_document

from stressmap import CAUTION, __version__

__all__ = ["bp"]

bp = Blueprint("meta", __name__)


@bp.get("/health")
def health():
    return jsonify({"status": "ok", "version": __version__, "caution": CAUTION})


@bp.get("/openapi.json")
def openapi():
    return jsonify(openapi_document())
