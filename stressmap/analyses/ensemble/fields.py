"""Ensembles of a built model at points or on a grid, as xarray Datasets (composition layer)."""

from __future__ import annotations

import json
import logging

import numpy as np
import xarray as xr

from stressmap.analyses.ensemble.distributions import (
    DEFAULT_WEIGHT_RANGE,
    default_distributions,
    sample_weights,
    validate_distributions,
    varies,
)
from stressmap.analyses.ensemble.execution import ensemble_statistics
from stressmap.analyses.ensemble.kernels import DEFAULT_PERCENTILES, STAT_VARIABLES
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.geo.grid import regular_grid, wrap_lon
from stressmap.geo.tensor import REGIMES
from stressmap.model import resolve_weights, unit_stress_at
from stressmap.model.plate import parse_plate

__all__ = ["chosen_distributions", "grid_coordinates", "ensemble_points", "ensemble_grid", "percentile_label",
           "flatten_percentiles"]

_log = logging.getLogger(__name__)


def grid_coordinates(bbox, spacing_km, max_nodes=None):
    """1-D longitude and latitude vectors of the regular grid over ``bbox = (W, S, E, N)``.

    The package's one grid (:func:`stressmap.geo.grid.regular_grid`): latitude step
    ``spacing_km`` along a meridian (sphere of radius 6371 km), longitude step keeping
    ``spacing_km`` at the box's middle latitude; ``E < W`` crosses the antimeridian and
    longitudes then run past 180 so that they stay increasing (CF coordinates).

    Examples
    --------
    >>> lon, lat = grid_coordinates((0, -1, 1, 1), 111.19492664455873)
    >>> lon.round(9).tolist(), lat.round(9).tolist()
    ([0.0, 1.0], [-1.0, 0.0, 1.0])
    >>> lon, lat = grid_coordinates((179.5, -0.5, -179.5, 0.5), 55.597463322279364)
    >>> lon.round(3).tolist()
    [179.5, 180.0, 180.5]
    """
    return regular_grid(bbox, spacing_km, max_nodes)


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


def chosen_distributions(model, distributions) -> tuple[dict, str]:
    """The distributions an ensemble of ``model`` draws from, and where they came from.

    The given ones; else the model document's ``ensemble.distributions``; else every load group's
    weight uniform over :data:`~stressmap.analyses.ensemble.distributions.DEFAULT_WEIGHT_RANGE`.
    An ensemble in which nothing varies is refused: every member would be the same.
    """
    given = dict(distributions or {})
    source = "given"
    if not given:
        doc = ((getattr(model, "definition", None) or {}).get("ensemble") or {})
        given, source = dict(doc.get("distributions") or {}), "model document"
    if not given:
        lo, hi = DEFAULT_WEIGHT_RANGE
        return (default_distributions(model.groups),
                f"default: no distributions were given, so every load group's weight is drawn "
                f"uniformly from {lo:g} to {hi:g}")
    specs = validate_distributions(given, model.groups)
    if not any(varies(spec) for spec in specs.values()):
        raise InputError("nothing varies in this ensemble: every member would be the same",
                         [problem("give at least one distribution with low < high (or std > 0)",
                                  field="distributions")])
    return given, source


def _weights_for(model, members, distributions, seed):
    groups = list(model.groups)
    merged = dict(distributions or {})
    needs_refs = any(isinstance(s, dict) and s.get("parameter", "weight") not in ("weight", "scale")
                     for s in merged.values())
    refs = _group_references(model) if needs_refs else {}
    return sample_weights(groups, merged, members, seed, resolve_weights(model, None), refs)


def _attrs(members, seed, distributions):
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


    lon = np.atleast_1d(np.asarray(lon, dtype=float))
    lat = np.atleast_1d(np.asarray(lat, dtype=float))
    source = "member weights given"
    if weights is None:
        distributions, source = chosen_distributions(model, distributions)
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
                    attrs=dict(_attrs(weights.shape[0], seed, distributions or {}),
                               distributions_source=source))
    return ds


def ensemble_grid(model, bbox, spacing_km, members=1000, distributions=None, seed=0,
                  percentiles=DEFAULT_PERCENTILES, weights=None, progress=None, **kwargs):
    """Ensemble statistics on a regular lon/lat grid (dims ``lat``, ``lon``; CF-1.8 attributes).

    See :func:`ensemble_points` for the parameters and variables and :func:`grid_coordinates` for
    the grid.
    """
    lon1, lat1 = grid_coordinates(bbox, spacing_km)
    lon2, lat2 = np.meshgrid(lon1, lat1)
    pts = ensemble_points(model, wrap_lon(lon2.ravel()), lat2.ravel(), members, distributions,
                          seed, percentiles, weights, progress, **kwargs)
    shape = lat2.shape
    ds = pts.drop_vars(["lon", "lat"])

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
