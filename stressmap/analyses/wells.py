"""Reservoir and well screening from one request: depth profiles, tendency nets, stress paths,
deviated-well stability and SHmax from breakout widths (composition layer).

A request is a JSON object: the site fields of the site screening (``site``, ``depth_km``,
``regime``, ``shmax_azimuth_deg``, ``shape_ratio``, ``friction``, density, pore pressure, measured
``sv_mpa``/``shmax_mpa``/``shmin_mpa``, ``weights``, ``planes``, ``faults``, ``uncertainty``; see
:func:`stressmap.analyses.sitescreen.parse_request`) plus the members of this module:

- ``units``: ``si`` (MPa, km, MPa/km; default) or ``oilfield`` (psi, ft, psi/ft, ppg);
- ``rock``: ``{ucs_mpa, internal_friction, tensile_mpa, poisson}`` (wellbore stability and the
  breakout constraint);
- ``well``: ``{azimuth_deg, inclination_deg, mud_pressure_mpa}`` (one well);
- ``window``: ``{step_deg, max_breakout_width_deg}`` (the chart over all orientations);
- ``breakout``: ``{width_deg, mud_pressure_mpa}``: an observed breakout width in a vertical well
  that bounds SHmax at the site (:func:`stressmap.analyses.wellbore.shmax_from_breakout_mpa`);
  the site then uses that SHmax as a measured value;
- ``profile``: ``{max_depth_km, step_km | count}``;
- ``stress_path``: ``{biot, poisson}``.

Every result carries :data:`stressmap.constants.CAUTION` and a note that it is a screening
estimate, not a well design.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from stressmap import validate
from stressmap.analyses import screening as sc
from stressmap.analyses import sitescreen
from stressmap.analyses.depth_profile import depth_grid, stress_profile
from stressmap.analyses.faults import fault_tendencies, rank_order
from stressmap.analyses.stereonet import pole_of_plane, project_pole, tendency_net
from stressmap.analyses.stress_path import (
    pressure_change_to_failure,
    stress_path_coefficient,
)
from stressmap.analyses.wellbore import (
    borehole_stress,
    breakout_width_deg,
    failure_azimuths_deg,
    mud_window,
    rock_strength,
    shmax_from_breakout_mpa,
)
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.units import check_units

__all__ = [
    "WELL_NOTE",
    "WellRequest",
    "parse_well_request",
    "site_of",
    "run_profile",
    "run_net",
    "run_stress_path",
    "run_stability",
    "run_window",
    "run_breakout",
]

#: Said beside every well result, after the caution: only what the caution does not already say.
WELL_NOTE = "This is not a well design."

_OWN_KEYS = {"units", "rock", "well", "window", "breakout", "profile", "stress_path"}
_SUB_KEYS = {
    "rock": {"ucs_mpa", "internal_friction", "tensile_mpa", "poisson"},
    "well": {"azimuth_deg", "inclination_deg", "mud_pressure_mpa"},
    "window": {"step_deg", "max_breakout_width_deg", "upper_bound"},
    "breakout": {"width_deg", "mud_pressure_mpa"},
    "profile": {"max_depth_km", "step_km", "count"},
    "stress_path": {"biot", "poisson"},
}


@dataclass
class WellRequest:
    """A validated well-screening request (see the module docstring)."""

    site: sitescreen.ScreenRequest
    units: str = "si"
    parts: dict = field(default_factory=dict)


def _number(doc: dict, key: str, where: str, problems: list, *, lo=None, hi=None,
            lo_open=False, default=None):
    """One optional number of a request part, checked by :func:`stressmap.validate.number`."""
    return validate.number(doc.get(key, default if default is not None else validate.MISSING),
                           f"{where}.{key}", problems, low=lo, high=hi,
                           low_inclusive=not lo_open)


def _part(doc: dict, name: str, problems: list) -> dict | None:
    raw = doc.get(name)
    if raw is None:
        return None
    if not isinstance(raw, dict):
        problems.append(problem(f"{name} must be an object, got {validate.describe(raw)}",
                                field=name))
        return None
    validate.unknown_fields(raw, sorted(_SUB_KEYS[name]), problems, prefix=name)
    return raw


def parse_well_request(doc: dict) -> WellRequest:
    """Validate a well-screening request; every problem names its field.

    Examples
    --------
    >>> r = parse_well_request({"site": [5, 50], "depth_km": 3, "regime": "normal",
    ...                         "shmax_azimuth_deg": 30, "rock": {"ucs_mpa": 60}})
    >>> r.units, r.parts["rock"].ucs_mpa
    ('si', 60.0)
    >>> parse_well_request({"site": [5, 50], "depth_km": 3, "well": {"inclination_deg": 95}})
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: well.inclination_deg: inclination_deg must be <= 90, got 95
      - field well.inclination_deg: inclination_deg must be <= 90, got 95
    """
    if not isinstance(doc, dict):
        raise InputError("the request must be a JSON object",
                         [problem("expected an object", field="(body)")])
    problems: list = []
    site_doc = {k: v for k, v in doc.items() if k not in _OWN_KEYS}
    try:
        site = sitescreen.parse_request(site_doc)
    except InputError as exc:
        problems.extend(exc.problems)
        site = None
    try:
        units = check_units(doc.get("units"))
    except InputError as exc:
        problems.extend(exc.problems)
        units = "si"
    parts = {name: _part(doc, name, problems) for name in _SUB_KEYS}
    out: dict = {}
    rock = parts["rock"]
    if rock is not None:
        try:
            out["rock"] = rock_strength(rock.get("ucs_mpa", validate.MISSING),
                                        rock.get("internal_friction", 0.6),
                                        rock.get("tensile_mpa", 0.0), rock.get("poisson", 0.25),
                                        prefix="rock.")
        except InputError as exc:
            problems.extend(exc.problems)
    well = parts["well"] or {}
    out["well"] = {"azimuth_deg": _number(well, "azimuth_deg", "well", problems, lo=-360.0,
                                          hi=720.0, default=0.0),
                   "inclination_deg": _number(well, "inclination_deg", "well", problems, lo=0.0,
                                              hi=90.0, default=0.0),
                   "mud_pressure_mpa": _number(well, "mud_pressure_mpa", "well", problems,
                                               lo=0.0, hi=1000.0)}
    win = parts["window"] or {}
    out["window"] = {"step_deg": _number(win, "step_deg", "window", problems, lo=1.0, hi=45.0,
                                         default=5.0),
                     "max_breakout_width_deg": _number(win, "max_breakout_width_deg", "window",
                                                       problems, lo=0.0, hi=179.0, default=0.0),
                     "upper_bound": validate.choice(win.get("upper_bound", "least"),
                                                    ("least", "shmin"), "window.upper_bound",
                                                    problems) or "least"}
    if parts["breakout"] is not None:
        b = parts["breakout"]
        out["breakout"] = {
            "width_deg": _number(b, "width_deg", "breakout", problems, lo=0.0, lo_open=True,
                                 hi=179.0),
            "mud_pressure_mpa": _number(b, "mud_pressure_mpa", "breakout", problems, lo=0.0,
                                        hi=1000.0)}
        if "width_deg" not in b:
            problems.append(problem("missing 'width_deg' (the observed breakout width in "
                                    "degrees)", field="breakout.width_deg"))
        if "rock" not in out and rock is None:
            problems.append(problem("a breakout constraint needs the rock strength (rock.ucs_mpa)",
                                    field="rock.ucs_mpa"))
    prof = parts["profile"] or {}
    out["profile"] = {k: _number(prof, k, "profile", problems, lo=0.0, lo_open=True,
                                 hi=40.0 if k != "count" else 2000.0)
                      for k in ("max_depth_km", "step_km", "count")}
    path = parts["stress_path"] or {}
    out["stress_path"] = {"biot": _number(path, "biot", "stress_path", problems, lo=0.0, hi=1.0,
                                          default=1.0),
                          "poisson": _number(path, "poisson", "stress_path", problems, lo=0.0,
                                             hi=0.5, default=0.25)}
    if problems:
        first = problems[0]
        raise InputError(f"{first.get('field')}: {first['message']}" if len(problems) == 1
                         else f"the well request has {len(problems)} problems", problems)
    return WellRequest(site, units, out)


def _need_rock(req: WellRequest):
    if "rock" not in req.parts:
        raise InputError("the rock strength is required here",
                         [problem("give rock.ucs_mpa (unconfined compressive strength, MPa)",
                                  field="rock.ucs_mpa")])
    return req.parts["rock"]


def site_of(req: WellRequest, model=None, model_info=None):
    """The site's stress state (a :class:`~stressmap.analyses.sitescreen.ScreenResult`).

    With a ``breakout`` constraint, SHmax comes from the breakout width (vertical well; the
    site's Shmin and Pp from the first pass) and the site is solved again with it as a
    measured value.
    """
    result = sitescreen.screen(replace(req.site, samples=0), model, model_info)
    if "breakout" not in req.parts:
        return result
    s = result.site
    b = req.parts["breakout"]
    rock = _need_rock(req)
    pw = s["pp_mpa"] if b["mud_pressure_mpa"] is None else b["mud_pressure_mpa"]
    shmax = float(shmax_from_breakout_mpa(b["width_deg"], s["shmin_mpa"], s["pp_mpa"], pw,
                                          rock.ucs_mpa))
    if not math.isfinite(shmax) or shmax < s["shmin_mpa"]:
        raise InputError("the breakout width gives no SHmax at or above Shmin here",
                         [problem(f"SHmax from the breakout is {shmax:.1f} MPa, below Shmin "
                                  f"{s['shmin_mpa']:.1f} MPa: check the width, the rock strength "
                                  "and the mud pressure", field="breakout.width_deg")])
    # both magnitudes as measured: the Shmin the breakout width was read with stays
    constrained = replace(req.site, samples=0, shmax_mpa=shmax, shmin_mpa=s["shmin_mpa"])
    try:
        result = sitescreen.screen(constrained, model, model_info)
    except InputError as exc:
        raise InputError(f"SHmax {shmax:.1f} MPa from the breakout width does not fit the "
                         f"site: {exc.message}", [problem(
                             f"SHmax {shmax:.1f} MPa from the breakout width with Shmin "
                             f"{s['shmin_mpa']:.1f} MPa and Sv {s['sv_mpa']:.1f} MPa: "
                             f"{exc.message}", field="breakout.width_deg")]) from exc
    result.site["sources"]["shmax_mpa"] = (f"breakout width {b['width_deg']:g} deg, UCS "
                                          f"{rock.ucs_mpa:g} MPa (Zoback et al. 1985)")
    return result


def _header(req: WellRequest, result) -> dict:
    site = {k: result.site[k] for k in ("lon", "lat", "depth_km", "sv_mpa", "pp_mpa",
                                        "shmax_mpa", "shmin_mpa", "shmax_azimuth_deg", "regime",
                                        "shape_ratio", "friction")}
    site["sources"] = dict(result.site.get("sources", {}))
    out = {"caution": CAUTION, "note": WELL_NOTE, "units": req.units, "site": site,
           "notes": list(result.notes)}
    if result.model_info:
        out["model"] = result.model_info
    return out


def _samples(req: WellRequest) -> dict | None:
    s = req.site
    if s.samples <= 0:
        return None
    rng = np.random.default_rng(s.seed)
    out = {}
    for key, rng_pair in (("friction", s.friction_range), ("pore_gradient_mpa_km",
                          s.pore_gradient_range_mpa_km), ("density_kg_m3",
                          s.density_range_kg_m3), ("shape_ratio", s.shape_ratio_range)):
        if rng_pair is not None:
            out[key] = rng.uniform(rng_pair[0], rng_pair[1], s.samples)
    return out or None


def run_profile(req: WellRequest, model=None, model_info=None) -> dict:
    """Sv, Pp, Shmin and SHmax from the surface to ``profile.max_depth_km`` (default the
    site's depth), central estimate, frictional bounds and percentiles when sampling."""
    p = req.parts["profile"]
    result = site_of(req, model, model_info)
    s = result.site
    z = depth_grid(p["max_depth_km"] or req.site.depth_km, p["step_km"],
                   None if p["count"] is None else int(p["count"]))
    grad = None
    if req.site.pore_gradient_mpa_km is not None:
        grad = req.site.pore_gradient_mpa_km
    elif req.site.pore_pressure_mpa is not None:
        grad = req.site.pore_pressure_mpa / req.site.depth_km
    prof = stress_profile(z, regime_code=int(sc.regime_code_of(s["regime"])),
                          shape_ratio=s["shape_ratio"], friction=s["friction"],
                          density=req.site.density, pore_gradient_mpa_km=grad,
                          samples=_samples(req))
    columns = {"depth_km": z, **prof.central, **prof.bounds}
    if prof.spread:
        for name, values in prof.spread.items():
            for q, row in zip(prof.percentiles, values):
                columns[f"{name[:-4]}_p{q:g}_mpa"] = row
    out = _header(req, result)
    out["profile"] = {"samples": prof.samples, "percentiles": list(prof.percentiles),
                      "pore_gradient_mpa_km": grad}
    out["columns"] = columns
    return out


def _planes(req: WellRequest, notes: list) -> dict:
    planes = sitescreen.collect_planes(req.site, notes)
    return planes


def run_net(req: WellRequest, model=None, model_info=None, size: int = 181) -> dict:
    """Slip and dilation tendency of every orientation on the equal-area net, with the given
    planes and fault segments as poles and the fraction of orientations at or past the
    friction coefficient."""
    result = site_of(req, model, model_info)
    s = result.site
    net = tendency_net(result.stress_ned, s["pp_mpa"], size)
    out = _header(req, result)
    out["net"] = net
    inside = np.isfinite(net["slip_tendency"])
    out["fraction_at_or_past_friction"] = float(
        (net["slip_tendency"][inside] >= s["friction"]).mean())
    out["greatest_slip_tendency"] = float(net["slip_tendency"][inside].max())
    planes = _planes(req, out["notes"])
    if planes["strike_deg"].size:
        tend = fault_tendencies(result.stress_ned, s["pp_mpa"], planes["strike_deg"],
                                planes["dip_deg"], s["friction"], req.site.cohesion_mpa)
        trend, plunge = pole_of_plane(planes["strike_deg"], planes["dip_deg"])
        x, y = project_pole(trend, plunge)
        out["planes"] = {"name": list(planes["name"]), "strike_deg": planes["strike_deg"],
                         "dip_deg": planes["dip_deg"], "pole_trend_deg": trend,
                         "pole_plunge_deg": plunge, "x": x, "y": y,
                         "slip_tendency": tend["slip_tendency"],
                         "dilation_tendency": tend["dilation_tendency"]}
    return out


def run_stress_path(req: WellRequest, model=None, model_info=None) -> dict:
    """Stress path coefficient and, for each plane, the pore-pressure change to failure with
    and without the stress path, for injection and depletion."""
    result = site_of(req, model, model_info)
    s = result.site
    p = req.parts["stress_path"]
    a = float(stress_path_coefficient(p["biot"], p["poisson"]))
    out = _header(req, result)
    out["stress_path"] = {"biot": p["biot"], "poisson": p["poisson"], "coefficient": a,
                          "source": "Engelder & Fischer (1994)"}
    planes = _planes(req, out["notes"])
    if not planes["strike_deg"].size:
        raise InputError("the stress path needs planes or faults to screen",
                         [problem("give planes (STRIKE/DIP) or faults", field="planes")])
    args = (result.stress_ned, s["pp_mpa"], planes["strike_deg"], planes["dip_deg"],
            s["friction"], req.site.cohesion_mpa)
    fixed = pressure_change_to_failure(*args, coefficient=0.0)
    moving = pressure_change_to_failure(*args, coefficient=a)
    order = rank_order(np.where(np.isfinite(moving["injection_mpa"]),
                                moving["injection_mpa"], np.inf))
    cols = {"name": np.asarray(planes["name"], dtype=object), "strike_deg": planes["strike_deg"],
            "dip_deg": planes["dip_deg"],
            "injection_fixed_stress_mpa": fixed["injection_mpa"],
            "injection_with_path_mpa": moving["injection_mpa"],
            "depletion_fixed_stress_mpa": fixed["depletion_mpa"],
            "depletion_with_path_mpa": moving["depletion_mpa"]}
    out["columns"] = {k: np.asarray(v)[order] for k, v in cols.items()}
    return out


def run_stability(req: WellRequest, model=None, model_info=None) -> dict:
    """Mud-weight window of one well, breakout width at its mud pressure, and where breakouts
    and tensile fractures form around the hole."""
    rock = _need_rock(req)
    result = site_of(req, model, model_info)
    s = result.site
    w = req.parts["well"]
    window = mud_window(result.stress_ned, s["pp_mpa"], s["shmin_mpa"], w["azimuth_deg"],
                        w["inclination_deg"], rock, req.parts["window"]["max_breakout_width_deg"],
                        req.parts["window"]["upper_bound"])
    out = _header(req, result)
    out["well"] = dict(w)
    out["rock"] = {"ucs_mpa": rock.ucs_mpa, "internal_friction": rock.internal_friction,
                   "tensile_mpa": rock.tensile_mpa, "poisson": rock.poisson}
    out["window"] = {k: float(v) for k, v in window.items()}
    out["window"]["max_breakout_width_deg"] = req.parts["window"]["max_breakout_width_deg"]
    out["window"]["upper_bound"] = req.parts["window"]["upper_bound"]
    if window["breakdown_mpa"] <= s["pp_mpa"]:
        out["notes"].append("tensile wall fractures form even at balanced mud pressure (common "
                            "where the crust is near its frictional limit); they cannot "
                            "propagate while the mud pressure stays below Shmin (window."
                            "upper_bound = shmin accepts them)")
    pw = w["mud_pressure_mpa"]
    if pw is not None:
        s_b = borehole_stress(result.stress_ned, w["azimuth_deg"], w["inclination_deg"])
        bo, tf = failure_azimuths_deg(s_b, s["pp_mpa"], rock)
        out["at_mud_pressure"] = {
            "mud_pressure_mpa": pw,
            "breakout_width_deg": float(breakout_width_deg(s_b, pw, s["pp_mpa"], rock)),
            "breakout_deg": float(bo), "tensile_deg": float(tf),
            "tensile_fractures": bool(pw >= window["breakdown_mpa"]),
            "inside_window": bool(window["lower_mpa"] <= pw <= window["upper_mpa"])}
    if w["inclination_deg"] == 0.0:
        out["window"]["breakout_azimuth_deg"] = float(
            (w["azimuth_deg"] + out["window"]["breakout_deg"]) % 180.0)
        out["window"]["tensile_azimuth_deg"] = float(
            (w["azimuth_deg"] + out["window"]["tensile_deg"]) % 180.0)
    return out


def run_window(req: WellRequest, model=None, model_info=None) -> dict:
    """The mud-weight window over every azimuth and inclination (``window.step_deg``)."""
    rock = _need_rock(req)
    result = site_of(req, model, model_info)
    s = result.site
    step = req.parts["window"]["step_deg"]
    az = np.arange(0.0, 360.0, step)
    inc = np.arange(0.0, 90.0 + 1e-9, step)
    if inc[-1] < 90.0:
        inc = np.append(inc, 90.0)
    aa, ii = np.meshgrid(az, inc)
    window = mud_window(result.stress_ned, s["pp_mpa"], s["shmin_mpa"], aa, ii, rock,
                        req.parts["window"]["max_breakout_width_deg"],
                        req.parts["window"]["upper_bound"])
    out = _header(req, result)
    out["rock"] = {"ucs_mpa": rock.ucs_mpa, "internal_friction": rock.internal_friction,
                   "tensile_mpa": rock.tensile_mpa, "poisson": rock.poisson}
    out["grid"] = {"azimuth_deg": az, "inclination_deg": inc,
                   "upper_bound": req.parts["window"]["upper_bound"]}
    out["window"] = window
    best = np.unravel_index(np.nanargmax(window["width_mpa"]), window["width_mpa"].shape)
    worst = np.unravel_index(np.nanargmin(window["width_mpa"]), window["width_mpa"].shape)
    out["widest"] = {"azimuth_deg": float(az[best[1]]), "inclination_deg": float(inc[best[0]]),
                     "width_mpa": float(window["width_mpa"][best])}
    out["narrowest"] = {"azimuth_deg": float(az[worst[1]]),
                        "inclination_deg": float(inc[worst[0]]),
                        "width_mpa": float(window["width_mpa"][worst])}
    return out


def run_breakout(req: WellRequest, model=None, model_info=None) -> dict:
    """SHmax at the site from the observed breakout width (a site constraint)."""
    if "breakout" not in req.parts:
        raise InputError("the breakout width is required here",
                         [problem("give breakout.width_deg", field="breakout.width_deg")])
    result = site_of(req, model, model_info)
    out = _header(req, result)
    rock = _need_rock(req)
    out["breakout"] = dict(req.parts["breakout"])
    out["breakout"]["ucs_mpa"] = rock.ucs_mpa
    out["breakout"]["method"] = ("hoop stress at the breakout edge equals the rock strength "
                                 "(Zoback et al. 1985; Barton, Zoback & Burns 1988)")
    out["shmax_from_breakout_mpa"] = result.site["shmax_mpa"]
    return out
