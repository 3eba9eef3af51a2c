"""``stressmap calibrate`` and ``stressmap ensemble``: force magnitudes against indicators, and
how much the prediction could change across plausible force magnitudes."""

from __future__ import annotations

import json
from pathlib import Path

from stressmap import CAUTION, validate
from stressmap.analyses.calibrate import calibrate
from stressmap.analyses.ensemble import (
    ensemble_grid,
    ensemble_points,
    flatten_percentiles,
)
from stressmap.cli._progress import progress_bar
from stressmap.cli.model import parse_bbox
from stressmap.errors import InputError, problem
from stressmap.io.files import write_atomic
from stressmap.io.indicators import read_indicators
from stressmap.io.networkdir import read_any_model
from stressmap.io.outputs import output_kind, write_points_output
from stressmap.io.points import read_points
from stressmap.model import plate_outline
from stressmap.plot.ensemble import ensemble_png
from stressmap.plot.maps import ensemble_regime_png

__all__ = ["register", "parse_bounds", "parse_vary", "parse_percentiles", "load_config"]


def parse_bounds(text: str | None) -> dict:
    """Parse ``group=low:high,group=low:high``.

    Examples
    --------
    >>> parse_bounds("collision=0:3, subduction=0.5:2")
    {'collision': [0.0, 3.0], 'subduction': [0.5, 2.0]}
    >>> parse_bounds("collision=3")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: cannot read bounds 'collision=3': use group=low:high,...
      - field --bounds: cannot read 'collision=3': expected group=low:high pairs separated by commas (--bounds must be a pair LOW:HIGH of finite numbers, got the string '3')
    """
    out: dict = {}
    problems: list = []
    for item in (text or "").split(","):
        if not item.strip():
            continue
        name, sep, rng = item.partition("=")
        found: list = []
        pair = validate.number_pair(rng, "--bounds", found, text=":") if sep else None
        if not name.strip() or pair is None:
            problems.append(problem(f"cannot read {item.strip()!r}: expected group=low:high pairs "
                                    "separated by commas" + (f" ({found[0]['message']})"
                                                             if found else ""), field="--bounds"))
            continue
        out[name.strip()] = list(pair)
    validate.raise_problems(problems, f"cannot read bounds {text!r}: use group=low:high,...")
    return out


def parse_vary(items: list[str] | None) -> dict:
    """Parse ``--vary`` options into distribution specs.

    ``GROUP=uniform:LOW:HIGH``, ``GROUP=log-uniform:LOW:HIGH``, ``GROUP=normal:MEAN:STD`` vary
    the group's weight; ``GROUP.PARAMETER=...`` varies a physical parameter
    (``pull_fraction``, ``slab_age_myr``) mapped to the weight.

    Examples
    --------
    >>> parse_vary(["collision=log-uniform:0.3:3"])
    {'collision': {'distribution': 'log-uniform', 'low': 0.3, 'high': 3.0}}
    >>> parse_vary(["subduction.pull_fraction=normal:0.12:0.03"])["subduction"]
    {'distribution': 'normal', 'mean': 0.12, 'std': 0.03, 'parameter': 'pull_fraction'}
    """
    out: dict = {}
    for item in items or []:
        target, sep, rest = item.partition("=")
        parts = rest.split(":")
        group, _, parameter = target.strip().partition(".")
        found: list = []
        a, b = ((validate.number(v, "--vary", found, text=True, required=True)
                 for v in parts[1:]) if len(parts) == 3 else (None, None))
        kind = parts[0].strip()
        if not (sep and group and len(parts) == 3) or found:
            raise InputError(f"cannot read --vary {item!r}: use GROUP[.PARAMETER]=KIND:A:B",
                             [problem("e.g. collision=log-uniform:0.3:3 or "
                                      "subduction.pull_fraction=uniform:0.06:0.24",
                                      field="--vary")]) from None
        spec = ({"distribution": kind, "mean": a, "std": b} if kind == "normal"
                else {"distribution": kind, "low": a, "high": b})
        if parameter:
            spec["parameter"] = parameter
        out[group] = spec
    return out


def parse_percentiles(text: str) -> list[float]:
    """Parse ``5,50,95``.

    Examples
    --------
    >>> parse_percentiles("10, 50,90")
    [10.0, 50.0, 90.0]
    >>> parse_percentiles("5,x,150")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: cannot read percentiles '5,x,150': use numbers from 0 to 100 separated by commas
      - field --percentiles: percentile must be a number, got the string 'x'
      - field --percentiles: percentile must be <= 100, got 150
    """
    problems: list = []
    out = [validate.number(v, "--percentiles", problems, name="percentile", text=True, low=0.0,
                           high=100.0) for v in text.split(",") if v.strip()]
    validate.raise_problems(problems, f"cannot read percentiles {text!r}: use numbers from 0 to "
                            "100 separated by commas")
    return out


def load_config(path: str | None) -> dict:
    """Read a TOML or JSON settings file with optional ``calibration`` and ``ensemble`` tables.

    ``calibration``: ``bounds`` (group -> [low, high]), ``reference``, ``n_bootstrap``,
    ``n_random``, ``n_starts``, ``confidence``, ``seed``. ``ensemble``: ``distributions``
    (group -> spec), ``percentiles``, ``seed``.
    """
    if not path:
        return {}
    p = Path(path)
    if not p.is_file():
        raise InputError(f"settings file not found: {path}", [problem("file not found",
                                                                      field="--config")])
    text = p.read_text(encoding="utf-8")
    try:
        if p.suffix.lower() == ".json":
            data = json.loads(text)
        else:
            import tomllib

            data = tomllib.loads(text)
    except (ValueError, json.JSONDecodeError) as exc:
        raise InputError(f"cannot read {p.name}: {exc}", [problem(str(exc), field="--config")]) \
            from None
    if not isinstance(data, dict):
        raise InputError(f"{p.name} must hold a table", [problem("not a table", field="--config")])
    return data


def _read_model(path: str):

    if not Path(path).is_dir():
        raise InputError(f"model directory not found: {path}",
                         [problem("not a directory written by `stressmap build`",
                                  field="MODEL_DIR")])
    return read_any_model(path)


def _cmd_calibrate(args) -> int:

    config = dict(load_config(args.config).get("calibration") or {})
    bounds = dict(config.get("bounds") or {})
    bounds.update(parse_bounds(args.bounds))
    settings = {
        "reference": args.reference or config.get("reference"),
        "n_bootstrap": args.bootstrap if args.bootstrap is not None else config.get("n_bootstrap", 200),
        "n_random": args.random if args.random is not None else config.get("n_random", 100),
        "n_starts": args.starts if args.starts is not None else config.get("n_starts", 8),
        "confidence": args.confidence if args.confidence is not None else config.get("confidence", 0.95),
        "seed": args.seed if args.seed is not None else config.get("seed", 0),
    }
    problems: list = []
    for key in ("n_bootstrap", "n_random", "n_starts"):
        settings[key] = validate.number(settings[key], key, problems, integer=True,
                                        low=1 if key == "n_starts" else 0)
    settings["confidence"] = validate.number(settings["confidence"], "confidence", problems,
                                             low=0.0, high=1.0, low_inclusive=False,
                                             high_inclusive=False)
    settings["seed"] = validate.number(settings["seed"], "seed", problems, integer=True, low=0)
    validate.raise_problems(problems, "invalid calibration settings")
    model = _read_model(args.model_dir)
    indicators = read_indicators(args.indicators, skip_bad=args.skip_bad)
    skipped = indicators.attrs.get("skipped") or []
    bar, update = progress_bar("calibrate")
    try:
        result = calibrate(model, indicators, bounds=bounds, progress=update,
                           **{k: (int(v) if k.startswith("n_") or k == "seed" else v)
                              for k, v in settings.items()})
    finally:
        bar.close()
    out = result.to_dict()
    out["model_name"] = model.summary.get("name", "")
    out["skipped_rows"] = skipped
    out["caution"] = CAUTION
    if args.json:
        print(json.dumps(out, indent=2, allow_nan=False, default=float))
        return 0
    sig = out["significance"]
    print(f"calibrated {out['n_indicators']} indicators against {out['model_name']!r} "
          f"(reference group {out['reference']}, {int(100 * out['confidence'])}% bootstrap "
          f"intervals from {result.settings['n_bootstrap']} resamples)")
    if result.settings.get("n_outside"):
        print(f"  {result.settings['n_outside']} indicators outside the plate were left out")
    if skipped:
        print(f"  {len(skipped)} unreadable rows were skipped (--skip-bad)")
    print(f"  {'group':<16}{'weight':>9}{'interval':>22}{'bounds':>16}  note")
    for g in result.groups:
        lo, hi = out["weights_ci"][g]
        blo, bhi = out["bounds"][g]
        note = ("reference (fixed)" if g == out["reference"]
                else "; ".join(out["flags"].get(g, [])) or "constrained")
        print(f"  {g:<16}{out['weights'][g]:>9.3f}{f'[{lo:.3f}, {hi:.3f}]':>22}"
              f"{f'[{blo:g}, {bhi:g}]':>16}  {note}")
    print(f"  misfit before {out['misfit_before']:.1f} deg, after {out['misfit_after']:.1f} deg "
          f"(weighted mean absolute axial misfit; random orientations give 45)")
    if "p_value" in sig:
        print(f"  significance against random azimuths: p = {sig['p_value']:.3g} "
              f"({sig['n_random']} calibrations to random data, mean misfit "
              f"{sig['null_misfit_mean_deg']:.1f} deg)")
    print(f"note: {CAUTION}")
    return 0


def _cmd_ensemble(args) -> int:

    out = Path(args.output)
    fmt = output_kind(out, (".nc", ".geojson", ".json", ".csv", ".gpkg", ".png"))
    if args.members < 1:
        raise InputError("--members must be at least 1", [problem(f"got {args.members}",
                                                                  field="--members")])
    config = dict(load_config(args.config).get("ensemble") or {})
    distributions = dict(config.get("distributions") or {})
    if args.distributions:
        extra = load_config(args.distributions)
        distributions.update(extra.get("distributions", extra))
    distributions.update(parse_vary(args.vary))
    percentiles = (parse_percentiles(args.percentiles) if args.percentiles
                   else config.get("percentiles", [5.0, 50.0, 95.0]))
    seed = args.seed if args.seed is not None else int(config.get("seed", 0))
    model = _read_model(args.model_dir)
    kwargs = dict(members=args.members, distributions=distributions, seed=seed,
                  percentiles=percentiles, memory_mb=args.memory_mb, workers=args.workers,
                  scheduler=args.scheduler)
    bar, update = progress_bar("ensemble")
    try:
        if args.points:

            lon, lat, props = read_points(args.points)
            ds = ensemble_points(model, lon, lat, progress=update, **kwargs)
        else:
            if args.spacing_km is None:
                raise InputError("--bbox needs --spacing-km",
                                 [problem("required with --bbox", field="--spacing-km")])

            props = None
            ds = ensemble_grid(model, parse_bbox(args.bbox), args.spacing_km, progress=update,
                               **kwargs)
    finally:
        bar.close()
    meta = {"caution": CAUTION, "model_name": model.summary.get("name", ""),
            "build_time": model.summary.get("build_time", ""), "members": args.members,
            "seed": seed, "distributions": ds.attrs.get("distributions", "{}")}
    caption = (f"Model {meta['model_name']} built {meta['build_time']}; {args.members} members, "
               f"seed {seed}")
    if args.regime_png:
        write_atomic(args.regime_png, ensemble_regime_png(ds, plate_outline(model), caption=caption))
    if fmt == "png":
        write_atomic(out, ensemble_png(ds, plate_outline(model), caption=caption))
    else:
        write_points_output(out, ds, meta, props, grid=not args.points,
                            flat=flatten_percentiles(ds))
    n_in = int(ds["inside"].values.astype(bool).sum())
    where = (f"{ds.sizes['point']} points" if "point" in ds.dims
             else f"a {ds.sizes['lat']} x {ds.sizes['lon']} grid")
    print(f"ensemble of {args.members} members over {where} ({n_in} inside the plate) -> {out}"
          + (f"; regime probability map -> {args.regime_png}" if args.regime_png else ""))
    if ds.attrs.get("distributions_source", "given") != "given":
        print(f"note: distributions: {ds.attrs['distributions_source']}")
    print(f"note: {CAUTION}")
    return 0


def register(sub) -> None:
    p = sub.add_parser(
        "calibrate",
        help="fit load-group weights of a built model to stress indicators",
        description="Fit non-negative load-group weights that minimise the uncertainty-weighted "
                    "axial misfit between predicted SHmax and the indicators (one reference "
                    "group held fixed: orientations are blind to an overall scale). Reports the "
                    "weights with bootstrap intervals, the misfit before and after, its "
                    "significance against random azimuths, and weights the data cannot "
                    "constrain.",
    )
    p.add_argument("model_dir", metavar="MODEL_DIR", help="model directory from `stressmap build`")
    p.add_argument("indicators", metavar="INDICATORS",
                   help="indicator file (CSV, GeoJSON or GeoPackage; see `stressmap indicators`)")
    p.add_argument("--json", action="store_true",
                   help="print the result as JSON (weights, weights_ci, misfit_before, "
                        "misfit_after, ...)")
    p.add_argument("--bounds", metavar="GROUP=LOW:HIGH,...",
                   help="weight bounds per group (default 0:5)")
    p.add_argument("--reference", metavar="GROUP",
                   help="group held at weight 1 (default: the strongest at the indicators)")
    p.add_argument("--bootstrap", type=int, metavar="N", help="bootstrap resamples (200)")
    p.add_argument("--random", type=int, metavar="N",
                   help="random-azimuth data sets for the significance test (100; 0 skips)")
    p.add_argument("--starts", type=int, metavar="N", help="optimiser starts (8)")
    p.add_argument("--confidence", type=float, metavar="C", help="interval level (0.95)")
    p.add_argument("--seed", type=int, metavar="S", help="random seed (0)")
    p.add_argument("--skip-bad", action="store_true",
                   help="leave out unreadable indicator rows (they are reported) instead of failing")
    p.add_argument("--config", metavar="FILE",
                   help="TOML/JSON settings with a [calibration] table (bounds, reference, ...)")
    p.set_defaults(handler=_cmd_calibrate)

    q = sub.add_parser(
        "ensemble",
        help="SHmax and regime statistics over an ensemble of force magnitudes",
        description="Draw load-group weights (or physical parameters mapped to them) from "
                    "distributions with a fixed seed and report, at points or on a grid, the "
                    "axial mean and standard deviation of SHmax, the probability of each regime "
                    "and percentiles of s_hmax and s_hmin. Output type follows the -o suffix.",
    )
    q.add_argument("model_dir", metavar="MODEL_DIR", help="model directory from `stressmap build`")
    where = q.add_mutually_exclusive_group(required=True)
    where.add_argument("--points", metavar="F",
                       help="CSV with lon,lat columns, or GeoJSON/GeoPackage points")
    where.add_argument("--bbox", metavar="W,S,E,N", help="grid bounding box in degrees")
    q.add_argument("--spacing-km", type=float, metavar="K", help="grid spacing in km (with --bbox)")
    q.add_argument("--members", type=int, required=True, metavar="N", help="ensemble members")
    q.add_argument("-o", "--output", required=True, metavar="OUT",
                   help="output file: .nc (CF netCDF), .geojson, .csv, .gpkg or .png")
    q.add_argument("--regime-png", metavar="FILE",
                   help="also draw the probability of each faulting regime as a PNG map")
    q.add_argument("--vary", action="append", metavar="GROUP[.PARAM]=KIND:A:B",
                   help="distribution of a group's weight or parameter: uniform:LOW:HIGH, "
                        "log-uniform:LOW:HIGH, normal:MEAN:STD (repeatable)")
    q.add_argument("--distributions", metavar="FILE",
                   help="TOML/JSON table of group -> {distribution, low, high | mean, std, "
                        "parameter, reference}")
    q.add_argument("--percentiles", metavar="P,P,...", help="magnitude percentiles (5,50,95)")
    q.add_argument("--seed", type=int, metavar="S", help="random seed (0)")
    q.add_argument("--workers", type=int, metavar="N", help="local threads (default: CPUs, <= 4)")
    q.add_argument("--memory-mb", type=float, default=256.0, metavar="MB",
                   help="memory budget per chunk (256)")
    q.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on a Dask distributed scheduler, e.g. tcp://host:8786")
    q.add_argument("--config", metavar="FILE",
                   help="TOML/JSON settings with an [ensemble] table (distributions, ...)")
    q.set_defaults(handler=_cmd_ensemble)
