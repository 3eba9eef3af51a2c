"""Running the ensemble kernels over many points: chunks on local threads or a Dask cluster.

Memory stays bounded for any number of points: points are processed in chunks sized from a memory
budget (:func:`stressmap.analyses.ensemble.kernels.plan_chunks`), members in sub-chunks inside each
point chunk. ``dask``/``distributed`` are imported only when a scheduler is given.
"""

from __future__ import annotations

import os
import queue
from concurrent.futures import ThreadPoolExecutor, as_completed

import numpy as np

from stressmap.analyses.ensemble.kernels import (
    DEFAULT_PERCENTILES,
    STAT_VARIABLES,
    chunk_statistics,
    plan_chunks,
    workspace,
)
from stressmap.errors import InputError, problem

__all__ = ["ensemble_statistics"]


def ensemble_statistics(unit, weights, percentiles=DEFAULT_PERCENTILES, *, memory_mb=256.0,
                        member_chunk=256, workers=None, scheduler=None, progress=None) -> dict:
    """Per-point ensemble statistics for any number of points, chunked.

    Parameters
    ----------
    unit : ndarray, shape (G, P, 3)
        Unit stresses at the points; points with any non-finite value (outside the plate) get NaN
        statistics.
    weights : ndarray, shape (M, G)
        Member weights (:func:`sample_weights`).
    memory_mb : float
        Memory budget per chunk in MiB (peak is about ``workers`` times this).
    workers : int, optional
        Local threads (default: CPU count, at most 4).
    scheduler : str or distributed.Client, optional
        Address of a Dask distributed scheduler (or a client); chunks then run on its workers.
    progress : callable(fraction, message), optional

    Returns
    -------
    dict of ndarray
        As :func:`chunk_statistics`, for all P points, plus ``n_members``.
    """
    unit = np.asarray(unit, dtype=float)
    weights = np.ascontiguousarray(weights, dtype=float)
    if unit.ndim != 3 or unit.shape[2] != 3:
        raise ValueError(f"unit must have shape (G, P, 3), got {unit.shape}")
    g, n_points, _ = unit.shape
    if weights.ndim != 2 or weights.shape[1] != g:
        raise ValueError(f"weights must have shape (M, {g}), got {weights.shape}")
    q = np.asarray(percentiles, dtype=float)
    if q.ndim != 1 or np.any(~np.isfinite(q)) or np.any((q < 0) | (q > 100)):
        raise InputError("percentiles must be numbers between 0 and 100",
                         [problem(f"got {np.asarray(percentiles).tolist()}", field="percentiles")])
    members = weights.shape[0]
    finite = np.all(np.isfinite(unit), axis=(0, 2))
    idx = np.flatnonzero(finite)
    size = plan_chunks(max(idx.size, 1), members, g, memory_mb, member_chunk)
    slices = [idx[i:i + size] for i in range(0, idx.size, size)]
    report = progress or (lambda fraction, message: None)

    out = {k: np.full(n_points, np.nan) for k in STAT_VARIABLES}
    out["s_hmax_mpa"] = np.full((n_points, q.size), np.nan)
    out["s_hmin_mpa"] = np.full((n_points, q.size), np.nan)

    def store(sel, res):
        for key, val in res.items():
            out[key][sel] = val

    if scheduler is not None:
        _run_dask(scheduler, unit, weights, q, member_chunk, slices, store, report)
    else:
        _run_threads(unit, weights, q, member_chunk, slices, size, workers, store, report)
    out["n_members"] = members
    out["percentiles"] = q
    return out


def _run_threads(unit, weights, q, member_chunk, slices, size, workers, store, report):
    """Chunks on local threads, one reusable workspace per thread, at most ~2 chunks per thread
    in flight (bounded memory)."""
    members = weights.shape[0]
    n_chunks = len(slices)
    n_workers = max(1, min(int(workers or min(os.cpu_count() or 1, 4)), n_chunks))
    mc = max(1, min(int(member_chunk), members))
    spare = queue.SimpleQueue()  # one workspace per worker thread, reused chunk after chunk
    for _ in range(n_workers):
        spare.put(workspace(size, members, mc))

    def run(sel):
        work = spare.get()
        try:
            return chunk_statistics(unit[:, sel], weights, q, mc, work)
        finally:
            spare.put(work)

    done = 0
    if n_workers == 1:
        for sel in slices:
            store(sel, run(sel))
            done += 1
            report(done / n_chunks, f"chunk {done}/{n_chunks}")
    else:
        with ThreadPoolExecutor(max_workers=n_workers) as pool:
            # Submit lazily so at most ~2 chunks per worker are alive at once (bounded memory).
            pending = {}
            it = iter(slices)
            for sel in it:
                pending[pool.submit(run, sel)] = sel
                if len(pending) >= 2 * n_workers:
                    break
            while pending:
                fut = next(as_completed(pending))
                sel = pending.pop(fut)
                store(sel, fut.result())
                done += 1
                report(done / n_chunks, f"chunk {done}/{n_chunks}")
                nxt = next(it, None)
                if nxt is not None:
                    pending[pool.submit(run, nxt)] = nxt


def _run_dask(scheduler, unit, weights, q, member_chunk, slices, store, report):
    try:
        from distributed import Client
        from distributed import as_completed as dask_completed
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise InputError("running on a Dask cluster needs the 'dask' extra",
                         [problem("pip install 'stressmap[dask]'", field="scheduler")]) from exc
    own = isinstance(scheduler, str)
    try:
        client = Client(scheduler, timeout="10s") if own else scheduler
    except OSError as exc:
        raise InputError("cannot reach the Dask scheduler",
                         [problem(f"{scheduler}: {exc}", field="scheduler")]) from exc
    try:
        w_remote = client.scatter(weights, broadcast=True)
        futures = {}
        for sel in slices:
            fut = client.submit(chunk_statistics, unit[:, sel], w_remote, q, member_chunk,
                                pure=False)
            futures[fut] = sel
        done = 0
        for fut in dask_completed(list(futures)):
            store(futures[fut], fut.result())
            fut.release()
            done += 1
            report(done / len(slices), f"chunk {done}/{len(slices)} (dask)")
    finally:
        if own:
            client.close()
