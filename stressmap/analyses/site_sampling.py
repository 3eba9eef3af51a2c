"""Monte-Carlo propagation of a site screening's uncertain inputs to every plane's margin.

Friction, pore pressure, overburden density and the shape ratio are drawn uniformly from their
ranges; the orientation comes from the members of a model ensemble
(:mod:`stressmap.analyses.ensemble`) when ensemble members or load-group distributions are given,
otherwise from a normal spread of the SHmax azimuth whose standard deviation is user-given,
derived from stress indicators near the site (:func:`indicator_spread_deg`) or 15 degrees by
default. Each plane then gets the distribution of its pore-pressure margin, summarised as its
median, the central 80 % band and the share of samples within ``margin_threshold_mpa`` of
failure (``reactivation_share``); :func:`fault_margins` gives each fault's least margin per sample
for its cumulative margin curve.
"""

from __future__ import annotations

import numpy as np
from pyproj import Geod

from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.analyses.compare import compare
from stressmap.analyses.ensemble import (
    DEFAULT_WEIGHT_RANGE,
    default_distributions,
    ensemble_points,
)
from stressmap.analyses.site_request import DEFAULTS
from stressmap.constants import EARTH_RADIUS_M
from stressmap.errors import InputError, OutsidePlateError, problem
from stressmap.geo.circular import axial_std_deg
from stressmap.geo.tensor import describe
from stressmap.model import unit_stress_at

__all__ = ["CURVE_SHARES", "MARGIN_BAND", "ensemble_orientation", "fault_margins",
           "indicator_spread_deg", "sample_screening"]

#: Percentiles bounding the central band of a plane's sampled margins (the central 80 %).
MARGIN_BAND = (10.0, 90.0)
#: Cumulative shares at which a fault's margin curve is reported (0 %, 5 %, ..., 100 %).
CURVE_SHARES = np.linspace(0.0, 1.0, 21)

#: Plane-samples evaluated at once when sampling (bounds the temporary arrays to ~100 MB).
_CHUNK_PLANE_SAMPLES = 250_000


def ensemble_orientation(model, lon: float, lat: float, members: int, seed: int = 0,
                         distributions=None) -> dict:
    """Azimuth, regime code and shape ratio of every member of a model ensemble at a site.

    Uses :func:`stressmap.analyses.ensemble.ensemble_points` for the member weights (load-group force
    magnitudes drawn from the model's or the given distributions) and the stored unit solutions
    (``stressmap.model.unit_stress_at``): member stress = weights @ unit stress.

    Returns
    -------
    dict of (M,) arrays: ``shmax_azimuth_deg``, ``regime_code``, ``shape_ratio``.
    """

    ds = ensemble_points(model, [lon], [lat], members=members, distributions=distributions,
                         seed=seed)
    weights = np.asarray(ds["member_weight"].values, dtype=float)     # (M, G)
    inside, unit = unit_stress_at(model, np.array([lon]), np.array([lat]))
    if not bool(np.asarray(inside).reshape(-1)[0]):
        raise OutsidePlateError(f"site {lon}, {lat} is outside the model's plate",
                                [problem("outside the plate outline", field="site")])
    comps = weights @ np.asarray(unit, dtype=float)[:, 0, :]            # (M, 3)
    d = describe(comps[:, 0], comps[:, 1], comps[:, 2])
    return {"shmax_azimuth_deg": d["shmax_azimuth_deg"], "regime_code": d["regime_code"],
            "shape_ratio": d["shape_ratio"]}


def indicator_spread_deg(indicators, lon: float, lat: float, radius_km: float = 500.0,
                         model=None, weights=None) -> tuple[float, str, dict]:
    """Orientation spread (degrees) derived from stress indicators near a site.

    With a model: the weighted RMS misfit between the indicators and the model's SHmax
    (:func:`stressmap.analyses.compare.compare`), i.e. how far the model's azimuth is typically off. Without
    one: the weighted axial standard deviation of the indicators' SHmax azimuths
    (:func:`stressmap.geo.circular.axial_std_deg`). Indicators within ``radius_km`` of the site
    (great circles on the 6371 km sphere) are used; when fewer than 3 are that close, all of
    them are, and the answer says so.

    Returns
    -------
    sigma_deg, description, info
    """


    ilon = indicators["lon"].to_numpy(float)
    ilat = indicators["lat"].to_numpy(float)
    _, _, dist = Geod(a=EARTH_RADIUS_M, f=0.0).inv(np.full_like(ilon, lon), np.full_like(ilat, lat),
                                                   ilon, ilat)
    near = np.asarray(dist) / 1e3 <= radius_km
    scope = f"{int(near.sum())} indicators within {radius_km:g} km"
    if near.sum() < 3:
        near = np.ones_like(near)
        scope = f"all {int(near.sum())} indicators (fewer than 3 within {radius_km:g} km)"
    chosen = indicators[near]
    if model is not None:

        table, _ = compare(model, chosen, weights)
        ok = table["inside"].to_numpy(bool) & np.isfinite(table["misfit_deg"].to_numpy(float))
        m = table["misfit_deg"].to_numpy(float)[ok]
        w = table["weight"].to_numpy(float)[ok]
        if m.size == 0:
            raise InputError("no indicator near the site can be compared with the model",
                             [problem("no usable indicator inside the plate",
                                      field="uncertainty.indicators")])
        sigma = float(np.sqrt(np.sum(w * m**2) / np.sum(w)))
        how = f"indicator-derived: weighted RMS misfit of the model against {scope}"
    else:

        az = chosen["shmax_azimuth_deg"].to_numpy(float)
        w = chosen["weight"].to_numpy(float) if "weight" in chosen else None
        sigma = float(axial_std_deg(az, w))
        how = f"indicator-derived: axial standard deviation of {scope}"
    if not np.isfinite(sigma):
        raise InputError("the indicators near the site give no usable orientation spread",
                         [problem("their azimuths cancel out", field="uncertainty.indicators")])
    sigma = min(sigma, 90.0)
    return sigma, how, {"sigma_deg": sigma, "source": how}


def sample_screening(result, model, rho_mean: float, code: int, phi: float, az: float) -> None:
    """Monte-Carlo propagation; fills ``result.samples``, ``result.uncertainty`` and the per-plane
    margin statistics of a :class:`stressmap.analyses.site_result.ScreenResult` in place.

    ``rho_mean`` is the mean overburden density above the depth (kg/m^3); ``code``, ``phi`` and
    ``az`` the central regime code, shape ratio and SHmax azimuth (degrees).
    """
    req = result.request
    n = req.samples
    rng = np.random.default_rng(req.seed)
    info: dict = {"samples": n, "seed": req.seed, "margin_band_percentiles": list(MARGIN_BAND),
                  "margin_threshold_mpa": req.margin_threshold_mpa}
    mu, sv, pp = _draw_inputs(req, result.site, rho_mean, rng, info, result.notes)
    azs, codes, phis = _draw_orientation(req, model, rng, code, phi, az, info, result.notes)
    shmax, shmin = sc.complete_magnitudes(sv, pp, mu, codes, phis, req.shmax_mpa, req.shmin_mpa)
    implied = sc.shape_ratio_of(shmax, shmin, sv)  # what the sampled magnitudes hold
    phis = np.where(np.isfinite(implied), implied, phis)
    samples = {"sv_mpa": sv, "pp_mpa": pp, "friction": mu, "shmax_azimuth_deg": azs,
               "regime_code": codes, "shape_ratio": phis, "shmax_mpa": shmax, "shmin_mpa": shmin}
    pct = [5, 50, 95]
    for key in ("sv_mpa", "pp_mpa", "shmax_mpa", "shmin_mpa"):
        info[f"{key[:-4]}_percentiles_mpa"] = np.percentile(samples[key], pct).tolist()
    info["regime_probability"] = {r: float(np.mean(codes == i)) for i, r in enumerate(sc.REGIMES)}
    planes = result.planes
    if planes["strike_deg"].size:
        stress = sc.principal_tensor_ned(shmax, shmin, sv, azs)          # (N, 3, 3)
        margin = _plane_margins(stress, pp, mu, req.cohesion_mpa, planes)
        low, median, high = np.percentile(margin, [MARGIN_BAND[0], 50.0, MARGIN_BAND[1]], axis=0)
        planes["margin_median_mpa"] = median
        planes["margin_band_low_mpa"] = low
        planes["margin_band_high_mpa"] = high
        planes["reactivation_share"] = np.mean(margin < req.margin_threshold_mpa, axis=0)
        samples["margin_mpa"] = margin
    result.samples = samples
    result.uncertainty = info


def _draw_inputs(req, site: dict, rho_mean: float, rng, info: dict, notes: list):
    """Friction, Sv and Pp of every sample, (N,) each (uniform within the given ranges)."""
    n = req.samples

    def uniform(rng_pair, center):
        if rng_pair is None:
            return np.full(n, float(center))
        return rng.uniform(rng_pair[0], rng_pair[1], n)

    mu = uniform(req.friction_range, req.friction)
    info["friction_range"] = list(req.friction_range) if req.friction_range else None
    if req.sv_mpa is not None or req.density_range_kg_m3 is None:
        sv = np.full(n, site["sv_mpa"])
        if req.density_range_kg_m3 is not None:
            notes.append("density_range_kg_m3 ignored: Sv was given")
    else:
        sv = site["sv_mpa"] * uniform(req.density_range_kg_m3, rho_mean) / rho_mean
        info["density_range_kg_m3"] = list(req.density_range_kg_m3)
        info["density_range_meaning"] = "range of the mean overburden density above the depth"
    if req.pore_pressure_range_mpa is not None:
        pp = uniform(req.pore_pressure_range_mpa, site["pp_mpa"])
        info["pore_pressure_range_mpa"] = list(req.pore_pressure_range_mpa)
    elif req.pore_gradient_range_mpa_km is not None:
        pp = uniform(req.pore_gradient_range_mpa_km, 0.0) * req.depth_km
        info["pore_gradient_range_mpa_km"] = list(req.pore_gradient_range_mpa_km)
    else:
        pp = np.full(n, site["pp_mpa"])
    if np.any(pp >= sv):
        raise InputError("sampled pore pressure reaches the vertical stress",
                         [problem("lower the pore-pressure range (or raise the density range)",
                                  field="uncertainty.pore_pressure_range_mpa")])
    return mu, sv, pp


def _draw_orientation(req, model, rng, code: int, phi: float, az: float, info: dict,
                      notes: list):
    """SHmax azimuth, regime code and shape ratio of every sample, (N,) each."""
    n = req.samples
    codes = np.full(n, code)
    phis = (np.full(n, float(phi)) if req.shape_ratio_range is None else
            rng.uniform(req.shape_ratio_range[0], req.shape_ratio_range[1], n))
    dists = req.ensemble_distributions
    model_dists = ((getattr(model, "definition", None) or {}).get("ensemble") or {}).get(
        "distributions") if model is not None else None
    use_ensemble = (model is not None and req.shmax_azimuth_deg is None and
                    (req.ensemble_members > 0 or bool(dists) or bool(model_dists)))
    if not use_ensemble:
        if req.azimuth_sigma_deg is not None:
            sigma, how = req.azimuth_sigma_deg, "user-given"
        elif req.indicators is not None:
            sigma, how, ind_info = indicator_spread_deg(
                req.indicators, req.lon, req.lat, req.indicator_radius_km,
                model if req.shmax_azimuth_deg is None else None, req.weights)
            info["indicator_spread"] = ind_info
        else:
            sigma, how = DEFAULTS["azimuth_sigma_deg"], "default"
        azs = np.mod(az + sigma * rng.standard_normal(n), 180.0)
        info["orientation_source"] = (f"normal spread of the SHmax azimuth about "
                                      f"{az:.1f} deg, sigma {sigma:g} deg ({how}); regime fixed")
        if model is not None and req.shmax_azimuth_deg is None:
            notes.append("orientation spread: the model has no ensemble distributions; "
                         "give ensemble_members or ensemble_distributions to sample the "
                         "model ensemble instead")
        info["azimuth_sigma_deg"] = sigma
        return azs, codes, phis
    if not dists and not model_dists:
        dists = default_distributions(model.groups)
        notes.append("ensemble: no force distributions given; every load group's weight "
                     "drawn uniformly from {:g} to {:g} (default)".format(*DEFAULT_WEIGHT_RANGE))
    members = req.ensemble_members or DEFAULTS["ensemble_default_members"]
    ens = ensemble_orientation(model, req.lon, req.lat, members, req.seed, dists)
    pick = rng.integers(0, ens["shmax_azimuth_deg"].size, n)
    azs = ens["shmax_azimuth_deg"][pick]
    azs = np.where(np.isfinite(azs), azs, az)
    if req.regime is None:
        ens_codes = ens["regime_code"][pick]
        codes = np.where(ens_codes >= 0, ens_codes, code)
    own_phi = req.shape_ratio is None and req.shape_ratio_range is None
    if own_phi:
        phis = np.where(np.isfinite(ens["shape_ratio"][pick]), ens["shape_ratio"][pick], phi)
    info["orientation_source"] = (
        f"model ensemble (stressmap.analyses.ensemble, {members} members, resampled): "
        "SHmax azimuth" + (", regime" if req.regime is None else "") +
        (" and shape ratio" if own_phi else "") + " per member")
    info["ensemble_members"] = members
    info["ensemble_distributions"] = dists or model_dists
    info["ensemble_azimuth_std_deg"] = float(axial_std_deg(ens["shmax_azimuth_deg"]))
    return azs, codes, phis


def _plane_margins(stress, pp, mu, cohesion_mpa: float, planes: dict) -> np.ndarray:
    """Pore-pressure margin (MPa) of every sample on every plane, (N, F), in bounded chunks."""
    n = stress.shape[0]
    normal, _, _ = fl.plane_vectors_ned(planes["strike_deg"], planes["dip_deg"])
    n_planes = planes["strike_deg"].size
    margin = np.empty((n, n_planes))                                  # (N, F)
    step = max(1, _CHUNK_PLANE_SAMPLES // n_planes)
    for lo in range(0, n, step):  # bounded memory: chunks of samples, each vectorised
        sl = slice(lo, lo + step)
        part = stress[sl, None]                                      # (n, 1, 3, 3)
        sn, tau = fl.tractions_vertical_principal(part[..., 0, 0], part[..., 1, 1],
                                                  part[..., 0, 1], part[..., 2, 2], normal)
        margin[sl] = fl.pore_pressure_margin_mpa(sn, tau, pp[sl, None], mu[sl, None],
                                                 cohesion_mpa)
    return margin


def fault_margins(result) -> dict:
    """Each input fault's least margin over its planes (trace segments), per sample.

    Returns
    -------
    dict
        ``name`` (K,), ``kind`` (K,) and ``feature`` (K,) of the faults in rank order (worst
        first), ``margin_mpa`` (N, K) the least margin of each fault in each sample, and
        ``curve_mpa`` (K, S): each fault's margin at the cumulative shares :data:`CURVE_SHARES`
        (the quantiles of its sampled least margin). Empty arrays when nothing was sampled.
    """
    pl = result.planes
    margin = (result.samples or {}).get("margin_mpa")
    if margin is None or not pl or pl["strike_deg"].size == 0:
        empty = np.zeros(0, dtype=object)
        return {"name": empty, "kind": empty, "feature": np.zeros(0, dtype=np.int64),
                "margin_mpa": np.zeros((0, 0)), "curve_mpa": np.zeros((0, CURVE_SHARES.size))}
    kind = np.where(np.asarray(pl["kind"], dtype=object) == "trace segment", "trace",
                    np.asarray(pl["kind"], dtype=object)).astype(str)
    key = np.char.add(np.char.add(kind, ":"), np.asarray(pl["feature"]).astype(str))
    _, first, group = np.unique(key, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")          # faults by their first (worst) plane
    rank_of_group = np.empty_like(order)
    rank_of_group[order] = np.arange(order.size)
    cols = np.argsort(rank_of_group[group], kind="stable")
    starts = np.searchsorted(rank_of_group[group][cols], np.arange(order.size))
    least = np.minimum.reduceat(margin[:, cols], starts, axis=1)      # (N, K)
    heads = first[order]
    return {"name": np.asarray(pl["name"], dtype=object)[heads], "kind": kind[heads],
            "feature": np.asarray(pl["feature"])[heads], "margin_mpa": least,
            "curve_mpa": np.quantile(least, CURVE_SHARES, axis=0).T}
