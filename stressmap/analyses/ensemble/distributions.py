"""Distributions of load-group weights for ensembles, and the member weights drawn from them.

Weights are drawn per load group from ``uniform``, ``log-uniform`` or ``normal`` (optionally
truncated) distributions with a fixed seed. A distribution may be given for a physical parameter
that maps onto the group's weight: ``pull_fraction`` (slab pull is proportional to it),
``slab_age_myr`` (weight = ratio of :func:`stressmap.physics.forces.slab_pull_n_per_m` at the drawn
and the reference age), or ``scale`` / ``weight`` (the weight itself).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import truncnorm

from stressmap.errors import InputError, problem
from stressmap.physics.forces import slab_pull_n_per_m

__all__ = ["DEFAULT_WEIGHT_RANGE", "DISTRIBUTIONS", "PARAMETERS", "default_distributions",
           "validate_distributions", "sample_parameter", "parameter_to_weight", "sample_weights",
           "varies"]

DISTRIBUTIONS = ("uniform", "log-uniform", "normal")
PARAMETERS = ("weight", "scale", "pull_fraction", "slab_age_myr")

#: Range of every load group's weight when an ensemble is asked for without distributions: the
#: forces of the document within -50 % .. +50 %, drawn uniformly (our own default).
DEFAULT_WEIGHT_RANGE = (0.5, 1.5)


def default_distributions(groups) -> dict:
    """Every group's weight uniform over :data:`DEFAULT_WEIGHT_RANGE`.

    Examples
    --------
    >>> default_distributions(["ridge"])
    {'ridge': {'distribution': 'uniform', 'low': 0.5, 'high': 1.5}}
    """
    lo, hi = DEFAULT_WEIGHT_RANGE
    return {g: {"distribution": "uniform", "low": lo, "high": hi} for g in groups}


def varies(spec: dict) -> bool:
    """Whether a validated spec draws more than one value.

    Examples
    --------
    >>> varies({"distribution": "uniform", "low": 1.0, "high": 1.0})
    False
    >>> varies({"distribution": "normal", "mean": 1.0, "std": 0.2, "low": 0.0, "high": 2.0})
    True
    """
    if spec["distribution"] == "normal":
        return spec["std"] > 0
    return spec["high"] > spec["low"]

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
        clean = _check_spec(spec, where, problems)
        if clean is not None:
            out[group] = clean
    if problems:
        raise InputError("invalid ensemble distributions", problems)
    return out


def _check_spec(spec, where: str, problems: list) -> dict | None:
    """One group's spec normalised, or None with its problems appended."""
    if not isinstance(spec, dict):
        problems.append(problem("must be an object", field=where))
        return None
    kind = spec.get("distribution")
    if kind not in DISTRIBUTIONS:
        problems.append(problem(f"must be one of {', '.join(DISTRIBUTIONS)}",
                                field=f"{where}.distribution"))
        return None
    parameter = spec.get("parameter", "weight")
    if parameter not in PARAMETERS:
        problems.append(problem(f"must be one of {', '.join(PARAMETERS)}",
                                field=f"{where}.parameter"))
        return None
    clean = _spec_numbers(spec, kind, where, problems)
    if clean is None:
        return None
    message = _spec_bounds_problem(clean, kind)
    if message is None and clean.get("low", 0.0) < 0 and parameter != "weight":
        message = ("physical parameters cannot be negative", "low")
    if message is not None:
        problems.append(problem(message[0], field=f"{where}.{message[1]}" if message[1] else where))
        return None
    clean["parameter"] = parameter
    return clean


def _spec_numbers(spec: dict, kind: str, where: str, problems: list) -> dict | None:
    """The numeric entries of a spec as floats (NaN refused; +-inf only for the bounds)."""
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
    return None if bad else clean


def _spec_bounds_problem(clean: dict, kind: str):
    """(message, field suffix) of an inconsistent range, or None; fills the normal's defaults."""
    if kind in ("uniform", "log-uniform"):
        if not (math.isfinite(clean["low"]) and math.isfinite(clean["high"])):
            return "low and high must be finite", ""
        if clean["high"] < clean["low"]:
            return "high must not be below low", "high"
        if kind == "log-uniform" and clean["low"] <= 0:
            return "log-uniform needs low > 0", "low"
        return None
    if clean["std"] < 0:
        return "std must not be negative", "std"
    clean.setdefault("low", 0.0)
    clean.setdefault("high", math.inf)
    if clean["high"] <= clean["low"]:
        return "truncation high must exceed low", "high"
    if clean["std"] == 0 and not clean["low"] <= clean["mean"] <= clean["high"]:
        return "mean lies outside the truncation bounds", "mean"
    return None


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
