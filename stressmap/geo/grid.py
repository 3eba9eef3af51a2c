"""THE regular lon/lat grid and THE polygon mask of the package.

Grid rule (one for every grid the package lays out: predicted fields, observed fields, ensembles,
the service's size limits):

* ``bbox = (W, S, E, N)`` in degrees, checked by :func:`stressmap.validate.bbox`: ``-90 <= S <
  N <= 90``; W, E in -180..360 (-180..180 or 0..360 longitudes); W == E is refused (a box of no
  width, not the globe); the box runs east from W to E, so W > E crosses the antimeridian.
* latitudes step ``spacing_km`` along a meridian from S; longitudes step so that nodes are
  ``spacing_km`` apart along the parallel through the middle of the box, from W. Nodes never
  pass N or E (a node closer than 1e-9 of a step to the edge counts as on it).
* longitudes increase along the axis: across the antimeridian they run past 180 (CF
  coordinates stay monotonic); :func:`wrap_lon` brings them back to [-180, 180) for look-ups.
* the node count is computed, and the limit enforced, before any array is allocated.

Polygon mask: :func:`polygon_mask` tells which points lie inside a polygon, either with edges
straight in lon/lat (GeoJSON, RFC 7946 section 3.1.1) or along great circles (plate rings),
vectorised, with the antimeridian handled the same way as the grid.

Layer: geo (numpy, shapely, :mod:`stressmap.validate`).
"""

from __future__ import annotations

import math

import numpy as np
import shapely
import xarray as xr

from stressmap import validate
from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import InputError, problem
from stressmap.geo import sphere

__all__ = [
    "mask_dataset",
    "KM_PER_DEG",
    "MIN_SPACING_KM",
    "grid_shape",
    "grid_size",
    "regular_grid",
    "wrap_lon",
    "polygon_mask",
]

#: Length of one degree of arc on the sphere of radius EARTH_RADIUS_KM, km.
KM_PER_DEG = math.pi * EARTH_RADIUS_KM / 180.0
#: Finest spacing any grid accepts, km (a metre; finer asks for more nodes than any limit).
MIN_SPACING_KM = 0.001
_EDGE_SLACK = 1e-9  # of a step: a node this close to E or N is on the edge


def _steps_deg(s: float, n: float, spacing_km: float) -> tuple[float, float]:
    dlat = spacing_km / KM_PER_DEG
    dlon = dlat / max(math.cos(math.radians(0.5 * (s + n))), 1e-3)
    return dlat, dlon


def grid_shape(bbox, spacing_km: float) -> tuple[int, int]:
    """``(n_lat, n_lon)`` of the grid over a valid ``bbox`` at ``spacing_km`` (no allocation).

    Examples
    --------
    >>> grid_shape((0.0, 0.0, 1.0, 1.0), 111.19)
    (2, 2)
    >>> grid_shape((170.0, 0.0, -170.0, 1.0), 111.19)  # across the antimeridian
    (2, 21)
    >>> grid_shape((350.0, 0.0, 10.0, 1.0), 111.19)    # the same box in 0..360 longitudes
    (2, 21)
    """
    w, s, e, n = (float(v) for v in bbox)
    dlat, dlon = _steps_deg(s, n, float(spacing_km))
    n_lat = math.floor((n - s) / dlat + _EDGE_SLACK) + 1
    n_lon = math.floor(validate.bbox_width_deg(w, e) / dlon + _EDGE_SLACK) + 1
    return int(n_lat), int(n_lon)


def grid_size(bbox, spacing_km: float) -> int:
    """Number of nodes of the grid over a valid ``bbox`` at ``spacing_km``.

    Examples
    --------
    >>> grid_size((0.0, 0.0, 1.0, 1.0), 111.19), grid_size((170.0, 0.0, -170.0, 1.0), 111.19)
    (4, 42)
    """
    n_lat, n_lon = grid_shape(bbox, spacing_km)
    return n_lat * n_lon


def regular_grid(bbox, spacing_km, max_nodes: int | None = None, *, bbox_field: str = "bbox",
                 spacing_field: str = "spacing_km") -> tuple[np.ndarray, np.ndarray]:
    """Longitudes (n_lon,) and latitudes (n_lat,) of the regular grid, degrees.

    Parameters
    ----------
    bbox : (W, S, E, N)
        Degrees; see the module docstring for the rule.
    spacing_km : float
        Node spacing along a meridian, and along the box's middle parallel, km (>= 0.001).
    max_nodes : int, optional
        Refuse grids with more nodes (checked before allocating).
    bbox_field, spacing_field : str
        Field names the problems carry (``region.bbox``, ``--spacing-km``, ...).

    Raises
    ------
    InputError
        Every problem of the box and the spacing at once, or the node count over the limit.

    Examples
    --------
    >>> lon, lat = regular_grid((0, -1, 1, 1), 111.19492664455873)
    >>> lon.round(9).tolist(), lat.round(9).tolist()
    ([0.0, 1.0], [-1.0, 0.0, 1.0])
    >>> lon, lat = regular_grid((179.5, -0.5, -179.5, 0.5), 55.597463322279364)
    >>> lon.round(3).tolist()
    [179.5, 180.0, 180.5]
    >>> regular_grid((5, 0, 5, 1), 10)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: invalid grid request
      - field bbox: west 5 and east 5 must differ: the box has no width (-180, ..., 180, ... is the whole globe)
    >>> regular_grid((0, 0, 10, 10), 1, max_nodes=1000)
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: the grid would have 1,232,096 nodes (1112 x 1108); the limit is 1,000
      - field spacing_km: 1112 x 1108 = 1,232,096 nodes exceed the limit of 1,000; use a larger spacing_km or a smaller box
    """
    probs: list = []
    box = validate.bbox(bbox if not isinstance(bbox, np.ndarray) else bbox.tolist(), bbox_field,
                        probs)
    spacing = validate.number(spacing_km, spacing_field, probs, name=spacing_field.lstrip("-"),
                              low=MIN_SPACING_KM, required=True)
    validate.raise_problems(probs, "invalid grid request")
    n_lat, n_lon = grid_shape(box, spacing)
    if max_nodes is not None and n_lat * n_lon > max_nodes:
        raise InputError(
            f"the grid would have {n_lat * n_lon:,} nodes ({n_lat} x {n_lon}); the limit is "
            f"{int(max_nodes):,}",
            [problem(f"{n_lat} x {n_lon} = {n_lat * n_lon:,} nodes exceed the limit of "
                     f"{int(max_nodes):,}; use a larger {spacing_field.lstrip('-')} or a "
                     "smaller box", field=spacing_field)])
    w, s, _, n = box
    dlat, dlon = _steps_deg(s, n, spacing)
    return w + dlon * np.arange(n_lon), s + dlat * np.arange(n_lat)


def wrap_lon(lon):
    """Longitudes brought to [-180, 180) degrees.

    Examples
    --------
    >>> wrap_lon(np.array([-180.0, 179.0, 180.0, 190.0, 360.0, 540.0])).tolist()
    [-180.0, 179.0, -180.0, -170.0, 0.0, -180.0]
    """
    return np.mod(np.asarray(lon, dtype=float) + 180.0, 360.0) - 180.0


def polygon_mask(lon, lat, polygon, *, arcs: str = "lonlat") -> np.ndarray:
    """Which points lie strictly inside ``polygon`` (boolean array of the broadcast shape).

    Parameters
    ----------
    lon, lat : array_like
        Degrees, any matching shapes (grid axes from :func:`regular_grid` broadcast as
        ``lon[None, :], lat[:, None]``); longitudes in any 360-degree frame.
    polygon
        ``arcs="lonlat"``: a shapely Polygon/MultiPolygon (holes allowed) in lon/lat degrees,
        edges straight in lon/lat as GeoJSON defines them (RFC 7946 section 3.1.1); the
        polygon may be written in -180..180 or 0..360 longitudes: a point counts as inside when
        it is inside at lon, lon - 360 or lon + 360.
        ``arcs="great_circle"``: a ring (k, 2) of lon/lat vertices joined by great-circle arcs
        (plate boundaries), not closed or closed; the ring must fit within 89 degrees of its
        centroid; points beyond 90 degrees from it are outside.

    Examples
    --------
    >>> box = shapely.box(170.0, -5.0, 190.0, 5.0)           # written in 0..360 longitudes
    >>> polygon_mask([-175.0, 175.0, 0.0], [0.0, 0.0, 0.0], box).tolist()
    [True, True, False]
    >>> ring = [(-10, 0), (10, 0), (10, 10), (-10, 10)]
    >>> polygon_mask([0.0, 0.0], [10.1, 0.1], ring, arcs="great_circle").tolist()   # arc bows north
    [True, True]
    >>> polygon_mask([0.0, 0.0], [10.1, 0.1], shapely.Polygon(ring)).tolist()
    [False, True]
    >>> polygon_mask(np.zeros((0,)), np.zeros((0,)), shapely.Polygon(ring)).shape
    (0,)
    """
    lon, lat = np.broadcast_arrays(np.asarray(lon, dtype=float), np.asarray(lat, dtype=float))
    if arcs == "lonlat":
        inside = np.zeros(lon.shape, dtype=bool)
        x0, y0, x1, y1 = polygon.bounds
        for shift in (0.0, -360.0, 360.0):
            x = lon + shift
            near = ~inside & (x >= x0) & (x <= x1) & (lat >= y0) & (lat <= y1)  # bounds first
            inside[near] = shapely.contains_xy(polygon, x[near], lat[near])
        return inside
    if arcs != "great_circle":
        raise ValueError(f"arcs must be 'lonlat' or 'great_circle', got {arcs!r}")
    ring = np.asarray(polygon, dtype=float).reshape(-1, 2)
    if len(ring) > 1 and np.allclose(ring[0], ring[-1]):
        ring = ring[:-1]
    ring_xyz = sphere.lonlat_to_xyz(ring[:, 0], ring[:, 1])
    centre = sphere.polygon_centroid_xyz(ring_xyz)
    if sphere.spherical_polygon_area(ring_xyz) < 0:  # clockwise: the region on its left is big
        centre = -centre
    if np.degrees(np.max(sphere.angle_between(ring_xyz, centre))) > 89.0:
        raise InputError("the polygon is too large for a great-circle mask",
                         [problem("the ring must lie within 89 degrees of its centre",
                                  field="polygon")])
    gx, gy = sphere.gnomonic_forward(ring_xyz, centre)
    xyz = sphere.lonlat_to_xyz(lon, lat)
    cap = np.cos(np.max(sphere.angle_between(ring_xyz, centre)))
    near = xyz @ centre >= cap - 1e-12  # points beyond the ring's cap are outside
    x, y = sphere.gnomonic_forward(xyz[near], centre)
    inside = np.zeros(lon.shape, dtype=bool)
    inside[near] = shapely.contains_xy(shapely.Polygon(np.column_stack([gx, gy])), x, y)
    return inside


def mask_dataset(ds, keep_lat_lon: np.ndarray):
    """``ds`` (an xarray Dataset on ``lat``, ``lon``) with every variable on (lat, lon) blanked
    outside ``keep`` ((n_lat, n_lon) booleans, e.g. from :func:`polygon_mask`): False for
    booleans, 0 for integers (an ``inside`` flag), "" for text, NaN otherwise; attributes kept.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"v": (("lat", "lon"), [[1.0, 2.0]]), "inside": (("lat", "lon"), [[1, 1]])},
    ...                 coords={"lat": [0.0], "lon": [0.0, 1.0]})
    >>> out = mask_dataset(ds, np.array([[True, False]]))
    >>> out["v"].values.tolist(), out["inside"].values.tolist()
    ([[1.0, nan]], [[1, 0]])
    """

    keep = xr.DataArray(np.asarray(keep_lat_lon, dtype=bool), dims=("lat", "lon"),
                        coords={"lat": ds["lat"], "lon": ds["lon"]})
    out = ds.copy()
    for name, var in ds.data_vars.items():
        if not {"lat", "lon"} <= set(var.dims):
            continue
        if var.dtype == bool:
            new = var & keep
        elif var.dtype.kind in "iu":
            new = var.where(keep, 0).astype(var.dtype)
        elif var.dtype.kind in "USO":
            new = var.where(keep, "")
        else:
            new = var.where(keep)
        out[name] = new.transpose(*var.dims)
        out[name].attrs = var.attrs
    return out
