"""Gridded observed SHmax field: weighted axial mean of the indicators around each grid node.

At each node, every indicator within the search radius ``radius_km`` (great-circle distance on
the sphere of radius 6371 km) contributes with weight ``w = w_distance * w_indicator``:

* ``w_distance = (1 - (d / radius)^3)^3`` (tricube kernel: 1 at the node, falling smoothly to 0 at
  the radius; a common choice in local regression, Cleveland 1979, from memory);
* ``w_indicator`` = the indicator's ``weight`` (``(20 / sigma_deg)^2``, see
  :mod:`stressmap.analyses.indicators`).

The node's value is the weighted axial mean of the SHmax azimuths (doubled angles); its
``dispersion_deg`` is the weighted axial circular standard deviation, ``count`` the number of
indicators within the radius. A node keeps its mean only with ``count >= min_count`` and
``dispersion_deg <= max_dispersion_deg``; otherwise ``shmax_azimuth_deg`` is NaN and ``status``
says why. Pure numpy core (:func:`smooth_at`) with a k-d tree for the neighbour pairs; the grid
builder returns a CF-1.8 xarray Dataset (GeoJSON and netCDF: :mod:`stressmap.formats.observed`).
"""

from __future__ import annotations

import numpy as np

from stressmap.constants import CAUTION, EARTH_RADIUS_KM
from stressmap.errors import InputError, problem
from stressmap.geo import circular
from stressmap.geo.grid import regular_grid

__all__ = [
    "STATUS",
    "tricube",
    "smooth_at",
    "grid_axes",
    "observed_grid",
]

#: Node status codes (``status`` variable): why a node has or lacks a mean.
STATUS = {0: "ok", 1: "no indicators", 2: "too few indicators", 3: "too dispersed",
          4: "no defined mean"}


def _xyz(lon, lat):
    lon = np.radians(np.asarray(lon, dtype=float))
    lat = np.radians(np.asarray(lat, dtype=float))
    return np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], axis=-1)


def tricube(distance_km, radius_km):
    """Tricube distance weight: ``(1 - (d/r)^3)^3`` inside the radius, 0 outside.

    Examples
    --------
    >>> tricube(np.array([0.0, 50.0, 100.0, 150.0]), 100.0).tolist()
    [1.0, 0.669921875, 0.0, 0.0]
    """
    q = np.clip(np.asarray(distance_km, dtype=float) / radius_km, 0.0, 1.0)
    return (1.0 - q**3) ** 3


def smooth_at(node_lon, node_lat, lon, lat, shmax_deg, weight=None, *, radius_km,
              min_count=3, max_dispersion_deg=25.0) -> dict:
    """Weighted axial mean of indicator azimuths around each node (flat arrays in, dict out).

    Parameters
    ----------
    node_lon, node_lat : array_like, shape (m,)
        Nodes, degrees.
    lon, lat, shmax_deg, weight : array_like, shape (n,)
        Indicators (SHmax azimuth in degrees; NaN azimuths are ignored; weight 1 when omitted).
    radius_km : float
        Search radius, km (> 0).
    min_count : int
        Fewest indicators within the radius for a mean.
    max_dispersion_deg : float
        Largest weighted axial standard deviation (degrees) for a mean.

    Returns
    -------
    dict of (m,) arrays
        ``shmax_azimuth_deg`` (NaN where rejected), ``count``, ``dispersion_deg``,
        ``mean_resultant_length``, ``weight_sum``, ``status`` (codes in :data:`STATUS`).

    Examples
    --------
    >>> out = smooth_at([0.0, 5.0], [0.0, 0.0], [0.1, -0.1, 0.0], [0.0, 0.0, 0.0],
    ...                 [170.0, 10.0, 0.0], radius_km=100.0, min_count=3)
    >>> round(float(out["shmax_azimuth_deg"][0]), 6) % 180.0, out["count"].tolist(), out["status"].tolist()
    (0.0, [3, 0], [0, 1])
    """
    from scipy.spatial import cKDTree

    if not (np.isfinite(radius_km) and radius_km > 0):
        raise InputError("radius_km must be a positive number",
                         [problem(f"must be > 0, got {radius_km!r}", field="radius_km")])
    if not (float(min_count) == int(min_count) and int(min_count) >= 1):
        raise InputError("min_count must be a whole number >= 1",
                         [problem(f"must be an integer >= 1, got {min_count!r}", field="min_count")])
    if not (np.isfinite(max_dispersion_deg) and max_dispersion_deg > 0):
        raise InputError("max_dispersion_deg must be a positive number",
                         [problem(f"must be > 0, got {max_dispersion_deg!r}", field="max_dispersion_deg")])
    node_xyz = _xyz(node_lon, node_lat).reshape(-1, 3)
    az = np.asarray(shmax_deg, dtype=float).ravel()
    w_ind = np.ones_like(az) if weight is None else np.asarray(weight, dtype=float).ravel()
    ok = np.isfinite(az) & np.isfinite(w_ind) & (w_ind > 0)
    ind_xyz = _xyz(np.asarray(lon, float).ravel()[ok], np.asarray(lat, float).ravel()[ok]).reshape(-1, 3)
    az, w_ind = az[ok], w_ind[ok]
    m = node_xyz.shape[0]

    chord = 2.0 * np.sin(min(radius_km / EARTH_RADIUS_KM, np.pi) / 2.0)
    if az.size and m:
        # Record array of (node, indicator, chord) pairs; zero distances are kept.
        pairs = cKDTree(node_xyz).sparse_distance_matrix(cKDTree(ind_xyz), chord, output_type="ndarray")
        rows, cols = pairs["i"].astype(np.int64), pairs["j"].astype(np.int64)
        dist_km = 2.0 * EARTH_RADIUS_KM * np.arcsin(np.clip(pairs["v"] / 2.0, 0.0, 1.0))
    else:
        rows = cols = np.zeros(0, dtype=np.int64)
        dist_km = np.zeros(0)
    w = tricube(dist_km, radius_km) * w_ind[cols]
    wc, ws, ww = circular.doubled_components(az[cols], w)
    c = np.bincount(rows, wc, minlength=m)
    s = np.bincount(rows, ws, minlength=m)
    wsum = np.bincount(rows, ww, minlength=m)
    count = np.bincount(rows, minlength=m).astype(np.int64)
    mean, r = circular.axial_from_sums(c, s, wsum)
    disp = circular.std_from_resultant_deg(r)
    status = np.where(count == 0, 1, np.where(count < min_count, 2, np.where(
        ~np.isfinite(mean), 4, np.where(~(disp <= max_dispersion_deg), 3, 0))))
    return {
        "shmax_azimuth_deg": np.where(status == 0, mean, np.nan),
        "count": count,
        "dispersion_deg": np.where(count > 0, disp, np.nan),
        "mean_resultant_length": np.where(count > 0, r, np.nan),
        "weight_sum": wsum,
        "status": status.astype(np.int8),
    }


def grid_axes(bbox, spacing_km, max_nodes=1_000_000):
    """Longitudes and latitudes (1-D, degrees) of the regular grid over ``bbox = (W, S, E, N)``:
    the package's one grid, :func:`stressmap.geo.grid.regular_grid` (a box with W > E crosses the
    antimeridian; longitudes then run past 180).

    Examples
    --------
    >>> lon, lat = grid_axes((0, 0, 1, 1), 55.5)
    >>> lon.size, lat.size, float(lat[1] - lat[0]) == 55.5 / (np.pi * 6371.0 / 180.0)
    (3, 3, True)
    """
    return regular_grid(bbox, spacing_km, max_nodes)


def observed_grid(indicators, bbox, radius_km, spacing_km=None, min_count=3,
                  max_dispersion_deg=25.0, max_nodes=1_000_000):
    """The observed SHmax field on a regular grid, as a CF-1.8 xarray Dataset with dims (lat, lon).

    Parameters
    ----------
    indicators : DataFrame-like
        Columns ``lon``, ``lat``, ``shmax_azimuth_deg`` and ``weight`` (as from
        :func:`stressmap.analyses.indicators.read_indicators`).
    bbox : (W, S, E, N) degrees
    radius_km : float
        Search radius, km.
    spacing_km : float, optional
        Node spacing, km (default: half the radius).
    min_count, max_dispersion_deg :
        Acceptance rules (see :func:`smooth_at`).
    """
    import xarray as xr

    try:
        radius_km = float(radius_km)
    except (TypeError, ValueError):
        radius_km = float("nan")
    if not (np.isfinite(radius_km) and radius_km > 0):
        raise InputError("radius_km must be a positive number",
                         [problem(f"must be > 0, got {radius_km!r}", field="radius_km")])
    spacing_km = 0.5 * radius_km if spacing_km is None else float(spacing_km)
    glon, glat = grid_axes(bbox, spacing_km, max_nodes)
    lon2, lat2 = np.meshgrid(glon, glat)
    out = smooth_at(lon2.ravel(), lat2.ravel(), indicators["lon"], indicators["lat"],
                    indicators["shmax_azimuth_deg"], indicators["weight"], radius_km=float(radius_km),
                    min_count=int(min_count), max_dispersion_deg=float(max_dispersion_deg))
    shape = lat2.shape
    spec = {
        "shmax_azimuth_deg": ("degree", "Weighted axial mean SHmax azimuth, clockwise from north",
                              {"valid_min": 0.0, "valid_max": 180.0}),
        "count": ("1", "Number of indicators within the search radius", {}),
        "dispersion_deg": ("degree", "Weighted axial circular standard deviation", {}),
        "mean_resultant_length": ("1", "Weighted mean resultant length of doubled azimuths", {}),
        "weight_sum": ("1", "Sum of distance x indicator weights", {}),
        "status": ("1", "Node status", {
            "flag_values": np.array(sorted(STATUS), dtype=np.int8),
            "flag_meanings": " ".join(v.replace(" ", "_") for _, v in sorted(STATUS.items()))}),
    }
    data_vars = {}
    for name, (units, long_name, extra) in spec.items():
        attrs = {"long_name": long_name, **extra}
        if units != "1" or name in ("mean_resultant_length", "weight_sum"):
            attrs["units"] = units
        data_vars[name] = (("lat", "lon"), out[name].reshape(shape), attrs)
    ds = xr.Dataset(
        data_vars,
        coords={
            "lat": ("lat", glat, {"standard_name": "latitude", "units": "degrees_north"}),
            "lon": ("lon", glon, {"standard_name": "longitude", "units": "degrees_east"}),
        },
        attrs={
            "Conventions": "CF-1.8",
            "title": "Observed SHmax field from stress indicators",
            "source": "stressmap observed-field smoothing (tricube distance x indicator weight)",
            "radius_km": float(radius_km),
            "spacing_km": float(spacing_km),
            "min_count": int(min_count),
            "max_dispersion_deg": float(max_dispersion_deg),
            "indicator_count": int(len(indicators)),
            "caution": CAUTION,
        },
    )
    return ds
