"""Ensemble statistics kernels: pure functions of unit stresses (G, p, 3) and member weights (M, G).

Member ``m``'s stress at point ``p`` is ``sum_g W[m, g] U[g, p]``. Per point: the axial mean SHmax
azimuth over members and the axial standard deviation ``0.5 sqrt(-2 ln R)`` of the doubled angles
(Mardia & Jupp 2000, section 9.3.2 -- from memory; the definitions of :mod:`stressmap.geo.circular`),
the probability of each Anderson regime, the mean of Simpson's A-phi and percentiles of the
horizontal principal stresses (MPa). Members are combined in sub-chunks into reusable workspaces.
"""

from __future__ import annotations

import numpy as np

__all__ = ["DEFAULT_PERCENTILES", "STAT_VARIABLES", "regime_index_from_principal", "workspace",
           "chunk_statistics", "plan_chunks"]

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
    acc = {"cos": np.zeros(p), "sin": np.zeros(p), "n_dir": np.zeros(p),
           "counts": np.zeros((p, 3)), "aphi": np.zeros(p), "n_reg": np.zeros(p)}
    for m0 in range(0, m_total, step):
        _accumulate_members(u, w_t, slice(m0, min(m0 + step, m_total)), work, shmax, shmin, acc)
    return _finish_statistics(acc, shmax, shmin, percentiles)


def _accumulate_members(u, w_t, cols, work, shmax, shmin, acc) -> None:
    """Add one sub-chunk of members (``cols``) to the running sums of :func:`chunk_statistics`.

    ``u`` (3p, G) unit stresses, ``w_t`` (G, M) weights; writes the members' s_hmax/s_hmin into
    their columns of ``shmax``/``shmin`` (p, M) and updates ``acc`` in place.
    """
    p = shmax.shape[0]
    m = cols.stop - cols.start
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
        acc["n_dir"] += m
        undefined = None
        n_undef = 0
    else:
        directed = r > 0
        inv = np.divide(1.0, r, out=np.zeros_like(r), where=directed)
        acc["n_dir"] += np.count_nonzero(directed, axis=1)
        undefined = ~directed
        undefined &= a == 0
        n_undef = np.count_nonzero(undefined, axis=1)
    acc["cos"] += np.einsum("pm,pm->p", d, inv)
    acc["sin"] += 2.0 * np.einsum("pm,pm->p", sen, inv)
    # Regimes: b > 0 reverse; a > 0 >= b strike-slip; a <= 0 normal; a == b == 0 undefined.
    pos_a = a > 0
    n_pos_a = np.count_nonzero(pos_a, axis=1)
    n_rev = np.count_nonzero(b > 0, axis=1)
    n_def = m - n_undef
    acc["counts"][:, 2] += n_rev
    acc["counts"][:, 1] += n_pos_a - n_rev
    acc["counts"][:, 0] += n_def - n_pos_a
    # A-phi = (1 + [a > 0]) + ratio (see regime_index_from_principal): reverse b / a and
    # strike-slip b / (a - b) = b / r are both b / max(a, r); normal -a / b.
    ratio = np.maximum(a, r, out=d)
    with np.errstate(divide="ignore", invalid="ignore"):
        np.divide(b, ratio, out=ratio)
        if n_pos_a.sum() < p * m:
            np.copyto(ratio, -a / b, where=~pos_a)
    if undefined is not None:
        ratio[undefined] = 0.0
    acc["aphi"] += ratio.sum(axis=1) + n_pos_a + n_def
    acc["n_reg"] += n_def


def _finish_statistics(acc, shmax, shmin, percentiles) -> dict:
    """The per-point statistics from the running sums (see :func:`chunk_statistics`)."""
    cos_sum, sin_sum, n_dir = acc["cos"], acc["sin"], acc["n_dir"]
    with np.errstate(divide="ignore", invalid="ignore"):
        resultant = np.clip(np.hypot(cos_sum, sin_sum) / n_dir, 0.0, 1.0)
        azimuth = np.mod(np.degrees(0.5 * np.arctan2(sin_sum, cos_sum)), 180.0)
        azimuth = np.where(azimuth >= 180.0 - 1e-12, 0.0, azimuth)
        std = np.degrees(0.5 * np.sqrt(-2.0 * np.log(np.clip(resultant, 1e-300, 1.0))))
        prob = acc["counts"] / acc["n_reg"][:, None]
        aphi_mean = acc["aphi"] / acc["n_reg"]
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
