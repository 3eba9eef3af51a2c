"""``stressmap build`` and ``stressmap predict``: build a plate model once, query it many times."""

from __future__ import annotations

import json
from pathlib import Path

from stressmap import CAUTION, validate
from stressmap.cli._progress import progress_bar
from stressmap.errors import InputError, problem
from stressmap.io.grids import read_document_grids
from stressmap.io.modeldir import write_model
from stressmap.io.networkdir import is_network_dir, read_any_model
from stressmap.io.outputs import output_kind, write_points_output
from stressmap.io.plate_files import load_plate_files
from stressmap.io.points import read_points
from stressmap.model import build_model, predict_grid, predict_points
from stressmap.model.network_predict import predict_network_grid, predict_network_points

__all__ = ["register", "parse_weights", "parse_bbox", "load_document"]


def parse_weights(text: str | None, option: str = "--weights") -> dict | None:
    """Parse ``group=value,group=value`` (``group:value`` works too) into a dict.

    Examples
    --------
    >>> parse_weights("ridge=1.5, subduction=0.5")
    {'ridge': 1.5, 'subduction': 0.5}
    >>> parse_weights(None) is None
    True
    >>> parse_weights("ridge=inf")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: cannot read 'ridge=inf' as group=value (value must be a finite number)
    """
    problems: list = []
    out = validate.weights_text(text, option, problems)
    validate.raise_problems(problems)
    return out


def parse_bbox(text: str, option: str = "--bbox") -> tuple[float, float, float, float]:
    """Parse ``W,S,E,N`` in degrees (the box rule of :func:`stressmap.validate.bbox`).

    Examples
    --------
    >>> parse_bbox("-10,40,5.5,50")
    (-10.0, 40.0, 5.5, 50.0)
    >>> parse_bbox("5,40,5,50")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: west 5 and east 5 must differ: the box has no width (-180, ..., 180, ... is the whole globe)
    """
    problems: list = []
    box = validate.bbox(text, option, problems, text=True)
    validate.raise_problems(problems)
    return box


def load_document(path: str, params: str | None = None) -> dict:
    """Read a plate model document (JSON), or a boundary file (GeoJSON/GeoPackage) plus params."""
    p = Path(path)
    if not p.is_file():
        raise InputError(f"model file not found: {path}", [problem("file not found", field=path)])
    if params is not None or p.suffix.lower() in (".gpkg", ".geojson"):

        return load_plate_files(p, params)
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:  # also too deep / too long
        raise InputError(f"{p.name} is not valid JSON: {exc}",
                         [problem(f"not valid JSON: {exc}", field=p.name)]) from None


def _cmd_build(args) -> int:

    document = load_document(args.model, args.params)
    # grid paths are relative to the working directory, else to the file that names them
    base = Path(args.params if args.params else args.model).parent
    grids = read_document_grids(document, base_dir=base)
    bar, update = progress_bar("build")
    try:
        model = build_model(document, progress=update, grids=grids)
    finally:
        bar.close()
    out = write_model(model, args.output)
    s = model.summary
    print(f"built {s.get('name', '')!r} -> {out}")
    stats = s.get("mesh", {})
    if stats:
        print(f"  mesh: {stats.get('nodes')} nodes, {stats.get('triangles')} triangles, "
              f"min angle {stats.get('min_angle_deg', float('nan')):.1f} deg")
    print(f"  load groups: {', '.join(model.groups)}")
    return 0


def _cmd_predict(args) -> int:

    network = is_network_dir(args.model_dir)
    model = read_any_model(args.model_dir)
    on_points, on_grid = ((predict_network_points, predict_network_grid) if network
                          else (predict_points, predict_grid))
    weights = parse_weights(args.weights)
    out = Path(args.output)
    output_kind(out)  # refuse an unknown suffix before any work
    if args.points and out.resolve() == Path(args.points).resolve():
        raise InputError(f"-o {args.output} is the --points file: it would be overwritten",
                         [problem("write the predictions to another file", field="-o")])
    meta = {
        "caution": CAUTION,
        "model_name": model.summary.get("name", ""),
        "build_time": model.summary.get("build_time", ""),
    }
    if args.points:
        lon, lat, props = read_points(args.points)
        ds = on_points(model, lon, lat, weights=weights)
        write_points_output(out, ds, meta, props)
        n_in = int(ds["inside"].sum())
        print(f"predicted {n_in} of {lon.size} points inside the plate{'s' if network else ''} -> {out}")
    else:
        if args.spacing_km is None:
            raise InputError("--bbox needs --spacing-km", [problem("required with --bbox", field="--spacing-km")])
        ds = on_grid(model, bbox=parse_bbox(args.bbox), spacing_km=args.spacing_km, weights=weights)
        write_points_output(out, ds, meta, grid=True)
        print(f"predicted a {ds.sizes['lat']} x {ds.sizes['lon']} grid "
              f"({int(ds['inside'].sum())} nodes inside the plate{'s' if network else ''}) -> {out}")
    print(f"note: {CAUTION}")
    return 0


def register(sub) -> None:
    p = sub.add_parser(
        "build",
        help="build a plate model: mesh, solve every load group, store unit stress fields",
        description="Build a plate model document into a model directory (definition, unit stress "
                    "fields per load group as netCDF, summary). Every later prediction reuses it.",
    )
    p.add_argument("model", metavar="MODEL", help="plate model document (.json), or a boundary "
                   "file (.geojson/.gpkg) with --params")
    p.add_argument("--params", metavar="FILE", help="TOML/JSON parameters for a boundary file "
                   "(name, provinces, ridge_push, drag, sheet, mesh)")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="model directory to write")
    p.set_defaults(handler=_cmd_build)

    q = sub.add_parser(
        "predict",
        help="predict SHmax azimuth, regime and magnitudes at points or on a grid",
        description="Predict the tectonic stress of a built model at points (--points) or on a "
                    "lon/lat grid (--bbox with --spacing-km). Output type follows the -o suffix.",
    )
    q.add_argument("model_dir", metavar="DIR", help="model directory written by `stressmap build`, "
                   "or network directory written by `stressmap network build` (adds a plate column)")
    where = q.add_mutually_exclusive_group(required=True)
    where.add_argument("--points", metavar="FILE", help="CSV with lon,lat columns, or GeoJSON/GeoPackage points")
    where.add_argument("--bbox", metavar="W,S,E,N", help="grid bounding box in degrees (write --bbox=W,S,E,N when W is negative)")
    q.add_argument("--spacing-km", type=float, metavar="K", help="grid spacing in km (with --bbox)")
    q.add_argument("--weights", metavar="GROUP=VALUE,...", help="scale load groups (default 1 each)")
    q.add_argument("-o", "--output", required=True, metavar="OUT",
                   help="output file: .geojson, .csv (with .csvt/.prj/.json sidecars), .nc (CF netCDF) or .gpkg")
    q.set_defaults(handler=_cmd_predict)
