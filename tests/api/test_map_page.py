"""The map page (``/`` and ``/map``), served by the real service and driven in a real browser.

Set-up: Debian's Chromium (installed with apt-get when /usr/bin/chromium is missing), the pinned
web map library (``npm ci`` when node_modules lacks it) and ``stressmap serve --demo`` on a
loopback port with an access token configured (reads need none; storing needs it). Playwright
(PyPI) drives the browser; its own browser download is never used.

References outside the page: the numbers the page shows are checked against the service's own
``POST /predict``, ``/compare`` and ``/screen`` answers for the same input, the re-weighted ticks
against :func:`stressmap.model.predict_points` called in this process, the colour table against
matplotlib's cividis, and the misfit against the axial difference observed - predicted wrapped to
[-90, 90) (common practice for axial data).
"""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from browser_support import REPO, DemoServer, ensure_chromium, ensure_node_modules, launch_chromium
from stressmap_api.blueprints.mappage import CIVIDIS_32

from stressmap import CAUTION

pytestmark = pytest.mark.server

TOKEN = "map-page-test-token"
VIEWPORT = {"width": 1280, "height": 860}

#: JavaScript: every drawn predicted tick as [lon, lat, azimuth_deg], read back from the drawn
#: geometry (the coloured line of each casing/colour pair), not from the page's own data.
DRAWN_TICKS_JS = """() => {
  const m = stressmapPage.map, z = m.getZoom(), out = [];
  stressmapPage.layers.ticks.getLayers().forEach((line, i) => {
    if (i % 2 === 0) return;
    const [a, b] = line.getLatLngs();
    const pa = m.project(a, z), pb = m.project(b, z);
    const mid = m.unproject(pa.add(pb).divideBy(2), z);
    const az = Math.atan2(pb.x - pa.x, -(pb.y - pa.y)) * 180 / Math.PI;
    out.push([mid.lng, mid.lat, ((az % 180) + 180) % 180]);
  });
  return out;
}"""


def _axial_diff(a, b):
    """Smallest difference of two axial angles, degrees in [0, 90]."""
    d = np.abs(np.mod(np.asarray(a) - np.asarray(b), 180.0))
    return np.minimum(d, 180.0 - d)


# ----------------------------------------------------------------------------- fixtures

@pytest.fixture(scope="module")
def server(tmp_path_factory):
    ensure_node_modules()
    srv = DemoServer(tmp_path_factory.mktemp("mappage") / "data", API_TOKEN=TOKEN)
    yield srv
    srv.stop()


@pytest.fixture(scope="module")
def browser():
    ensure_chromium()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        chromium = launch_chromium(pw)
        yield chromium
        chromium.close()


@pytest.fixture
def page(browser, server, request, tmp_path):
    """A fresh tab on the map page after its first draw; console errors are collected in
    ``page.problems``; a screenshot goes to the test's tmp dir when the test fails."""
    context = browser.new_context(viewport=VIEWPORT)
    tab = context.new_page()
    tab.problems = []
    tab.on("console", lambda msg: msg.type == "error" and tab.problems.append(msg.text))
    tab.on("pageerror", lambda exc: tab.problems.append(f"page error: {exc}"))
    # a request the page cancels itself (a newer view replaced it) is not a failure
    tab.on("requestfailed", lambda req: req.failure != "net::ERR_ABORTED" and
           tab.problems.append(f"request failed: {req.url} ({req.failure})"))
    failed_before = request.session.testsfailed
    tab.goto(server.base + "/map")
    tab.wait_for_selector("body[data-first-draw=done]", timeout=30_000)
    yield tab
    if request.session.testsfailed > failed_before:
        shot = tmp_path / f"{request.node.name}.png"
        tab.screenshot(path=str(shot), full_page=True)
        print(f"screenshot of the failed test: {shot}")
    context.close()


def _wait_idle(tab):
    tab.wait_for_function("() => stressmapPage.state.busy === 0", timeout=30_000)


def _field_key_params(key: str) -> tuple[str, str]:
    _source, bbox, spacing, _weights = key.split("|")
    return bbox, spacing


# ----------------------------------------------------------------------------- browser tests

def test_first_draw_ticks_outline_caution_and_no_console_errors(page, server, record_property):
    from PIL import Image, ImageChops

    first_ms = page.evaluate("() => stressmapPage.state.firstDrawMs")
    record_property("first_draw_ms", first_ms)  # recorded, not asserted (benchmarks/README.md)
    _wait_idle(page)
    assert page.locator("#caution").is_visible()
    assert page.locator("#caution").inner_text() == CAUTION

    # the drawn ticks are exactly the inside nodes of the field the page asked for
    key = page.evaluate("() => stressmapPage.state.field.key")
    bbox, spacing = _field_key_params(key)
    fc = server.get_json(f"/api/v1/models/{server.model_id}/field?bbox={bbox}&spacing_km={spacing}"
                         "&format=geojson")
    expected = [f for f in fc["features"]
                if f["properties"]["inside"] and f["properties"]["shmax_azimuth_deg"] is not None]
    drawn = page.evaluate(DRAWN_TICKS_JS)
    assert len(drawn) == len(expected) > 100
    exp = np.array([[*f["geometry"]["coordinates"], f["properties"]["shmax_azimuth_deg"]]
                    for f in expected])
    got = np.array(drawn)
    np.testing.assert_allclose(got[:, :2], exp[:, :2], atol=1e-6)
    assert _axial_diff(got[:, 2], exp[:, 2]).max() < 0.05
    # each tick's colour is the cividis colour of its regime index (0..3 over the table)
    colours = page.evaluate("() => stressmapPage.layers.ticks.getLayers()"
                            ".filter((l, i) => i % 2 === 1).map(l => l.options.color)")
    index = np.array([f["properties"]["regime_index"] for f in expected])
    table = np.array(CIVIDIS_32)
    nearest = np.floor(np.clip(index / 3.0, 0, 1) * 31 + 0.5).astype(int)  # as JS Math.round
    assert colours == list(table[nearest])
    assert len(set(colours)) > 5

    # every boundary kind of the demo outline is drawn and named in the legend
    boundary = server.get_json(f"/api/v1/models/{server.model_id}/boundary")
    kinds = {f["properties"]["kind"] for f in boundary["features"]}
    assert page.evaluate("() => stressmapPage.layers.outline.getLayers().length") >= \
        len(boundary["features"])
    legend = page.locator("#legend").inner_text()
    for kind in kinds:
        assert kind in legend

    # the ticks are on the canvas: hiding them changes many pixels (each tick ~18 x 5 px)
    with_ticks = Image.open(io.BytesIO(page.locator("#map").screenshot()))
    page.locator("#layer-ticks").uncheck()
    without = Image.open(io.BytesIO(page.locator("#map").screenshot()))
    page.locator("#layer-ticks").check()
    diff = np.asarray(ImageChops.difference(with_ticks.convert("RGB"),
                                            without.convert("RGB")).convert("L"))
    assert int((diff > 24).sum()) > 30 * len(drawn)
    # and the background (graticule, outline) alone is not blank either
    assert len(np.unique(np.asarray(without.convert("L")))) > 3

    # the tick density follows the zoom: zooming in asks for a finer node spacing
    page.evaluate("() => { stressmapPage.map.setZoom(stressmapPage.map.getZoom() + 2, "
                  "{animate: false}); }")
    page.wait_for_function(f"() => stressmapPage.state.field.spacing < {float(spacing)} / 3",
                           timeout=30_000)
    _wait_idle(page)
    assert page.problems == []


def test_click_shows_the_numbers_of_post_predict(page, server):
    box = page.locator("#map").bounding_box()
    page.locator("#map").click(position={"x": box["width"] * 0.55, "y": box["height"] * 0.45})
    page.wait_for_selector("#point-result td[data-field=s_hmax_mpa]", timeout=30_000)
    point = page.evaluate("() => stressmapPage.state.point")
    shown = {td.get_attribute("data-field"): td.get_attribute("data-value")
             for td in page.locator("#point-result td").all()}
    ref = server.post_json(f"/api/v1/models/{server.model_id}/predict",
                           {"points": [[point["lon"], point["lat"]]]})["features"][0]["properties"]
    assert ref["inside"]
    for name in ("s_hmax_mpa", "s_hmin_mpa", "shmax_azimuth_deg", "regime_index", "shape_ratio"):
        assert float(shown[name]) == pytest.approx(ref[name], rel=1e-12, abs=1e-12), name
    assert shown["regime"] == ref["regime"]
    text = page.locator("#point-result").inner_text()
    assert f"{ref['s_hmax_mpa']:.2f}" in text and f"{ref['shmax_azimuth_deg']:.1f}" in text

    # the same through the keyboard: typed position, Enter on the button
    page.locator("#point-lon").fill("-15")
    page.locator("#point-lat").fill("-20")
    page.locator("#point-go").focus()
    page.keyboard.press("Enter")
    page.wait_for_function("() => stressmapPage.state.point && stressmapPage.state.point.lon === -15",
                           timeout=30_000)
    ref2 = server.post_json(f"/api/v1/models/{server.model_id}/predict",
                            {"points": [[-15.0, -20.0]]})["features"][0]["properties"]
    assert float(page.locator("#point-result td[data-field=shmax_azimuth_deg]")
                 .get_attribute("data-value")) == pytest.approx(ref2["shmax_azimuth_deg"])
    assert page.problems == []


def test_slider_reweights_ticks_as_the_library_predicts(page, server):
    from stressmap.io.modeldir import read_model
    from stressmap.model import predict_points

    before = np.array(page.evaluate(DRAWN_TICKS_JS))
    slider = page.locator("#weight-collision")
    slider.focus()
    page.keyboard.press("End")  # keyboard: range to its maximum, 3
    page.wait_for_function("() => stressmapPage.state.field.key.includes('collision:3')",
                           timeout=30_000)
    _wait_idle(page)
    assert page.locator("output[for=weight-collision]").inner_text() == "3.00"
    after = np.array(page.evaluate(DRAWN_TICKS_JS))

    model = read_model(server.data_dir / "models" / server.model_id)
    weights = {g: 1.0 for g in model.groups} | {"collision": 3.0}
    pred = predict_points(model, after[:, 0], after[:, 1], weights=weights)
    predicted = np.asarray(pred["shmax_azimuth_deg"].values)
    assert np.isfinite(predicted).all()
    assert _axial_diff(after[:, 2], predicted).max() < 0.05
    # and the change is a real one: at the same nodes the default weights give other azimuths
    same = {(round(x, 6), round(y, 6)): az for x, y, az in before}
    moved = [_axial_diff(az, same[(round(x, 6), round(y, 6))])
             for x, y, az in after if (round(x, 6), round(y, 6)) in same]
    assert len(moved) > 100 and max(moved) > 5.0
    assert page.problems == []


def test_indicator_upload_shows_misfits(page, server, tmp_path):
    source = (REPO / "stressmap" / "data" / "demo_indicators.csv").read_text(encoding="utf-8")
    lines = [ln for ln in source.splitlines() if not ln.startswith("#")]
    upload = tmp_path / "few_indicators.csv"
    upload.write_text("\n".join(lines[:13]) + "\n", encoding="utf-8")  # header + 12 rows
    page.locator("#ind-file").set_input_files(str(upload))
    page.wait_for_function("() => stressmapPage.state.indicators !== null", timeout=30_000)
    _wait_idle(page)
    info = page.locator("#ind-info").inner_text()
    assert info.startswith("12 indicators; weighted mean |misfit|")

    shown = page.evaluate("() => stressmapPage.state.indicators.features.map(f => f.properties)")
    ref = server.post_json(f"/api/v1/models/{server.model_id}/compare",
                           {"indicators_csv": upload.read_text(), "format": "geojson"})
    assert [p["misfit_deg"] for p in shown] == pytest.approx(
        [f["properties"]["misfit_deg"] for f in ref["features"]])
    mean = ref["summary"]["overall"]["weighted_mean_abs_misfit_deg"]
    assert f"{mean:.1f} deg" in info
    for p in shown:  # misfit = observed - predicted, wrapped to [-90, 90)
        wrapped = (p["shmax_azimuth_deg"] - p["predicted_shmax_azimuth_deg"] + 90.0) % 180.0 - 90.0
        # GeoJSON numbers carry 7 significant digits, so the wrap of rounded values agrees to 1e-4
        assert p["misfit_deg"] == pytest.approx(wrapped, abs=1e-4)
    # drawn as hollow ticks (an outline and a white core per indicator), outline growing with misfit
    widths = page.evaluate("() => stressmapPage.layers.indicators.getLayers()"
                           ".filter((l, i) => i % 2 === 0).map(l => l.options.weight)")
    assert len(widths) == 12
    order = np.argsort([p["abs_misfit_deg"] for p in shown])
    assert np.all(np.diff(np.asarray(widths)[order]) >= 0)
    assert page.problems == []


def test_ensemble_needs_the_token_which_stays_in_the_tab(page, server):
    page.locator("#ens-members").fill("60")
    page.locator("#ens-run").click()
    page.wait_for_selector("#status.error", timeout=30_000)
    assert "token" in page.locator("#status").inner_text()
    page.problems.clear()  # the 401 itself is logged by the browser as a failed resource

    page.locator("#token").fill(TOKEN)
    page.locator("#ens-run").click()
    page.wait_for_function("() => stressmapPage.state.ensemble !== null", timeout=120_000)
    _wait_idle(page)
    assert page.locator("#layer-spread").is_checked()
    fans = page.evaluate("() => stressmapPage.layers.spread.getLayers().length")
    nodes = sum(1 for f in page.evaluate("() => stressmapPage.state.ensemble.features")
                if f["properties"]["inside"] and f["properties"]["shmax_std_deg"] is not None)
    assert nodes > 10 and fans == 2 * nodes
    stds = [f["properties"]["shmax_std_deg"]
            for f in page.evaluate("() => stressmapPage.state.ensemble.features")
            if f["properties"]["inside"] and f["properties"]["shmax_std_deg"] is not None]
    assert np.mean(stds) > 1.0  # weights drawn from 0.5-1.5 x each group: a real spread
    assert "mean 1-sigma SHmax spread" in page.locator("#ens-info").inner_text()
    page.locator("#layer-spread").uncheck()
    assert not page.evaluate("() => stressmapPage.map.hasLayer(stressmapPage.layers.spread)")

    stored = page.evaluate("() => JSON.stringify([Object.entries(localStorage), "
                           "Object.entries(sessionStorage), document.cookie, location.href])")
    assert TOKEN not in stored
    assert page.problems == []


def test_screen_a_site_shows_numbers_and_pictures(page, server):
    page.locator("#point-lon").fill("-15")
    page.locator("#point-lat").fill("-20")
    page.locator("#point-go").click()
    page.wait_for_function("() => stressmapPage.state.point !== null", timeout=30_000)
    page.locator("#scr-depth").fill("2.5")
    page.locator("#scr-friction").fill("0.7")
    page.locator("#scr-pore").fill("11")
    page.locator("#scr-go").click()
    page.wait_for_function("() => document.querySelectorAll('#scr-figs img').length === 2 && "
                           "[...document.querySelectorAll('#scr-figs img')].every("
                           "i => i.complete && i.naturalWidth > 100)", timeout=60_000)
    ref = server.post_json("/api/v1/screen", {
        "site": [-15.0, -20.0], "depth_km": 2.5, "friction": 0.7, "pore_gradient_mpa_km": 11.0,
        "planes": ["040/60", "130/80"], "model_id": server.model_id})
    shown = page.evaluate("() => stressmapPage.state.screen")
    for name in ("sv_mpa", "pp_mpa", "shmax_mpa", "shmin_mpa", "shmax_azimuth_deg"):
        assert shown[name] == pytest.approx(ref[name], rel=1e-12), name
    text = page.locator("#scr-result").inner_text()
    assert f"{ref['shmax_mpa']:.1f}" in text and f"{ref['pp_mpa']:.1f}" in text
    assert page.problems == []


def test_controls_have_labels_and_units(page):
    unlabelled = page.evaluate("""() => [...document.querySelectorAll('.panel input, .panel select')]
      .filter(el => !el.labels || el.labels.length === 0).map(el => el.id)""")
    assert unlabelled == []
    for label in ("Depth (km)", "Pore-pressure gradient (MPa/km)", "Longitude (deg)",
                  "Friction coefficient (-)", "Members (count)"):
        assert page.get_by_label(label).count() == 1, label


def test_panel_fits_its_width_and_graticule_is_labelled(page):
    # every weight's value stays inside the panel (no sideways scrolling to read it)
    over = page.evaluate("""() => { const p = document.querySelector('.panel');
      return [p.scrollWidth - p.clientWidth, [...document.querySelectorAll('.weight output')]
        .filter(o => o.getBoundingClientRect().right > p.getBoundingClientRect().right).length]; }""")
    assert over == [0, 0]
    # meridians and parallels carry their degrees (the demo plate spans about 40 W-10 E, 5-38 S)
    labels = page.evaluate("() => [...document.querySelectorAll('.grat-label')].map(e => e.textContent)")
    assert "20\u00b0W" in labels and "20\u00b0S" in labels, labels
    # the legend folds away (a small screen needs the plate more than the legend) and back
    full = page.locator("#legend").bounding_box()
    page.locator("#legend summary").click()
    folded = page.locator("#legend").bounding_box()
    assert folded["height"] < 0.25 * full["height"] and folded["width"] < 0.5 * full["width"]
    page.locator("#legend summary").press("Enter")  # keyboard too
    assert page.locator("#legend").bounding_box()["height"] == pytest.approx(full["height"], abs=2)


# ----------------------------------------------------------------------------- without a browser

def test_page_routes_headers_and_settings(app, client):
    resp = client.get("/")
    assert resp.status_code == 200 and resp.mimetype == "text/html"
    csp = resp.headers["Content-Security-Policy"]
    assert "script-src 'self'" in csp and "connect-src 'self'" in csp and "unsafe-eval" not in csp
    html = resp.get_data(as_text=True)
    start = html.index('<script id="page-settings" type="application/json">') + 51
    settings = json.loads(html[start:html.index("</script>", start)])
    assert settings["caution"] == CAUTION and settings["api"] == "/api/v1"
    assert settings["tile_url"] == ""  # no basemap tiles unless the deployment names its own
    assert set(settings["boundary_styles"]) == {"ridge", "subduction", "overriding", "collision",
                                                "transform", "free", "fixed"}
    assert client.get("/map").get_data(as_text=True) == html
    assert client.get("/map/assets/map.js").mimetype == "text/javascript"
    assert client.get("/map/assets/nothing.js").status_code == 404
    assert client.get("/map/lib/../../pyproject.toml").status_code == 404
    sample = client.get("/map/samples/demo_indicators.csv").get_data(as_text=True)
    assert sample.startswith("id,lon,lat,")  # a plain table; every row says it is fictional
    assert all(row.endswith("fictional demo data (stressmap)") for row in sample.splitlines()[1:])


def test_colour_table_is_matplotlib_cividis():
    import matplotlib

    cmap = matplotlib.colormaps["cividis"]
    ref = np.array([cmap(i / 31)[:3] for i in range(32)]) * 255
    got = np.array([[int(c[k:k + 2], 16) for k in (1, 3, 5)] for c in CIVIDIS_32])
    np.testing.assert_allclose(got, ref, atol=0.51)


def test_library_is_pinned_and_missing_install_is_a_clear_problem(tmp_path):
    from stressmap_api import create_app

    package = json.loads((REPO / "package.json").read_text())
    lock = json.loads((REPO / "package-lock.json").read_text())
    version = package["dependencies"]["leaflet"]
    assert version[0].isdigit()  # an exact version, not a range
    assert lock["packages"]["node_modules/leaflet"]["version"] == version
    assert lock["packages"]["node_modules/leaflet"]["license"] == "BSD-2-Clause"

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                      "WEB_MODULES_DIR": str(tmp_path / "empty"), "READS_NEED_TOKEN": True,
                      "API_TOKEN": TOKEN})
    try:
        client = app.test_client()
        resp = client.get("/map/lib/leaflet.js")
        assert resp.status_code == 503 and resp.mimetype == "application/problem+json"
        assert "npm ci" in resp.json["detail"]
        # the page is public even where reads need the token; the API behind it is not
        assert client.get("/map").status_code == 200
        assert client.get("/api/v1/models").status_code == 401
    finally:
        app.extensions["stressmap_jobs"].shutdown()


def test_tile_url_from_config_reaches_page_and_policy(tmp_path):
    from stressmap_api import create_app

    url = "https://tiles.example.org/{z}/{x}/{y}.png"
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "MAP_TILE_URL": url,
                      "MAP_TILE_ATTRIBUTION": "our tiles"})
    try:
        resp = app.test_client().get("/map")
        assert url in resp.get_data(as_text=True)
        assert "img-src 'self' data: blob: https://tiles.example.org;" in \
            resp.headers["Content-Security-Policy"]
    finally:
        app.extensions["stressmap_jobs"].shutdown()

