"""``stressmap well ...``: reservoir and well screening at a site.

Subcommands share the site options of ``stressmap screen`` (site, depth, model or orientation,
density, pore pressure, measured magnitudes) and print a short report with the caution; ``-o``
writes JSON, CSV or PNG by the file's suffix. ``--units oilfield`` gives psi, ft, psi/ft and
equivalent mud weight in ppg.

- ``profile``: Sv, Pp, Shmin, SHmax from the surface to a depth (bounds, percentiles);
- ``net``: slip/dilation tendency of every plane orientation on the equal-area net;
- ``path``: pore-pressure change to fault failure with and without the poroelastic stress path;
- ``stability``: the mud-weight window of one well, breakouts and tensile fractures;
- ``window``: the window over every azimuth and inclination (a chart);
- ``breakout``: SHmax from an observed breakout width (then usable as ``--shmax-mpa``).
"""

from __future__ import annotations

import json
from pathlib import Path

from stressmap.analyses import wells
from stressmap.analyses.sitescreen import parse_plane_text, parse_site_text
from stressmap.cli._site import (
    add_friction_options,
    add_orientation_options,
    load_site_model,
)
from stressmap.cli.model import parse_weights
from stressmap.cli.screen import parse_pair, read_density_profile
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats.table import metadata_json
from stressmap.formats.wells import csv_table, json_document
from stressmap.io.faults import read_fault_file
from stressmap.io.files import write_atomic
from stressmap.plot import wells as plot_wells

__all__ = ["register", "request_document"]

_SITE_KEYS = ("shmax_azimuth_deg", "regime", "shape_ratio", "friction", "cohesion_mpa",
              "density_kg_m3", "pore_gradient_mpa_km", "pore_pressure_mpa", "sv_mpa",
              "shmax_mpa", "shmin_mpa")
_PICTURES = {"profile": plot_wells.profile_png, "net": plot_wells.net_png,
             "path": plot_wells.path_png, "window": plot_wells.window_png}
_RUNS = {"profile": wells.run_profile, "net": wells.run_net, "path": wells.run_stress_path,
         "stability": wells.run_stability, "window": wells.run_window,
         "breakout": wells.run_breakout}


def _planes(args, doc: dict) -> None:
    planes = []
    for text in getattr(args, "plane", None) or []:
        s, d = parse_plane_text(text)
        planes.append({"strike_deg": s, "dip_deg": d, "name": f"plane {text}"})
    if getattr(args, "faults", None):
        parsed, collection = read_fault_file(args.faults)
        if collection is None:
            pl = parsed["planes"]
            planes += [{"strike_deg": s, "dip_deg": d, "name": n}
                       for s, d, n in zip(pl["strike_deg"], pl["dip_deg"], pl["name"])]
        else:
            doc["faults"] = parsed
    if planes:
        doc["planes"] = planes


def request_document(args) -> dict:
    """The shared request document (:func:`stressmap.analyses.wells.parse_well_request`)."""
    doc: dict = {"site": list(parse_site_text(args.site)), "depth_km": args.depth_km,
                 "units": args.units}
    for key in _SITE_KEYS:
        if getattr(args, key, None) is not None:
            doc[key] = getattr(args, key)
    if args.density_profile:
        doc["density_profile"] = read_density_profile(args.density_profile)
    if args.weights:
        doc["weights"] = parse_weights(args.weights)
    _planes(args, doc)
    rock = {k: getattr(args, k) for k in ("ucs_mpa", "internal_friction", "tensile_mpa",
                                          "poisson") if getattr(args, k, None) is not None}
    if rock:
        doc["rock"] = rock
    if getattr(args, "breakout_width_deg", None) is not None:
        doc["breakout"] = {"width_deg": args.breakout_width_deg}
        if getattr(args, "breakout_mud_pressure_mpa", None) is not None:
            doc["breakout"]["mud_pressure_mpa"] = args.breakout_mud_pressure_mpa
    well = {k: getattr(args, k) for k in ("azimuth_deg", "inclination_deg", "mud_pressure_mpa")
            if getattr(args, k, None) is not None}
    if well:
        doc["well"] = well
    window = {k: getattr(args, k) for k in ("step_deg", "max_breakout_width_deg", "upper_bound")
              if getattr(args, k, None) is not None}
    if window:
        doc["window"] = window
    profile = {k: getattr(args, k) for k in ("max_depth_km", "step_km", "count")
               if getattr(args, k, None) is not None}
    if profile:
        doc["profile"] = profile
    path = {k: getattr(args, k) for k in ("biot", "path_poisson") if getattr(args, k, None)
            is not None}
    if path:
        doc["stress_path"] = {"biot" if k == "biot" else "poisson": v for k, v in path.items()}
    unc = {}
    for key in ("friction_range", "pore_gradient_range_mpa_km", "density_range_kg_m3",
                "shape_ratio_range"):
        value = parse_pair(getattr(args, key, None), "--" + key.replace("_", "-"))
        if value is not None:
            unc[key] = value
    for key in ("samples", "seed"):
        if getattr(args, key, None) is not None:
            unc[key] = getattr(args, key)
    if unc:
        doc["uncertainty"] = unc
    return doc


def _report(kind: str, doc: dict) -> str:
    s = doc["site"]
    p_unit = "psi" if doc["units"] == "oilfield" else "MPa"
    sfx = "_psi" if doc["units"] == "oilfield" else "_mpa"
    depth = f"{s['depth_ft']:.0f} ft" if "depth_ft" in s else f"{s['depth_km']:g} km"
    lines = [f"CAUTION: {CAUTION}", wells.WELL_NOTE, "",
             f"Site {s['lon']:.4f}, {s['lat']:.4f} at {depth}: {s['regime']}, SHmax azimuth "
             f"{s['shmax_azimuth_deg']:.1f} deg; Sv {s['sv' + sfx]:.1f}, Pp {s['pp' + sfx]:.1f}, "
             f"SHmax {s['shmax' + sfx]:.1f}, Shmin {s['shmin' + sfx]:.1f} {p_unit}"]
    if kind == "stability":
        w = doc["window"]
        lines.append(f"Well azimuth {doc['well']['azimuth_deg']:g} deg, inclination "
                     f"{doc['well']['inclination_deg']:g} deg: mud window "
                     f"{w['lower' + sfx]:.1f}-{w['upper' + sfx]:.1f} {p_unit} (collapse "
                     f"{w['collapse' + sfx]:.1f}, breakdown {w['breakdown' + sfx]:.1f}, Shmin "
                     f"{w['shmin' + sfx]:.1f})")
        if "lower_emw_ppg" in w:
            lines.append(f"  equivalent mud weight {w['lower_emw_ppg']:.2f}-"
                         f"{w['upper_emw_ppg']:.2f} ppg")
        if w["width" + sfx] < 0:
            lines.append("  no safe mud weight: the collapse bound exceeds the upper bound")
        lines.append(f"  breakouts centre {w['breakout_deg']:.0f} deg and tensile fractures "
                     f"{w['tensile_deg']:.0f} deg around the hole from its high side (and +180)")
        if "at_mud_pressure" in doc:
            a = doc["at_mud_pressure"]
            lines.append(f"  at the given mud pressure: breakout width "
                         f"{a['breakout_width_deg']:.0f} deg, tensile wall fractures: "
                         f"{'yes' if a['tensile_fractures'] else 'no'}, inside the window: "
                         f"{'yes' if a['inside_window'] else 'no'}")
    elif kind == "window":
        lines.append(f"Widest window: azimuth {doc['widest']['azimuth_deg']:g}, inclination "
                     f"{doc['widest']['inclination_deg']:g} deg; narrowest: azimuth "
                     f"{doc['narrowest']['azimuth_deg']:g}, inclination "
                     f"{doc['narrowest']['inclination_deg']:g} deg")
    elif kind == "breakout":
        key = "shmax_from_breakout" + sfx
        lines.append(f"SHmax from the breakout width: {doc[key]:.1f} {p_unit} (use it with "
                     f"--shmax-mpa in other commands, or give --breakout-width-deg)")
    elif kind == "net":
        lines.append(f"{100 * doc['fraction_at_or_past_friction']:.1f} % of plane orientations "
                     f"reach the friction coefficient {s['friction']:g}; the greatest slip "
                     f"tendency is {doc['greatest_slip_tendency']:.3f}"
                     + (" (the crust at its frictional limit: only the optimally oriented "
                        "planes reach it)" if doc["greatest_slip_tendency"] >= 0.98 *
                        s["friction"] and doc["fraction_at_or_past_friction"] < 0.01 else ""))
    elif kind == "path":
        a = doc["stress_path"]["coefficient"]
        lines.append(f"Stress path coefficient A = {a:.3f}; change of pore pressure to failure "
                     f"({p_unit}; injection > 0, depletion < 0):")
        cols = doc["columns"]
        keys = [k for k in cols if k.startswith(("injection", "depletion"))]
        for i, name in enumerate(cols["name"]):
            vals = ", ".join(f"{k.rsplit('_', 1)[0].replace('_', ' ')} "
                             f"{'-' if cols[k][i] is None else format(cols[k][i], '.1f')}"
                             for k in keys)
            lines.append(f"  {name}: {vals}")
    elif kind == "profile":
        lines.append(f"{len(doc['columns']['depth_' + ('ft' if sfx == '_psi' else 'km')])} "
                     "depths" + (f", {doc['profile']['samples']} samples"
                                 if doc["profile"]["samples"] else ""))
    for note in doc.get("notes", []):
        lines.append(f"note: {note}")
    lines += ["", f"CAUTION: {CAUTION}"]
    return "\n".join(lines)


def _run(args) -> int:
    kind = args.well_command
    req = wells.parse_well_request(request_document(args))
    model, model_info = load_site_model(args.model)
    result = _RUNS[kind](req, model, model_info)
    doc = json_document(result)
    for target in args.output or []:
        path = Path(target)
        suffix = path.suffix.lower()
        if suffix == ".json":
            path.write_text(json.dumps(doc, indent=1), encoding="utf-8")
        elif suffix == ".csv":
            write_atomic(path, csv_table(result))
            sidecar = path.with_suffix(".json")  # the caution beside the plain table
            if not any(Path(t).resolve() == sidecar.resolve() for t in args.output):
                write_atomic(sidecar, metadata_json(
                    {"caution": doc.get("caution", CAUTION), "model": model_info},
                    {path.name: f"well {kind} table"}))
        elif suffix == ".png" and kind in _PICTURES:
            path.write_bytes(_PICTURES[kind](doc))
        else:
            allowed = ".json, .csv" + (", .png" if kind in _PICTURES else "")
            raise InputError(f"cannot write {target}: use {allowed}",
                             [problem(f"unknown output suffix {suffix!r}", field="-o")])
    print(json.dumps(doc, indent=1) if args.json else _report(kind, doc))
    return 0


def _site_options(p) -> None:
    p.add_argument("--site", required=True, metavar="LON,LAT", help="site, degrees")
    p.add_argument("--depth-km", required=True, type=float, metavar="Z",
                   help="depth of the site (true vertical depth), km")
    p.add_argument("--model", metavar="DIR", help="built model directory (orientation, regime, "
                   "shape ratio at the site)")
    p.add_argument("--weights", metavar="GROUP=W,...", help="model load-group weights")
    p.add_argument("--units", choices=["si", "oilfield"], default="si",
                   help="si: MPa, km, MPa/km (default); oilfield: psi, ft, psi/ft, ppg")
    p.add_argument("-o", "--output", action="append", metavar="FILE",
                   help="write .json, .csv or .png (repeatable)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    g = p.add_argument_group("site stress (as in stressmap screen)")
    add_orientation_options(g)
    add_friction_options(g)
    dens = g.add_mutually_exclusive_group()
    dens.add_argument("--density-kg-m3", type=float, help="constant overburden density")
    dens.add_argument("--density-profile", metavar="FILE", help="CSV: top_km, density_kg_m3 "
                      "[, gradient_kg_m3_per_km] per layer")
    pore = g.add_mutually_exclusive_group()
    pore.add_argument("--pore-gradient-mpa-km", type=float, help="pore-pressure gradient "
                      "(default hydrostatic 9.81 MPa/km)")
    pore.add_argument("--pore-pressure-mpa", type=float, help="pore pressure at the depth")
    g.add_argument("--sv-mpa", type=float, help="measured Sv at the depth")
    g.add_argument("--shmax-mpa", type=float, help="measured SHmax at the depth")
    g.add_argument("--shmin-mpa", type=float, help="measured Shmin at the depth")
    g.add_argument("--breakout-width-deg", type=float,
                   help="observed breakout width in a vertical well: bounds SHmax (needs "
                        "--ucs-mpa)")
    g.add_argument("--breakout-mud-pressure-mpa", type=float,
                   help="mud pressure when the breakouts formed (default: Pp)")


def _rock_options(p, required: bool) -> None:
    g = p.add_argument_group("rock strength")
    g.add_argument("--ucs-mpa", type=float, required=required,
                   help="unconfined compressive strength, MPa")
    g.add_argument("--internal-friction", type=float, help="coefficient of internal friction "
                   "(default 0.6)")
    g.add_argument("--tensile-mpa", type=float, help="tensile strength, MPa (default 0)")
    g.add_argument("--poisson", type=float, help="Poisson's ratio (default 0.25)")


def _window_options(p) -> None:
    p.add_argument("--max-breakout-width-deg", type=float,
                   help="breakout width accepted at the lower bound (default 0)")
    p.add_argument("--upper-bound", choices=["least", "shmin"],
                   help="least: the lower of breakdown and Shmin (default); shmin: accept "
                        "tensile wall fractures below Shmin")
    _rock_options(p, required=True)


def _plane_options(p) -> None:
    p.add_argument("--plane", action="append", metavar="STRIKE/DIP",
                   help="a plane, right-hand rule (repeatable)")
    p.add_argument("--faults", metavar="FILE", help="fault traces or planes (as in "
                   "stressmap screen)")


def register(subparsers) -> None:
    top = subparsers.add_parser(
        "well", help="reservoir and well screening: depth profiles, tendency nets, stress "
        "paths, deviated-well stability",
        description=(__doc__ or "").split("\n\n")[1] + " Screening estimates, not a well "
        "design: defer to site-specific studies, local codes and licensed practice.")
    sub = top.add_subparsers(dest="well_command", metavar="SUBCOMMAND", required=True)
    p = sub.add_parser("profile", help="Sv, Pp, Shmin and SHmax with depth")
    _site_options(p)
    p.add_argument("--max-depth-km", type=float, help="deepest depth (default the site's)")
    p.add_argument("--step-km", type=float, help="depth step (default: 101 depths)")
    p.add_argument("--count", type=int, help="number of depths")
    g = p.add_argument_group("uncertainty (percentiles over samples)")
    g.add_argument("--samples", type=int, help="samples (default 1000 when a range is given)")
    g.add_argument("--seed", type=int)
    g.add_argument("--friction-range", metavar="LO,HI")
    g.add_argument("--pore-gradient-range-mpa-km", metavar="LO,HI")
    g.add_argument("--density-range-kg-m3", metavar="LO,HI")
    g.add_argument("--shape-ratio-range", metavar="LO,HI")
    _rock_options(p, required=False)
    p = sub.add_parser("net", help="slip and dilation tendency on the equal-area net")
    _site_options(p)
    _plane_options(p)
    _rock_options(p, required=False)
    p = sub.add_parser("path", help="pore-pressure change to failure with the stress path")
    _site_options(p)
    _plane_options(p)
    p.add_argument("--biot", type=float, help="Biot coefficient (default 1)")
    p.add_argument("--path-poisson", type=float, help="drained Poisson's ratio of the "
                   "reservoir (default 0.25)")
    _rock_options(p, required=False)
    p = sub.add_parser("stability", help="mud-weight window of one well")
    _site_options(p)
    p.add_argument("--azimuth-deg", type=float, help="well azimuth, degrees from north")
    p.add_argument("--inclination-deg", type=float, help="0 vertical .. 90 horizontal")
    p.add_argument("--mud-pressure-mpa", type=float, help="report breakouts at this pressure")
    _window_options(p)
    p = sub.add_parser("window", help="mud-weight window over all azimuths and inclinations")
    _site_options(p)
    p.add_argument("--step-deg", type=float, help="azimuth and inclination step (default 5)")
    _window_options(p)
    p = sub.add_parser("breakout", help="SHmax from an observed breakout width")
    _site_options(p)
    _rock_options(p, required=True)
    top.set_defaults(handler=_run)
