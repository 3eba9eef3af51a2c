"""Several built plates of a network as one model: every query answered by the plate it falls on.

:func:`merge_plates` joins the built plates of a network into one :class:`BuiltModel` whose mesh
is the union of the plates' meshes and whose load groups are the union of theirs (a plate's
unit field of a group it does not have is zero). A group name means the same force on every
plate (a ``ridge`` weight scales every ridge), so everything written for one plate (prediction,
comparison, calibration, ensembles, screening) runs unchanged on a network; the facets remember
their plate (``element_plate``), and :func:`plate_at` names the plate under each point.

A point on a boundary shared by two plates is answered by one of them (the first facet found);
points on no plate are flagged (``inside`` False, ``plate`` ``""``), never extrapolated.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from stressmap.errors import InputError, problem
from stressmap.model.built import BuiltModel
from stressmap.model.predict import (
    _check_lonlat,
    grid_points,
    locate,
    predict_grid,
    predict_points,
)

__all__ = ["merge_plates", "plate_at", "predict_network_points", "predict_network_grid"]

_NODE_VARS = ("lon", "lat")
_SEGMENT_VARS = ("segment_kind", "segment_group", "segment_name")


def _offsets(sizes) -> np.ndarray:
    return np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)


def merge_plates(models: dict, name: str = "network") -> BuiltModel:
    """One model from the built plates ``{plate name: BuiltModel}`` (see the module docstring).

    Examples
    --------
    >>> try:
    ...     merge_plates({})
    ... except InputError as err:
    ...     print(err.message)
    the network has no built plate
    """

    if not models:
        raise InputError("the network has no built plate", [problem("no plate is built", field="plates")])
    names = list(models)
    fields = [models[n].fields for n in names]
    groups = list(dict.fromkeys(g for m in models.values() for g in m.groups))
    n_nodes = [f.sizes["node"] for f in fields]
    n_tri = [f.sizes["triangle"] for f in fields]
    node_off = _offsets(n_nodes)
    unit = np.zeros((len(groups), sum(n_nodes), 3))
    for f, off, nn, m in zip(fields, node_off, n_nodes, models.values()):  # a dozen plates
        rows = [groups.index(g) for g in m.groups]
        unit[rows, off:off + nn] = np.asarray(f["unit_stress_mpa"].values, float)
    tri = np.concatenate([np.asarray(f["triangles"].values, np.int64) + off
                          for f, off in zip(fields, node_off)])
    seg_off = _offsets([f.sizes["segment"] for f in fields])
    prov = []
    prov_off = 0
    for f in fields:
        p = np.asarray(f["element_province"].values, np.int64)
        prov.append(np.where(p >= 0, p + prov_off, -1))
        prov_off += int(p.max()) + 1 if p.size and p.max() >= 0 else 0
    data = {
        "unit_stress_mpa": (("group", "node", "component"), unit,
                            fields[0]["unit_stress_mpa"].attrs),
        "triangles": (("triangle", "vertex"), tri, fields[0]["triangles"].attrs),
        "element_province": (("triangle",), np.concatenate(prov), fields[0]["element_province"].attrs),
        "element_stiffness": (("triangle",), np.concatenate(
            [np.asarray(f["element_stiffness"].values, float) for f in fields])),
        "element_plate": (("triangle",), np.repeat(np.arange(len(names)), n_tri),
                          {"long_name": "index of the plate of each facet (see plate_name)"}),
        "arc_segment": (("ring_vertex",), np.concatenate(
            [np.asarray(f["arc_segment"].values, np.int64) + o for f, o in zip(fields, seg_off)])),
        "ring_plate": (("ring_vertex",), np.repeat(np.arange(len(names)),
                                                   [f.sizes["ring_vertex"] for f in fields])),
        "plate_name": (("plate",), np.array(names, dtype=object)),
    }
    for var in _NODE_VARS:
        data[var] = (("node",), np.concatenate([np.asarray(f[var].values, float) for f in fields]),
                     fields[0][var].attrs)
    for var in ("ring_lon", "ring_lat"):
        data[var] = (("ring_vertex",), np.concatenate([np.asarray(f[var].values, float) for f in fields]))
    for var in _SEGMENT_VARS:
        data[var] = (("segment",), np.concatenate([np.asarray(f[var].values, dtype=object) for f in fields]))
    attrs = dict(fields[0].attrs)
    attrs["title"] = f"stressmap unit stress fields: {name} ({len(names)} plates)"
    attrs["build_time"] = max(str(f.attrs.get("build_time", "")) for f in fields)
    merged = xr.Dataset(data, coords={"group": np.array(groups, dtype=object),
                                      "component": list(fields[0]["component"].values)},
                        attrs=attrs)
    summary = {"name": name, "build_time": attrs["build_time"], "groups": groups,
               "plates": {n: {"name": m.summary.get("name", n), "build_time": m.summary.get("build_time"),
                              "mesh": m.summary.get("mesh", {})} for n, m in models.items()},
               "mesh": {"nodes": int(sum(n_nodes)), "triangles": int(sum(n_tri))}}
    definition = {"name": name, "plates": {n: m.definition for n, m in models.items()}}
    return BuiltModel(definition=definition, fields=merged, summary=summary)


def plate_at(model: BuiltModel, lon, lat, located=None) -> np.ndarray:
    """Name of the plate under each point (object array; ``""`` on no plate).

    A one-plate model answers with its own name inside it. ``located``: the answer of
    :func:`~stressmap.model.predict.locate` for these points, when the caller has it.
    """
    inside, triangle, _ = located if located is not None else locate(model, lon, lat)
    if "element_plate" in model.fields:
        names = np.asarray(model.fields["plate_name"].values, dtype=object)
        which = np.asarray(model.fields["element_plate"].values, np.int64)
        got = names[which[np.where(inside, triangle, 0)]]
    else:
        got = np.full(inside.size, str(model.summary.get("name", "")), dtype=object)
    return np.where(inside, got, "").astype(object)


_PLATE_ATTRS = {"long_name": "plate the point lies on (empty: on no plate)"}


def predict_network_points(model: BuiltModel, lon, lat, weights=None):
    """:func:`~stressmap.model.predict.predict_points` plus the ``plate`` of each point."""
    lon, lat = _check_lonlat(lon, lat)
    located = locate(model, lon, lat)   # once, for the values and for the plate column
    ds = predict_points(model, lon, lat, weights, located=located)
    ds["plate"] = (("point",), plate_at(model, lon, lat, located), _PLATE_ATTRS)
    return ds


def predict_network_grid(model: BuiltModel, bbox, spacing_km, weights=None):
    """:func:`~stressmap.model.predict.predict_grid` plus the ``plate`` of each grid node."""
    lons, lats, qlon, qlat = grid_points(bbox, spacing_km)
    located = locate(model, qlon, qlat)   # once, for the values and for the plate column
    ds = predict_grid(model, bbox, spacing_km, weights, located=located)
    ds["plate"] = (("lat", "lon"), plate_at(model, qlon, qlat, located).reshape(lats.size,
                                                                             lons.size),
                   _PLATE_ATTRS)
    return ds
