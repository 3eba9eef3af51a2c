"""``stressmap screen``: stress magnitudes at a site and depth, and fault reactivation screening.

Works without a model when the SHmax azimuth and the regime are given
(``--shmax-azimuth-deg``, ``--regime``); with ``--model DIR`` they come from the built model and
any option given overrides the model's value.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

from stressmap import validate
from stressmap.analyses.sitescreen import (
    parse_plane_text,
    parse_request,
    parse_site_text,
    screen,
)
from stressmap.cli._site import (
    add_friction_options,
    add_orientation_options,
    load_site_model,
)
from stressmap.cli.model import parse_weights
from stressmap.errors import InputError, problem
from stressmap.formats.gpkg import geojson_to_layer
from stressmap.formats.screening import (
    result_json,
    screen_csv,
    screen_csvt,
    screen_layers,
    screen_meta,
)
from stressmap.io.faults import read_fault_file
from stressmap.io.files import write_atomic
from stressmap.io.indicators import read_indicators
from stressmap.io.outputs import (
    write_csv_with_sidecars,
    write_geojson,
    write_geopackage,
)
from stressmap.io.tables import read_csv_table
from stressmap.plot import screening as plot_screening
from stressmap.plot.margins import margin_curves_png

__all__ = ["register", "build_request", "read_density_profile", "parse_pair", "format_text",
           "layer_path"]


def layer_path(path, layer: str) -> Path:
    """The file of one screening layer beside ``path``: ``out.geojson`` -> ``out_traces.geojson``.

    Examples
    --------
    >>> layer_path("run/out.geojson", "sites").as_posix()
    'run/out_sites.geojson'
    """
    path = Path(path)
    return path.with_name(f"{path.stem}_{layer}{path.suffix or '.geojson'}")


def parse_pair(text: str | None, option: str):
    """``"LO,HI"`` -> [lo, hi] (None passes through).

    Examples
    --------
    >>> parse_pair("0.5,0.8", "--friction-range")
    [0.5, 0.8]
    >>> parse_pair("0.8", "--friction-range")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: --friction-range must be a pair LOW,HIGH of finite numbers, got the string '0.8'
    """
    if text is None:
        return None
    problems: list = []
    pair = validate.number_pair(text, option, problems, text=",")
    validate.raise_problems(problems)
    return list(pair)


def read_density_profile(path) -> dict:
    """Density profile file (CSV): columns ``top_km``, ``density_kg_m3`` and optionally
    ``gradient_kg_m3_per_km``; one row per layer from the surface down; '#' starts a comment.
    """
    try:
        frame = read_csv_table(path, ("top_km", "density_kg_m3"), what="density profile",
                               field="--density-profile")
        out: dict = {}
        problems: list = []
        for col in ("top_km", "density_kg_m3", "gradient_kg_m3_per_km"):
            if col in frame.columns:
                optional = col == "gradient_kg_m3_per_km"  # an empty cell: no gradient in that layer
                values = [validate.number(validate.cell(v), col, problems, row=i + 1, text=True,
                                          required=not optional)
                          for i, v in enumerate(frame[col].tolist())]
                out[col] = [0.0 if optional and v is None else v for v in values]
        validate.raise_problems(problems, f"density profile {path}: {len(problems)} bad cell(s)")
    except InputError as exc:  # the fields are the file's columns: they keep their names
        raise InputError(exc.message, [{**p, "file": str(path)} for p in exc.problems]) from None
    return out


def build_request(args) -> dict:
    """Turn parsed options into the shared request document (:func:`sitescreen.parse_request`)."""

    doc: dict = {"site": list(parse_site_text(args.site)), "depth_km": args.depth_km}
    for key in ("shmax_azimuth_deg", "regime", "shape_ratio", "friction", "cohesion_mpa",
                "density_kg_m3", "pore_gradient_mpa_km", "pore_pressure_mpa", "sv_mpa",
                "shmax_mpa", "shmin_mpa"):
        value = getattr(args, key)
        if value is not None:
            doc[key] = value
    if args.density_profile:
        doc["density_profile"] = read_density_profile(args.density_profile)
    if args.weights:
        doc["weights"] = parse_weights(args.weights)
    planes = []
    for text in args.plane or []:
        s, d = parse_plane_text(text)
        planes.append({"strike_deg": s, "dip_deg": d, "name": f"plane {text}"})
    if planes:
        doc["planes"] = planes
    if args.faults:
        parsed, collection = read_fault_file(args.faults)
        if collection is None:  # CSV of planes
            pl = parsed["planes"]
            doc.setdefault("planes", [])
            doc["planes"] += [{"strike_deg": s, "dip_deg": d, "name": n}
                              for s, d, n in zip(pl["strike_deg"], pl["dip_deg"], pl["name"])]
        else:
            doc["faults"] = parsed
    unc = {}
    for key, option in (("friction_range", "--friction-range"),
                        ("pore_pressure_range_mpa", "--pore-pressure-range-mpa"),
                        ("pore_gradient_range_mpa_km", "--pore-gradient-range-mpa-km"),
                        ("density_range_kg_m3", "--density-range-kg-m3"),
                        ("shape_ratio_range", "--shape-ratio-range")):
        value = parse_pair(getattr(args, key), option)
        if value is not None:
            unc[key] = value
    for key in ("samples", "seed", "azimuth_sigma_deg", "margin_threshold_mpa",
                "ensemble_members"):
        value = getattr(args, key)
        if value is not None:
            unc[key] = value
    if args.indicators:

        unc["indicators"] = read_indicators(args.indicators)
    if args.indicator_radius_km is not None:
        unc["indicator_radius_km"] = args.indicator_radius_km
    if args.ensemble_distributions:
        unc["ensemble_distributions"] = _json_or_file(args.ensemble_distributions,
                                                      "--ensemble-distributions")
    if unc:
        doc["uncertainty"] = unc
    return doc


def _json_or_file(text: str, option: str):
    """Inline JSON, or the path of a JSON file."""
    raw = text
    path = Path(text)
    if not text.lstrip().startswith("{") and path.is_file():
        raw = path.read_text(encoding="utf-8")
    try:
        return json.loads(raw)
    except ValueError as exc:
        raise InputError(f"{option}: not JSON and not a JSON file ({exc})",
                         [problem("expected a JSON object or a file holding one",
                                  field=option)]) from None


def _fmt(v, nd=2):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{v:.{nd}f}" if isinstance(v, float) else str(v)


def format_text(doc: dict) -> str:
    """Human-readable report of a screening JSON document (caution first and last)."""
    lines = [f"CAUTION: {doc['caution']}", ""]
    s = doc["site"]
    lines.append(f"Site {s['lon']:.4f}, {s['lat']:.4f} at {doc['depth_km']:g} km depth")
    src = doc["sources"]
    lines.append(f"  SHmax azimuth {doc['shmax_azimuth_deg']:.1f} deg ({src['shmax_azimuth_deg']}),"
                 f" regime {doc['regime']} ({src['regime']}), shape ratio "
                 f"{doc['shape_ratio']:.2f} ({src['shape_ratio']})")
    lines.append(f"  Sv {doc['sv_mpa']:.1f} MPa ({src['sv_mpa']}), Pp {doc['pp_mpa']:.1f} MPa "
                 f"({src['pp_mpa']}), friction {doc['friction']:g}, cohesion "
                 f"{doc['cohesion_mpa']:g} MPa")
    lines.append(f"  SHmax {doc['shmax_mpa']:.1f} MPa (frictional bounds "
                 f"{doc['shmax_lower_mpa']:.1f}-{doc['shmax_upper_mpa']:.1f})")
    lines.append(f"  Shmin {doc['shmin_mpa']:.1f} MPa (frictional bounds "
                 f"{doc['shmin_lower_mpa']:.1f}-{doc['shmin_upper_mpa']:.1f})")
    unc = doc.get("uncertainty")
    if unc:
        lines.append(f"  Uncertainty: {unc['samples']} samples; {unc['orientation_source']}")
    if doc["planes"]:
        lines.append("")
        has_p = "margin_median_mpa" in doc["planes"][0]
        head = (f"{'rank':>4} {'strike':>6} {'dip':>4} {'sn MPa':>7} {'tau MPa':>7} {'Ts':>5} "
                f"{'Td':>5} {'margin':>8}")
        if has_p:
            head += f" {'80% of samples':>15} {'reach':>6}"
        lines.append(head + "  name")
        for p in doc["planes"]:
            row = (f"{p['rank']:>4} {p['strike_deg']:6.1f} {p['dip_deg']:4.0f} "
                   f"{_fmt(p['normal_stress_mpa'], 1):>7} {_fmt(p['shear_stress_mpa'], 1):>7} "
                   f"{_fmt(p['slip_tendency']):>5} {_fmt(p['dilation_tendency']):>5} "
                   f"{_fmt(p['pore_pressure_margin_mpa'], 1):>8}")
            if has_p:
                band = (f"{_fmt(p['margin_band_low_mpa'], 1)}.."
                        f"{_fmt(p['margin_band_high_mpa'], 1)}")
                row += f" {band:>15} {_fmt(p['reactivation_share']):>6}"
            seg = f" #{p['segment']}" if (p.get("segment") or 0) > 0 else ""
            lines.append(f"{row}  {p['name']}{seg}")
        lines.append("  (Ts slip tendency, Td dilation tendency, margin: the pore-pressure increase "
                     "to failure, MPa" + ("; 80% of samples: the central band of the sampled "
                                          "margins; reach: share of samples within the "
                                          "margin threshold" if has_p else "") + ")")
    for note in doc.get("notes", []):
        lines.append(f"note: {note}")
    lines += ["", f"CAUTION: {doc['caution']}"]
    return "\n".join(lines)


_FIELD = re.compile(r"\b(?:uncertainty\.)?([a-z][a-z0-9]*(?:_[a-z0-9]+)+)\b")


def flag_words(text: str, flags: dict) -> str:
    """Name command-line flags instead of request fields in a note or an error message.

    Only snake_case words (and ``uncertainty.<field>`` paths) that are the destination of an
    option are replaced, so ordinary words stay as they are.

    Examples
    --------
    >>> flags = {"ensemble_members": "--ensemble-members", "samples": "--samples"}
    >>> flag_words("give ensemble_members or uncertainty.ensemble_members; 200 samples", flags)
    'give --ensemble-members or --ensemble-members; 200 samples'
    """
    return _FIELD.sub(lambda m: flags.get(m.group(1), m.group(0)), str(text))


def _with_flags(exc: InputError, flags: dict) -> InputError:
    """The same error with request fields named as the flags that set them."""
    if exc.problems and all(p.get("file") for p in exc.problems):
        return exc  # about a file's columns and rows (``density_kg_m3`` is a column there)
    probs = [p if p.get("file") else
             {**p, "message": flag_words(p["message"], flags),
              **({"field": flag_words(p["field"], flags)} if p.get("field") else {})}
             for p in exc.problems]
    return InputError(flag_words(exc.message, flags), probs)


def _run(args) -> int:
    flags = getattr(args, "flag_names", {}) or {}
    try:
        doc = build_request(args)
        req = parse_request(doc)
        model, model_info = load_site_model(args.model)
        result = screen(req, model, model_info)
    except InputError as exc:
        raise _with_flags(exc, flags) from None
    result.notes[:] = [flag_words(n, flags) for n in result.notes]
    out = result_json(result)
    meta = screen_meta(result)
    if args.csv:
        write_csv_with_sidecars(args.csv, screen_csv(result), screen_csvt(result), meta)
    if args.geojson:
        for name, layer in screen_layers(result, meta).items():
            write_geojson(layer_path(args.geojson, name), layer)
    if args.gpkg:
        layers = screen_layers(result, meta)
        write_geopackage(args.gpkg, {name: geojson_to_layer(fc) for name, fc in layers.items()
                                     if fc["features"]}, meta)
    pictures = (("mohr_png", "mohr_png"), ("polygon_png", "polygon_png"),
                ("map_png", "fault_map_png"))
    if any(getattr(args, opt) for opt, _ in pictures):

        for opt, fn in pictures:
            target = getattr(args, opt)
            if target:
                write_atomic(target, getattr(plot_screening, fn)(result))
    if args.margins_png:
        write_atomic(args.margins_png, margin_curves_png(result))
    if args.json:
        print(json.dumps(out, indent=1))
    else:
        print(format_text(out))
    return 0


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "screen",
        help="stress magnitudes at a site and depth; fault slip and dilation tendency",
        description=(
            "Stress at a site and depth (Sv from a density profile, pore pressure, frictional-"
            "limit bounds and a central estimate at frictional equilibrium) and screening of "
            "fault planes for reactivation (slip and dilation tendency, Coulomb stress, the "
            "pore-pressure increase to failure), ranked. Screening estimate from a regional, "
            "plate-scale model: it does not replace site-specific engineering studies, in-situ "
            "stress measurements, local codes and regulations, or licensed professional "
            "judgement."),
    )
    p.add_argument("--site", required=True, metavar="LON,LAT", help="site, degrees")
    p.add_argument("--depth-km", required=True, type=float, metavar="Z", help="depth, km")
    p.add_argument("--model", metavar="DIR", help="built model directory (orientation, regime, "
                   "shape ratio at the site)")
    p.add_argument("--weights", metavar="GROUP=W,...", help="model load-group weights")
    p.add_argument("--faults", metavar="FILE", help="fault traces (GeoJSON/GeoPackage lines with "
                   "dip_deg, dip_direction_deg) or planes (points or CSV with strike_deg, dip_deg)")
    p.add_argument("--plane", action="append", metavar="STRIKE/DIP",
                   help="a plane, right-hand rule (repeatable)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    g = p.add_argument_group("orientation overrides")
    add_orientation_options(g)
    g = p.add_argument_group("site physics")
    add_friction_options(g)
    dens = g.add_mutually_exclusive_group()
    dens.add_argument("--density-kg-m3", type=float,
                      help="constant overburden density (default 2450 kg/m^3)")
    dens.add_argument("--density-profile", metavar="FILE", help="CSV: top_km, density_kg_m3 "
                      "[, gradient_kg_m3_per_km] per layer")
    pore = g.add_mutually_exclusive_group()
    pore.add_argument("--pore-gradient-mpa-km", type=float,
                      help="pore-pressure gradient (default hydrostatic 9.81 MPa/km)")
    pore.add_argument("--pore-pressure-mpa", type=float, help="pore pressure at the depth, MPa")
    g = p.add_argument_group("measured magnitudes (override the estimate)")
    g.add_argument("--sv-mpa", type=float)
    g.add_argument("--shmax-mpa", type=float)
    g.add_argument("--shmin-mpa", type=float)
    g = p.add_argument_group("uncertainty (sampling; any range turns it on, 1000 samples)")
    g.add_argument("--samples", type=int)
    g.add_argument("--seed", type=int)
    g.add_argument("--friction-range", metavar="LO,HI")
    g.add_argument("--pore-pressure-range-mpa", metavar="LO,HI")
    g.add_argument("--pore-gradient-range-mpa-km", metavar="LO,HI")
    g.add_argument("--density-range-kg-m3", metavar="LO,HI",
                   help="range of the mean overburden density")
    g.add_argument("--shape-ratio-range", metavar="LO,HI")
    g.add_argument("--azimuth-sigma-deg", type=float,
                   help="standard deviation of SHmax azimuth when no ensemble is used "
                        "(default 15)")
    g.add_argument("--indicators", metavar="FILE",
                   help="stress indicators (CSV/GeoJSON/GeoPackage): derive the azimuth spread "
                        "from them when no ensemble is used and --azimuth-sigma-deg is not given")
    g.add_argument("--indicator-radius-km", type=float,
                   help="use indicators within this distance of the site (default 500)")
    g.add_argument("--ensemble-members", type=int,
                   help="sample azimuth/regime/shape ratio from a model ensemble of this size")
    g.add_argument("--ensemble-distributions", metavar="JSON|FILE",
                   help="load-group distributions for the ensemble, e.g. "
                        "'{\"ridge\": {\"distribution\": \"uniform\", \"low\": 0.5, "
                        "\"high\": 1.5}}' (default: the model's, else each group 0.5-1.5)")
    g.add_argument("--margin-threshold-mpa", type=float,
                   help="report the share of samples whose margin falls below this, MPa "
                        "(default 0)")
    g = p.add_argument_group("files")
    g.add_argument("--csv", metavar="FILE", help="write the ranked planes as CSV (with .csvt/.prj "
                   "sidecars and the caution and site results in FILE's .json sidecar)")
    g.add_argument("--geojson", metavar="FILE", help="write three GeoJSON layers beside FILE: "
                   "STEM_traces (lines), STEM_planes and STEM_sites (points)")
    g.add_argument("--gpkg", metavar="FILE", help="write a GeoPackage with the layers traces, "
                   "planes and sites")
    g.add_argument("--mohr-png", metavar="FILE", help="write a Mohr diagram")
    g.add_argument("--polygon-png", metavar="FILE", help="write the stress polygon")
    g.add_argument("--map-png", metavar="FILE", help="write a map of traces coloured by margin")
    g.add_argument("--margins-png", metavar="FILE",
                   help="write each fault's cumulative margin curve over the samples")
    # option destinations -> their long flags, so notes and errors name what the user typed
    flag_names = {a.dest: next(o for o in a.option_strings if o.startswith("--"))
                  for a in p._actions if any(o.startswith("--") for o in a.option_strings)}
    p.set_defaults(handler=_run, flag_names=flag_names)
