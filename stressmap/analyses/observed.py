"""Gridded observed SHmax field: weighted axial mean of the indicators around each grid node.

At each node, every indicator within the search radius ``radius_km`` (great-circle distance on
the sphere of radius 6371 km) contributes with weight ``w = w_distance * w_indicator``:

* ``w_distance = (1 - (d / radius)^3)^3`` (tricube kernel: 1 at the node, falling smoothly to 0 at
  the radius; a common choice in local regression, Cleveland 1979, from memory);
* ``w_indicator`` = the indicator's ``weight`` (``(20 / sigma_deg)^2``, see
  :mod:`stressmap.analyses.indicators`).

The node's value is the weighted axial mean of the SHmax azimuths (doubled angles); its
``dispersion_deg`` is the weighted axial circular standard deviation ``s``, ``count`` the number of
indicators within the radius and ``effective_count`` Kish's effective sample size
``n_eff = (sum w)^2 / sum w^2`` of the weights.

Acceptance rule (our own, from two statistics of axial data):

* ``halfwidth_deg`` -- the half-width of the 95 % confidence interval of the node's mean,
  ``t_0.975(n_eff - 1) * s / sqrt(n_eff)`` (the standard error of a concentrated circular mean,
  applied to the doubled angles and halved, with Student's t for few indicators; Mardia & Jupp
  2000, section 4.8, from memory; its coverage is checked by simulation in the tests). A node keeps its
  mean only when ``halfwidth_deg <= max_halfwidth_deg``. Default :data:`DEFAULT_MAX_HALFWIDTH_DEG`
  = 15 degrees: the finest agreement :mod:`stressmap.analyses.compare` reports (its "within 15
  degrees" share), so an accepted node can tell a 15-degree model misfit from its own noise.
* ``count >= min_count``. Default :data:`DEFAULT_MIN_COUNT` = :func:`minimum_count` of that
  half-width: the fewest equally weighted indicators whose mean, when it just meets the
  half-width limit, also rejects uniformly random orientations by the Rayleigh test of the
  doubled angles at the 1 % level (a grid tests many nodes at once): 5 indicators for 15 degrees.

Otherwise ``shmax_azimuth_deg`` is NaN and ``status`` says why. Pure numpy core
(:func:`smooth_at`) with a k-d tree for the neighbour pairs; the grid builder returns a CF-1.8
xarray Dataset (GeoJSON and netCDF: :mod:`stressmap.formats.observed`).
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from scipy.spatial import cKDTree
from scipy.stats import t as student_t

from stressmap.constants import CAUTION, EARTH_RADIUS_KM
from stressmap.errors import InputError, problem
from stressmap.geo import circular
from stressmap.geo.grid import regular_grid

__all__ = [
    "CONFIDENCE",
    "DEFAULT_MAX_HALFWIDTH_DEG",
    "DEFAULT_MIN_COUNT",
    "SIGNIFICANCE",
    "STATUS",
    "minimum_count",
    "rayleigh_p_value",
    "tricube",
    "smooth_at",
    "grid_axes",
    "observed_grid",
]

#: Node status codes (``status`` variable): why a node has or lacks a mean.
STATUS = {0: "ok", 1: "no indicators", 2: "too few indicators", 3: "mean too uncertain",
          4: "no defined mean"}
#: Level of the confidence interval of a node's mean.
CONFIDENCE = 0.95
#: Level of the Rayleigh test behind the default minimum count: 1 %, not 5 %, because a grid
#: tests every node at once and 5 % would pass one random cluster in twenty.
SIGNIFICANCE = 0.01
#: Largest accepted 95 % confidence half-width of a node's mean SHmax, degrees (see the module).
DEFAULT_MAX_HALFWIDTH_DEG = 15.0


def _t_quantile(n_eff):
    """Student-t quantile of the two-sided :data:`CONFIDENCE` level with ``n_eff - 1`` degrees of
    freedom (inf where ``n_eff <= 1``: one indicator has no spread to estimate)."""
    df = np.asarray(n_eff, dtype=float) - 1.0
    with np.errstate(invalid="ignore"):
        q = student_t.ppf(0.5 + 0.5 * CONFIDENCE, np.where(df > 0, df, 1.0))
    return np.where(df > 0, q, np.inf)


def rayleigh_p_value(r, n):
    """Rayleigh test p-value of ``n`` doubled angles with mean resultant length ``r``.

    ``p = exp(sqrt(1 + 4n + 4(n^2 - R_n^2)) - (1 + 2n))`` with ``R_n = n r`` (Zar 1999,
    Biostatistical Analysis, eq. 27.4, from memory); on the safe side (too large) for a handful
    of indicators.

    Examples
    --------
    >>> round(float(rayleigh_p_value(1.0, 3)), 4)   # three identical orientations
    0.0336
    >>> float(rayleigh_p_value(0.0, 10)) == 1.0
    True
    """
    r = np.asarray(r, dtype=float)
    n = np.asarray(n, dtype=float)
    rn = n * r
    return np.minimum(np.exp(np.sqrt(1.0 + 4.0 * n + 4.0 * (n * n - rn * rn)) - (1.0 + 2.0 * n)),
                      1.0)


def minimum_count(max_halfwidth_deg: float = DEFAULT_MAX_HALFWIDTH_DEG,
                  significance: float = SIGNIFICANCE, limit: int = 1000) -> int:
    """Fewest equally weighted indicators for which a mean that just meets the half-width limit
    also rejects uniformly random orientations (Rayleigh test of the doubled angles).

    With ``n`` indicators the limit allows a standard deviation ``s = h sqrt(n) / t(n - 1)``, i.e. a
    doubled-angle resultant ``R = exp(-2 s^2)`` (``s`` in radians; the inverse of ``s = 0.5
    sqrt(-2 ln R)``); the answer is the least ``n`` whose :func:`rayleigh_p_value` is below
    ``significance``.

    Examples
    --------
    >>> minimum_count(15.0), minimum_count(15.0, significance=0.05)
    (5, 3)
    """
    n = np.arange(2, limit + 1, dtype=float)
    s_rad = np.radians(float(max_halfwidth_deg)) * np.sqrt(n) / _t_quantile(n)
    ok = rayleigh_p_value(np.exp(-2.0 * s_rad**2), n) < significance
    if not ok.any():
        raise InputError("no indicator count makes such a wide mean significant",
                         [problem(f"max_halfwidth_deg {max_halfwidth_deg} is too wide",
                                  field="max_halfwidth_deg")])
    return int(n[np.argmax(ok)])


#: Fewest indicators within the radius for a node's mean (derived, see :func:`minimum_count`).
DEFAULT_MIN_COUNT = minimum_count()


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
              min_count=DEFAULT_MIN_COUNT, max_halfwidth_deg=DEFAULT_MAX_HALFWIDTH_DEG) -> dict:
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
        Fewest indicators within the radius for a mean (default :data:`DEFAULT_MIN_COUNT`).
    max_halfwidth_deg : float
        Largest 95 % confidence half-width of the node's mean (degrees) for a mean (default
        :data:`DEFAULT_MAX_HALFWIDTH_DEG`; ``inf``: no limit).

    Returns
    -------
    dict of (m,) arrays
        ``shmax_azimuth_deg`` (NaN where rejected), ``count``, ``effective_count``,
        ``dispersion_deg``, ``halfwidth_deg``, ``mean_resultant_length``, ``weight_sum``,
        ``status`` (codes in :data:`STATUS`).

    Examples
    --------
    >>> out = smooth_at([0.0, 5.0], [0.0, 0.0], [0.1, -0.1, 0.0], [0.0, 0.0, 0.0],
    ...                 [170.0, 10.0, 0.0], radius_km=100.0, min_count=3, max_halfwidth_deg=30.0)
    >>> round(float(out["shmax_azimuth_deg"][0]), 6) % 180.0, out["count"].tolist(), out["status"].tolist()
    (0.0, [3, 0], [0, 1])
    """

    if not (np.isfinite(radius_km) and radius_km > 0):
        raise InputError("radius_km must be a positive number",
                         [problem(f"must be > 0, got {radius_km!r}", field="radius_km")])
    if not (float(min_count) == int(min_count) and int(min_count) >= 1):
        raise InputError("min_count must be a whole number >= 1",
                         [problem(f"must be an integer >= 1, got {min_count!r}", field="min_count")])
    if not max_halfwidth_deg > 0:  # inf: no limit
        raise InputError("max_halfwidth_deg must be a positive number",
                         [problem(f"must be > 0, got {max_halfwidth_deg!r}", field="max_halfwidth_deg")])
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
    w2sum = np.bincount(rows, ww * ww, minlength=m)
    mean, r = circular.axial_from_sums(c, s, wsum)
    disp = circular.std_from_resultant_deg(r)
    with np.errstate(divide="ignore", invalid="ignore"):
        n_eff = np.where(w2sum > 0, wsum * wsum / np.where(w2sum > 0, w2sum, 1.0), 0.0)
        halfwidth = _t_quantile(n_eff) * disp / np.sqrt(n_eff)
    status = np.where(count == 0, 1, np.where(count < min_count, 2, np.where(
        ~np.isfinite(mean), 4, np.where(~(halfwidth <= max_halfwidth_deg), 3, 0))))
    return {
        "shmax_azimuth_deg": np.where(status == 0, mean, np.nan),
        "count": count,
        "effective_count": np.where(count > 0, n_eff, np.nan),
        "dispersion_deg": np.where(count > 0, disp, np.nan),
        "halfwidth_deg": np.where(count > 0, halfwidth, np.nan),
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


def observed_grid(indicators, bbox, radius_km, spacing_km=None, min_count=DEFAULT_MIN_COUNT,
                  max_halfwidth_deg=DEFAULT_MAX_HALFWIDTH_DEG, max_nodes=1_000_000):
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
    min_count, max_halfwidth_deg :
        Acceptance rules (see :func:`smooth_at`).
    """

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
                    min_count=int(min_count), max_halfwidth_deg=float(max_halfwidth_deg))
    shape = lat2.shape
    spec = {
        "shmax_azimuth_deg": ("degree", "Weighted axial mean SHmax azimuth, clockwise from north",
                              {"valid_min": 0.0, "valid_max": 180.0}),
        "count": ("1", "Number of indicators within the search radius", {}),
        "effective_count": ("1", "Effective number of indicators (Kish) of the node's weights", {}),
        "dispersion_deg": ("degree", "Weighted axial circular standard deviation", {}),
        "halfwidth_deg": ("degree", "Half-width of the 95 % confidence interval of the mean", {}),
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
            "max_halfwidth_deg": float(max_halfwidth_deg),
            "indicator_count": int(len(indicators)),
            "caution": CAUTION,
        },
    )
    return ds
