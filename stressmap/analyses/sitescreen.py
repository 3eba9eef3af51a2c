"""Site and fault screening from a request to a result (composition layer).

One request format serves the CLI and the HTTP service (:func:`parse_request` validates it and
collects every problem with its field name). :func:`screen` then

1. takes the SHmax azimuth, regime and shape ratio at the site from a built model
   (``stressmap.model.predict_points``) unless the user overrides them;
2. integrates the density profile for Sv, sets the pore pressure (hydrostatic, a gradient or a
   value) and puts the crust at frictional equilibrium in that regime with that shape ratio
   (:mod:`stressmap.analyses.screening`), keeping any measured magnitude the user gives;
3. resolves the stress on every plane -- strike/dip planes and the straight segments of GIS
   traces -- and ranks them by the pore-pressure increase that would bring them to failure
   (:mod:`stressmap.analyses.faults`);
4. optionally samples the uncertain inputs (friction, pore pressure, overburden density, and the
   orientation: the members of a model ensemble (``stressmap.analyses.ensemble``) when ensemble members
   or load-group distributions are given, otherwise a normal spread of the SHmax azimuth whose
   standard deviation is user-given, derived from stress indicators near the site
   (:func:`indicator_spread_deg`) or 15 degrees by default) and reports percentiles of each
   plane's margin and the probability that it falls below a threshold.

Results serialise to JSON (:func:`result_json`), GeoJSON (:func:`result_geojson`) and CSV
(:func:`result_csv`); each carries :data:`stressmap.constants.CAUTION`.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

import numpy as np

from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.analyses.compare import compare
from stressmap.analyses.ensemble import ensemble_points
from stressmap.analyses.indicators import indicators_from_geojson
from stressmap.constants import CAUTION, EARTH_RADIUS_M
from stressmap.errors import InputError, OutsidePlateError, problem
from stressmap.geo.circular import axial_std_deg
from stressmap.geo.tensor import describe
from stressmap.io.faults import faults_from_geojson
from stressmap.model import predict_points, unit_stress_at

__all__ = [
    "DEFAULTS",
    "ScreenRequest",
    "ScreenResult",
    "parse_request",
    "parse_plane_text",
    "parse_site_text",
    "screen",
    "orientation_from_model",
    "ensemble_orientation",
    "indicator_spread_deg",
    "result_json",
    "result_geojson",
    "result_csv",
    "PLANE_FIELDS",
]

_log = logging.getLogger(__name__)

DEFAULTS = {
    "friction": 0.6,
    "cohesion_mpa": 0.0,
    "shape_ratio": 0.5,             # used only when neither the model nor the user gives one
    "azimuth_sigma_deg": 15.0,      # default orientation spread when sampling without an ensemble
    "samples": 0,
    "seed": 0,
    "margin_threshold_mpa": 0.0,
    "ensemble_members": 0,
    "ensemble_default_members": 500,
    "max_dip_direction_misfit_deg": 60.0,
}

#: Plane-samples evaluated at once when sampling (bounds the temporary arrays to ~100 MB).
_CHUNK_PLANE_SAMPLES = 250_000

#: Per-plane fields of the JSON/CSV outputs, in order.
PLANE_FIELDS = (
    "rank", "name", "kind", "feature", "segment", "strike_deg", "dip_deg", "dip_direction_deg",
    "normal_stress_mpa", "effective_normal_stress_mpa", "shear_stress_mpa", "slip_tendency",
    "dilation_tendency", "coulomb_failure_stress_mpa", "pore_pressure_margin_mpa", "rake_deg",
    "at_or_beyond_failure",
)
_UNCERTAIN_FIELDS = ("pore_pressure_margin_p05_mpa", "pore_pressure_margin_p50_mpa",
                     "pore_pressure_margin_p95_mpa", "probability_margin_below_threshold")

_KNOWN_KEYS = {
    "site", "depth_km", "model_id", "weights", "shmax_azimuth_deg", "regime", "shape_ratio",
    "friction", "cohesion_mpa", "density_kg_m3", "density_profile", "pore_gradient_mpa_km",
    "pore_pressure_mpa", "sv_mpa", "shmax_mpa", "shmin_mpa", "planes", "faults", "uncertainty",
    "format", "picture",
}
_UNCERTAINTY_KEYS = {
    "samples", "seed", "friction_range", "pore_pressure_range_mpa", "pore_gradient_range_mpa_km",
    "density_range_kg_m3", "azimuth_sigma_deg", "shape_ratio_range", "margin_threshold_mpa",
    "ensemble_members", "ensemble_distributions", "indicators", "indicator_radius_km",
}


# ---------------------------------------------------------------------------------------------
# Request


@dataclass(frozen=True)
class ScreenRequest:
    """A validated screening request (see :func:`parse_request` for the fields)."""

    lon: float
    lat: float
    depth_km: float
    shmax_azimuth_deg: float | None = None
    regime: str | None = None
    shape_ratio: float | None = None
    friction: float = DEFAULTS["friction"]
    cohesion_mpa: float = DEFAULTS["cohesion_mpa"]
    density: sc.DensityProfile | None = None
    pore_gradient_mpa_km: float | None = None
    pore_pressure_mpa: float | None = None
    sv_mpa: float | None = None
    shmax_mpa: float | None = None
    shmin_mpa: float | None = None
    weights: dict | None = None
    plane_strike_deg: np.ndarray = field(default_factory=lambda: np.zeros(0))
    plane_dip_deg: np.ndarray = field(default_factory=lambda: np.zeros(0))
    plane_name: tuple = ()
    plane_lonlat: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)))
    plane_kind: tuple = ()                # "plane" (planes list) or "fault plane" (faults)
    plane_feature: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    traces: dict | None = None           # from fault_io.faults_from_geojson()["traces"]
    samples: int = 0
    seed: int = 0
    friction_range: tuple | None = None
    pore_pressure_range_mpa: tuple | None = None
    pore_gradient_range_mpa_km: tuple | None = None
    density_range_kg_m3: tuple | None = None
    azimuth_sigma_deg: float | None = None
    shape_ratio_range: tuple | None = None
    margin_threshold_mpa: float = 0.0
    ensemble_members: int = 0
    ensemble_distributions: dict | None = None
    indicators: object | None = None     # geopandas.GeoDataFrame from stressmap.analyses.indicators
    indicator_radius_km: float = 500.0


def parse_site_text(text: str, field_name: str = "--site") -> tuple[float, float]:
    """``"LON,LAT"`` -> (lon, lat).

    Examples
    --------
    >>> parse_site_text("-15.0, -20.5")
    (-15.0, -20.5)
    """
    parts = str(text).split(",")
    try:
        if len(parts) != 2:
            raise ValueError
        lon, lat = float(parts[0]), float(parts[1])
    except ValueError:
        raise InputError(f"cannot read site {text!r}: use LON,LAT in degrees",
                         [problem("expected two numbers LON,LAT", field=field_name)]) from None
    return lon, lat


def parse_plane_text(text: str, field_name: str = "--plane") -> tuple[float, float]:
    """``"STRIKE/DIP"`` (right-hand rule, degrees) -> (strike, dip).

    Examples
    --------
    >>> parse_plane_text("045/60")
    (45.0, 60.0)
    """
    parts = str(text).split("/")
    try:
        if len(parts) != 2:
            raise ValueError
        return float(parts[0]), float(parts[1])
    except ValueError:
        raise InputError(f"cannot read plane {text!r}: use STRIKE/DIP in degrees (right-hand "
                         "rule)", [problem("expected STRIKE/DIP", field=field_name)]) from None


def _number(doc, key, problems, *, lo=None, hi=None, lo_open=False, integer=False, where=None):
    if key not in doc or doc[key] is None:
        return None
    value = doc[key]
    name = f"{where}.{key}" if where else key
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        problems.append(problem(f"must be a number, got {value!r}", field=name))
        return None
    value = float(value)
    if not math.isfinite(value):
        problems.append(problem("must be finite", field=name))
        return None
    if integer and value != int(value):
        problems.append(problem(f"must be a whole number, got {value}", field=name))
        return None
    if lo is not None and (value <= lo if lo_open else value < lo):
        problems.append(problem(f"must be {'>' if lo_open else '>='} {lo}, got {value}",
                                field=name))
        return None
    if hi is not None and value > hi:
        problems.append(problem(f"must be <= {hi}, got {value}", field=name))
        return None
    return int(value) if integer else value


def _range(doc, key, problems, *, lo=None, hi=None, where="uncertainty"):
    if key not in doc or doc[key] is None:
        return None
    value = doc[key]
    name = f"{where}.{key}"
    try:
        a, b = (float(v) for v in value)
        if isinstance(value, (str, bytes)) or not (math.isfinite(a) and math.isfinite(b)):
            raise ValueError
    except (TypeError, ValueError):
        problems.append(problem(f"must be a pair [low, high] of numbers, got {value!r}",
                                field=name))
        return None
    if a > b:
        problems.append(problem(f"low {a} exceeds high {b}", field=name))
        return None
    if (lo is not None and a < lo) or (hi is not None and b > hi):
        problems.append(problem(f"must lie within [{lo}, {hi}], got [{a}, {b}]", field=name))
        return None
    return (a, b)


def parse_request(doc: dict) -> ScreenRequest:
    """Validate a screening request (JSON object) and collect every problem.

    Fields: ``site`` ([lon, lat], {"lon", "lat"} or "LON,LAT"), ``depth_km`` (0-40),
    ``shmax_azimuth_deg``, ``regime`` (normal / strike-slip / reverse), ``shape_ratio`` (0-1),
    ``friction`` (default 0.6), ``cohesion_mpa`` (default 0), ``density_kg_m3`` or
    ``density_profile`` ({top_km, density_kg_m3, gradient_kg_m3_per_km}), ``pore_gradient_mpa_km``
    or ``pore_pressure_mpa`` (default hydrostatic), measured ``sv_mpa``, ``shmax_mpa``,
    ``shmin_mpa``, model ``weights``, ``planes`` (list of {strike_deg, dip_deg, name} or
    "STRIKE/DIP" strings), ``faults`` (GeoJSON FeatureCollection, see
    :mod:`stressmap.io.faults`) and ``uncertainty`` ({samples, seed, friction_range,
    pore_pressure_range_mpa | pore_gradient_range_mpa_km, density_range_kg_m3,
    azimuth_sigma_deg, shape_ratio_range, margin_threshold_mpa, ensemble_members,
    ensemble_distributions}).

    Examples
    --------
    >>> r = parse_request({"site": [-15, -20], "depth_km": 3, "regime": "normal",
    ...                    "shmax_azimuth_deg": 40, "planes": ["040/60"]})
    >>> r.lon, r.depth_km, r.regime, r.plane_strike_deg.tolist()
    (-15.0, 3.0, 'normal', [40.0])
    >>> parse_request({"site": [0, 0], "depth_km": -1})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: must be > 0.0, got -1.0
    """

    if not isinstance(doc, dict):
        raise InputError("the screening request must be a JSON object",
                         [problem("expected an object", field="")])
    problems: list[dict] = []
    unknown = sorted(set(doc) - _KNOWN_KEYS)
    for key in unknown:
        problems.append(problem(f"unknown field {key!r}", field=key))

    site = doc.get("site")
    lon = lat = math.nan
    if site is None:
        problems.append(problem("required: [lon, lat] in degrees", field="site"))
    else:
        try:
            if isinstance(site, str):
                lon, lat = parse_site_text(site, "site")
            elif isinstance(site, dict):
                lon, lat = float(site["lon"]), float(site["lat"])
            else:
                lon, lat = (float(v) for v in site)
            if not (math.isfinite(lon) and math.isfinite(lat)) or abs(lat) > 90:
                raise ValueError
        except (InputError, KeyError, TypeError, ValueError):
            problems.append(problem(f"must be [lon, lat] with latitude in [-90, 90], got "
                                    f"{site!r}", field="site"))
    lon = ((lon + 180.0) % 360.0) - 180.0 if math.isfinite(lon) else lon

    depth = _number(doc, "depth_km", problems, lo=0.0, lo_open=True, hi=40.0)
    if "depth_km" not in doc:
        problems.append(problem("required: depth below the surface in km", field="depth_km"))
    az = _number(doc, "shmax_azimuth_deg", problems)
    az = None if az is None else az % 180.0
    regime = doc.get("regime")
    if regime is not None:
        try:
            regime = sc.REGIMES[int(sc.regime_code_of(regime))]
        except InputError as exc:
            problems.extend(exc.problems)
            regime = None
    phi = _number(doc, "shape_ratio", problems, lo=0.0, hi=1.0)
    mu = _number(doc, "friction", problems, lo=0.0, lo_open=True, hi=2.0)
    coh = _number(doc, "cohesion_mpa", problems, lo=0.0)

    density = None
    if doc.get("density_kg_m3") is not None and doc.get("density_profile") is not None:
        problems.append(problem("give density_kg_m3 or density_profile, not both",
                                field="density_profile"))
    elif doc.get("density_profile") is not None:
        prof = doc["density_profile"]
        if not isinstance(prof, dict) or "density_kg_m3" not in prof:
            problems.append(problem("must be an object with top_km, density_kg_m3 and optional "
                                    "gradient_kg_m3_per_km lists", field="density_profile"))
        else:
            try:
                density = sc.density_profile(prof.get("top_km", 0.0), prof["density_kg_m3"],
                                             prof.get("gradient_kg_m3_per_km", 0.0),
                                             field="density_profile")
            except InputError as exc:
                problems.extend(exc.problems)
    else:
        rho = _number(doc, "density_kg_m3", problems, lo=500.0, hi=5000.0)
        if rho is not None:
            density = sc.density_profile(0.0, rho)

    pgrad = _number(doc, "pore_gradient_mpa_km", problems, lo=0.0)
    pval = _number(doc, "pore_pressure_mpa", problems, lo=0.0)
    if pgrad is not None and pval is not None:
        problems.append(problem("give pore_gradient_mpa_km or pore_pressure_mpa, not both",
                                field="pore_pressure_mpa"))
    sv = _number(doc, "sv_mpa", problems, lo=0.0, lo_open=True)
    shmax = _number(doc, "shmax_mpa", problems, lo=0.0, lo_open=True)
    shmin = _number(doc, "shmin_mpa", problems, lo=0.0, lo_open=True)
    if shmax is not None and shmin is not None and shmin > shmax:
        problems.append(problem(f"shmin_mpa {shmin} exceeds shmax_mpa {shmax}", field="shmin_mpa"))

    weights = doc.get("weights")
    if weights is not None and not isinstance(weights, dict):
        problems.append(problem("must be an object {group: weight}", field="weights"))
        weights = None

    strikes, dips, names, lonlat, kinds, feats = [], [], [], [], [], []
    planes = doc.get("planes") or []
    if not isinstance(planes, list):
        problems.append(problem("must be a list of planes", field="planes"))
        planes = []
    for i, p in enumerate(planes, start=1):
        try:
            if isinstance(p, str):
                s, d = parse_plane_text(p, "planes")
                name = f"plane {i} ({p.strip()})"
            elif isinstance(p, dict):
                s, d = float(p["strike_deg"]), float(p["dip_deg"])
                name = str(p.get("name", f"plane {i}"))
            else:
                raise ValueError
        except (InputError, KeyError, TypeError, ValueError):
            problems.append(problem("a plane is {strike_deg, dip_deg} or \"STRIKE/DIP\"",
                                    field="planes", row=i))
            continue
        strikes.append(s)
        dips.append(d)
        names.append(name)
        lonlat.append((math.nan, math.nan))
        kinds.append("plane")
        feats.append(i)
    if strikes:
        try:
            fl.validate_planes(strikes, dips, field="planes")
        except InputError as exc:
            problems.extend(exc.problems)

    traces = None
    if doc.get("faults") is not None:
        try:
            parsed = faults_from_geojson(doc["faults"], field="faults")
        except InputError as exc:
            problems.extend({**p, "field": f"faults.{p['field']}" if p.get("field") and
                             not str(p["field"]).startswith("faults") else p.get("field")}
                            for p in exc.problems)
        else:
            pl = parsed["planes"]
            strikes += pl["strike_deg"]
            dips += pl["dip_deg"]
            names += pl["name"]
            lonlat += list(zip(pl["lon"], pl["lat"]))
            kinds += ["fault plane"] * len(pl["strike_deg"])
            feats += [f + 1 for f in pl["feature"]]
            traces = parsed["traces"] if parsed["traces"]["lines"] else None

    unc = doc.get("uncertainty") or {}
    if not isinstance(unc, dict):
        problems.append(problem("must be an object", field="uncertainty"))
        unc = {}
    for key in sorted(set(unc) - _UNCERTAINTY_KEYS):
        problems.append(problem(f"unknown field {key!r}", field=f"uncertainty.{key}"))
    w = "uncertainty"
    samples = _number(unc, "samples", problems, lo=0, hi=100_000, integer=True, where=w)
    seed = _number(unc, "seed", problems, lo=0, integer=True, where=w)
    fr = _range(unc, "friction_range", problems, lo=1e-3, hi=2.0)
    ppr = _range(unc, "pore_pressure_range_mpa", problems, lo=0.0)
    pgr = _range(unc, "pore_gradient_range_mpa_km", problems, lo=0.0)
    if ppr is not None and pgr is not None:
        problems.append(problem("give pore_pressure_range_mpa or pore_gradient_range_mpa_km, "
                                "not both", field="uncertainty.pore_gradient_range_mpa_km"))
    dr = _range(unc, "density_range_kg_m3", problems, lo=500.0, hi=5000.0)
    sig = _number(unc, "azimuth_sigma_deg", problems, lo=0.0, hi=90.0, where=w)
    phr = _range(unc, "shape_ratio_range", problems, lo=0.0, hi=1.0)
    thr = _number(unc, "margin_threshold_mpa", problems, where=w)
    members = _number(unc, "ensemble_members", problems, lo=0, hi=100_000, integer=True, where=w)
    dists = unc.get("ensemble_distributions")
    if dists is not None and not isinstance(dists, dict):
        problems.append(problem("must be an object {group: distribution}",
                                field="uncertainty.ensemble_distributions"))
        dists = None
    indicators = unc.get("indicators")
    if indicators is not None and isinstance(indicators, dict):

        try:
            indicators = indicators_from_geojson(indicators, field="uncertainty.indicators")
        except InputError as exc:
            problems.extend(exc.problems)
            indicators = None
    elif indicators is not None and not hasattr(indicators, "geometry"):
        problems.append(problem("must be a GeoJSON FeatureCollection of stress indicators",
                                field="uncertainty.indicators"))
        indicators = None
    radius = _number(unc, "indicator_radius_km", problems, lo=0.0, lo_open=True, where=w)
    if samples is None:
        wants = any(v is not None for v in (fr, ppr, pgr, dr, sig, phr, members, indicators))
        samples = 1000 if wants else 0

    if problems:
        raise InputError(problems[0]["message"] if len(problems) == 1 else
                         f"{len(problems)} problems with the screening request", problems)
    return ScreenRequest(
        lon=lon, lat=lat, depth_km=depth, shmax_azimuth_deg=az, regime=regime, shape_ratio=phi,
        friction=DEFAULTS["friction"] if mu is None else mu,
        cohesion_mpa=DEFAULTS["cohesion_mpa"] if coh is None else coh,
        density=density, pore_gradient_mpa_km=pgrad, pore_pressure_mpa=pval, sv_mpa=sv,
        shmax_mpa=shmax, shmin_mpa=shmin, weights=weights,
        plane_strike_deg=np.asarray(strikes, dtype=float),
        plane_dip_deg=np.asarray(dips, dtype=float), plane_name=tuple(names),
        plane_lonlat=np.asarray(lonlat, dtype=float).reshape(-1, 2), plane_kind=tuple(kinds),
        plane_feature=np.asarray(feats, dtype=np.int64), traces=traces,
        samples=int(samples), seed=int(seed or 0), friction_range=fr,
        pore_pressure_range_mpa=ppr, pore_gradient_range_mpa_km=pgr, density_range_kg_m3=dr,
        azimuth_sigma_deg=sig, shape_ratio_range=phr,
        margin_threshold_mpa=DEFAULTS["margin_threshold_mpa"] if thr is None else thr,
        ensemble_members=int(members or 0), ensemble_distributions=dists,
        indicators=indicators, indicator_radius_km=500.0 if radius is None else radius,
    )


# ---------------------------------------------------------------------------------------------
# Model


def orientation_from_model(model, lon: float, lat: float, weights=None) -> dict:
    """SHmax azimuth, regime and shape ratio of a built model at one site.

    Raises :class:`OutsidePlateError` when the site is outside the plate.
    """

    ds = predict_points(model, np.array([lon]), np.array([lat]), weights=weights)
    inside = bool(np.asarray(ds["inside"].values).reshape(-1)[0])
    if not inside:
        raise OutsidePlateError(f"site {lon}, {lat} is outside the model's plate",
                                [problem("outside the plate outline", field="site")])

    def val(name):
        return np.asarray(ds[name].values).reshape(-1)[0] if name in ds else None

    out = {
        "shmax_azimuth_deg": float(val("shmax_azimuth_deg")),
        "regime": str(val("regime")),
        "shape_ratio": float(val("shape_ratio")),
    }
    for extra in ("regime_index", "s_hmax_mpa", "s_hmin_mpa", "max_shear_mpa"):
        v = val(extra)
        if v is not None:
            out[extra] = float(v)
    return out


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
    from pyproj import Geod


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


# ---------------------------------------------------------------------------------------------
# Screening


@dataclass
class ScreenResult:
    """Everything a screening produced (scalars as floats, per-plane arrays ranked).

    ``planes["feature"]`` is the 1-based number of the plane in the request's ``planes`` list
    (kind "plane") or of the feature in ``faults`` (kinds "fault plane", "trace segment");
    ``planes["segment"]`` numbers a trace's segments from 1 (-1 for planes).
    """

    request: ScreenRequest
    site: dict                      # scalar results and their sources
    planes: dict                    # per-plane arrays (F,), ranked by margin
    plane_geometry: np.ndarray      # (F, 2, 2) segment end points (lon, lat); NaN for planes
    stress_ned: np.ndarray          # (3, 3)
    samples: dict | None = None     # sampled arrays (N,) and margins (N, F) when sampled
    uncertainty: dict | None = None
    notes: list = field(default_factory=list)
    model_info: dict | None = None


def _collect_planes(req: ScreenRequest, notes: list) -> dict:
    """All planes: given strike/dip planes first, then one per straight trace segment."""
    n_pl = req.plane_strike_deg.size
    strike = [req.plane_strike_deg]
    dip = [req.plane_dip_deg]
    dipdir = [np.mod(req.plane_strike_deg + 90.0, 360.0)]
    name = [np.asarray(req.plane_name, dtype=object)]
    kind = [np.asarray(req.plane_kind, dtype=object).reshape(n_pl)]
    feature = [req.plane_feature.reshape(n_pl)]
    segment = [np.full(n_pl, -1)]
    geom = [np.repeat(req.plane_lonlat[:, None, :], 2, axis=1)]
    if req.traces is not None:
        tr = req.traces
        lines = tr["lines"]
        coords = np.concatenate(lines)
        part = np.repeat(np.arange(len(lines)), [len(a) for a in lines])
        start, end, seg_part = fl.trace_segments(coords, part)
        if start.shape[0] == 0:
            raise InputError("the fault traces have no segments of non-zero length",
                             [problem("every trace repeats one vertex", field="faults")])
        az = fl.segment_azimuth_deg(start[:, 0], start[:, 1], end[:, 0], end[:, 1])
        dd_in = np.asarray(tr["dip_direction_deg"], dtype=float)[seg_part]
        s, misfit = fl.strike_from_azimuth(az, dd_in)
        dips = np.asarray(tr["dip_deg"], dtype=float)[seg_part]
        # A trace whose overall direction (first to last vertex) runs within 30 degrees of its
        # dip direction is a data error; single segments of a wiggly trace may do so and are
        # only counted in the notes (each still dips toward the side nearest the dip direction).
        limit = DEFAULTS["max_dip_direction_misfit_deg"]
        ends = np.cumsum([len(a) for a in lines])
        first_xy, last_xy = coords[ends - np.array([len(a) for a in lines])], coords[ends - 1]
        closed = np.all(first_xy == last_xy, axis=1)
        chord = fl.segment_azimuth_deg(first_xy[:, 0], first_xy[:, 1], last_xy[:, 0],
                                       last_xy[:, 1])
        tr_dd = np.asarray(tr["dip_direction_deg"], dtype=float)
        _, tr_misfit = fl.strike_from_azimuth(chord, tr_dd)
        bad = (tr_misfit > limit) & ~closed & (np.asarray(tr["dip_deg"], dtype=float) < 90.0)
        if bad.any():
            probs = [problem(f"the dip direction {tr_dd[i]:.0f} runs within "
                             f"{90 - tr_misfit[i]:.0f} degrees of the trace's own direction "
                             f"({chord[i]:.0f}); check dip_direction_deg",
                             field="dip_direction_deg", row=int(tr["feature"][i]) + 1)
                     for i in np.flatnonzero(bad)[:20]]
            raise InputError("a fault's dip direction does not fit its trace", probs)
        odd = int(np.count_nonzero((misfit > limit) & (dips < 90.0)))
        if odd:
            notes.append(f"{odd} trace segment(s) run within {90 - limit:.0f} degrees of their "
                         "fault's dip direction; each dips toward the nearer side")
        if np.isnan(dd_in).any():
            notes.append("traces without dip_direction_deg dip to the right of their digitised "
                         "direction (right-hand rule)")
        first = np.r_[True, seg_part[1:] != seg_part[:-1]]
        seg_no = np.arange(seg_part.size) - np.maximum.accumulate(
            np.where(first, np.arange(seg_part.size), 0))
        strike.append(s)
        dip.append(dips)
        dipdir.append(np.mod(s + 90.0, 360.0))
        name.append(np.asarray(tr["name"], dtype=object)[seg_part])
        kind.append(np.full(seg_part.size, "trace segment", dtype=object))
        feature.append(np.asarray(tr["feature"])[seg_part] + 1)
        segment.append(seg_no + 1)
        geom.append(np.stack([start, end], axis=1))
    return {
        "strike_deg": np.concatenate(strike).astype(float),
        "dip_deg": np.concatenate(dip).astype(float),
        "dip_direction_deg": np.concatenate(dipdir).astype(float),
        "name": np.concatenate(name),
        "kind": np.concatenate(kind),
        "feature": np.concatenate(feature).astype(np.int64),
        "segment": np.concatenate(segment).astype(np.int64),
        "geometry": np.concatenate(geom).reshape(-1, 2, 2).astype(float),
    }


def _site_magnitudes(req: ScreenRequest, regime_code: int, phi: float, sv: float, pp: float,
                     sources: dict, notes: list):
    mu = req.friction
    if req.shmax_mpa is not None and req.shmin_mpa is not None:
        implied = int(sc.regime_from_magnitudes(req.shmax_mpa, req.shmin_mpa, sv))
        if req.regime is not None and sc.REGIMES[implied] != req.regime:
            raise InputError(
                f"shmax_mpa {req.shmax_mpa} and shmin_mpa {req.shmin_mpa} with Sv {sv:.1f} MPa "
                f"imply a {sc.REGIMES[implied]} regime, not {req.regime}",
                [problem("contradicts the measured magnitudes", field="regime")])
        if implied != regime_code:
            notes.append(f"regime {sc.REGIMES[implied]} follows from the measured magnitudes")
            sources["regime"] = "measured magnitudes"
        regime_code = implied
    elif req.shmin_mpa is not None or req.shmax_mpa is not None:
        key, value = ("shmin_mpa", req.shmin_mpa) if req.shmin_mpa is not None else \
            ("shmax_mpa", req.shmax_mpa)
        b = sc.regime_bounds(sv, pp, mu, regime_code)
        name = "shmin" if key == "shmin_mpa" else "shmax"
        lo, hi = float(b[f"{name}_lower_mpa"]), float(b[f"{name}_upper_mpa"])
        side = (regime_code == 0 and value > sv) or (regime_code == 2 and value < sv) or \
            (regime_code == 1 and ((name == "shmin" and value > sv) or
                                   (name == "shmax" and value < sv)))
        if side:
            raise InputError(f"{key} {value} MPa is on the wrong side of Sv {sv:.1f} MPa for a "
                             f"{sc.REGIMES[regime_code]} regime",
                             [problem("contradicts the regime", field=key)])
        if not lo - 1e-9 <= value <= hi + 1e-9:
            notes.append(f"{key} {value} MPa lies outside the frictional-limit range "
                         f"[{lo:.1f}, {hi:.1f}] MPa for friction {mu}")
    shmax, shmin = sc.complete_magnitudes(sv, pp, mu, regime_code, phi, req.shmax_mpa,
                                          req.shmin_mpa)
    shmax, shmin = float(shmax), float(shmin)
    if shmin > shmax:
        raise InputError(f"the completed Shmin {shmin:.1f} MPa exceeds SHmax {shmax:.1f} MPa; "
                         "check the measured magnitude against the regime",
                         [problem("inconsistent magnitudes",
                                  field="shmin_mpa" if req.shmin_mpa is not None else "shmax_mpa")])
    if shmin <= pp:
        raise InputError(f"Shmin {shmin:.1f} MPa does not exceed the pore pressure {pp:.1f} MPa "
                         "(negative effective stress: the rock would be hydraulically fractured)",
                         [problem("the least stress must exceed the pore pressure",
                                  field="shmin_mpa" if req.shmin_mpa is not None else
                                  "shmax_mpa")])
    ratio = float(sc.frictional_ratio(shmax, shmin, sv, pp))
    limit = float(sc.frictional_limit_ratio(mu))
    if ratio > limit * (1 + 1e-9):
        notes.append(f"the magnitudes exceed the frictional limit ((S1-Pp)/(S3-Pp) = {ratio:.2f} "
                     f"> {limit:.2f} for friction {mu}): well-oriented faults would be slipping")
    for key, given in (("shmax_mpa", req.shmax_mpa), ("shmin_mpa", req.shmin_mpa)):
        if given is not None:
            sources[key] = "user"
        elif req.shmax_mpa is None and req.shmin_mpa is None:
            sources[key] = "frictional equilibrium with the shape ratio"
        else:
            sources[key] = "completed from the measured magnitude (frictional limit / shape ratio)"
    return regime_code, shmax, shmin


def screen(req: ScreenRequest, model=None, model_info: dict | None = None) -> ScreenResult:
    """Run a screening (see the module docstring). ``model`` is a BuiltModel or None."""
    notes: list[str] = []
    sources: dict = {}
    orient = None
    if model is not None and (req.shmax_azimuth_deg is None or req.regime is None or
                              req.shape_ratio is None):
        orient = orientation_from_model(model, req.lon, req.lat, req.weights)
    missing = []
    if req.shmax_azimuth_deg is not None:
        az, sources["shmax_azimuth_deg"] = req.shmax_azimuth_deg, "user"
    elif orient is not None and math.isfinite(orient["shmax_azimuth_deg"]):
        az, sources["shmax_azimuth_deg"] = orient["shmax_azimuth_deg"], "model"
    else:
        az = math.nan
        missing.append(problem("give --shmax-azimuth-deg (shmax_azimuth_deg) or a model" if
                               orient is None else "the model has no SHmax direction here "
                               "(isotropic); give shmax_azimuth_deg", field="shmax_azimuth_deg"))
    if req.regime is not None:
        regime, sources["regime"] = req.regime, "user"
    elif orient is not None and orient["regime"] in sc.REGIMES:
        regime, sources["regime"] = orient["regime"], "model"
    elif req.shmax_mpa is not None and req.shmin_mpa is not None:
        regime, sources["regime"] = None, "measured magnitudes"
    else:
        regime = None
        missing.append(problem("give --regime (regime) or a model" if orient is None else
                               "the model gives no regime here; give regime", field="regime"))
    if missing:
        raise InputError("the site's stress orientation is not known" if len(missing) > 1 else
                         missing[0]["message"], missing)
    if req.shape_ratio is not None:
        phi, sources["shape_ratio"] = req.shape_ratio, "user"
    elif orient is not None and math.isfinite(orient["shape_ratio"]):
        phi, sources["shape_ratio"] = orient["shape_ratio"], "model"
    else:
        phi, sources["shape_ratio"] = DEFAULTS["shape_ratio"], "default"
        notes.append(f"shape ratio {DEFAULTS['shape_ratio']} assumed (none from the model or "
                     "the user)")

    profile = req.density if req.density is not None else sc.density_profile()
    if req.sv_mpa is not None:
        sv, sources["sv_mpa"] = req.sv_mpa, "user"
    else:
        sv = float(sc.vertical_stress_mpa(req.depth_km, profile))
        sources["sv_mpa"] = "integrated density profile"
    rho_mean = float(sc.mean_density_kg_m3(req.depth_km, profile))
    if req.pore_pressure_mpa is not None:
        pp, sources["pp_mpa"] = req.pore_pressure_mpa, "user"
    elif req.pore_gradient_mpa_km is not None:
        pp = float(sc.pore_pressure_mpa(req.depth_km, req.pore_gradient_mpa_km))
        sources["pp_mpa"] = "user gradient"
    else:
        pp, sources["pp_mpa"] = float(sc.pore_pressure_mpa(req.depth_km)), "hydrostatic"
    if pp >= sv:
        raise InputError(f"pore pressure {pp:.1f} MPa reaches the vertical stress {sv:.1f} MPa",
                         [problem("pore pressure must stay below Sv", field="pore_pressure_mpa"
                                  if req.pore_pressure_mpa is not None else "pore_gradient_mpa_km")])

    code = -1 if regime is None else int(sc.regime_code_of(regime))
    if code < 0:  # regime only from the measured magnitudes
        code = int(sc.regime_from_magnitudes(req.shmax_mpa, req.shmin_mpa, sv))
    code, shmax, shmin = _site_magnitudes(req, code, phi, sv, pp, sources, notes)
    mu = req.friction
    bounds = {k: float(v) for k, v in sc.regime_bounds(sv, pp, mu, code).items()}
    stress = sc.principal_tensor_ned(shmax, shmin, sv, az)

    site = {
        "lon": req.lon, "lat": req.lat, "depth_km": req.depth_km,
        "sv_mpa": sv, "pp_mpa": pp, "shmax_mpa": shmax, "shmin_mpa": shmin, **bounds,
        "shmax_azimuth_deg": float(az), "regime": sc.REGIMES[code], "shape_ratio": float(phi),
        "friction": mu, "cohesion_mpa": req.cohesion_mpa,
        "frictional_limit_ratio": float(sc.frictional_limit_ratio(mu)),
        "stress_polygon_mpa": sc.stress_polygon(sv, pp, mu).tolist(),
        "mean_density_kg_m3": rho_mean, "density_profile": profile.to_dict(),
        "sources": sources,
    }
    if orient is not None:
        site["model_orientation"] = orient

    planes = _collect_planes(req, notes)
    if planes["strike_deg"].size:
        tend = fl.fault_tendencies(stress, pp, planes["strike_deg"], planes["dip_deg"], mu,
                                   req.cohesion_mpa)
        planes.update(tend)
        planes["at_or_beyond_failure"] = planes["pore_pressure_margin_mpa"] <= 0.0
    result = ScreenResult(req, site, planes, planes.pop("geometry"), stress, notes=notes,
                          model_info=model_info)
    if model is None and (req.ensemble_members or req.ensemble_distributions):
        notes.append("ensemble options ignored: no model was given")
    if req.samples > 0:
        _sample(result, model, profile, rho_mean, code, phi, az, orient)
    order = fl.rank_order(result.planes.get("pore_pressure_margin_mpa", np.zeros(0)))
    result.planes = {k: np.asarray(v)[order] for k, v in result.planes.items()}
    result.planes["rank"] = np.arange(1, order.size + 1)
    result.plane_geometry = result.plane_geometry[order]
    if result.samples is not None and "margin_mpa" in result.samples:
        result.samples["margin_mpa"] = result.samples["margin_mpa"][:, order]
    return result


def _sample(result: ScreenResult, model, profile, rho_mean, code, phi, az, orient) -> None:
    """Monte-Carlo propagation; fills result.samples, result.uncertainty and per-plane stats."""
    req = result.request
    n = req.samples
    rng = np.random.default_rng(req.seed)
    site = result.site
    info: dict = {"samples": n, "seed": req.seed, "percentiles": [5, 50, 95],
                  "margin_threshold_mpa": req.margin_threshold_mpa}

    def uniform(rng_pair, center):
        if rng_pair is None:
            return np.full(n, float(center))
        return rng.uniform(rng_pair[0], rng_pair[1], n)

    mu = uniform(req.friction_range, req.friction)
    info["friction_range"] = list(req.friction_range) if req.friction_range else None
    if req.sv_mpa is not None or req.density_range_kg_m3 is None:
        sv = np.full(n, site["sv_mpa"])
        if req.density_range_kg_m3 is not None:
            result.notes.append("density_range_kg_m3 ignored: Sv was given")
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

    codes = np.full(n, code)
    phis = uniform(req.shape_ratio_range, phi)
    dists = req.ensemble_distributions
    model_dists = ((getattr(model, "definition", None) or {}).get("ensemble") or {}).get(
        "distributions") if model is not None else None
    use_ensemble = (model is not None and req.shmax_azimuth_deg is None and
                    (req.ensemble_members > 0 or bool(dists) or bool(model_dists)))
    if use_ensemble and not dists and not model_dists:
        dists = {g: {"distribution": "uniform", "low": 0.5, "high": 1.5} for g in model.groups}
        result.notes.append("ensemble: no force distributions given; every load group's weight "
                            "drawn uniformly from 0.5 to 1.5 (default)")
    if use_ensemble:
        members = req.ensemble_members or DEFAULTS["ensemble_default_members"]
        ens = ensemble_orientation(model, req.lon, req.lat, members, req.seed, dists)
        pick = rng.integers(0, ens["shmax_azimuth_deg"].size, n)
        azs = ens["shmax_azimuth_deg"][pick]
        azs = np.where(np.isfinite(azs), azs, az)
        if req.regime is None:
            ens_codes = ens["regime_code"][pick]
            codes = np.where(ens_codes >= 0, ens_codes, code)
        if req.shape_ratio is None and req.shape_ratio_range is None:
            phis = np.where(np.isfinite(ens["shape_ratio"][pick]), ens["shape_ratio"][pick], phi)
        info["orientation_source"] = (
            f"model ensemble (stressmap.analyses.ensemble, {members} members, resampled): "
            "SHmax azimuth" + (", regime" if req.regime is None else "") +
            (" and shape ratio" if req.shape_ratio is None and req.shape_ratio_range is None
             else "") + " per member")
        info["ensemble_members"] = members
        info["ensemble_distributions"] = dists or model_dists

        info["ensemble_azimuth_std_deg"] = float(axial_std_deg(ens["shmax_azimuth_deg"]))
    else:
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
            result.notes.append("orientation spread: the model has no ensemble distributions; "
                                "give ensemble_members or ensemble_distributions to sample the "
                                "model ensemble instead")
        info["azimuth_sigma_deg"] = sigma
    shmax, shmin = sc.complete_magnitudes(sv, pp, mu, codes, phis, req.shmax_mpa, req.shmin_mpa)
    samples = {"sv_mpa": sv, "pp_mpa": pp, "friction": mu, "shmax_azimuth_deg": azs,
               "regime_code": codes, "shape_ratio": phis, "shmax_mpa": shmax, "shmin_mpa": shmin}
    pct = [5, 50, 95]
    for key in ("sv_mpa", "pp_mpa", "shmax_mpa", "shmin_mpa"):
        info[f"{key[:-4]}_percentiles_mpa"] = np.percentile(samples[key], pct).tolist()
    info["regime_probability"] = {r: float(np.mean(codes == i)) for i, r in enumerate(sc.REGIMES)}
    planes = result.planes
    if planes["strike_deg"].size:
        stress = sc.principal_tensor_ned(shmax, shmin, sv, azs)          # (N, 3, 3)
        normal, _, _ = fl.plane_vectors_ned(planes["strike_deg"], planes["dip_deg"])
        n_planes = planes["strike_deg"].size
        margin = np.empty((n, n_planes))                                  # (N, F)
        step = max(1, _CHUNK_PLANE_SAMPLES // n_planes)  # bounded memory: chunks of samples
        for lo in range(0, n, step):
            sl = slice(lo, lo + step)
            part = stress[sl, None]                                      # (n, 1, 3, 3)
            sn, tau = fl.tractions_vertical_principal(part[..., 0, 0], part[..., 1, 1],
                                                      part[..., 0, 1], part[..., 2, 2], normal)
            margin[sl] = fl.pore_pressure_margin_mpa(sn, tau, pp[sl, None], mu[sl, None],
                                                     req.cohesion_mpa)
        p = np.percentile(margin, pct, axis=0)
        planes["pore_pressure_margin_p05_mpa"] = p[0]
        planes["pore_pressure_margin_p50_mpa"] = p[1]
        planes["pore_pressure_margin_p95_mpa"] = p[2]
        planes["probability_margin_below_threshold"] = np.mean(
            margin < req.margin_threshold_mpa, axis=0)
        samples["margin_mpa"] = margin
    result.samples = samples
    result.uncertainty = info


# ---------------------------------------------------------------------------------------------
# Serialisation


def _plain(v):
    if isinstance(v, (np.floating, float)):
        v = float(v)
        return v if math.isfinite(v) else None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, np.ndarray):
        return [_plain(x) for x in v.tolist()]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return v


def _plane_records(result: ScreenResult) -> list[dict]:
    import pandas as pd

    fields = [f for f in PLANE_FIELDS + _UNCERTAIN_FIELDS if f in result.planes]
    if not result.planes or result.planes["strike_deg"].size == 0:
        return []
    frame = pd.DataFrame({f: result.planes[f] for f in fields})
    return [_plain(r) for r in frame.to_dict("records")]


def _fault_summary(result: ScreenResult) -> list[dict]:
    """One entry per input fault or plane: its least margin over its segments, ranked."""
    import pandas as pd

    pl = result.planes
    if not pl or pl["strike_deg"].size == 0:
        return []
    frame = pd.DataFrame({k: pl[k] for k in ("kind", "feature", "name", "rank",
                                             "pore_pressure_margin_mpa", "slip_tendency")})
    frame["kind"] = frame["kind"].replace({"trace segment": "trace"})
    grouped = frame.groupby(["kind", "feature"], sort=False)
    out = grouped.agg(name=("name", "first"), segments=("rank", "size"),
                      least_margin_mpa=("pore_pressure_margin_mpa", "min"),
                      max_slip_tendency=("slip_tendency", "max"),
                      worst_rank=("rank", "min")).reset_index()
    if "probability_margin_below_threshold" in pl:
        frame["p"] = pl["probability_margin_below_threshold"]
        out["max_probability_margin_below_threshold"] = frame.groupby(
            ["kind", "feature"], sort=False)["p"].max().to_numpy()
    out = out.sort_values("worst_rank", kind="stable")
    return [_plain(r) for r in out.to_dict("records")]


def result_json(result: ScreenResult) -> dict:
    """The JSON document of a screening (the CLI's ``--json`` and the service's answer)."""
    site = dict(result.site)
    out = {"caution": CAUTION}
    out["site"] = {"lon": site.pop("lon"), "lat": site.pop("lat")}
    out.update(site)
    if result.model_info:
        out["model"] = result.model_info
    out["planes"] = _plane_records(result)
    out["faults"] = _fault_summary(result)
    out["uncertainty"] = result.uncertainty
    out["notes"] = list(result.notes)
    out["conventions"] = ("stress compression positive, MPa; effective stress = total - Pp; "
                          "strike/dip by the right-hand rule (dip direction = strike + 90); "
                          "azimuths clockwise from north; rake of the hanging wall's slip; "
                          "pore_pressure_margin_mpa = pore-pressure increase to Coulomb failure")
    return _plain(out)


def result_geojson(result: ScreenResult) -> dict:
    """RFC 7946 FeatureCollection: one LineString per trace segment, one Point per plane.

    Planes without a location sit at the site. The site's scalar results and the caution are
    foreign members at the top level.
    """
    records = _plane_records(result)
    geom = result.plane_geometry
    features = []
    for rec, seg in zip(records, geom):  # serialisation of F records (no numerics here)
        if rec["kind"] == "trace segment":
            g = {"type": "LineString", "coordinates": seg.tolist()}
        else:
            xy = seg[0] if np.isfinite(seg[0]).all() else [result.site["lon"], result.site["lat"]]
            g = {"type": "Point", "coordinates": [float(xy[0]), float(xy[1])]}
        features.append({"type": "Feature", "properties": rec, "geometry": g})
    doc = result_json(result)
    doc.pop("planes")
    doc.pop("faults")
    return {"type": "FeatureCollection", "features": features, **doc}


def result_csv(result: ScreenResult) -> str:
    """Per-plane table as CSV with the site results and the caution as '# key: value' lines."""
    import io

    import pandas as pd

    doc = result_json(result)
    lines = [f"# caution: {doc['caution']}"]
    for key in ("site", "depth_km", "sv_mpa", "pp_mpa", "shmax_mpa", "shmax_lower_mpa",
                "shmax_upper_mpa", "shmin_mpa", "shmin_lower_mpa", "shmin_upper_mpa",
                "shmax_azimuth_deg", "regime", "shape_ratio", "friction", "cohesion_mpa"):
        lines.append(f"# {key}: {doc[key]}")
    for note in doc["notes"]:
        lines.append(f"# note: {note}")
    buf = io.StringIO()
    fields = [f for f in PLANE_FIELDS + _UNCERTAIN_FIELDS if f in result.planes]
    frame = pd.DataFrame(doc["planes"], columns=fields)
    if "name" in frame:  # keep spreadsheet programs from evaluating names as formulas
        frame["name"] = [("'" + n) if isinstance(n, str) and n[:1] in "=+-@\t\r" else n
                         for n in frame["name"]]
    frame.to_csv(buf, index=False)
    return "\n".join(lines) + "\n" + buf.getvalue()
