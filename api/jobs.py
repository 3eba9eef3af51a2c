"""Background jobs: a bounded worker pool whose job states live in the SQLite index.

``get_jobs().submit(kind, fn, *args, **kwargs)`` queues ``fn(*args, progress=..., **kwargs)`` and
returns the job id at once; ``GET /api/v1/jobs/{id}`` reports it. ``fn`` must be a module-level
function (it is sent to a worker process by pickling), receives a ``progress(fraction, message)``
keyword to report how far it is, and returns a JSON-able result (for example a model id, or the
path of result files it wrote under :meth:`stressmap_api.store.Store.job_dir`).

Executors (config ``JOB_EXECUTOR``):

``"process"`` (default)
    A :class:`concurrent.futures.ProcessPoolExecutor` of ``JOB_WORKERS`` processes started with
    the ``spawn`` method. Builds are CPU- and GIL-heavy; in their own processes they cannot slow
    down the request threads, and a crashed or killed worker cannot take the service with it:
    the job is marked failed ("the worker process ended unexpectedly") and a fresh pool is
    started for the next job.
``"thread"``
    A thread pool of the same size, for small deployments and for tests of the job mechanics.

The worker writes the job's state (running, progress, done with result, failed with reason) into
the index itself, so state survives the service process. A restart fails every job that its dead
owner left queued or running (:meth:`~stressmap_api.store.Store.recover`); nothing stays
"running" forever.
"""

from __future__ import annotations

import logging
import os
import pickle
import signal
import sys
import threading
import time
from concurrent.futures import Future, ProcessPoolExecutor, ThreadPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from stressmap_api.errors import JobQueueFull
from stressmap_api.store import Store, get_store, new_id, owner_token, register_owner

from stressmap.errors import InputError, StorageError, StressmapError

__all__ = ["JobQueueFull", "JobRunner", "get_jobs", "init_app"]

_log = logging.getLogger(__name__)
_EXTENSION = "stressmap_jobs"

#: Minimum seconds between two progress writes to the index (the final one is always written).
PROGRESS_INTERVAL_S = 0.2


class _Progress:
    """The ``progress(fraction, message)`` callable handed to a job (throttled index writes)."""

    def __init__(self, store: Store, job_id: str):
        self._store, self._job_id, self._last = store, job_id, 0.0

    def __call__(self, fraction: float, message: str = "") -> None:
        now = time.monotonic()
        if now - self._last < PROGRESS_INTERVAL_S and float(fraction) < 1.0:
            return
        self._last = now
        try:
            self._store.job_progress(self._job_id, fraction, message)
        except StressmapError:  # progress is advisory; never fail a job for it
            _log.warning("could not record progress of job %s", self._job_id)


def _run_job(data_dir: str, job_id: str, fn, args: tuple, kwargs: dict) -> None:
    """Body of every job, in the worker: record start, run ``fn``, record result or failure."""
    store = Store(data_dir, cache_size=0)
    store.job_started(job_id, os.getpid())
    try:
        result = fn(*args, progress=_Progress(store, job_id), **kwargs)
    except InputError as exc:
        store.job_failed(job_id, exc.message, exc.problems)
        return
    except Exception as exc:  # the job's failure is its result; the worker lives on
        _log.exception("job %s failed", job_id)
        store.job_failed(job_id, f"{type(exc).__name__}: {exc}")
        return
    store.job_done(job_id, result)


def _worker_init() -> None:
    # Ctrl-C in a terminal reaches the whole process group; the service decides when workers end.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # If the service process dies (even by SIGKILL), its workers die with it instead of finishing
    # builds nobody will record (Linux prctl PR_SET_PDEATHSIG; elsewhere a no-op).
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL("libc.so.6", use_errno=True).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
        except OSError:  # pragma: no cover - unusual libc
            pass
    logging.basicConfig(level=logging.WARNING, format="%(levelname)s %(name)s: %(message)s")


class JobRunner:
    """Queue jobs on a bounded pool and record them in a :class:`Store`.

    Parameters
    ----------
    store : Store
    workers : int
        Pool size (jobs running at once).
    executor : {"process", "thread"}
    max_queued : int
        Jobs allowed to wait or run at once (per runner); more raise :class:`JobQueueFull`.
    """

    def __init__(self, store: Store, workers: int = 2, executor: str = "process",
                 max_queued: int = 32):
        if executor not in ("process", "thread"):
            raise ValueError(f"JOB_EXECUTOR must be 'process' or 'thread', not {executor!r}")
        self.store = store
        self.workers = max(int(workers), 1)
        self.kind = executor
        self.max_queued = max(int(max_queued), 1)
        self.owner = owner_token()
        register_owner(self.owner, True)
        self._pool = None
        self._lock = threading.Lock()
        self._pending: dict[str, Future] = {}
        # Final states the index could not take (a full disk): reported from memory and written
        # when the index takes writes again, so no job reads "running" forever.
        self._unrecorded: dict[str, str] = {}

    def _executor(self):
        if self._pool is None:
            if self.kind == "process":
                import multiprocessing

                self._pool = ProcessPoolExecutor(
                    max_workers=self.workers, mp_context=multiprocessing.get_context("spawn"),
                    initializer=_worker_init)
            else:
                self._pool = ThreadPoolExecutor(max_workers=self.workers,
                                                thread_name_prefix="stressmap-job")
        return self._pool

    def submit(self, kind: str, fn, *args, **kwargs) -> str:
        """Queue ``fn(*args, progress=..., **kwargs)`` as a job of ``kind``; return its id."""
        return self.submit_as(new_id(), kind, fn, *args, **kwargs)

    def submit_as(self, job_id: str, kind: str, fn, *args, **kwargs) -> str:
        """:meth:`submit` under an id the caller generated first (with :func:`new_id`), so that
        rows referring to the job (e.g. a model's) can be written before the job can start."""
        if self.kind == "process":
            try:
                pickle.dumps((fn, args, kwargs))
            except Exception as exc:
                raise TypeError(f"job function and arguments must be picklable: {exc}") from exc
        with self._lock:
            if len(self._pending) >= self.max_queued:
                raise JobQueueFull(
                    f"{len(self._pending)} jobs are already queued or running; retry later")
            self.store.add_job(kind, self.owner, job_id=job_id)
            try:
                future = self._executor().submit(
                    _run_job, str(self.store.data_dir), job_id, fn, args, kwargs)
            except (BrokenProcessPool, RuntimeError) as exc:
                self._pool = None
                self.store.job_failed(job_id, f"the worker pool could not take the job: {exc}")
                return job_id
            self._pending[job_id] = future
        future.add_done_callback(lambda f, j=job_id: self._finished(j, f))
        return job_id

    def _finished(self, job_id: str, future: Future) -> None:
        with self._lock:
            self._pending.pop(job_id, None)
        if future.cancelled():
            self.store.job_failed(job_id, "cancelled: the service stopped before the job ran")
            return
        exc = future.exception()
        if exc is None:
            return
        if isinstance(exc, BrokenProcessPool):
            reason = ("the worker process ended unexpectedly (killed or out of memory) while "
                      "this job was queued or running; submit it again")
            with self._lock:
                if self._pool is not None and getattr(self._pool, "_broken", False):
                    self._pool = None  # a fresh pool for the next job
        elif isinstance(exc, StorageError):
            reason = f"the job's state or files could not be stored: {exc}"
        else:
            reason = f"the job could not be run: {type(exc).__name__}: {exc}"
        _log.error("job %s failed: %s", job_id, reason)
        self._record_failure(job_id, reason)

    def _record_failure(self, job_id: str, reason: str) -> None:
        try:
            self.store.job_failed(job_id, reason)
        except StorageError:
            with self._lock:
                self._unrecorded[job_id] = reason
            return
        with self._lock:
            self._unrecorded.pop(job_id, None)

    def overlay(self, job: dict) -> dict:
        """``job`` (a :meth:`Store.job` view) with a final state the index could not take yet;
        retries writing it."""
        with self._lock:
            reason = self._unrecorded.get(job.get("id"))
        if reason is None or job.get("status") not in ("queued", "running"):
            return job
        self._record_failure(job["id"], reason)
        return {**job, "status": "failed", "error": {"reason": reason}}

    def running(self) -> int:
        """Jobs of this runner that are queued or running."""
        with self._lock:
            return len(self._pending)

    def shutdown(self, wait: bool = False) -> None:
        """Stop the pool; jobs not finished are marked failed (a restart would do the same)."""
        with self._lock:
            pool, self._pool = self._pool, None
            pending = dict(self._pending)
        if pool is not None:
            if not wait and isinstance(pool, ProcessPoolExecutor):
                # ProcessPoolExecutor has no public way to stop running work; end the workers.
                for proc in list(getattr(pool, "_processes", {}).values()):
                    proc.terminate()
            pool.shutdown(wait=True, cancel_futures=True)
        for job_id in pending:
            self.store.job_failed(job_id, "interrupted: the service stopped while this job ran; "
                                          "submit it again")
        register_owner(self.owner, False)


def init_app(app) -> JobRunner:
    """Create the app's job runner (``app.extensions``); needs the store set up first."""

    with app.app_context():
        store = get_store()
    runner = JobRunner(
        Store(store.data_dir, cache_size=0),
        workers=int(app.config.get("JOB_WORKERS", 2)),
        executor=str(app.config.get("JOB_EXECUTOR", "process")),
        max_queued=int(app.config.get("MAX_QUEUED_JOBS", 32)),
    )
    app.extensions[_EXTENSION] = runner
    return runner


def get_jobs() -> JobRunner:
    """The current app's :class:`JobRunner` (inside an application context)."""
    from flask import current_app

    return current_app.extensions[_EXTENSION]
