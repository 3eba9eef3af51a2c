"""stressmap HTTP service (installed as ``stressmap_api``).

``create_app(test_config=None)`` builds a fresh Flask app; there is no app at module level.
Configuration layers, later wins: package defaults (:data:`DEFAULTS`), a TOML file
(``config/service.toml`` or the file named by ``STRESSMAP_CONFIG``), environment variables
``STRESSMAP_<KEY>`` (values parsed as TOML scalars where possible), then ``test_config``.

Every module in :mod:`stressmap_api.blueprints` that defines ``bp`` (a Blueprint) is registered
under ``/api/v1``; every ``openapi/*.yaml`` fragment is merged into the served OpenAPI document.
Views are thin: validate, call the core, serialise.
"""

from __future__ import annotations

import importlib
import logging
import os
import pkgutil
import tomllib
from pathlib import Path

from flask import Flask
from stressmap_api import auth, blueprints, jobs, limits, store
from stressmap_api.jsonio import NumpyJSONProvider
from stressmap_api.problems import register_error_handlers

__all__ = ["create_app", "DEFAULTS", "API_PREFIX"]

API_PREFIX = "/api/v1"

#: Package defaults; every key may be overridden by config/service.toml, STRESSMAP_<KEY>, tests.
DEFAULTS: dict = {
    "DATA_DIR": "var/data",
    "MAX_CONTENT_LENGTH": 16 * 1024 * 1024,  # bytes; Flask enforces it (413)
    "MAX_POINTS": 100_000,
    "MAX_GRID_POINTS": 250_000,
    "MAX_MESH_NODES": 400_000,
    "REQUEST_TIME_LIMIT_S": 30.0,
    "JOB_WORKERS": 2,
    "JOB_EXECUTOR": "process",  # "process" (isolated builds) or "thread"
    "MAX_QUEUED_JOBS": 32,
    "MODEL_CACHE_SIZE": 8,  # loaded models kept in memory (LRU)
    "COMPUTE_THREADS": 4,  # threads answering predictions (bounded; see limits.py)
    "API_TOKEN": "",  # empty: no token needed; set via STRESSMAP_API_TOKEN, never in the repo
    "READS_NEED_TOKEN": False,
    "CORS_ORIGINS": [],
    "LOAD_DEMO": False,
    "FEATURES_FIELD_SPACING_KM": 100.0,  # node spacing of the OGC API - Features field collections
}

_REPO_CONFIG = Path(__file__).resolve().parent.parent / "config" / "service.toml"


def _parse_env_value(raw: str):
    try:
        return tomllib.loads(f"v = {raw}")["v"]
    except tomllib.TOMLDecodeError:
        return raw


def load_config(test_config: dict | None = None) -> dict:
    """Merge the configuration layers into one dict (see module docstring)."""
    cfg = dict(DEFAULTS)
    path = Path(os.environ.get("STRESSMAP_CONFIG", _REPO_CONFIG))
    if path.is_file():
        with path.open("rb") as fh:
            data = tomllib.load(fh)
        cfg.update({k.upper(): v for k, v in data.get("service", data).items()})
    for key in list(cfg):
        env = os.environ.get(f"STRESSMAP_{key}")
        if env is not None:
            cfg[key] = _parse_env_value(env)
    if test_config:
        cfg.update(test_config)
    return cfg


def create_app(test_config: dict | None = None) -> Flask:
    """Application factory."""
    app = Flask(__name__)
    app.config.update(load_config(test_config))


    app.json_provider_class = NumpyJSONProvider
    app.json = NumpyJSONProvider(app)
    register_error_handlers(app)


    store.init_app(app)  # data directory, SQLite index, restart recovery
    jobs.init_app(app)  # bounded background worker pool
    auth.init_app(app)  # bearer token for reads (if configured) and CORS allow-list
    limits.init_app(app)  # bounded compute pool for the per-request time limit


    for info in sorted(pkgutil.iter_modules(blueprints.__path__), key=lambda m: m.name):
        module = importlib.import_module(f"{blueprints.__name__}.{info.name}")
        bp = getattr(module, "bp", None)
        if bp is not None:
            app.register_blueprint(bp, url_prefix=API_PREFIX)
            init = getattr(module, "init_app", None)
            if init is not None:
                init(app)
    importlib.import_module(f"{blueprints.__name__}.mappage").register(app)  # / and /map page

    logging.getLogger(__name__).debug("stressmap service created")
    return app
