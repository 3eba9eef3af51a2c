"""Calibration of load-group weights against stress indicators.

The thin sheet is linear, so the tectonic stress at any point is ``sum_g w_g U_g`` where ``U_g`` is
the stored unit solution of load group ``g`` (weight 1.0 = the forces the model document
specifies). Calibration chooses non-negative weights that minimise the uncertainty-weighted axial
misfit between predicted and observed SHmax azimuths,

    F(w) = sum_i k_i (1 - cos 2 delta_i) / sum_i k_i,        k_i = weight_i ~ 1 / sigma_i**2,

which is the negative log-likelihood (up to constants) of a von Mises distribution of the doubled
angle, the usual model for axial data (Mardia & Jupp 2000, "Directional Statistics", ch. 9 -- from
memory). ``F`` lies in [0, 2]; random orientations give ``E[F] = 1`` and a mean absolute misfit of 45
degrees (analytic: delta is uniform on [-90, 90)).

Orientations are blind to an overall scale of the stress, so one *reference* group keeps its
weight fixed (1.0 unless told otherwise) and the others are fitted within bounds, from several
seeded starts. Many fits (starts, bootstrap resamples, random data sets) are solved together by a
batched projected Levenberg-Marquardt on the Gauss-Newton form of the misfit, and each answer is
polished by L-BFGS-B (scipy.optimize) with the analytic gradient. The predicted doubled
angle is a ratio of linear forms of ``w``: with ``d = s_nn - s_ee`` and ``e = 2 s_en``,
``cos 2(theta_p - theta_o) = (d cos 2theta_o + e sin 2theta_o) / hypot(d, e)``, so the objective
and its gradient are matrix-vector products over all indicators at once.

Uncertainty: percentile bootstrap over indicators (resampling counts enter as multiplicities of
``k_i``, no data are copied); significance: the calibrated misfit is compared with calibrations of
the same model to uniformly random azimuths (Monte Carlo, seeded); weights are flagged as not
constrained when their interval covers most of their bounds or when moving them to a bound changes
the misfit by less than its standard error.

The core (:func:`calibrate_arrays`) takes arrays; :func:`calibrate` composes it with a built model
and an indicator table.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import minimize

from stressmap.errors import InputError, problem
from stressmap.geo.circular import random_misfit_significance
from stressmap.model import resolve_weights, unit_stress_at

__all__ = [
    "CalibrationResult",
    "DEFAULT_BOUNDS",
    "axial_terms",
    "indicator_kappa",
    "misfit_objective",
    "misfit_deg",
    "fit_weights",
    "calibrate_arrays",
    "calibrate",
    "resolve_bounds",
]

_log = logging.getLogger(__name__)

#: Default bounds of a free group's weight (relative to the document's forces = 1.0). Force
#: magnitudes are uncertain "by factors of several" (issue 6), hence 0 .. 5.
DEFAULT_BOUNDS = (0.0, 5.0)

_TINY = 1e-300


def axial_terms(unit):
    """Doubled-angle components of unit stress fields.

    Parameters
    ----------
    unit : array_like, shape (G, N, 3)
        Unit stress ``(s_ee, s_nn, s_en)`` per load group and point (any stress unit).

    Returns
    -------
    d, e : ndarray, shape (G, N)
        ``d = s_nn - s_ee`` and ``e = 2 s_en``; for a combined tensor, SHmax has azimuth
        ``0.5 * atan2(e, d)`` (clockwise from north).

    Examples
    --------
    >>> d, e = axial_terms([[[1.0, 5.0, 0.5]]])
    >>> d.tolist(), e.tolist()
    ([[4.0]], [[1.0]])
    """
    unit = np.asarray(unit, dtype=float)
    if unit.ndim != 3 or unit.shape[-1] != 3:
        raise ValueError(f"unit stress must have shape (G, N, 3), got {unit.shape}")
    return np.ascontiguousarray(unit[..., 1] - unit[..., 0]), np.ascontiguousarray(2.0 * unit[..., 2])


def indicator_kappa(sigma_deg=None, weight=None, n=None):
    """Misfit weights ``k_i`` of indicators: their ``weight`` where given, else ``1 / sigma_i**2``.

    The indicator reader's weight is ``(20 / sigma_deg)**2`` (:mod:`stressmap.analyses.indicators`), i.e.
    already proportional to ``1 / sigma**2``, the von Mises concentration of an angle with
    standard deviation sigma; only ratios matter (the objective is normalised by ``sum k``).
    Missing or unusable values count 1; negative weights count 0.

    Examples
    --------
    >>> indicator_kappa([10.0, 20.0]).tolist()
    [0.01, 0.0025]
    >>> indicator_kappa(None, [1.0, 0.5]).tolist()
    [1.0, 0.5]
    >>> indicator_kappa([10.0, 20.0], [4.0, np.nan]).tolist()   # weight wins; missing: sigma
    [4.0, 0.0025]
    """
    arrays = [np.asarray(a, dtype=float) for a in (sigma_deg, weight) if a is not None]
    if n is None:
        if not arrays:
            raise ValueError("give sigma_deg, weight or n")
        n = arrays[0].shape[0]
    k = np.ones(n)
    if sigma_deg is not None:
        s = np.asarray(sigma_deg, dtype=float)
        ok = np.isfinite(s) & (s > 0)
        k = np.where(ok, 1.0 / np.where(ok, s, 1.0) ** 2, 1.0)
    if weight is not None:
        w = np.asarray(weight, dtype=float)
        k = np.where(np.isfinite(w), np.maximum(w, 0.0), k)
    return k


def misfit_objective(w, d, e, cos2o, sin2o, kappa):
    """Normalised axial misfit ``F(w)`` and its gradient with respect to all G weights.

    Parameters
    ----------
    w : array_like, shape (G,)
    d, e : ndarray, shape (G, N)
        From :func:`axial_terms`.
    cos2o, sin2o : ndarray, shape (N,)
        Cosine and sine of twice the observed azimuths.
    kappa : ndarray, shape (N,)
        Non-negative misfit weights (e.g. from :func:`indicator_kappa`, times bootstrap counts).

    Returns
    -------
    f : float
        ``sum k (1 - cos 2 delta) / sum k`` in [0, 2].
    grad : ndarray, shape (G,)

    Examples
    --------
    A north-south compression observed as north-south gives zero misfit; observed east-west, 2:

    >>> d, e = axial_terms([[[0.0, 1.0, 0.0]]])
    >>> float(misfit_objective([1.0], d, e, np.array([1.0]), np.array([0.0]), np.ones(1))[0])
    0.0
    >>> float(misfit_objective([1.0], d, e, np.array([-1.0]), np.array([0.0]), np.ones(1))[0])
    2.0
    """
    w = np.asarray(w, dtype=float)
    dd = w @ d
    ee = w @ e
    r2 = dd * dd + ee * ee
    r = np.sqrt(r2) + _TINY
    u = dd * cos2o + ee * sin2o
    cos2delta = u / r
    ksum = kappa.sum()
    f = float(np.dot(kappa, 1.0 - cos2delta) / ksum)
    r3 = r * r * r
    gd = kappa * (cos2o / r - u * dd / r3)
    ge = kappa * (sin2o / r - u * ee / r3)
    grad = -(d @ gd + e @ ge) / ksum
    return f, grad


def _predicted_deg(w, d, e):
    return np.mod(np.degrees(0.5 * np.arctan2(w @ e, w @ d)), 180.0)


def misfit_deg(w, d, e, observed_deg, kappa):
    """Weighted mean absolute axial misfit (degrees, in [0, 90]) and the signed residuals.

    Examples
    --------
    >>> d, e = axial_terms([[[0.0, 1.0, 0.0], [1.0, 0.0, 0.0]]])   # SHmax N-S, then E-W
    >>> m, res = misfit_deg([1.0], d, e, np.array([10.0, 80.0]), np.ones(2))
    >>> round(m, 9), res.round(9).tolist()
    (10.0, [-10.0, 10.0])
    """
    pred = _predicted_deg(np.asarray(w, dtype=float), d, e)
    res = np.mod(pred - np.asarray(observed_deg, dtype=float) + 90.0, 180.0) - 90.0
    return float(np.dot(kappa, np.abs(res)) / kappa.sum()), res


@dataclass(frozen=True)
class _Problem:
    d: np.ndarray
    e: np.ndarray
    cos2o: np.ndarray
    sin2o: np.ndarray
    base: np.ndarray  # full weight vector with the reference weight in place
    free: np.ndarray  # indices of free groups
    bounds: np.ndarray  # (F, 2) bounds of the free groups

    def full(self, x):
        w = self.base.copy()
        w[self.free] = x
        return w

    def fun(self, kappa):
        free = self.free

        def f(x):
            val, grad = misfit_objective(self.full(x), self.d, self.e, self.cos2o, self.sin2o, kappa)
            return val, grad[free]

        return f


def _minimise(prob: _Problem, kappa, starts):
    """Best L-BFGS-B result over the given starts (array (S, F)). Returns (x, f)."""

    fun = prob.fun(kappa)
    best_x, best_f = None, np.inf
    for x0 in starts:
        res = minimize(fun, x0, jac=True, method="L-BFGS-B", bounds=prob.bounds,
                       options={"maxiter": 500, "ftol": 1e-11, "gtol": 1e-8})
        if res.fun < best_f:
            best_x, best_f = np.clip(res.x, prob.bounds[:, 0], prob.bounds[:, 1]), float(res.fun)
    return best_x, best_f


def _rows(arr, idx):
    """Rows ``idx`` of a (B, N) array, or the array itself when it has one row (broadcast)."""
    return arr if arr.shape[0] == 1 else arr[idx]


def _batched_fit(prob: _Problem, kappa, x0, cos2o=None, sin2o=None, max_iter=200,
                 block_elements=2_000_000):
    """Many bounded fits at once: projected Levenberg-Marquardt on the Gauss-Newton form.

    ``F = sum k (1 - cos 2 delta) / sum k = sum k |v_p - v_o|^2 / (2 sum k)`` with ``v`` the unit
    vectors of the doubled angles, a nonlinear least-squares problem. With ``rho = hypot(d, e)``,
    ``v_p = (d, e) / rho`` and the tangent ``t = (-sin 2theta_p, cos 2theta_p)``, the Jacobian of
    ``v_p`` is ``t q^T / rho`` with ``q = t_1 D + t_2 E`` (per free group), so the gradient is
    ``-sum k (t . v_o) q / rho`` and the Gauss-Newton matrix ``sum k q q^T / rho^2`` (positive
    semi-definite), both normalised by ``sum k``. Every problem of the batch (bootstrap resample,
    random data set, start) has its own start, observed angles and weights; the batch is
    processed in blocks so ``B x F x N`` temporaries stay below ``block_elements``.

    Parameters
    ----------
    prob : _Problem
    kappa : ndarray (B, N) or (1, N)
    x0 : ndarray (B, F)
    cos2o, sin2o : ndarray (B, N) or (1, N), optional (default: the problem's observations)

    Returns
    -------
    x : ndarray (B, F), f : ndarray (B,)
    """
    x0 = np.atleast_2d(np.asarray(x0, dtype=float))
    kappa = np.atleast_2d(kappa)
    c_o = prob.cos2o[None] if cos2o is None else np.atleast_2d(cos2o)
    s_o = prob.sin2o[None] if sin2o is None else np.atleast_2d(sin2o)
    b_total, n_free = x0.shape
    n = prob.d.shape[1]
    step = max(1, int(block_elements // max(n_free * n, 1)))
    xs, fs = [], []
    for b0 in range(0, b_total, step):
        sl = np.arange(b0, min(b0 + step, b_total))
        x, f = _lm_block(prob, _rows(kappa, sl), x0[sl], _rows(c_o, sl), _rows(s_o, sl),
                         max_iter)
        xs.append(x)
        fs.append(f)
    return np.vstack(xs), np.concatenate(fs)


def _lm_block(prob, kappa, x, c_o, s_o, max_iter):
    lo, hi = prob.bounds[:, 0], prob.bounds[:, 1]
    d_free, e_free = prob.d[prob.free], prob.e[prob.free]  # (F, N)
    d_ref, e_ref = prob.base @ prob.d, prob.base @ prob.e  # (N,)
    x = np.clip(x, lo, hi)
    b, nf = x.shape
    ksum = np.broadcast_to(kappa.sum(axis=1), (b,)).copy()
    eye = np.eye(nf)

    def evaluate(xb, k, co, so, ks):
        dd = d_ref + xb @ d_free
        ee = e_ref + xb @ e_free
        rho = np.sqrt(dd * dd + ee * ee) + _TINY
        cv, sv = dd / rho, ee / rho
        f = np.einsum("bn,bn->b", np.broadcast_to(k, cv.shape), 1.0 - (cv * co + sv * so)) / ks
        return f, cv, sv, rho

    f, cv, sv, rho = evaluate(x, kappa, c_o, s_o, ksum)
    lam = np.full(b, 1e-3)
    active = np.ones(b, dtype=bool)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        k, co, so, ks = _rows(kappa, idx), _rows(c_o, idx), _rows(s_o, idx), ksum[idx]
        cvi, svi, rhoi, xi = cv[idx], sv[idx], rho[idx], x[idx]
        t_dot_o = -svi * co + cvi * so
        q = -svi[:, None, :] * d_free[None] + cvi[:, None, :] * e_free[None]  # (b, F, N)
        grad = -np.einsum("bfn,bn->bf", q, k * t_dot_o / rhoi) / ks[:, None]
        hess = np.matmul(q * (k / (rhoi * rhoi))[:, None, :], q.transpose(0, 2, 1))
        hess /= ks[:, None, None]
        fixed = ((xi <= lo + 1e-12) & (grad > 0)) | ((xi >= hi - 1e-12) & (grad < 0))
        g_free = np.where(fixed, 0.0, grad)
        keep = (~fixed)[:, :, None] & (~fixed)[:, None, :]
        h = np.where(keep, hess, 0.0) + fixed[:, :, None] * eye
        diag = np.einsum("bii->bi", h)
        a = h + (lam[idx, None] * (diag + 1e-12))[:, :, None] * eye
        delta = np.linalg.solve(a, -g_free[..., None])[..., 0]
        x_new = np.clip(xi + delta, lo, hi)
        f_new, cv_new, sv_new, rho_new = evaluate(x_new, k, co, so, ks)
        better = f_new < f[idx]
        acc = idx[better]
        gain = f[acc] - f_new[better]
        x[acc], f[acc] = x_new[better], f_new[better]
        cv[acc], sv[acc], rho[acc] = cv_new[better], sv_new[better], rho_new[better]
        lam[acc] *= 0.3
        lam[idx[~better]] *= 10.0
        moved = np.abs(x_new - xi).max(axis=1) if nf else np.zeros(idx.size)
        done = np.zeros(idx.size, dtype=bool)
        done[better] = (gain <= 1e-15) & (moved[better] < 1e-9)
        done |= ~better & (lam[idx] > 1e10)
        done |= np.abs(g_free).max(axis=1, initial=0.0) < 1e-9
        active[idx[done]] = False
    return x, f


def _polish(prob: _Problem, kappa, x, cos2o=None, sin2o=None):
    """L-BFGS-B from each row of ``x`` (a batch's answers), per problem; rows (B, F).

    The batched Levenberg-Marquardt of :func:`_batched_fit` can stall near points where the
    predicted stress is nearly isotropic at an indicator (the objective bends sharply there);
    a quasi-Newton polish from its answer ends at a proper stationary point, usually within a
    few iterations.
    """

    out = np.empty_like(x)
    for j in range(x.shape[0]):
        pj = prob if cos2o is None else replace(prob, cos2o=_rows(cos2o, [j])[0],
                                               sin2o=_rows(sin2o, [j])[0])
        out[j], _ = _minimise(pj, _rows(kappa, [j])[0], x[j][None])
    return out


def _random_starts(rng, bounds, n):
    lo, hi = bounds[:, 0], bounds[:, 1]
    return lo + (hi - lo) * rng.random((n, bounds.shape[0]))


def fit_weights(unit, observed_deg, kappa, bounds, reference_index, reference_weight=1.0,
                start=None, n_starts=8, seed=0):
    """Fit weights minimising :func:`misfit_objective` with one reference weight held fixed.

    Parameters
    ----------
    unit : array_like, shape (G, N, 3)
    observed_deg : array_like, shape (N,)
        Observed SHmax azimuths, degrees.
    kappa : array_like, shape (N,)
    bounds : array_like, shape (G, 2)
        Bounds of every group (the reference's are ignored).
    reference_index : int
    start : array_like, shape (G,), optional
        Weights tried first (e.g. the document's defaults), clipped into the bounds.
    n_starts : int
        Total number of starts (``start`` plus seeded uniform draws within the bounds).

    Returns
    -------
    weights : ndarray, shape (G,)
    objective : float

    Examples
    --------
    Two groups: N-S compression (reference) and a shear ``s_en``; SHmax then lies at
    ``0.5 atan2(2 w, 1)``, so an observed azimuth of 22.5 degrees needs ``w = 0.5``:

    >>> unit = np.array([[[0.0, 1.0, 0.0]], [[0.0, 0.0, 1.0]]])
    >>> w, f = fit_weights(unit, [22.5], [1.0], [[0, 5], [0, 5]], 0)
    >>> w.round(6).tolist(), round(f, 9)
    ([1.0, 0.5], 0.0)
    """
    d, e = axial_terms(unit)
    prob = _problem(d, e, observed_deg, bounds, reference_index, reference_weight)
    kappa = np.asarray(kappa, dtype=float)
    starts = _starts(prob, start, n_starts, np.random.default_rng(seed))
    x, f = _minimise(prob, kappa, starts)
    return prob.full(x), f


def _problem(d, e, observed_deg, bounds, reference_index, reference_weight):
    g = d.shape[0]
    two = np.radians(2.0 * np.asarray(observed_deg, dtype=float))
    bounds = np.asarray(bounds, dtype=float).reshape(g, 2)
    free = np.array([i for i in range(g) if i != reference_index], dtype=int)
    base = np.zeros(g)
    base[reference_index] = reference_weight
    return _Problem(d, e, np.cos(two), np.sin(two), base, free, bounds[free])


def _starts(prob, start, n_starts, rng):
    rows = []
    if start is not None:
        s = np.asarray(start, dtype=float)[prob.free]
        rows.append(np.clip(s, prob.bounds[:, 0], prob.bounds[:, 1]))
    n_rand = max(n_starts - len(rows), 0)
    out = np.vstack(rows + [_random_starts(rng, prob.bounds, n_rand)]) if rows or n_rand else None
    return out if out is not None else _random_starts(rng, prob.bounds, 1)


@dataclass(frozen=True)
class CalibrationResult:
    """Outcome of a calibration. Weights are relative to the document's forces (1.0).

    Attributes
    ----------
    groups : tuple of str
    weights, default_weights : ndarray (G,)
    weights_ci : ndarray (G, 2)
        Bootstrap percentile interval at ``confidence`` (the reference group's is its fixed value).
    bounds : ndarray (G, 2)
    reference : str
    misfit_before_deg, misfit_after_deg : float
        Weighted mean absolute axial misfit with the default and the calibrated weights.
    objective_before, objective_after : float
        ``F`` (weighted mean of ``1 - cos 2 delta``) before and after.
    significance : dict
        Monte Carlo comparison with random azimuths (see :func:`calibrate_arrays`).
    constrained : ndarray (G,) bool
    flags : dict
        Group -> list of reasons why the data do not constrain that weight.
    residuals_deg : ndarray (N,)
        Signed axial residual predicted - observed with the calibrated weights.
    bootstrap_weights : ndarray (B, G)
    """

    groups: tuple
    weights: np.ndarray
    default_weights: np.ndarray
    weights_ci: np.ndarray
    bounds: np.ndarray
    reference: str
    confidence: float
    misfit_before_deg: float
    misfit_after_deg: float
    objective_before: float
    objective_after: float
    significance: dict
    constrained: np.ndarray
    flags: dict
    residuals_deg: np.ndarray
    predicted_deg: np.ndarray
    bootstrap_weights: np.ndarray
    n_indicators: int
    settings: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """JSON-able summary: ``weights`` and ``weights_ci`` keyed by group, misfits, flags."""
        g = self.groups
        return {
            "weights": {k: float(v) for k, v in zip(g, self.weights)},
            "weights_ci": {k: [float(lo), float(hi)] for k, (lo, hi) in zip(g, self.weights_ci)},
            "default_weights": {k: float(v) for k, v in zip(g, self.default_weights)},
            "bounds": {k: [float(lo), float(hi)] for k, (lo, hi) in zip(g, self.bounds)},
            "reference": self.reference,
            "confidence": self.confidence,
            "misfit_before": self.misfit_before_deg,
            "misfit_after": self.misfit_after_deg,
            "misfit_unit": "deg (weighted mean absolute axial misfit)",
            "objective_before": self.objective_before,
            "objective_after": self.objective_after,
            "significance": dict(self.significance),
            "constrained": {k: bool(v) for k, v in zip(g, self.constrained)},
            "flags": {k: list(v) for k, v in self.flags.items()},
            "n_indicators": self.n_indicators,
            "settings": dict(self.settings),
        }


def _check_inputs(unit, observed_deg, kappa):
    problems = []
    obs = np.asarray(observed_deg, dtype=float)
    if obs.ndim != 1 or obs.shape[0] != unit.shape[1]:
        raise InputError("observed azimuths do not match the indicator points",
                         [problem(f"expected {unit.shape[1]} azimuths, got {obs.shape}",
                                  field="shmax_azimuth_deg")])
    for i in np.flatnonzero(~np.isfinite(obs))[:20]:
        problems.append(problem("azimuth is not a finite number", field="shmax_azimuth_deg",
                                row=int(i) + 1))
    for i in np.flatnonzero(~(np.isfinite(kappa) & (kappa >= 0)))[:20]:
        problems.append(problem("uncertainty/weight must be finite and positive",
                                field="sigma_deg", row=int(i) + 1))
    bad_pts = ~np.all(np.isfinite(unit), axis=(0, 2))
    for i in np.flatnonzero(bad_pts)[:20]:
        problems.append(problem("indicator lies outside the model (no predicted stress)",
                                row=int(i) + 1))
    if problems:
        raise InputError("indicators cannot be used for calibration", problems)


def resolve_bounds(groups, bounds=None, default=DEFAULT_BOUNDS):
    """Bounds array (G, 2) from a dict ``group -> [low, high]`` (missing groups get ``default``).

    Examples
    --------
    >>> resolve_bounds(["a", "b"], {"b": [0.5, 2]}).tolist()
    [[0.0, 5.0], [0.5, 2.0]]
    >>> resolve_bounds(["a"], {"c": [0, 1]})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: invalid weight bounds
      - field bounds.c: unknown load group 'c' (groups: a)
    """
    groups = list(groups)
    out = np.tile(np.asarray(default, dtype=float), (len(groups), 1))
    problems = []
    for key, val in (bounds or {}).items():
        where = f"bounds.{key}"
        if key not in groups:
            problems.append(problem(f"unknown load group '{key}' (groups: {', '.join(groups)})",
                                    field=where))
            continue
        try:
            lo, hi = (float(v) for v in val)
        except (TypeError, ValueError):
            problems.append(problem("must be a pair [low, high] of numbers", field=where))
            continue
        if not (np.isfinite(lo) and np.isfinite(hi)) or lo < 0 or hi < lo:
            problems.append(problem(f"need 0 <= low <= high, got [{lo}, {hi}]", field=where))
            continue
        out[groups.index(key)] = lo, hi
    if problems:
        raise InputError("invalid weight bounds", problems)
    return out


def calibrate_arrays(unit, observed_deg, kappa=None, *, groups=None, default_weights=None,
                     bounds=None, reference=None, n_starts=8, n_bootstrap=200, n_random=100,
                     confidence=0.95, seed=0, progress=None) -> CalibrationResult:
    """Calibrate load-group weights against observed SHmax azimuths (pure arrays).

    Parameters
    ----------
    unit : array_like, shape (G, N, 3)
        Unit stress (s_ee, s_nn, s_en) of each group at the N indicators (compression positive).
    observed_deg : array_like, shape (N,)
        Observed SHmax azimuths, degrees clockwise from north.
    kappa : array_like, shape (N,), optional
        Misfit weights (:func:`indicator_kappa`); equal weights when omitted.
    groups : sequence of str, optional
        Names of the G groups (default ``g0, g1, ...``).
    default_weights : array_like (G,), optional
        The model's weights (1.0 each by default); "before" is evaluated with them and they are the
        first start.
    bounds : dict or array (G, 2), optional
        Weight bounds per group (default :data:`DEFAULT_BOUNDS`).
    reference : str, optional
        Group whose weight stays at its default value. Default: the group with the largest RMS
        unit deviatoric stress at the indicators.
    n_starts, n_bootstrap, n_random : int
        Optimiser starts; bootstrap resamples over indicators; random-azimuth data sets for the
        significance test (0 skips it).
    confidence : float
        Level of the bootstrap percentile intervals.
    seed : int
        Seeds every random draw (starts, resamples, random azimuths): same seed, same result.
    progress : callable(fraction, message), optional

    Returns
    -------
    CalibrationResult

    Notes
    -----
    ``significance`` holds ``p_value`` = (1 + #{random data sets whose calibrated misfit <= the
    observed calibrated misfit}) / (1 + n_random), the null distribution's mean and 5th
    percentile, the same test for the misfit *reduction* (``reduction_p_value``), the analytic
    reference ``random_misfit_deg`` = 45 and the analytic one-sided p-value of the calibrated misfit
    against it (:func:`stressmap.geo.circular.random_misfit_significance`; it ignores the freedom of the
    fit, which the Monte Carlo ``p_value`` accounts for).
    """
    d, e, obs, kappa, groups, w0, b, ref = _prepared_inputs(
        unit, observed_deg, kappa, groups, default_weights, bounds, reference, confidence)
    g, n = d.shape
    report = progress or (lambda fraction, message: None)
    rng = np.random.default_rng(seed)
    prob = _problem(d, e, obs, b, ref, w0[ref])
    b = b.copy()
    b[ref] = [w0[ref], w0[ref]]

    f_before, _ = misfit_objective(w0, d, e, prob.cos2o, prob.sin2o, kappa)
    m_before, _ = misfit_deg(w0, d, e, obs, kappa)
    x_best, f_best = _best_fit(prob, kappa, w0, n_starts, rng, f_before)
    w_best = prob.full(x_best)
    m_after, residuals = misfit_deg(w_best, d, e, obs, kappa)
    report(0.1, "best fit found")
    boot = _bootstrap(prob, kappa, x_best, w_best, n_bootstrap, rng)
    report(0.6, "bootstrap done")
    alpha = 1.0 - confidence
    if n_bootstrap:
        ci = np.quantile(boot, [alpha / 2, 1 - alpha / 2], axis=0).T
    else:
        ci = np.full((g, 2), np.nan)
    ci[ref] = w0[ref]
    significance = _significance(prob, kappa, w0, residuals, m_before, m_after, n_random, seed,
                                 rng, report)
    constrained, flags = _constraint_flags(prob, kappa, groups, b, ci, w_best, f_best,
                                           residuals, n_bootstrap)
    report(1.0, "calibration done")
    return CalibrationResult(
        groups=groups, weights=w_best, default_weights=w0, weights_ci=ci, bounds=b,
        reference=groups[ref], confidence=float(confidence), misfit_before_deg=m_before,
        misfit_after_deg=m_after, objective_before=f_before, objective_after=f_best,
        significance=significance, constrained=constrained, flags=flags,
        residuals_deg=residuals, predicted_deg=_predicted_deg(w_best, d, e),
        bootstrap_weights=boot, n_indicators=n,
        settings={"n_starts": n_starts, "n_bootstrap": n_bootstrap, "n_random": n_random,
                  "seed": seed},
    )


def _prepared_inputs(unit, observed_deg, kappa, groups, default_weights, bounds, reference,
                     confidence):
    """Checked inputs of :func:`calibrate_arrays`: axial terms, observations, misfit weights,
    group names, default weights, bounds (G, 2) and the reference group's index."""
    unit = np.asarray(unit, dtype=float)
    d, e = axial_terms(unit)
    g, n = d.shape
    groups = tuple(groups) if groups is not None else tuple(f"g{i}" for i in range(g))
    if len(groups) != g:
        raise ValueError("groups and unit disagree")
    obs = np.asarray(observed_deg, dtype=float)
    kappa = np.ones(n) if kappa is None else np.asarray(kappa, dtype=float)
    _check_inputs(unit, obs, kappa)
    if not 0.0 < confidence < 1.0:
        raise InputError("confidence must lie strictly between 0 and 1",
                         [problem(f"got {confidence}", field="confidence")])
    w0 = np.ones(g) if default_weights is None else np.asarray(default_weights, dtype=float)
    b = np.asarray(bounds, dtype=float) if isinstance(bounds, np.ndarray) else \
        resolve_bounds(groups, bounds)
    ref = _reference_index(d, e, groups, reference)
    n_free = g - 1
    if kappa.sum() <= 0 or np.count_nonzero(kappa) < max(n_free, 1):
        raise InputError("too few usable indicators for calibration",
                         [problem(f"{np.count_nonzero(kappa)} indicators with positive weight; "
                                  f"{n_free} free weights need at least as many", field="indicators")])
    return d, e, obs, kappa, groups, w0, b, ref


def _reference_index(d, e, groups, reference) -> int:
    """Index of the reference group: the named one, else the strongest RMS unit stress."""
    if reference is None:
        return int(np.argmax(np.sqrt(np.mean(d * d + e * e, axis=1))))
    if reference in groups:
        return groups.index(reference)
    raise InputError("unknown reference group",
                     [problem(f"'{reference}' is not one of {', '.join(groups)}",
                              field="reference")])


def _best_fit(prob, kappa, w0, n_starts, rng, f_before):
    """Free weights and objective of the best fit from ``n_starts`` seeded starts."""
    if prob.free.size == 0:
        return np.zeros(0), f_before
    starts = _starts(prob, w0, n_starts, rng)
    xs, fs = _batched_fit(prob, kappa[None], starts)
    # polish the best start with L-BFGS-B (an independent method; keeps the better answer)
    x_best, f_best = _minimise(prob, kappa, xs[np.argmin(fs)][None])
    if fs.min() < f_best:
        x_best, f_best = xs[np.argmin(fs)], float(fs.min())
    return x_best, f_best


def _bootstrap(prob, kappa, x_best, w_best, n_bootstrap, rng) -> np.ndarray:
    """Bootstrap weights over indicators, (n_bootstrap, G).

    Multiplicities come from a multinomial draw; every resample starts from the best fit and from
    one random point, all resamples solved as one batch.
    """
    n = kappa.size
    boot = np.tile(w_best, (n_bootstrap, 1))
    if not (prob.free.size and n_bootstrap):
        return boot
    counts = rng.multinomial(n, np.full(n, 1.0 / n), size=n_bootstrap)
    extra = _random_starts(rng, prob.bounds, n_bootstrap)
    k_b = kappa[None] * counts
    usable = k_b.sum(axis=1) > 0
    k_b[~usable] = kappa
    x0 = np.vstack([np.tile(x_best, (n_bootstrap, 1)), extra])
    xs, fs = _batched_fit(prob, np.vstack([k_b, k_b]), x0)
    pick = np.where(fs[:n_bootstrap] <= fs[n_bootstrap:], 0, n_bootstrap) + np.arange(n_bootstrap)
    boot[:, prob.free] = _polish(prob, k_b, xs[pick])
    boot[~usable] = w_best
    return boot


def _significance(prob, kappa, w0, residuals, m_before, m_after, n_random, seed, rng,
                  report) -> dict:
    """Calibrate the same model to ``n_random`` sets of uniformly random azimuths (see
    :func:`calibrate_arrays`, Notes) and the analytic test against 45 degrees."""
    d, e = prob.d, prob.e
    n = kappa.size
    _, z_after, p_analytic = random_misfit_significance(np.abs(residuals), kappa)
    significance = {"random_misfit_deg": 45.0, "n_random": int(n_random), "seed": int(seed),
                    "analytic_z": float(z_after), "analytic_p_value": float(p_analytic)}
    if not n_random:
        return significance
    rand = rng.uniform(0.0, 180.0, (n_random, n))
    two = np.radians(2.0 * rand)
    c_r, s_r = np.cos(two), np.sin(two)
    w_null = np.tile(prob.base, (n_random, 1))
    if prob.free.size:
        n_s = 3  # the default weights and two random starts per data set
        x0 = np.vstack([_starts(prob, w0, n_s, rng) for _ in range(n_random)])
        xs, fs = _batched_fit(prob, kappa[None], x0, np.repeat(c_r, n_s, axis=0),
                              np.repeat(s_r, n_s, axis=0))
        best = np.argmin(fs.reshape(n_random, n_s), axis=1) + n_s * np.arange(n_random)
        w_null[:, prob.free] = _polish(prob, kappa[None], xs[best], c_r, s_r)
    pred = np.mod(np.degrees(0.5 * np.arctan2(w_null @ e, w_null @ d)), 180.0)
    pred0 = _predicted_deg(w0, d, e)
    res_after = np.abs(np.mod(pred - rand + 90.0, 180.0) - 90.0)
    res_before = np.abs(np.mod(pred0[None] - rand + 90.0, 180.0) - 90.0)
    null_after = res_after @ kappa / kappa.sum()
    null_reduction = res_before @ kappa / kappa.sum() - null_after
    report(0.95, "random azimuths done")
    significance.update(
        p_value=float((1 + np.count_nonzero(null_after <= m_after)) / (1 + n_random)),
        null_misfit_mean_deg=float(null_after.mean()),
        null_misfit_p05_deg=float(np.quantile(null_after, 0.05)),
        reduction_deg=float(m_before - m_after),
        reduction_p_value=float(
            (1 + np.count_nonzero(null_reduction >= m_before - m_after)) / (1 + n_random)),
    )
    return significance


def _constraint_flags(prob, kappa, groups, b, ci, w_best, f_best, residuals, n_bootstrap):
    """Which weights the data do not constrain, and why: (constrained (G,), {group: reasons})."""
    d, e = prob.d, prob.e
    one_minus = 1.0 - np.cos(np.radians(2.0 * residuals))
    ksum = kappa.sum()
    mean = np.dot(kappa, one_minus) / ksum
    n_eff = ksum**2 / np.dot(kappa, kappa)
    se = np.sqrt(max(np.dot(kappa, (one_minus - mean) ** 2) / ksum, 0.0) / n_eff)
    constrained = np.ones(len(groups), dtype=bool)
    flags: dict = {}
    for i in prob.free:  # loop over the few load groups
        reasons = []
        span = b[i, 1] - b[i, 0]
        if n_bootstrap and span > 0 and (ci[i, 1] - ci[i, 0]) >= 0.8 * span:
            reasons.append("confidence interval spans most of the bounds")
        rises = []
        for edge in b[i]:
            w_try = w_best.copy()
            w_try[i] = edge
            rises.append(misfit_objective(w_try, d, e, prob.cos2o, prob.sin2o, kappa)[0] - f_best)
        if span > 0 and max(rises) < se:
            reasons.append("misfit changes by less than its standard error across the bounds")
        if reasons:
            constrained[i] = False
            flags[groups[i]] = reasons
    return constrained, flags


def _indicator_columns(indicators):
    """lon, lat, azimuth, kappa arrays from an indicator table (GeoDataFrame or DataFrame)."""
    cols = indicators.columns
    if "shmax_azimuth_deg" not in cols:
        raise InputError("indicator table has no SHmax azimuths",
                         [problem("missing column", field="shmax_azimuth_deg")])
    if "geometry" in cols and getattr(indicators, "geometry", None) is not None:
        lon = np.asarray(indicators.geometry.x, dtype=float)
        lat = np.asarray(indicators.geometry.y, dtype=float)
    elif {"lon", "lat"} <= set(cols):
        lon = np.asarray(indicators["lon"], dtype=float)
        lat = np.asarray(indicators["lat"], dtype=float)
    else:
        raise InputError("indicator table has no positions",
                         [problem("need a point geometry or lon/lat columns", field="geometry")])
    az = np.asarray(indicators["shmax_azimuth_deg"], dtype=float)
    sigma = np.asarray(indicators["sigma_deg"], dtype=float) if "sigma_deg" in cols else None
    weight = np.asarray(indicators["weight"], dtype=float) if "weight" in cols else None
    return lon, lat, az, indicator_kappa(sigma, weight, n=len(az))


def calibrate(model, indicators, *, bounds=None, reference=None, n_starts=8, n_bootstrap=200,
              n_random=100, confidence=0.95, seed=0, progress=None) -> CalibrationResult:
    """Calibrate a built model's load-group weights against an indicator table.

    Parameters
    ----------
    model : stressmap.model.BuiltModel
    indicators : geopandas.GeoDataFrame
        As returned by :func:`stressmap.analyses.indicators.read_indicators` (point geometry,
        ``shmax_azimuth_deg``, ``sigma_deg``, ``weight``).
    bounds : dict, optional
        ``group -> [low, high]``; groups not named get :data:`DEFAULT_BOUNDS`. (The CLI and the
        service merge bounds from their configuration under the request's.)
    reference : str, optional
        Group held at its default weight (see :func:`calibrate_arrays`).

    Other parameters are those of :func:`calibrate_arrays`. Indicators outside the plate are left
    out (their number is in ``settings["n_outside"]``).
    """

    lon, lat, az, kappa = _indicator_columns(indicators)
    inside, unit = unit_stress_at(model, lon, lat)
    inside = np.asarray(inside, dtype=bool)
    usable = inside & np.isfinite(az) & (kappa > 0)
    if not usable.any():
        raise InputError("no usable indicator lies inside the plate",
                         [problem(f"{int((~inside).sum())} of {len(az)} indicators are outside "
                                  "the plate", field="indicators")])
    groups = list(model.groups)
    w0 = resolve_weights(model, None)
    result = calibrate_arrays(
        np.asarray(unit)[:, usable], az[usable], kappa[usable], groups=groups, default_weights=w0,
        bounds=resolve_bounds(groups, bounds), reference=reference, n_starts=n_starts,
        n_bootstrap=n_bootstrap, n_random=n_random, confidence=confidence, seed=seed,
        progress=progress,
    )
    settings = dict(result.settings, n_outside=int((~inside).sum()),
                    n_unusable=int((inside & ~usable).sum()))
    residuals = np.full(len(az), np.nan)
    residuals[usable] = result.residuals_deg
    predicted = np.full(len(az), np.nan)
    predicted[usable] = result.predicted_deg
    return CalibrationResult(**{**result.__dict__, "settings": settings,
                                "residuals_deg": residuals, "predicted_deg": predicted})
