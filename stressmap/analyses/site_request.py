"""Site-screening requests: one validated request for the CLI, the service and Python callers.

:func:`parse_request` checks a request document (a JSON-like dict) and collects every problem with
its field name. Fault traces and stress indicators arrive already parsed (the edges read GeoJSON
and files: :func:`stressmap.formats.screening.parse_request_json` does both for a JSON body).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from stressmap import validate
from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.errors import InputError, problem

__all__ = ["DEFAULTS", "ScreenRequest", "parse_request", "parse_plane_text", "parse_site_text"]

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
    traces: dict | None = None           # the "traces" of parsed faults (lines, dip, dip direction)
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
    indicators: object | None = None     # GeoDataFrame of prepare_indicators()
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
    """``doc[key]`` checked by :func:`stressmap.validate.number` (absent or null: None)."""
    return validate.number(doc.get(key, validate.MISSING), f"{where}.{key}" if where else key,
                           problems, name=key, low=lo, high=hi, low_inclusive=not lo_open,
                           integer=integer, nullable=True)


def _range(doc, key, problems, *, lo=None, hi=None, where="uncertainty"):
    """``doc[key]`` as a (low, high) pair by :func:`stressmap.validate.number_pair`."""
    return validate.number_pair(doc.get(key, validate.MISSING), f"{where}.{key}", problems,
                                name=key, low=lo, high=hi)


def parse_request(doc: dict) -> ScreenRequest:
    """Validate a screening request (JSON-like object) and collect every problem.

    Fields: ``site`` ([lon, lat], {"lon", "lat"} or "LON,LAT"), ``depth_km`` (0-40),
    ``shmax_azimuth_deg``, ``regime`` (normal / strike-slip / reverse), ``shape_ratio`` (0-1),
    ``friction`` (default 0.6), ``cohesion_mpa`` (default 0), ``density_kg_m3`` or
    ``density_profile`` ({top_km, density_kg_m3, gradient_kg_m3_per_km}), ``pore_gradient_mpa_km``
    or ``pore_pressure_mpa`` (default hydrostatic), measured ``sv_mpa``, ``shmax_mpa``,
    ``shmin_mpa``, model ``weights``, ``planes`` (list of {strike_deg, dip_deg, name} or
    "STRIKE/DIP" strings), ``faults`` (parsed faults: a mapping with ``planes`` and ``traces`` as
    from :func:`stressmap.formats.faults.faults_from_geojson`) and ``uncertainty`` ({samples,
    seed, friction_range, pore_pressure_range_mpa | pore_gradient_range_mpa_km,
    density_range_kg_m3, azimuth_sigma_deg, shape_ratio_range, margin_threshold_mpa,
    ensemble_members, ensemble_distributions, indicators (a prepared indicator table),
    indicator_radius_km}).

    Examples
    --------
    >>> r = parse_request({"site": [-15, -20], "depth_km": 3, "regime": "normal",
    ...                    "shmax_azimuth_deg": 40, "planes": ["040/60"]})
    >>> r.lon, r.depth_km, r.regime, r.plane_strike_deg.tolist()
    (-15.0, 3.0, 'normal', [40.0])
    >>> parse_request({"site": [0, 0], "depth_km": -1})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: depth_km must be > 0, got -1
    """
    if not isinstance(doc, dict):
        raise InputError("the screening request must be a JSON object",
                         [problem("expected an object", field="")])
    problems: list[dict] = []
    for key in sorted(set(doc) - _KNOWN_KEYS):
        problems.append(problem(f"unknown field {key!r}", field=key))
    fields = _site_fields(doc, problems)
    fields.update(_stress_fields(doc, problems))
    fields.update(_plane_fields(doc, problems))
    fields.update(_uncertainty_fields(doc.get("uncertainty"), problems))
    if problems:
        raise InputError(problems[0]["message"] if len(problems) == 1 else
                         f"{len(problems)} problems with the screening request", problems)
    return ScreenRequest(**fields)


def _site_fields(doc: dict, problems: list) -> dict:
    """Site, depth, orientation, friction and cohesion of a request."""
    site = doc.get("site")
    lon = lat = math.nan
    if site is None:
        problems.append(problem("required: [lon, lat] in degrees", field="site"))
    else:  # any finite longitude, wrapped to [-180, 180)
        xy = validate.position(site, "site", problems, lon_range=None, altitude=False,
                               text=True, mapping=True)
        if xy is not None:
            lon, lat = ((xy[0] + 180.0) % 360.0) - 180.0, xy[1]
    depth = _number(doc, "depth_km", problems, lo=0.0, lo_open=True, hi=40.0)
    if doc.get("depth_km") is None:  # missing or null
        problems.append(problem("required: depth below the surface in km", field="depth_km"))
    az = _number(doc, "shmax_azimuth_deg", problems, lo=-360.0, hi=360.0)
    regime = doc.get("regime")
    if regime is not None and not isinstance(regime, str):
        problems.append(problem(f"must be one of {', '.join(sc.REGIMES)}, got a "
                                f"{type(regime).__name__}", field="regime"))
        regime = None
    elif regime is not None:
        try:
            regime = sc.REGIMES[int(sc.regime_code_of(regime))]
        except InputError as exc:
            problems.extend(exc.problems)
            regime = None
    mu = _number(doc, "friction", problems, lo=0.0, lo_open=True, hi=2.0)
    coh = _number(doc, "cohesion_mpa", problems, lo=0.0)
    weights = doc.get("weights")
    if weights is not None and not isinstance(weights, dict):
        problems.append(problem("must be an object {group: weight}", field="weights"))
        weights = None
    return {
        "lon": lon, "lat": lat, "depth_km": depth,
        "shmax_azimuth_deg": None if az is None else az % 180.0, "regime": regime,
        "shape_ratio": _number(doc, "shape_ratio", problems, lo=0.0, hi=1.0),
        "friction": DEFAULTS["friction"] if mu is None else mu,
        "cohesion_mpa": DEFAULTS["cohesion_mpa"] if coh is None else coh, "weights": weights,
    }


def _stress_fields(doc: dict, problems: list) -> dict:
    """Density, pore pressure and measured magnitudes of a request."""
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
            grad = prof.get("gradient_kg_m3_per_km")
            if isinstance(grad, (list, tuple)):  # optional per layer: null means no gradient
                grad = [0.0 if g is None else g for g in grad]
            try:
                density = sc.density_profile(prof.get("top_km", 0.0), prof["density_kg_m3"],
                                             0.0 if grad is None else grad,
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
    shmax = _number(doc, "shmax_mpa", problems, lo=0.0, lo_open=True)
    shmin = _number(doc, "shmin_mpa", problems, lo=0.0, lo_open=True)
    if shmax is not None and shmin is not None and shmin > shmax:
        problems.append(problem(f"shmin_mpa {shmin} exceeds shmax_mpa {shmax}", field="shmin_mpa"))
    return {"density": density, "pore_gradient_mpa_km": pgrad, "pore_pressure_mpa": pval,
            "sv_mpa": _number(doc, "sv_mpa", problems, lo=0.0, lo_open=True),
            "shmax_mpa": shmax, "shmin_mpa": shmin}


def _plane_fields(doc: dict, problems: list) -> dict:
    """Strike/dip planes of the request's ``planes`` list, then those of its parsed ``faults``."""
    cols: dict = {"strike": [], "dip": [], "name": [], "lonlat": [], "kind": [], "feature": []}
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
        for key, value in zip(cols, (s, d, name, (math.nan, math.nan), "plane", i)):
            cols[key].append(value)
    if cols["strike"]:
        try:
            fl.validate_planes(cols["strike"], cols["dip"], field="planes")
        except InputError as exc:
            problems.extend(exc.problems)
    traces = None
    faults = doc.get("faults")
    if faults is not None:
        if not (isinstance(faults, dict) and "planes" in faults and "traces" in faults):
            problems.append(problem("expected parsed faults (planes and traces); a GeoJSON "
                                    "FeatureCollection is read by "
                                    "stressmap.formats.screening.parse_request_json",
                                    field="faults"))
        else:
            pl = faults["planes"]
            cols["strike"] += list(pl["strike_deg"])
            cols["dip"] += list(pl["dip_deg"])
            cols["name"] += list(pl["name"])
            cols["lonlat"] += list(zip(pl["lon"], pl["lat"]))
            cols["kind"] += ["fault plane"] * len(pl["strike_deg"])
            cols["feature"] += [f + 1 for f in pl["feature"]]
            traces = faults["traces"] if faults["traces"]["lines"] else None
    return {
        "plane_strike_deg": np.asarray(cols["strike"], dtype=float),
        "plane_dip_deg": np.asarray(cols["dip"], dtype=float), "plane_name": tuple(cols["name"]),
        "plane_lonlat": np.asarray(cols["lonlat"], dtype=float).reshape(-1, 2),
        "plane_kind": tuple(cols["kind"]),
        "plane_feature": np.asarray(cols["feature"], dtype=np.int64), "traces": traces,
    }


def _uncertainty_fields(unc, problems: list) -> dict:
    """The ``uncertainty`` object: sampling ranges, orientation sources, threshold."""
    unc = {} if unc is None else unc
    if not isinstance(unc, dict):
        problems.append(problem("must be an object", field="uncertainty"))
        unc = {}
    for key in sorted(set(unc) - _UNCERTAINTY_KEYS):
        problems.append(problem(f"unknown field {key!r}", field=f"uncertainty.{key}"))
    w = "uncertainty"
    out = {
        "friction_range": _range(unc, "friction_range", problems, lo=1e-3, hi=2.0),
        "pore_pressure_range_mpa": _range(unc, "pore_pressure_range_mpa", problems, lo=0.0),
        "pore_gradient_range_mpa_km": _range(unc, "pore_gradient_range_mpa_km", problems, lo=0.0),
        "density_range_kg_m3": _range(unc, "density_range_kg_m3", problems, lo=500.0, hi=5000.0),
        "azimuth_sigma_deg": _number(unc, "azimuth_sigma_deg", problems, lo=0.0, hi=90.0,
                                     where=w),
        "shape_ratio_range": _range(unc, "shape_ratio_range", problems, lo=0.0, hi=1.0),
    }
    if out["pore_pressure_range_mpa"] is not None and out["pore_gradient_range_mpa_km"] is not None:
        problems.append(problem("give pore_pressure_range_mpa or pore_gradient_range_mpa_km, "
                                "not both", field="uncertainty.pore_gradient_range_mpa_km"))
    samples = _number(unc, "samples", problems, lo=0, hi=100_000, integer=True, where=w)
    seed = _number(unc, "seed", problems, lo=0, integer=True, where=w)
    thr = _number(unc, "margin_threshold_mpa", problems, where=w)
    members = _number(unc, "ensemble_members", problems, lo=0, hi=100_000, integer=True, where=w)
    dists = unc.get("ensemble_distributions")
    if dists is not None and not isinstance(dists, dict):
        problems.append(problem("must be an object {group: distribution}",
                                field="uncertainty.ensemble_distributions"))
        dists = None
    indicators = unc.get("indicators")
    if indicators is not None and not hasattr(indicators, "geometry"):
        problems.append(problem("must be a table of stress indicators (a GeoJSON "
                                "FeatureCollection over HTTP)", field="uncertainty.indicators"))
        indicators = None
    radius = _number(unc, "indicator_radius_km", problems, lo=0.0, lo_open=True, where=w)
    if samples is None:
        wants = any(v is not None for v in (*out.values(), members, indicators))
        samples = 1000 if wants else 0
    out.update(samples=int(samples), seed=int(seed or 0),
               margin_threshold_mpa=DEFAULTS["margin_threshold_mpa"] if thr is None else thr,
               ensemble_members=int(members or 0), ensemble_distributions=dists,
               indicators=indicators, indicator_radius_km=500.0 if radius is None else radius)
    return out
