"""``stressmap serve`` (the HTTP service under waitress) and ``stressmap demo`` (the fictional demo
plate built and written as a prediction grid: GeoJSON, netCDF and a PNG map)."""

from __future__ import annotations

import hashlib
import json
import logging
import math
import os
import signal
import tomllib
from pathlib import Path

from stressmap_api import create_app, load_config
from stressmap_api.demo import ensure_demo, example_points, example_requests
from stressmap_api.demo_network import (
    demo_network_document,
    ensure_demo_network,
    example_network_requests,
)
from stressmap_api.jobs import get_jobs
from stressmap_api.network_store import get_network_store
from stressmap_api.server import create_server
from stressmap_api.store import get_store

from stressmap import CAUTION, validate
from stressmap.cli._progress import progress_bar
from stressmap.errors import InputError, StressmapError, problem
from stressmap.formats import export
from stressmap.formats.network_geojson import plates_geojson
from stressmap.geo.grid import MIN_SPACING_KM
from stressmap.io.modeldir import write_model
from stressmap.io.networkdir import build_network, derive, read_network_model
from stressmap.model import build_model, plate_outline, predict_grid
from stressmap.model.network_predict import predict_network_grid
from stressmap.plot.maps import shmax_map

__all__ = ["SERVER_DEFAULTS", "load_server_config", "register"]

_log = logging.getLogger(__name__)

#: waitress settings used when config/server.toml is absent.
SERVER_DEFAULTS = {"host": "127.0.0.1", "port": 8000, "threads": 8, "ident": "stressmap",
                   "channel_timeout": 20, "connection_limit": 500}

_REPO_SERVER_CONFIG = Path(__file__).resolve().parents[2] / "config" / "server.toml"


def load_server_config(path: str | None = None) -> dict:
    """waitress settings: defaults < config/server.toml (or ``path`` / STRESSMAP_SERVER_CONFIG)
    < the STRESSMAP_PORT environment variable (command-line options win over all of them)."""
    cfg = dict(SERVER_DEFAULTS)
    explicit = path or os.environ.get("STRESSMAP_SERVER_CONFIG")
    file = Path(explicit) if explicit else _REPO_SERVER_CONFIG
    if explicit and not file.is_file():
        raise InputError(f"server configuration not found: {file}",
                         [problem("file not found", field="--server-config")])
    if file.is_file():
        try:
            data = tomllib.loads(file.read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"{file.name} is not valid TOML: {exc}",
                             [problem(str(exc), field=str(file))]) from None
        cfg.update(data.get("server", data))
    port = os.environ.get("STRESSMAP_PORT", "").strip()
    if port:
        if not port.isdigit() or int(port) > 65535:
            raise InputError(f"STRESSMAP_PORT must be a port number 0-65535, got {port!r}",
                             [problem("expected a whole number from 0 to 65535",
                                      field="STRESSMAP_PORT")])
        cfg["port"] = int(port)
    return cfg


def _cmd_serve(args) -> int:

    server_cfg = load_server_config(args.server_config)
    if args.host:
        server_cfg["host"] = args.host
    if args.port is not None:
        server_cfg["port"] = args.port
    if args.threads is not None:
        server_cfg["threads"] = args.threads
    overrides = {}
    if args.workers is not None:
        problems: list = []
        validate.number(args.workers, "--workers", problems, integer=True, low=1)
        validate.raise_problems(problems)
        overrides["JOB_WORKERS"] = args.workers
    if args.demo:
        overrides["LOAD_DEMO"] = True
    host = str(server_cfg.get("host") or "")
    if host and host not in ("0.0.0.0", "::", ""):
        # the address it listens on is a name clients may use in Host
        allowed = load_config(overrides).get("ALLOWED_HOSTS") or []
        allowed = [allowed] if isinstance(allowed, str) else list(allowed)
        if "*" not in allowed and host.strip("[]").lower() not in allowed:
            overrides["ALLOWED_HOSTS"] = [*allowed, host.strip("[]").lower()]
    app = create_app(overrides or None)
    with app.app_context():
        store = get_store()
        jobs = get_jobs()
    demo_id = demo_network = None
    if app.config.get("LOAD_DEMO"):
        bar, update = progress_bar("demo model")
        try:
            demo_id = ensure_demo(store, update, int(app.config.get("MAX_MESH_NODES") or 0))
        finally:
            bar.close()
        with app.app_context():  # the demo planet's plates build in the background
            demo_network = ensure_demo_network(get_network_store(), jobs)
    try:
        server = create_server(app, **server_cfg)
    except OSError as exc:
        jobs.shutdown()
        raise StressmapError(f"cannot listen on {server_cfg['host']}:{server_cfg['port']}: "
                             f"{exc.strerror or exc} (choose another --port)") from None
    except (TypeError, ValueError) as exc:  # unknown or malformed waitress setting
        jobs.shutdown()
        raise InputError(f"bad server setting: {exc}",
                         [problem(str(exc), field="config/server.toml")]) from None
    host = server_cfg["host"]
    base = f"http://{'[' + host + ']' if ':' in host else host}:{server.effective_port}"
    print(f"stressmap service listening on {base}  (API page: {base}/api/v1/docs)", flush=True)
    print(f"data directory: {store.data_dir}; build workers: {jobs.workers} ({jobs.kind})",
          flush=True)
    token_reads = bool(app.config.get("API_TOKEN")) and bool(app.config.get("READS_NEED_TOKEN"))
    if demo_id:
        model = store.load(demo_id)
        points = example_points(model)
        print(f"demo model (fictional plate '{model.summary.get('name')}') ready: {demo_id}")
        print("try:")
        for line in example_requests(base, demo_id, points, token_header=token_reads):
            print(f"  {line}")
    if demo_network:
        network_id, job_id = demo_network
        print(f"demo network (fictional planet Orrin): {network_id}"
              + (f", plates building (job {job_id})" if job_id else ", plates built"))
        for line in example_network_requests(base, network_id, token_header=token_reads):
            print(f"  {line}")
    print("press Ctrl-C to stop", flush=True)

    def _terminate(signum, frame):  # SIGTERM (service managers): stop like Ctrl-C
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, _terminate)
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    finally:
        server.close()
        jobs.shutdown()
    return 0


def _cmd_demo(args) -> int:

    problems: list = []
    validate.number(args.spacing_km, "--spacing-km", problems, low=MIN_SPACING_KM)
    validate.raise_problems(problems)
    out = Path(args.output)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder {out}: {exc.strerror}",
                         [problem(str(exc.strerror), field="-o")]) from None
    from importlib import resources

    document = json.loads((resources.files("stressmap.data") / "demo_plate.json")
                          .read_text(encoding="utf-8"))
    bar, update = progress_bar("demo model")
    try:
        model = build_model(document, progress=update)
    finally:
        bar.close()
    # Outside the service there is no stored id: name the model by its content (sha256 of the
    # canonical definition, first 32 hex digits), so the same demo always gets the same id.
    canonical = json.dumps(model.definition, sort_keys=True, separators=(",", ":"))
    model_id = hashlib.sha256(canonical.encode("utf-8")).hexdigest()[:32]
    write_model(model, out / "model")
    lon = model.fields["ring_lon"].values
    lat = model.fields["ring_lat"].values
    bbox = (math.floor(float(lon.min())) - 1.0, math.floor(float(lat.min())) - 1.0,
            math.ceil(float(lon.max())) + 1.0, math.ceil(float(lat.max())) + 1.0)
    ds = predict_grid(model, bbox=bbox, spacing_km=args.spacing_km)
    meta = {"caution": CAUTION, "model_id": model_id, "model_name": model.summary.get("name", ""),
            "build_time": model.summary.get("build_time", "")}
    (out / "demo_grid.geojson").write_text(
        json.dumps(export.grid_geojson(ds, meta), allow_nan=False), encoding="utf-8")
    (out / "demo_grid.nc").write_bytes(export.grid_netcdf_bytes(ds, meta))
    import numpy as np

    glon, glat = np.meshgrid(ds["lon"].values, ds["lat"].values)
    png = shmax_map(glon.ravel(), glat.ravel(),
                    ds["shmax_azimuth_deg"].transpose("lat", "lon").values.ravel(),
                    ds["regime_index"].transpose("lat", "lon").values.ravel(),
                    plate_outline(model), title=f"SHmax and regime: {meta['model_name']}",
                    caption=f"Model {model_id} - {meta['model_name']} - built {meta['build_time']}")
    (out / "demo_map.png").write_bytes(png)
    _demo_network(out, args.spacing_km, meta)
    inside = int(ds["inside"].sum())
    print(f"built the fictional demo plate {meta['model_name']!r} "
          f"({model.summary['mesh'].get('nodes')} mesh nodes) -> {out / 'model'}")
    print(f"predicted {inside} grid nodes inside the plate at {args.spacing_km:g} km spacing:")
    for name in ("demo_grid.geojson", "demo_grid.nc", "demo_map.png", "network",
                 "network_plates.geojson", "network_grid.csv"):
        print(f"  {out / name}")
    print(f"note: {CAUTION}")
    return 0


def _demo_network(out: Path, spacing_km: float, meta: dict) -> None:
    """Build the fictional demo planet (coarse mesh) and write its plates and a global grid."""
    document = demo_network_document()
    bar, update = progress_bar("demo network")
    try:
        build_network(document, out / "network", progress=update)
    finally:
        bar.close()
    net, docs, keys = derive(document)
    (out / "network_plates.geojson").write_text(json.dumps(plates_geojson(net, docs, keys)),
                                                encoding="utf-8")
    model = read_network_model(out / "network")
    ds = predict_network_grid(model, (-180.0, -80.0, 179.0, 80.0), max(spacing_km, 300.0))
    meta = dict(meta, model_name=net.name, model_id=out.name + "/network",
                build_time=model.summary.get("build_time", ""))
    (out / "network_grid.csv").write_text(export.grid_csv(ds, meta), encoding="utf-8")
    print(f"built the fictional demo planet {net.name!r}: {len(docs)} plates -> {out / 'network'}")


def register(sub) -> None:
    p = sub.add_parser(
        "serve",
        help="run the HTTP service (waitress) with settings from config/server.toml",
        description="Run the stressmap HTTP service under the waitress WSGI server. Service "
                    "settings come from config/service.toml and STRESSMAP_* environment "
                    "variables; server settings from config/server.toml; options here win.")
    p.add_argument("--host", help="address to listen on (default from config/server.toml: 127.0.0.1)")
    p.add_argument("--port", type=int, help="port to listen on (default: STRESSMAP_PORT, else config/server.toml: "
                        "8000; 0 picks a free port)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="background build workers (processes; default JOB_WORKERS from config)")
    p.add_argument("--threads", type=int, metavar="N", help="request threads of the server")
    p.add_argument("--demo", action="store_true",
                   help="build (or reuse) the fictional demo model before serving and print "
                        "example requests")
    p.add_argument("--server-config", metavar="FILE", help="waitress settings TOML file")
    p.set_defaults(handler=_cmd_serve)

    d = sub.add_parser(
        "demo",
        help="build the fictional demo plate and demo planet and write prediction grids",
        description="Build the packaged FICTIONAL demo plate and write its model directory, a "
                    "prediction grid as GeoJSON and netCDF, and a PNG map into a folder.")
    d.add_argument("-o", "--output", default="demo-output", metavar="DIR",
                   help="folder to write (default ./demo-output)")
    d.add_argument("--spacing-km", type=float, default=150.0, metavar="K",
                   help="grid spacing in km (default 150)")
    d.set_defaults(handler=_cmd_demo)
