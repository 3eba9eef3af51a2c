"""Ensembles of force magnitudes: how much SHmax and regime could change across plausible forces.

Because the sheet is linear, member ``m``'s stress at point ``p`` is ``sum_g W[m, g] U[g, p]`` with
the stored unit solutions ``U`` (G, P, 3) and sampled weights ``W`` (M, G): an ensemble is matrix
products, never new solves. For each point this module returns

- the axial (circular) mean SHmax azimuth over members and the axial standard deviation
  ``0.5 sqrt(-2 ln R)`` of the doubled angles (Mardia & Jupp 2000, section 9.3.2 -- from memory;
  the same definitions as :mod:`stressmap.geo.circular`), with the mean resultant length ``R``;
- the probability of each Anderson regime (share of members; :func:`stressmap.geo.tensor.regime_code`);
- the mean of Simpson's A-phi regime index over members;
- percentiles of the horizontal principal stresses ``s_hmax`` and ``s_hmin`` (MPa).

Memory stays bounded for any number of points: points are processed in chunks sized from a memory
budget, members in sub-chunks inside each point chunk (all members of a chunk of points are kept so
the percentiles are exact). Chunks run on local threads by default, or on a Dask distributed
cluster when given a scheduler address or client (``dask``/``distributed`` imported only then).

Weights are drawn per load group from ``uniform``, ``log-uniform`` or ``normal`` (optionally
truncated) distributions with a fixed seed. A distribution may be given for a physical parameter
that maps onto the group's weight: ``pull_fraction`` (slab pull is proportional to it),
``slab_age_myr`` (weight = ratio of :func:`stressmap.physics.forces.slab_pull_n_per_m` at the drawn and the
reference age), or ``scale`` / ``weight`` (the weight itself).
"""

from __future__ import annotations

import logging
import math
import os
import queue
from concurrent.futures import ThreadPoolExecutor, as_completed

import numpy as np

from stressmap.constants import CAUTION, EARTH_RADIUS_KM
from stressmap.errors import InputError, problem
from stressmap.geo.tensor import REGIMES
from stressmap.model import resolve_weights, unit_stress_at
from stressmap.model.plate import parse_plate
from stressmap.physics.forces import slab_pull_n_per_m
from stressmap.plot.maps import shmax_map

__all__ = [
    "DISTRIBUTIONS",
    "PARAMETERS",
    "DEFAULT_PERCENTILES",
    "validate_distributions",
    "sample_parameter",
    "parameter_to_weight",
    "sample_weights",
    "chunk_statistics",
    "workspace",
    "ensemble_statistics",
    "plan_chunks",
    "regime_index_from_principal",
    "grid_coordinates",
    "ensemble_points",
    "ensemble_grid",
    "STAT_VARIABLES",
    "percentile_label",
    "flatten_percentiles",
    "ensemble_png",
]

_log = logging.getLogger(__name__)

DISTRIBUTIONS = ("uniform", "log-uniform", "normal")
PARAMETERS = ("weight", "scale", "pull_fraction", "slab_age_myr")
DEFAULT_PERCENTILES = (5.0, 50.0, 95.0)

#: Per-point output variables (besides the percentile arrays) and their descriptions.
STAT_VARIABLES = {
    "shmax_azimuth_deg": "axial mean SHmax azimuth over members, degrees clockwise from north",
    "shmax_std_deg": "axial standard deviation of SHmax over members, degrees",
    "shmax_resultant": "mean resultant length of doubled SHmax angles (1 = all members agree)",
    "prob_normal": "share of members in the normal regime",
    "prob_strike_slip": "share of members in the strike-slip regime",
    "prob_reverse": "share of members in the reverse regime",
    "regime_index": "mean of Simpson's A-phi regime index over members (0 .. 3)",
}


# ----------------------------------------------------------------------------- distributions

def validate_distributions(distributions, groups) -> dict:
    """Check distribution specs ``group -> spec`` and return them normalised.

    A spec is a dict with ``distribution`` (``uniform``, ``log-uniform``, ``normal``), its
    parameters (``low``/``high``; ``mean``/``std`` and optional truncation ``low``/``high``, the
    lower defaulting to 0), optional ``parameter`` (default ``weight``) and ``reference`` (the
    parameter value that corresponds to weight 1). Raises :class:`InputError` naming each bad
    field.

    Examples
    --------
    >>> validate_distributions({"a": {"distribution": "uniform", "low": 0.5, "high": 2}}, ["a"])
    {'a': {'distribution': 'uniform', 'low': 0.5, 'high': 2.0, 'parameter': 'weight'}}
    >>> validate_distributions({"a": {"distribution": "gamma"}}, ["a"])
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: invalid ensemble distributions
      - field distributions.a.distribution: must be one of uniform, log-uniform, normal
    """
    groups = list(groups)
    out, problems = {}, []
    if not isinstance(distributions, dict):
        raise InputError("invalid ensemble distributions",
                         [problem("must be an object keyed by load group", field="distributions")])
    for group, spec in distributions.items():
        where = f"distributions.{group}"
        if group not in groups:
            problems.append(problem(f"unknown load group (groups: {', '.join(groups)})",
                                    field=where))
            continue
        if not isinstance(spec, dict):
            problems.append(problem("must be an object", field=where))
            continue
        kind = spec.get("distribution")
        if kind not in DISTRIBUTIONS:
            problems.append(problem(f"must be one of {', '.join(DISTRIBUTIONS)}",
                                    field=f"{where}.distribution"))
            continue
        parameter = spec.get("parameter", "weight")
        if parameter not in PARAMETERS:
            problems.append(problem(f"must be one of {', '.join(PARAMETERS)}",
                                    field=f"{where}.parameter"))
            continue
        clean = {"distribution": kind}
        needed = ("low", "high") if kind != "normal" else ("mean", "std")
        bad = False
        for key in needed + tuple(k for k in ("low", "high", "reference", "slab_depth_km")
                                  if k in spec and k not in needed):
            val = spec.get(key)
            try:
                num = float(val)
            except (TypeError, ValueError):
                problems.append(problem("must be a number", field=f"{where}.{key}"))
                bad = True
                continue
            if math.isnan(num) or (key not in ("low", "high") and not math.isfinite(num)):
                problems.append(problem("must be a finite number", field=f"{where}.{key}"))
                bad = True
                continue
            clean[key] = num
        if bad:
            continue
        if kind in ("uniform", "log-uniform"):
            if not (math.isfinite(clean["low"]) and math.isfinite(clean["high"])):
                problems.append(problem("low and high must be finite", field=where))
                continue
            if clean["high"] < clean["low"]:
                problems.append(problem("high must not be below low", field=f"{where}.high"))
                continue
            if kind == "log-uniform" and clean["low"] <= 0:
                problems.append(problem("log-uniform needs low > 0", field=f"{where}.low"))
                continue
        else:
            if clean["std"] < 0:
                problems.append(problem("std must not be negative", field=f"{where}.std"))
                continue
            clean.setdefault("low", 0.0)
            clean.setdefault("high", math.inf)
            if clean["high"] <= clean["low"]:
                problems.append(problem("truncation high must exceed low", field=f"{where}.high"))
                continue
            if clean["std"] == 0 and not clean["low"] <= clean["mean"] <= clean["high"]:
                problems.append(problem("mean lies outside the truncation bounds",
                                        field=f"{where}.mean"))
                continue
        if clean.get("low", 0.0) < 0 and parameter != "weight":
            problems.append(problem("physical parameters cannot be negative", field=f"{where}.low"))
            continue
        clean["parameter"] = parameter
        out[group] = clean
    if problems:
        raise InputError("invalid ensemble distributions", problems)
    return out


def sample_parameter(spec: dict, n: int, rng) -> np.ndarray:
    """Draw ``n`` values from one validated spec.

    The normal distribution is truncated to ``[low, high]`` (scipy.stats.truncnorm), so weights and
    physical parameters stay non-negative unless a negative ``low`` is given for a weight.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x = sample_parameter({"distribution": "log-uniform", "low": 0.1, "high": 10.0}, 1000, rng)
    >>> bool(x.min() >= 0.1 and x.max() <= 10.0)
    True
    """
    kind = spec["distribution"]
    if kind == "uniform":
        return rng.uniform(spec["low"], spec["high"], n)
    if kind == "log-uniform":
        return np.exp(rng.uniform(np.log(spec["low"]), np.log(spec["high"]), n))
    mean, std = spec["mean"], spec["std"]
    if std == 0:
        return np.full(n, mean)
    from scipy.stats import truncnorm

    a = (spec.get("low", 0.0) - mean) / std
    b = (spec.get("high", math.inf) - mean) / std
    return truncnorm.rvs(a, b, loc=mean, scale=std, size=n, random_state=rng)


def parameter_to_weight(parameter: str, values, reference: float, slab_depth_km: float = 660.0,
                        params=None):
    """Map sampled physical parameter values to weights of their load group.

    ``weight``/``scale`` are weights already. Slab pull is proportional to the transmitted fraction,
    so ``pull_fraction`` maps to ``values / reference``. ``slab_age_myr`` maps to
    ``slab_pull(values) / slab_pull(reference)`` with :func:`stressmap.physics.forces.slab_pull_n_per_m`
    at ``slab_depth_km`` (the fraction cancels).

    Examples
    --------
    >>> parameter_to_weight("pull_fraction", [0.06, 0.24], 0.12).tolist()
    [0.5, 2.0]
    """
    values = np.asarray(values, dtype=float)
    if parameter in ("weight", "scale"):
        return values
    if not (reference and np.isfinite(reference) and reference > 0):
        raise InputError("a physical parameter needs a positive reference value",
                         [problem(f"reference of {parameter} is {reference!r}",
                                  field="reference")])
    if parameter == "pull_fraction":
        return values / reference
    if parameter == "slab_age_myr":

        ref = slab_pull_n_per_m(float(reference), slab_depth_km, 1.0, params)
        return np.asarray(slab_pull_n_per_m(values, slab_depth_km, 1.0, params), float) / ref
    raise InputError(f"unknown parameter '{parameter}'", [problem("unknown", field="parameter")])


def sample_weights(groups, distributions=None, members=1000, seed=0, default_weights=None,
                   references=None, params=None) -> np.ndarray:
    """Weights of every member, shape (members, G).

    Groups without a distribution keep their default weight (1.0). Each group draws from its own
    stream spawned from ``seed`` (numpy SeedSequence), so the draws of one group do not change when
    another group's distribution is added or removed. ``references`` maps group -> dict of
    reference parameter values (e.g. ``{"pull_fraction": 0.12}``) used when a spec has none.

    Examples
    --------
    >>> w = sample_weights(["a", "b"], {"b": {"distribution": "uniform", "low": 0, "high": 2}},
    ...                    members=4, seed=1)
    >>> w.shape, w[:, 0].tolist()
    ((4, 2), [1.0, 1.0, 1.0, 1.0])
    """
    groups = list(groups)
    members = int(members)
    if members < 1:
        raise InputError("an ensemble needs at least one member",
                         [problem(f"got {members}", field="members")])
    specs = validate_distributions(distributions or {}, groups)
    w0 = np.ones(len(groups)) if default_weights is None else np.asarray(default_weights, float)
    out = np.tile(w0, (members, 1))
    streams = np.random.SeedSequence(int(seed)).spawn(len(groups))
    for i, group in enumerate(groups):
        spec = specs.get(group)
        if spec is None:
            continue
        rng = np.random.default_rng(streams[i])
        values = sample_parameter(spec, members, rng)
        parameter = spec["parameter"]
        if parameter in ("weight", "scale"):
            out[:, i] = values
            continue
        reference = spec.get("reference", ((references or {}).get(group) or {}).get(parameter))
        if reference is None:
            raise InputError("a physical parameter needs a reference value",
                             [problem(f"give distributions.{group}.reference (the {parameter} "
                                      "that the model's forces use)",
                                      field=f"distributions.{group}.reference")])
        depth = spec.get("slab_depth_km",
                         ((references or {}).get(group) or {}).get("slab_depth_km", 660.0))
        out[:, i] = w0[i] * parameter_to_weight(parameter, values, reference, depth, params)
    return out


# ----------------------------------------------------------------------------- statistics

def regime_index_from_principal(s_hmax, s_hmin):
    """Simpson's A-phi from the horizontal principal stresses, closed form (vertical = 0).

    Same values as :func:`stressmap.geo.tensor.regime_index` with fewer temporaries: reverse
    ``2 + s_hmin/s_hmax``; strike-slip ``2 - phi`` with ``phi = -s_hmin/(s_hmax - s_hmin)``;
    normal ``(s_hmax - s_hmin)/(-s_hmin)``.

    Examples
    --------
    >>> regime_index_from_principal(np.array([5.0, 4.0, -1.0]), np.array([-5.0, 4.0, -1.0])).tolist()
    [1.5, 3.0, 0.0]
    """
    a = np.asarray(s_hmax, dtype=float)
    b = np.asarray(s_hmin, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        rev = 2.0 + b / a
        ss = 2.0 + b / (a - b)
        nor = (a - b) / (-b)
    out = np.where(b > 0, rev, np.where(a > 0, ss, nor))
    return np.where((a == 0) & (b == 0), np.nan, out)


def workspace(points, members, member_chunk=256) -> dict:
    """Reusable work arrays for :func:`chunk_statistics` of up to ``points`` points.

    Fresh large arrays cost page faults on first touch, which dominate the arithmetic here;
    reusing one workspace per worker thread avoids them.
    """
    mc = max(1, min(int(member_chunk), int(members)))
    return {
        "shmax": np.empty((points, members)),
        "shmin": np.empty((points, members)),
        "x": np.empty((points * 3, mc)),
        "d": np.empty((points, mc)),
        "r": np.empty((points, mc)),
        "t": np.empty((points, mc)),
        "h": np.empty((points, mc)),
    }


def chunk_statistics(unit, weights, percentiles=DEFAULT_PERCENTILES, member_chunk=256,
                     work=None):
    """Ensemble statistics of a chunk of points with every member (pure function).

    Parameters
    ----------
    unit : ndarray, shape (G, p, 3)
        Finite unit stresses (s_ee, s_nn, s_en), MPa per unit weight.
    weights : ndarray, shape (M, G)
    percentiles : sequence of float
    member_chunk : int
        Members combined per matrix product (bounds the temporaries).
    work : dict, optional
        A :func:`workspace` at least this large (reused between calls by one worker).

    Returns
    -------
    dict of ndarray
        :data:`STAT_VARIABLES` keys of shape (p,), plus ``s_hmax_mpa`` and ``s_hmin_mpa`` of shape
        (p, Q).

    Examples
    --------
    One point, one group of N-S compression (s_ee = 1, s_nn = 2), members weighing it 1 and 3:

    >>> out = chunk_statistics(np.array([[[1.0, 2.0, 0.0]]]), np.array([[1.0], [3.0]]), [0, 100])
    >>> float(out["shmax_azimuth_deg"][0]), float(out["shmax_std_deg"][0])
    (0.0, 0.0)
    >>> out["s_hmax_mpa"].tolist(), float(out["prob_reverse"][0])
    ([[2.0, 6.0]], 1.0)
    """
    unit = np.asarray(unit, dtype=float)
    weights = np.asarray(weights, dtype=float)
    g, p, _ = unit.shape
    m_total = weights.shape[0]
    u = np.ascontiguousarray(unit.transpose(1, 2, 0)).reshape(p * 3, g)
    step = max(1, min(int(member_chunk), m_total))
    w_t = np.ascontiguousarray(weights.T)  # (G, M): member slices are contiguous rows
    if work is None or work["shmax"].shape[0] < p or work["shmax"].shape[1] != m_total \
            or work["x"].shape[1] < step:
        work = workspace(p, m_total, step)
    shmax = work["shmax"][:p]
    shmin = work["shmin"][:p]
    cos_sum = np.zeros(p)
    sin_sum = np.zeros(p)
    n_dir = np.zeros(p)
    counts = np.zeros((p, 3))
    aphi_sum = np.zeros(p)
    n_reg = np.zeros(p)
    for m0 in range(0, m_total, step):
        m = min(step, m_total - m0)
        cols = slice(m0, m0 + m)
        # einsum with an output buffer beats BLAS for this thin inner dimension (G ~ 5)
        x = np.einsum("ng,gm->nm", u, w_t[:, cols], out=work["x"][:p * 3, :m]).reshape(p, 3, m)
        see, snn, sen = x[:, 0], x[:, 1], x[:, 2]
        d = np.subtract(snn, see, out=work["d"][:p, :m])
        r = np.multiply(d, d, out=work["r"][:p, :m])
        t = np.multiply(sen, sen, out=work["t"][:p, :m])
        t *= 4.0
        r += t
        np.sqrt(r, out=r)  # r = s_hmax - s_hmin = hypot(s_nn - s_ee, 2 s_en)
        mean = np.add(see, snn, out=t)
        mean *= 0.5
        half = np.multiply(r, 0.5, out=work["h"][:p, :m])
        a = shmax[:, cols]
        b = shmin[:, cols]
        np.add(mean, half, out=a)
        np.subtract(mean, half, out=b)
        if r.min(initial=np.inf) > 0:  # the usual case: every member has a SHmax direction
            inv = np.divide(1.0, r, out=half)
            n_dir += m
            undefined = None
            n_undef = 0
        else:
            directed = r > 0
            inv = np.divide(1.0, r, out=np.zeros_like(r), where=directed)
            n_dir += np.count_nonzero(directed, axis=1)
            undefined = ~directed
            undefined &= a == 0
            n_undef = np.count_nonzero(undefined, axis=1)
        cos_sum += np.einsum("pm,pm->p", d, inv)
        sin_sum += 2.0 * np.einsum("pm,pm->p", sen, inv)
        # Regimes: b > 0 reverse; a > 0 >= b strike-slip; a <= 0 normal; a == b == 0 undefined.
        pos_a = a > 0
        n_pos_a = np.count_nonzero(pos_a, axis=1)
        n_rev = np.count_nonzero(b > 0, axis=1)
        n_def = m - n_undef
        counts[:, 2] += n_rev
        counts[:, 1] += n_pos_a - n_rev
        counts[:, 0] += n_def - n_pos_a
        # A-phi = (1 + [a > 0]) + ratio (see regime_index_from_principal): reverse b / a and
        # strike-slip b / (a - b) = b / r are both b / max(a, r); normal -a / b.
        ratio = np.maximum(a, r, out=d)
        with np.errstate(divide="ignore", invalid="ignore"):
            np.divide(b, ratio, out=ratio)
            if n_pos_a.sum() < p * m:
                np.copyto(ratio, -a / b, where=~pos_a)
        if undefined is not None:
            ratio[undefined] = 0.0
        aphi_sum += ratio.sum(axis=1) + n_pos_a + n_def
        n_reg += n_def
    with np.errstate(divide="ignore", invalid="ignore"):
        resultant = np.clip(np.hypot(cos_sum, sin_sum) / n_dir, 0.0, 1.0)
        azimuth = np.mod(np.degrees(0.5 * np.arctan2(sin_sum, cos_sum)), 180.0)
        azimuth = np.where(azimuth >= 180.0 - 1e-12, 0.0, azimuth)
        std = np.degrees(0.5 * np.sqrt(-2.0 * np.log(np.clip(resultant, 1e-300, 1.0))))
        prob = counts / n_reg[:, None]
        aphi_mean = aphi_sum / n_reg
    no_dir = ~(n_dir > 0) | ~(resultant > 1e-12)
    q = np.asarray(percentiles, dtype=float)
    return {
        "shmax_azimuth_deg": np.where(no_dir, np.nan, azimuth),
        "shmax_std_deg": np.where(n_dir > 0, std, np.nan),
        "shmax_resultant": np.where(n_dir > 0, resultant, np.nan),
        "prob_normal": prob[:, 0],
        "prob_strike_slip": prob[:, 1],
        "prob_reverse": prob[:, 2],
        "regime_index": aphi_mean,
        "s_hmax_mpa": _sorted_percentiles(shmax, q),
        "s_hmin_mpa": _sorted_percentiles(shmin, q),
    }


def _sorted_percentiles(values, q):
    """Percentiles (numpy's default linear interpolation) along axis 1, sorting ``values`` in
    place: a full SIMD sort of each row is several times faster than a multi-index partition.

    Examples
    --------
    >>> _sorted_percentiles(np.array([[3.0, 1.0, 2.0, 4.0]]), np.array([0.0, 50.0, 100.0]))
    array([[1. , 2.5, 4. ]])
    """
    values.sort(axis=1)
    m = values.shape[1]
    h = (m - 1) * np.asarray(q, dtype=float) / 100.0
    lo = np.floor(h).astype(np.intp)
    hi = np.minimum(lo + 1, m - 1)
    t = h - lo
    a, b = values[:, lo], values[:, hi]
    # numpy's lerp: a + (b - a) t, evaluated from the nearer end for t >= 0.5
    return np.where(t >= 0.5, b - (b - a) * (1.0 - t), a + (b - a) * t)


def plan_chunks(n_points, members, groups, memory_mb=256.0, member_chunk=256):
    """Points per chunk so one chunk's arrays stay within ``memory_mb`` (MiB).

    Per point a chunk's workspace keeps s_hmax and s_hmin of all members (percentiles partition
    them in place) and a few temporaries of a member sub-chunk (with room to spare).

    Examples
    --------
    >>> plan_chunks(100_000, 10_000, 6)
    1520
    >>> plan_chunks(10, 10, 2)
    10
    """
    mc = min(int(member_chunk), int(members))
    per_point = 8.0 * (2 * members + 8 * mc + 3 * groups)
    p = int(memory_mb * 2**20 // per_point)
    return int(max(1, min(p, n_points)))


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

    n_chunks = len(slices)
    if scheduler is not None:
        _run_dask(scheduler, unit, weights, q, member_chunk, slices, store, report)
    else:
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
    out["n_members"] = members
    out["percentiles"] = q
    return out


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


# ----------------------------------------------------------------------------- composition

def grid_coordinates(bbox, spacing_km):
    """1-D longitude and latitude vectors of a regular grid over ``bbox = (W, S, E, N)``.

    The latitude step is ``spacing_km`` along a meridian (sphere of radius 6371 km); the longitude
    step keeps ``spacing_km`` at the box's middle latitude (the grid of
    :func:`stressmap.model.predict_grid`). ``E < W`` crosses the antimeridian; longitudes then run
    past 180 so that they stay increasing (CF coordinates).

    Examples
    --------
    >>> lon, lat = grid_coordinates((0, -1, 1, 1), 111.19492664455873)
    >>> lon.round(9).tolist(), lat.round(9).tolist()
    ([0.0, 1.0], [-1.0, 0.0, 1.0])
    >>> lon, lat = grid_coordinates((179.5, -0.5, -179.5, 0.5), 55.597463322279364)
    >>> lon.round(3).tolist()
    [179.5, 180.0, 180.5]
    """

    problems = []
    try:
        w, s, e, n = (float(v) for v in bbox)
    except (TypeError, ValueError):
        raise InputError("invalid bbox", [problem("need four numbers W,S,E,N", field="bbox")])
    if not all(np.isfinite([w, s, e, n])) or not (-90 <= s < n <= 90) or abs(w) > 180 or abs(e) > 180:
        problems.append(problem("need -180 <= W, E <= 180 and -90 <= S < N <= 90", field="bbox"))
    try:
        spacing = float(spacing_km)
    except (TypeError, ValueError):
        spacing = float("nan")
    if not (np.isfinite(spacing) and spacing > 0):
        problems.append(problem("must be a positive number of km", field="spacing_km"))
    if problems:
        raise InputError("invalid grid", problems)
    if e <= w:
        e += 360.0
    dlat = np.degrees(spacing / EARTH_RADIUS_KM)
    dlon = dlat / max(np.cos(np.radians(0.5 * (s + n))), 1e-3)
    lat = s + dlat * np.arange(int(np.floor((n - s) / dlat + 1e-9)) + 1)
    lon = w + dlon * np.arange(int(np.floor((e - w) / dlon + 1e-9)) + 1)
    return lon, lat


def _group_references(model) -> dict:
    """Reference physical parameters per load group from the model document's segments.

    For each group, the mean of ``pull_fraction``, ``slab_age_myr`` and ``slab_depth_km`` over its
    segments that give them (a scenario then scales every such segment of the group alike).
    """
    try:

        plate = parse_plate(model.definition)
    except Exception:  # noqa: BLE001 - references are optional; specs may give them
        _log.debug("no plate segments for reference parameters", exc_info=True)
        return {}
    values: dict = {}
    for seg in plate.segments:
        props = getattr(seg, "properties", {}) or {}
        group = getattr(seg, "group", None)
        for key in ("pull_fraction", "slab_age_myr", "slab_depth_km"):
            if key in props and props[key] is not None:
                values.setdefault(group, {}).setdefault(key, []).append(float(props[key]))
    return {g: {k: float(np.mean(v)) for k, v in d.items()} for g, d in values.items()}


def _weights_for(model, members, distributions, seed):

    groups = list(model.groups)
    merged = dict(distributions or {})
    needs_refs = any(isinstance(s, dict) and s.get("parameter", "weight") not in ("weight", "scale")
                     for s in merged.values())
    refs = _group_references(model) if needs_refs else {}
    return sample_weights(groups, merged, members, seed, resolve_weights(model, None), refs)


def _attrs(members, seed, distributions):
    import json


    return {
        "title": "stressmap ensemble of load-group weights",
        "members": int(members),
        "seed": int(seed),
        "distributions": json.dumps(distributions, sort_keys=True),
        "caution": CAUTION,
    }


def ensemble_points(model, lon, lat, members=1000, distributions=None, seed=0,
                    percentiles=DEFAULT_PERCENTILES, weights=None, progress=None, **kwargs):
    """Ensemble statistics at points of a built model, as an xarray Dataset (dim ``point``).

    Parameters
    ----------
    model : stressmap.model.BuiltModel
    lon, lat : array_like (P,)
    members : int
    distributions : dict, optional
        ``group -> spec`` (see :func:`validate_distributions`); groups not named keep weight 1.
        A spec for ``pull_fraction`` or ``slab_age_myr`` takes its reference value from the
        group's segments in the model document (their mean) unless it gives ``reference``.
    weights : ndarray (M, G), optional
        Use these member weights instead of drawing them.
    **kwargs
        ``memory_mb``, ``member_chunk``, ``workers``, ``scheduler`` of :func:`ensemble_statistics`.

    Returns
    -------
    xarray.Dataset
        lon, lat, inside, the :data:`STAT_VARIABLES`, ``regime`` (most probable),
        ``s_hmax_mpa`` and ``s_hmin_mpa`` over (point, percentile); member weights as
        ``member_weight`` (member, group).
    """
    import xarray as xr


    lon = np.atleast_1d(np.asarray(lon, dtype=float))
    lat = np.atleast_1d(np.asarray(lat, dtype=float))
    if weights is None:
        weights = _weights_for(model, members, distributions, seed)
    weights = np.asarray(weights, dtype=float)
    inside, unit = unit_stress_at(model, lon, lat)
    stats = ensemble_statistics(unit, weights, percentiles, progress=progress, **kwargs)
    probs = np.stack([stats["prob_normal"], stats["prob_strike_slip"], stats["prob_reverse"]], -1)
    has = np.isfinite(probs).all(axis=1)
    regime = np.where(has, np.array(REGIMES)[np.argmax(np.where(has[:, None], probs, 0), 1)], "")
    data = {
        "lon": ("point", lon, {"units": "degrees_east"}),
        "lat": ("point", lat, {"units": "degrees_north"}),
        "inside": ("point", np.asarray(inside, dtype=bool)),
        "regime": ("point", regime.astype(str), {"long_name": "most probable regime"}),
    }
    for key, desc in STAT_VARIABLES.items():
        data[key] = ("point", stats[key], {"long_name": desc})
    for key in ("s_hmax_mpa", "s_hmin_mpa"):
        data[key] = (("point", "percentile"), stats[key],
                     {"units": "MPa", "long_name": f"percentiles of {key[:-4]} over members "
                      "(compression positive)"})
    data["member_weight"] = (("member", "group"), weights)
    ds = xr.Dataset(data, coords={"percentile": stats["percentiles"],
                                  "group": list(model.groups)},
                    attrs=_attrs(weights.shape[0], seed, distributions or {}))
    return ds


def ensemble_grid(model, bbox, spacing_km, members=1000, distributions=None, seed=0,
                  percentiles=DEFAULT_PERCENTILES, weights=None, progress=None, **kwargs):
    """Ensemble statistics on a regular lon/lat grid (dims ``lat``, ``lon``; CF-1.8 attributes).

    See :func:`ensemble_points` for the parameters and variables and :func:`grid_coordinates` for
    the grid.
    """
    lon1, lat1 = grid_coordinates(bbox, spacing_km)
    lon2, lat2 = np.meshgrid(lon1, lat1)
    pts = ensemble_points(model, np.mod(lon2.ravel() + 180.0, 360.0) - 180.0, lat2.ravel(), members, distributions, seed,
                          percentiles, weights, progress, **kwargs)
    shape = lat2.shape
    ds = pts.drop_vars(["lon", "lat"])
    import xarray as xr

    out = {}
    for name, var in ds.data_vars.items():
        if "point" not in var.dims:
            out[name] = var
            continue
        dims = ("lat", "lon") + tuple(d for d in var.dims if d != "point")
        out[name] = xr.Variable(dims, var.values.reshape(shape + var.shape[1:]), var.attrs)
    grid = xr.Dataset(out, coords={"lat": ("lat", lat1, {"units": "degrees_north",
                                                         "standard_name": "latitude"}),
                                   "lon": ("lon", lon1, {"units": "degrees_east",
                                                         "standard_name": "longitude"}),
                                   "percentile": pts["percentile"], "group": pts["group"]},
                      attrs=dict(pts.attrs, Conventions="CF-1.8"))
    grid["inside"] = grid["inside"].astype(np.int8)
    grid["inside"].attrs = {"flag_values": [0, 1], "flag_meanings": "outside inside"}
    return grid


def percentile_label(q) -> str:
    """Suffix of a percentile column: ``p5``, ``p50``, ``p2_5``.

    Examples
    --------
    >>> [percentile_label(q) for q in (5.0, 50, 2.5)]
    ['p5', 'p50', 'p2_5']
    """
    return "p" + f"{float(q):g}".replace(".", "_")


def flatten_percentiles(ds):
    """A copy of an ensemble Dataset with one variable per percentile and no member weights.

    ``s_hmax_mpa`` over (..., percentile) becomes ``s_hmax_mpa_p5``, ``s_hmax_mpa_p50``, ... so
    that tabular writers (GeoJSON properties, CSV columns) see one value per point.
    """
    out = ds.drop_vars([v for v in ("member_weight",) if v in ds.variables])
    for name in [n for n, v in out.data_vars.items() if "percentile" in v.dims]:
        var = out[name]
        for q in out["percentile"].values:
            out[f"{name}_{percentile_label(q)}"] = var.sel(percentile=q).drop_vars("percentile")
        out = out.drop_vars(name)
    drop = [c for c in ("percentile", "group", "member") if c in out.coords or c in out.dims]
    return out.drop_vars([c for c in drop if c in out.variables])


def ensemble_png(ds, outline=None, title=None, caption=None) -> bytes:
    """PNG map of an ensemble: mean SHmax ticks coloured by the mean A-phi, with the axial
    standard deviation drawn as a fan around each tick (:func:`stressmap.plot.maps.shmax_map`)."""

    if "point" in ds.dims:
        lon = np.asarray(ds["lon"].values, float)
        lat = np.asarray(ds["lat"].values, float)
        get = lambda name: np.asarray(ds[name].values, float).ravel()  # noqa: E731
    else:
        lon2, lat2 = np.meshgrid(np.asarray(ds["lon"].values, float),
                                 np.asarray(ds["lat"].values, float))
        lon, lat = lon2.ravel(), lat2.ravel()
        get = lambda name: np.asarray(ds[name].transpose("lat", "lon").values, float).ravel()  # noqa: E731
    members = ds.attrs.get("members", "")
    return shmax_map(lon, lat, get("shmax_azimuth_deg"), get("regime_index"), outline,
                     uncertainty_deg=get("shmax_std_deg"),
                     title=title or f"Ensemble mean SHmax and 1-sigma spread ({members} members)",
                     caption=caption)
