"""Request limits: the per-request time limit and the size of query work.

``run_limited(fn, *args, **kwargs)`` runs a computation on the app's small compute pool and waits
at most ``REQUEST_TIME_LIMIT_S`` seconds; past that the client gets a 503 problem saying what to
reduce (the computation finishes in the background and its result is dropped). The pool is
bounded (``COMPUTE_THREADS``), so a flood of heavy queries cannot start unbounded threads.
Body size is limited by Flask itself (``MAX_CONTENT_LENGTH`` -> 413); points per request
(``MAX_POINTS``), grid nodes per request (``MAX_GRID_POINTS``) and mesh size
(``MAX_MESH_NODES``) are checked by the views before any work starts.
"""

from __future__ import annotations

import time
from concurrent.futures import ThreadPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout

from flask import current_app, g
from stressmap_api.problems import ApiProblem

__all__ = ["run_limited", "init_app"]

_EXTENSION = "stressmap_compute"


def _mark_start() -> None:
    g.stressmap_started = time.monotonic()


def init_app(app) -> None:
    app.extensions[_EXTENSION] = ThreadPoolExecutor(
        max_workers=max(int(app.config.get("COMPUTE_THREADS", 4)), 1),
        thread_name_prefix="stressmap-query")
    app.before_request(_mark_start)


def run_limited(fn, *args, **kwargs):
    """``fn(*args, **kwargs)`` within what is left of the request's time limit (503 past it).

    The limit counts from the start of the request, so several calls in one request share it.
    ``fn`` runs inside an application context of the current app.
    """
    limit = float(current_app.config.get("REQUEST_TIME_LIMIT_S") or 0)
    if limit <= 0:
        return fn(*args, **kwargs)
    start = g.get("stressmap_started", None) or time.monotonic()
    app = current_app._get_current_object()

    def call():
        with app.app_context():
            return fn(*args, **kwargs)

    future = current_app.extensions[_EXTENSION].submit(call)
    try:
        return future.result(timeout=max(limit - (time.monotonic() - start), 0.001))
    except FutureTimeout:
        future.cancel()
        raise ApiProblem(
            503, "Time limit exceeded",
            f"the request needed more than the service's limit of {limit:g} s "
            f"(gave up after {time.monotonic() - start:.1f} s); ask for fewer points, a smaller "
            "region or a coarser spacing_km", headers={"Retry-After": "5"}) from None
