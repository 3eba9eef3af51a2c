"""The map page: a browser view of models, stress ticks, indicators and site screening.

Served outside ``/api/v1`` (it is a page, not part of the JSON API): ``/`` and ``/map`` give the
page, ``/map/assets/<name>`` its own script and style sheet (``stressmap_api/static/map.*``),
``/map/lib/<name>`` the web map library (Leaflet, BSD-2-Clause) from the repository's
``node_modules`` (pinned in ``package.json`` / ``package-lock.json``; ``make serve`` runs ``npm ci``
on first use), and ``/map/samples/demo_indicators.csv`` the packaged FICTIONAL demo indicators.

The page talks to the service only through the documented ``/api/v1`` endpoints; it loads nothing
from any other site. No basemap tiles are drawn unless the deployment names its own tile URL
(``MAP_TILE_URL`` / ``MAP_TILE_ATTRIBUTION`` in ``config/service.toml`` or ``STRESSMAP_MAP_TILE_URL``).

The page's settings travel inside the HTML as one JSON block: the caution, the API prefix, the
cividis colour table for the regime index (A-phi), the boundary line styles of the PNG maps
(:data:`stressmap.plot.maps.BOUNDARY_STYLES`) and the optional tile layer.
"""

from __future__ import annotations

import json
from importlib import resources
from pathlib import Path
from urllib.parse import urlsplit

from flask import Blueprint, Response, current_app, send_from_directory
from stressmap_api.auth import PUBLIC_ENDPOINTS
from stressmap_api.problems import ApiProblem

from stressmap.constants import CAUTION
from stressmap.plot.maps import BOUNDARY_STYLES, REGIME_TICKS

__all__ = ["page", "register", "page_settings", "CIVIDIS_32", "LIBRARY_FILES", "ASSET_FILES"]

page = Blueprint("mappage", __name__)

#: Files of the map library the page needs, relative to ``node_modules``.
LIBRARY_FILES = {"leaflet.js": "leaflet/dist/leaflet.js",
                 "leaflet.css": "leaflet/dist/leaflet.css"}
#: The page's own files in ``stressmap_api/static`` and their media types.
ASSET_FILES = {"map.js": "text/javascript", "map.css": "text/css"}

_REPO_NODE_MODULES = Path(__file__).resolve().parents[2] / "node_modules"
_SAMPLES = {"demo_indicators.csv": "demo_indicators.csv"}
#: Pixels per typographic point (96 dpi screen / 72 pt per inch).
_PX_PER_PT = 96.0 / 72.0


def _dash_px(linestyle, width_pt: float) -> list[float]:
    """A matplotlib line style as a canvas dash pattern in pixels ([] for a solid line).

    matplotlib scales dash patterns by the line width, so the page does the same.

    Examples
    --------
    >>> _dash_px("-", 2.0)
    []
    >>> _dash_px((0, (6, 2)), 1.5)
    [12.0, 4.0]
    """
    if isinstance(linestyle, tuple):
        return [round(d * width_pt * _PX_PER_PT, 1) for d in linestyle[1]]
    return []


#: The cividis colour map (Nunez, Anderton & Renslow 2018, PLOS ONE 13(7): e0199239) sampled
#: at 32 evenly spaced stops from 0 to 1, as hex RGB: the scale of the PNG maps
#: (``matplotlib.colormaps["cividis"]``), kept here so that serving the page never imports
#: matplotlib (the test compares it with matplotlib's table).
CIVIDIS_32 = (
    '#00224e', '#00285b', '#002e6a', '#053371', '#1c396f', '#293f6e', '#33446d', '#3c4a6c',
    '#45506c', '#4d556c', '#555b6d', '#5c616e', '#646770', '#6b6d72', '#727274', '#787877',
    '#807f78', '#888578', '#908b78', '#979177', '#a09875', '#a89e73', '#b0a571', '#b9ab6d',
    '#c2b369', '#cbb965', '#d3c05f', '#dcc859', '#e6d051', '#efd748', '#f8df3c', '#fee838',
)


def page_settings(config) -> dict:
    """The JSON settings embedded in the page (see module docstring)."""

    styles = {kind: {"width_px": round(lw * _PX_PER_PT, 2), "dash_px": _dash_px(ls, lw),
                     "colour": colour, "label": label}
              for kind, (ls, lw, colour, label) in BOUNDARY_STYLES.items()}
    return {
        "api": "/api/v1",
        "caution": CAUTION,
        "regime_index_range": [0.0, 3.0],
        "regime_ticks": [{"value": v, "label": name} for v, name in REGIME_TICKS],
        "colour_table": list(CIVIDIS_32),
        "boundary_styles": styles,
        "tile_url": str(config.get("MAP_TILE_URL") or ""),
        "tile_attribution": str(config.get("MAP_TILE_ATTRIBUTION") or ""),
        "samples": [{"name": "Demo indicators (FICTIONAL, 320 rows)",
                     "url": "/map/samples/demo_indicators.csv"}],
    }


def _security_headers(resp: Response, tile_url: str = "") -> Response:
    img = "'self' data: blob:"
    if tile_url:
        parts = urlsplit(tile_url.replace("{", "").replace("}", ""))
        if parts.scheme in ("http", "https") and parts.netloc:
            img += f" {parts.scheme}://{parts.netloc.split('@')[-1]}"
    resp.headers["Content-Security-Policy"] = (
        "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
        f"img-src {img}; connect-src 'self'; object-src 'none'; base-uri 'none'; "
        "frame-ancestors 'none'")
    resp.headers["X-Content-Type-Options"] = "nosniff"
    resp.headers["Referrer-Policy"] = "no-referrer"
    return resp


@page.get("/")
@page.get("/map")
def map_page():
    settings = page_settings(current_app.config)
    html = (resources.files("stressmap_api") / "static" / "map.html").read_text(encoding="utf-8")
    # "</" cannot end the JSON block early: every "/" after "<" is escaped.
    blob = json.dumps(settings).replace("</", "<\\/")
    resp = Response(html.replace("{{SETTINGS_JSON}}", blob), mimetype="text/html")
    resp.headers["Cache-Control"] = "no-cache"
    return _security_headers(resp, settings["tile_url"])


@page.get("/map/assets/<name>")
def asset(name: str):
    if name not in ASSET_FILES:
        raise ApiProblem(404, "Not Found", f"the map page has no asset {name[:40]!r}")
    body = (resources.files("stressmap_api") / "static" / name).read_bytes()
    resp = Response(body, mimetype=ASSET_FILES[name])
    resp.headers["Cache-Control"] = "no-cache"
    return _security_headers(resp)


def _node_modules() -> Path:
    configured = current_app.config.get("WEB_MODULES_DIR")
    return Path(configured) if configured else _REPO_NODE_MODULES


@page.get("/map/lib/<name>")
def library(name: str):
    if name not in LIBRARY_FILES:
        raise ApiProblem(404, "Not Found", f"the map page loads no library file {name[:40]!r}")
    root = _node_modules()
    path = root / LIBRARY_FILES[name]
    if not path.is_file():
        raise ApiProblem(503, "Map library not installed",
                         f"{LIBRARY_FILES[name]} is missing under {root.name}/: run `npm ci` in "
                         "the repository (`make serve` does it on first use)")
    resp = send_from_directory(path.parent, path.name, max_age=3600)
    return _security_headers(resp)


@page.get("/map/samples/<name>")
def sample(name: str):
    if name not in _SAMPLES:
        raise ApiProblem(404, "Not Found", f"no sample file {name[:40]!r}")
    text = (resources.files("stressmap.data") / _SAMPLES[name]).read_bytes()
    return _security_headers(Response(text, mimetype="text/csv"))


def register(app) -> None:
    """Register the page at the site root; its routes never need a token (the page asks for one
    only for operations that store data, and sends it with every request once given)."""

    app.register_blueprint(page)
    PUBLIC_ENDPOINTS.update({"mappage.map_page", "mappage.asset", "mappage.library",
                             "mappage.sample"})
