"""Jobs: the state of long work (model builds and other analyses) started by other endpoints."""

from __future__ import annotations

from flask import Blueprint, jsonify
from stressmap_api.jobs import get_jobs
from stressmap_api.store import get_store

__all__ = ["bp"]

bp = Blueprint("jobs", __name__)


@bp.get("/jobs/<job_id>")
def get_job(job_id: str):
    """queued | running (with progress fraction and message) | done (with result) | failed
    (with reason and, for input problems, one entry per problem)."""
    return jsonify(get_jobs().overlay(get_store().job(job_id)))
