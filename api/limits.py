"""Request limits: the per-request time limit and the size of query work.

``run_limited(fn, *args, **kwargs)`` runs a computation on the app's small compute pool and waits
at most ``REQUEST_TIME_LIMIT_S`` seconds; past that the client gets a 503 problem saying what to
reduce (the computation finishes in the background and its result is dropped). The pool is
bounded (``COMPUTE_THREADS``), so a flood of heavy queries cannot start unbounded threads. It is
for work whose size the request checks bound (points, grid nodes, planes x samples).

``run_isolated(fn, *args, **kwargs)`` is for work whose time the request cannot bound up front
(calibration: bootstrap x random x starts): it runs in its own process (``forkserver`` start, so
no fork of the threaded server) with an address-space cap (``COMPUTE_MEMORY_MB``), at most
``COMPUTE_PROCESSES`` at once, and the process is killed when the time limit passes, so abandoned
work stops and cannot starve the request threads.
Body size is limited by Flask itself (``MAX_CONTENT_LENGTH`` -> 413); points per request
(``MAX_POINTS``), grid nodes per request (``MAX_GRID_POINTS``) and mesh size
(``MAX_MESH_NODES``) are checked by the views before any work starts.
"""

from __future__ import annotations

import multiprocessing
import pickle
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout

from flask import current_app, g
from stressmap_api.problems import ApiProblem

from stressmap.errors import StressmapError

__all__ = ["init_app", "run_isolated", "run_limited"]

_EXTENSION = "stressmap_compute"
_PROCESSES = "stressmap_compute_processes"
#: Modules the fork server imports once, so each isolated computation starts in milliseconds.
_PRELOAD = ["stressmap_api", "stressmap_api.blueprints.analysis"]
_CONTEXT = multiprocessing.get_context("forkserver")
_CONTEXT.set_forkserver_preload(_PRELOAD)


def _mark_start() -> None:
    g.stressmap_started = time.monotonic()


def init_app(app) -> None:
    app.extensions[_EXTENSION] = ThreadPoolExecutor(
        max_workers=max(int(app.config.get("COMPUTE_THREADS", 4)), 1),
        thread_name_prefix="stressmap-query")
    app.extensions[_PROCESSES] = threading.BoundedSemaphore(
        max(int(app.config.get("COMPUTE_PROCESSES", 2)), 1))
    app.before_request(_mark_start)


def _time_left() -> tuple[float, float]:
    limit = float(current_app.config.get("REQUEST_TIME_LIMIT_S") or 0)
    start = g.get("stressmap_started", None) or time.monotonic()
    return limit, (limit - (time.monotonic() - start)) if limit > 0 else float("inf")


def _too_slow(limit: float, what: str = "the request") -> ApiProblem:
    return ApiProblem(
        503, "Time limit exceeded",
        f"{what} needed more than the service's limit of {limit:g} s and was stopped; ask for "
        "fewer points, a smaller region, a coarser spacing_km or fewer resamples",
        headers={"Retry-After": "5"})


def _isolated_child(conn, memory_mb: int, fn, args, kwargs) -> None:
    """Body of an isolated computation: cap the address space, run, send the outcome."""
    import resource  # POSIX only; the service runs on Linux

    if memory_mb > 0:
        cap = int(memory_mb) * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
    try:
        outcome = ("ok", fn(*args, **kwargs))
    except MemoryError:
        outcome = ("memory", None)
    except StressmapError as exc:
        outcome = ("error", exc)
    except Exception as exc:  # reported to the parent, which logs and answers 500
        outcome = ("crash", f"{type(exc).__name__}: {str(exc)[:500]}")
    try:
        conn.send(outcome)
    except (pickle.PicklingError, TypeError, AttributeError) as exc:
        conn.send(("crash", f"result not picklable: {exc}"[:500]))
    finally:
        conn.close()


def run_isolated(fn, *args, **kwargs):
    """``fn(*args, **kwargs)`` in its own process within what is left of the time limit; the
    process is killed at the limit (503) or when it exceeds ``COMPUTE_MEMORY_MB`` (503).

    Arguments and result travel by pickling; errors of the package (``StressmapError``) come back
    as themselves, so a 422 stays a 422. With ``ISOLATE_COMPUTE = false`` it is
    :func:`run_limited` (a thread).
    """
    if not current_app.config.get("ISOLATE_COMPUTE", True):
        return run_limited(fn, *args, **kwargs)
    limit, left = _time_left()
    slots = current_app.extensions[_PROCESSES]
    if not slots.acquire(timeout=max(min(left, 3600.0), 0.001)):
        raise _too_slow(limit, "waiting for a free compute process")
    proc = None
    try:
        parent, child = _CONTEXT.Pipe(duplex=False)
        proc = _CONTEXT.Process(target=_isolated_child, daemon=True, name="stressmap-isolated",
                                args=(child, int(current_app.config.get("COMPUTE_MEMORY_MB", 4096)),
                                      fn, args, kwargs))
        proc.start()
        child.close()
        _, left = _time_left()
        ready = parent.poll(max(min(left, 3600.0), 0.001))
        try:
            kind, value = parent.recv() if ready else ("timeout", None)
        except EOFError:  # the process died without an answer (killed, out of memory)
            kind, value = "memory", None
        parent.close()
    finally:
        if proc is not None:
            if proc.is_alive():
                proc.kill()
            proc.join(5.0)
        slots.release()
    if kind == "ok":
        return value
    if kind == "error":
        raise value
    if kind == "timeout":
        raise _too_slow(limit)
    if kind == "memory":
        raise ApiProblem(503, "Memory limit exceeded",
                         "the computation needed more memory than the service allows per "
                         "request and was stopped; ask for less work", headers={"Retry-After": "5"})
    raise RuntimeError(f"isolated computation failed: {value}")


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
