"""Stress-indicator commands.

``stressmap indicators convert FILE -o OUT.(csv|geojson)``
    Every indicator with its derived ``shmax_azimuth_deg`` (and, for focal mechanisms, the
    auxiliary plane, P/T/B axes and ``mechanism_class``).
``stressmap indicators summarise FILE``
    Counts and axial statistics (mean SHmax, resultant length, circular standard deviation,
    Rayleigh test), overall and per type.
``stressmap smooth FILE --bbox W,S,E,N --radius-km R``
    The gridded observed SHmax field (``-o OUT.nc`` for CF netCDF, ``-o OUT.geojson`` or stdout
    for GeoJSON).
``stressmap compare MODEL_DIR FILE -o OUT``
    Model-data comparison written to the directory OUT: ``indicators.geojson``,
    ``indicators.csv``, ``summary.json``, ``map.png`` and ``rose.png``.

Every command takes ``--skip-bad`` to leave out bad rows; they are still listed on stderr.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from stressmap.analyses.compare import COMPARISON_COLUMNS, compare
from stressmap.analyses.indicators import CONVERT_COLUMNS, summarise
from stressmap.analyses.observed import (
    DEFAULT_MAX_HALFWIDTH_DEG,
    DEFAULT_MIN_COUNT,
    observed_grid,
)
from stressmap.cli.model import parse_bbox, parse_weights
from stressmap.constants import CAUTION
from stressmap.errors import InputError, problem
from stressmap.formats.observed import observed_geojson, observed_netcdf_bytes
from stressmap.io.files import write_atomic
from stressmap.io.indicators import read_indicators, write_indicators
from stressmap.io.networkdir import read_any_model
from stressmap.model.network_predict import plate_at
from stressmap.plot.indicators import comparison_map_png, rose_png

__all__ = ["register", "summary_text"]


def _read(args):

    gdf = read_indicators(args.file, skip_bad=args.skip_bad)
    skipped = gdf.attrs.get("skipped") or []
    if skipped:
        rows = sorted({p["row"] for p in skipped if p.get("row") is not None})
        print(f"warning: skipped {len(rows)} bad row(s) of {args.file}:", file=sys.stderr)
        for p in skipped:
            where = ", ".join(f"{k} {p[k]}" for k in ("row", "field") if p.get(k) is not None)
            print(f"  - {where + ': ' if where else ''}{p['message']}", file=sys.stderr)
    return gdf


def _output_columns(gdf, leading):
    extra = [c for c in gdf.columns if c not in leading and c not in ("geometry", "shmax_span_deg")]
    return list(leading) + extra


def _cmd_convert(args) -> int:

    out = Path(args.output)
    if out.suffix.lower() not in (".csv", ".geojson", ".json", ".gpkg"):
        raise InputError("output must end in .csv, .geojson or .gpkg",
                         [problem(f"got {out.name!r}", field="-o/--output")])
    gdf = _read(args)
    write_indicators(gdf.reset_index(drop=True), out, columns=_output_columns(gdf, CONVERT_COLUMNS))
    print(f"wrote {len(gdf)} indicators to {out}")
    return 0


def _fmt(v, spec=".1f"):
    return "-" if v is None or v != v else format(v, spec)


def _cmd_summarise(args) -> int:

    gdf = _read(args)
    s = summarise(gdf)
    if args.json:
        print(json.dumps(_nan_to_none(s), indent=2))
        return 0
    print(f"{s['total']} indicators ({s['undefined']} without a defined SHmax)")
    head = f"{'type':<22}{'count':>6}{'mean SHmax':>12}{'R':>7}{'std':>7}{'Rayleigh p':>12}"
    print(head)
    for name, st in [("all", s["all"])] + list(s["by_type"].items()):
        print(f"{name:<22}{st['count']:>6}{_fmt(st['mean_shmax_azimuth_deg']):>12}"
              f"{_fmt(st['mean_resultant_length'], '.2f'):>7}{_fmt(st['axial_std_deg']):>7}"
              f"{_fmt(st['rayleigh_p'], '.2g'):>12}")
    print("Mean: weighted axial mean (degrees clockwise from north); R: mean resultant length of "
          "doubled angles; std: axial circular standard deviation (degrees); Rayleigh p: chance of "
          "this concentration from random orientations.")
    return 0


def _nan_to_none(obj):
    if isinstance(obj, dict):
        return {k: _nan_to_none(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_nan_to_none(v) for v in obj]
    if isinstance(obj, float) and obj != obj:
        return None
    if hasattr(obj, "item"):
        return _nan_to_none(obj.item())
    return obj


def _cmd_smooth(args) -> int:

    gdf = _read(args)
    ds = observed_grid(gdf, bbox=parse_bbox(args.bbox), radius_km=args.radius_km,
                       spacing_km=args.spacing_km, min_count=args.min_count,
                       max_halfwidth_deg=args.max_halfwidth_deg)
    meta = {"source_file": Path(args.file).name}
    if args.output is None:
        print(json.dumps(observed_geojson(ds, meta), allow_nan=False))
        return 0
    out = Path(args.output)
    suffix = out.suffix.lower()
    if suffix == ".nc":
        data = observed_netcdf_bytes(ds, meta)
    elif suffix in (".geojson", ".json"):
        data = json.dumps(observed_geojson(ds, meta), allow_nan=False).encode("utf-8")
    else:
        raise InputError("output must end in .nc or .geojson",
                         [problem(f"got {out.name!r}", field="-o/--output")])
    write_atomic(out, data)
    good = int((ds["status"].values == 0).sum())
    print(f"wrote {ds.sizes['lat']} x {ds.sizes['lon']} grid to {out}: {good} node(s) with a mean")
    return 0


def summary_text(summary: dict) -> str:
    """A short human-readable report of a comparison summary."""
    o = summary["overall"]
    lines = [
        f"{summary['total']} indicators: {summary['inside']} inside the plate, "
        f"{summary['outside']} outside; {o['count']} compared",
        f"weighted mean |misfit| {_fmt(o['weighted_mean_abs_misfit_deg'])} deg "
        f"(random orientations: 45), RMS {_fmt(o['rms_misfit_deg'])} deg, "
        f"mean misfit {_fmt(o['mean_misfit_deg'])} deg",
        f"within 15 deg: {_fmt(100 * o['fraction_within_15_deg'] if o['count'] else None, '.0f')} %, "
        f"within 30 deg: {_fmt(100 * o['fraction_within_30_deg'] if o['count'] else None, '.0f')} %; "
        f"chance of a fit this good from random orientations p = {_fmt(o['random_p_value'], '.2g')}",
    ]
    if o.get("regime_compared"):
        lines.append(f"regime agrees for {_fmt(100 * o['regime_agreement_fraction'], '.0f')} % of "
                     f"{o['regime_compared']} indicators with a regime")
    for key, label in (("by_type", "type"), ("by_province", "province")):
        for name, st in summary[key].items():
            lines.append(f"  {label} {name}: n={st['count']}, weighted mean |misfit| "
                         f"{_fmt(st['weighted_mean_abs_misfit_deg'])} deg, within 30 deg "
                         f"{_fmt(100 * st['fraction_within_30_deg'] if st['count'] else None, '.0f')} %")
    lines.append(CAUTION)
    return "\n".join(lines)


def _cmd_compare(args) -> int:

    model_dir = Path(args.model_dir)
    if not model_dir.is_dir():
        raise InputError(f"model directory not found: {model_dir}",
                         [problem("not a directory", field="MODEL_DIR")])
    model = read_any_model(model_dir)
    weights = parse_weights(args.weights)
    gdf = _read(args)
    table, summary = compare(model, gdf, weights=weights)
    if "element_plate" in model.fields:  # a network: name the plate of each indicator
        table["plate"] = plate_at(model, table["lon"].to_numpy(float), table["lat"].to_numpy(float))
    model_id = model_dir.name
    summary["model_id"] = model_id
    meta = {"caution": CAUTION, "model_id": model_id,
            "build_time": summary.get("model_build_time", "")}
    out = Path(args.output)
    out.mkdir(parents=True, exist_ok=True)
    cols = _output_columns(table, CONVERT_COLUMNS + COMPARISON_COLUMNS
                           + (["plate"] if "plate" in table else []))
    flat = table.reset_index(drop=True)
    write_indicators(flat, out / "indicators.geojson", columns=cols, meta=meta)
    write_indicators(flat, out / "indicators.csv", columns=cols, meta=meta)
    write_indicators(flat, out / "indicators.gpkg", columns=cols, meta=meta)
    write_atomic(out / "summary.json", json.dumps(_nan_to_none(summary), indent=2))
    written = ["indicators.geojson", "indicators.csv", "indicators.gpkg", "summary.json"]
    if not args.no_pictures:

        caption = f"Model {model_id}, built {summary.get('model_build_time', '')}"
        (out / "map.png").write_bytes(comparison_map_png(model, table, caption=caption))
        inside = table["inside"].to_numpy(bool)
        (out / "rose.png").write_bytes(rose_png(table["shmax_azimuth_deg"].to_numpy(float)[inside],
                                                table["predicted_shmax_azimuth_deg"].to_numpy(float)[inside],
                                                table["weight"].to_numpy(float)[inside], caption=caption))
        written += ["map.png", "rose.png"]
    print(summary_text(summary))
    print(f"wrote {', '.join(written)} to {out}")
    return 0


def register(sub) -> None:
    ind = sub.add_parser("indicators", help="convert and summarise stress-indicator files",
                         description="Convert stress-indicator files (CSV, GeoJSON, GeoPackage) to "
                                     "SHmax orientations and summarise them.")
    isub = ind.add_subparsers(dest="indicators_command", metavar="ACTION")

    def common(p):
        p.add_argument("file", metavar="FILE", help="indicator file: .csv, .geojson or .gpkg")
        p.add_argument("--skip-bad", action="store_true",
                       help="leave out bad rows (they are listed on stderr) instead of stopping")

    conv = isub.add_parser("convert", help="write every indicator with its derived SHmax azimuth",
                           description="Write every indicator with its derived shmax_azimuth_deg; "
                                       "focal mechanisms also get the auxiliary plane, P, T and B "
                                       "axes and their faulting class.")
    common(conv)
    conv.add_argument("-o", "--output", required=True, metavar="OUT",
                      help="output file, .csv, .geojson or .gpkg")
    conv.set_defaults(handler=_cmd_convert)

    summ = isub.add_parser("summarise", help="counts and axial statistics per indicator type")
    common(summ)
    summ.add_argument("--json", action="store_true", help="print the statistics as JSON")
    summ.set_defaults(handler=_cmd_summarise)

    sm = sub.add_parser("smooth", help="grid the observed SHmax field of an indicator file",
                        description="Weighted axial mean SHmax of the indicators within a search "
                                    "radius of each grid node (distance and uncertainty weights), "
                                    "with count, dispersion and the confidence half-width of the mean per node.")
    common(sm)
    sm.add_argument("--bbox", required=True, metavar="W,S,E,N",
                    help="grid bounding box in degrees (write --bbox=W,S,E,N when W is negative)")
    sm.add_argument("--radius-km", required=True, type=float, metavar="R", help="search radius, km")
    sm.add_argument("--spacing-km", type=float, metavar="K", help="node spacing, km (default R/2)")
    sm.add_argument("--min-count", type=int, default=DEFAULT_MIN_COUNT, metavar="N",
                    help="fewest indicators within the radius for a mean (default "
                         f"{DEFAULT_MIN_COUNT}: a mean at the half-width limit is then significant "
                         "by the Rayleigh test at 1 %%)")
    sm.add_argument("--max-halfwidth-deg", type=float, default=DEFAULT_MAX_HALFWIDTH_DEG,
                    metavar="H", help="largest 95 %% confidence half-width of a node's mean SHmax, "
                                      f"degrees (default {DEFAULT_MAX_HALFWIDTH_DEG:g})")
    sm.add_argument("-o", "--output", metavar="OUT",
                    help="output file, .nc (CF netCDF) or .geojson; GeoJSON on stdout if omitted")
    sm.set_defaults(handler=_cmd_smooth)

    cmp_ = sub.add_parser("compare", help="compare a built model with an indicator file",
                          description="Predicted SHmax and regime at every indicator, misfits and "
                                      "a summary; writes GeoJSON, CSV, JSON and two PNG pictures.")
    cmp_.add_argument("model_dir", metavar="MODEL_DIR", help="model directory written by `stressmap build`")
    common(cmp_)
    cmp_.add_argument("-o", "--output", required=True, metavar="OUT", help="output directory")
    cmp_.add_argument("--weights", metavar="GROUP=VALUE,...", help="scale load groups (default 1 each)")
    cmp_.add_argument("--no-pictures", action="store_true", help="skip map.png and rose.png")
    cmp_.set_defaults(handler=_cmd_compare)
