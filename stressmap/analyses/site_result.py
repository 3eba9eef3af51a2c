"""A site screening from a validated request to its result (composition layer).

:func:`screen`

1. takes the SHmax azimuth, regime and shape ratio at the site from a built model
   (``stressmap.model.predict_points``) unless the user overrides them;
2. integrates the density profile for Sv, sets the pore pressure (hydrostatic, a gradient or a
   value) and puts the crust at frictional equilibrium in that regime with that shape ratio
   (:mod:`stressmap.analyses.screening`), keeping any measured magnitude the user gives;
3. resolves the stress on every plane -- strike/dip planes and the straight segments of GIS
   traces -- and ranks them by the pore-pressure increase that would bring them to failure
   (:mod:`stressmap.analyses.faults`);
4. optionally samples the uncertain inputs (:mod:`stressmap.analyses.site_sampling`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.analyses.site_request import DEFAULTS, ScreenRequest
from stressmap.analyses.site_sampling import sample_screening
from stressmap.errors import InputError, OutsidePlateError, problem
from stressmap.model import predict_points

__all__ = ["ScreenResult", "collect_planes", "orientation_from_model", "screen"]


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


def collect_planes(req: ScreenRequest, notes: list) -> dict:
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
        no_dd = np.flatnonzero(np.isnan(tr_dd) & (np.asarray(tr["dip_deg"], dtype=float) < 90))
        for i in no_dd[:20]:  # each fault named with the direction it was given, never silently
            first = np.flatnonzero(seg_part == i)
            if first.size:
                notes.append(f"{tr['name'][i]}: no dip_direction_deg; dips to the right of its "
                             f"digitised direction (right-hand rule), toward "
                             f"{np.mod(s[first[0]] + 90.0, 360.0):.0f} deg")
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
    az, regime, phi, orient = _orientation(req, model, sources, notes)
    profile = req.density if req.density is not None else sc.density_profile()
    sv, pp, rho_mean = _vertical_and_pore(req, profile, sources)
    code = -1 if regime is None else int(sc.regime_code_of(regime))
    if code < 0:  # regime only from the measured magnitudes
        code = int(sc.regime_from_magnitudes(req.shmax_mpa, req.shmin_mpa, sv))
    code, shmax, shmin = _site_magnitudes(req, code, phi, sv, pp, sources, notes)
    phi = _reported_shape_ratio(phi, shmax, shmin, sv, sources, notes)
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

    planes = collect_planes(req, notes)
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
        sample_screening(result, model, rho_mean, code, phi, az)
    order = fl.rank_order(result.planes.get("pore_pressure_margin_mpa", np.zeros(0)))
    result.planes = {k: np.asarray(v)[order] for k, v in result.planes.items()}
    result.planes["rank"] = np.arange(1, order.size + 1)
    result.plane_geometry = result.plane_geometry[order]
    if result.samples is not None and "margin_mpa" in result.samples:
        result.samples["margin_mpa"] = result.samples["margin_mpa"][:, order]
    return result


def _reported_shape_ratio(phi: float, shmax: float, shmin: float, sv: float, sources: dict,
                          notes: list) -> float:
    """The shape ratio of the magnitudes themselves. A measured magnitude (or the strike-slip
    frictional limit with one measured) can fix all three, and then the requested ratio cannot
    hold; the reported one is always (S2 - S3)/(S1 - S3) of the reported magnitudes."""
    implied = float(sc.shape_ratio_of(shmax, shmin, sv))
    if not math.isfinite(implied) or abs(implied - phi) <= 1e-9:
        return float(phi)
    notes.append(f"shape ratio {implied:.2f} follows from the magnitudes (not the "
                 f"{sources.get('shape_ratio', 'given')} value {phi:.2f})")
    sources["shape_ratio"] = "the magnitudes"
    return implied


def _orientation(req: ScreenRequest, model, sources: dict, notes: list):
    """(SHmax azimuth, regime or None, shape ratio, the model's orientation or None) at the site:
    the user's values first, then the model's, then the default shape ratio."""
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
        missing.append(problem("give shmax_azimuth_deg or a model" if
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
        missing.append(problem("give regime or a model" if orient is None else
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
    return az, regime, phi, orient


def _vertical_and_pore(req: ScreenRequest, profile, sources: dict):
    """(Sv, Pp, mean overburden density) at the depth: measured values first."""
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
    return sv, pp, rho_mean
