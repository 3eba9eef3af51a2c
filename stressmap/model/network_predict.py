"""Predictions over several built plates of a network: each point answered by the plate it is on.

Results are the single-plate datasets (:func:`stressmap.model.predict.predict_points`,
:func:`~stressmap.model.predict.predict_grid`) with one more variable, ``plate`` (the plate's
name, ``""`` for a point on no plate); ``inside`` is True for points on some plate. A point on
a boundary shared by two plates is answered by the first plate in the given order. Plates whose
cap (centre and angular radius from the built mesh) cannot hold a point are not asked about it.
"""

from __future__ import annotations

import numpy as np

from stressmap.errors import InputError, problem
from stressmap.model.built import BuiltModel
from stressmap.model.predict import _check_lonlat, predict_grid, predict_points

__all__ = ["predict_network_points", "predict_network_grid", "split_weights"]


def _cap(model: BuiltModel):
    """(centre unit vector, cosine of the angular radius) of a built plate, cached."""
    cache = model._cache
    if "cap" not in cache:
        lon = np.radians(np.asarray(model.fields["lon"].values, float))
        lat = np.radians(np.asarray(model.fields["lat"].values, float))
        xyz = np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], axis=1)
        c = xyz.mean(axis=0)
        n = np.linalg.norm(c)
        c = c / n if n > 1e-9 else xyz[0]
        cos_r = float(np.min(xyz @ c))
        cache["cap"] = (c, cos_r - 1e-9)
    return cache["cap"]


def split_weights(models: dict, weights: dict | None) -> dict:
    """Per-plate weights: each plate gets the entries for its own load groups.

    A group no plate has is an error (as for one plate).

    Examples
    --------
    >>> split_weights({}, None)
    {}
    """
    if weights is None:
        return {name: None for name in models}
    if not isinstance(weights, dict):
        raise InputError("weights must be an object mapping load group to a number",
                         [problem(f"got {type(weights).__name__}", field="weights")])
    groups = {name: set(m.groups) for name, m in models.items()}
    known = set().union(*groups.values()) if groups else set()
    unknown = [g for g in weights if g not in known]
    if unknown:
        raise InputError("invalid load-group weights",
                         [problem(f"unknown load group {g!r}; the network's groups are "
                                  f"{', '.join(sorted(known))}", field=f"weights.{g}") for g in unknown])
    return {name: {g: v for g, v in weights.items() if g in groups[name]} for name in models}


def _candidates(models: dict, lon, lat) -> dict:
    lo, la = np.radians(lon), np.radians(lat)
    q = np.stack([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)], axis=1)
    out = {}
    for name, model in models.items():  # the plates of a network: a dozen or so
        c, cos_r = _cap(model)
        out[name] = np.flatnonzero(q @ c >= cos_r)
    return out


def predict_network_points(models: dict, lon, lat, weights=None):
    """Predicted stress at points over the plates ``{name: BuiltModel}`` (dimension ``point``).

    The dataset of :func:`~stressmap.model.predict.predict_points` plus ``plate`` (str).
    """
    import xarray as xr

    if not models:
        raise InputError("the network has no built plate", [problem("no plate", field="plates")])
    lon, lat = _check_lonlat(lon, lat)
    per_plate = split_weights(models, weights)
    plate = np.full(lon.size, "", dtype=object)
    first = next(iter(models.values()))
    out = predict_points(first, lon[:0], lat[:0], per_plate[next(iter(models))])
    data = {k: np.full(lon.size, np.nan) if v.dtype.kind == "f" else np.zeros(lon.size, v.dtype)
            for k, v in out.data_vars.items()}
    data["regime"] = np.full(lon.size, "", dtype=object)
    data["lon"], data["lat"] = lon, lat
    for name, idx in _candidates(models, lon, lat).items():
        idx = idx[plate[idx] == ""]
        if not idx.size:
            continue
        ds = predict_points(models[name], lon[idx], lat[idx], per_plate[name])
        hit = ds["inside"].values
        rows = idx[hit]
        plate[rows] = name
        for k in data:
            if k not in ("lon", "lat"):
                data[k][rows] = ds[k].values[hit]
    data["inside"] = plate != ""
    result = xr.Dataset({k: (("point",), v, out[k].attrs) for k, v in data.items()},
                        attrs=dict(out.attrs))
    result["plate"] = (("point",), plate.astype(str).astype(object),
                       {"long_name": "plate the point lies on (empty: on no plate)"})
    result.attrs["title"] = "stressmap prediction over a plate network"
    result.attrs["weights"] = ", ".join(f"{g}={v:g}" for g, v in (weights or {}).items())
    result.attrs["plates"] = ", ".join(models)
    return result


def predict_network_grid(models: dict, bbox, spacing_km, weights=None):
    """Predicted stress on a lon/lat grid over the plates (as :func:`predict_grid`, plus ``plate``)."""
    if not models:
        raise InputError("the network has no built plate", [problem("no plate", field="plates")])
    per_plate = split_weights(models, weights)
    names = list(models)
    base = predict_grid(models[names[0]], bbox, spacing_km, per_plate[names[0]])
    glon, glat = np.meshgrid(base["lon"].values, base["lat"].values)
    qlon = (glon.ravel() + 180.0) % 360.0 - 180.0
    pts = predict_network_points(models, qlon, glat.ravel(), weights)
    shape = (base.sizes["lat"], base.sizes["lon"])
    out = base.copy()
    for name in base.data_vars:
        out[name] = (("lat", "lon"), pts[name].values.reshape(shape), base[name].attrs)
    out["plate"] = (("lat", "lon"), pts["plate"].values.reshape(shape), pts["plate"].attrs)
    out.attrs.update({k: pts.attrs[k] for k in ("title", "weights", "plates")})
    return out
