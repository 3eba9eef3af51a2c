"""Pictures of a screening: textbook geometry, colours tied to margins, the caution footer."""

from __future__ import annotations

import io

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.plot import screening as ps
from stressmap.analyses import screening as sc
from stressmap.analyses.sitescreen import screen
from stressmap.formats.screening import parse_request_json as parse_request


@pytest.fixture(scope="module")
def result():
    rng = np.random.default_rng(11)
    planes = [{"strike_deg": float(s), "dip_deg": float(d)}
              for s, d in zip(rng.uniform(0, 360, 40), rng.uniform(5, 90, 40))]
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "A", "dip_deg": 60, "dip_direction_deg": 130},
         "geometry": {"type": "LineString",
                      "coordinates": [[-15.0, -20.0], [-14.9, -19.9], [-14.8, -19.85]]}},
        {"type": "Feature", "properties": {"name": "B", "strike_deg": 10, "dip_deg": 85},
         "geometry": {"type": "Point", "coordinates": [-15.05, -19.95]}}]}
    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "strike-slip",
                         "shmax_azimuth_deg": 40.0, "cohesion_mpa": 2.0, "planes": planes,
                         "faults": faults,
                         "uncertainty": {"friction_range": [0.5, 0.7], "samples": 200}})
    return screen(req)


def _by_gid(ax, gid):
    return [a for a in ax.get_children() if a.get_gid() == gid]


def test_mohr_circles_envelope_and_points_follow_textbook_geometry(result):
    fig = ps.mohr_figure(result)
    ax = fig.axes[0]
    s1, s2, s3 = np.sort(np.linalg.eigvalsh(result.stress_ned))[::-1] - result.site["pp_mpa"]
    circles = sorted(((c.center[0], c.radius) for c in _by_gid(ax, "mohr-circle")),
                     key=lambda t: t[1])
    expected = sorted((((a + b) / 2, (b - a) / 2) for a, b in ((s3, s1), (s2, s1), (s3, s2))),
                      key=lambda t: t[1])
    assert_allclose(circles, expected, atol=1e-9)
    (env,) = _by_gid(ax, "failure-envelope")
    x, y = env.get_data()
    assert_allclose(y, 2.0 + result.site["friction"] * x, atol=1e-12)  # tau = C + mu sigma'
    # Every plane's (sigma', tau) lies inside the big circle and outside both small ones
    # (Mohr's three-circle theorem; Jaeger, Cook & Zimmerman, from memory).
    (pts,) = _by_gid(ax, "fault-points")
    xy = pts.get_offsets()
    d = lambda c: np.hypot(xy[:, 0] - c[0], xy[:, 1])  # noqa: E731
    assert np.all(d(((s1 + s3) / 2,)) <= (s1 - s3) / 2 + 1e-9)
    assert np.all(d(((s1 + s2) / 2,)) >= (s1 - s2) / 2 - 1e-9)
    assert np.all(d(((s2 + s3) / 2,)) >= (s2 - s3) / 2 - 1e-9)
    assert_allclose(pts.get_array(), result.planes["pore_pressure_margin_mpa"])
    assert ax.get_aspect() == 1.0


def test_stress_polygon_plot(result):
    import shapely

    fig = ps.polygon_figure(result)
    ax = fig.axes[0]
    (poly,) = _by_gid(ax, "stress-polygon")
    s = result.site
    verts = poly.get_xy()[:4]
    assert_allclose(verts, sc.stress_polygon(s["sv_mpa"], s["pp_mpa"], s["friction"]))
    (est,) = _by_gid(ax, "central-estimate")
    x, y = est.get_data()
    assert (x[0], y[0]) == (s["shmin_mpa"], s["shmax_mpa"])
    assert shapely.Polygon(verts).buffer(1e-6).contains(shapely.Point(x[0], y[0]))
    # the regime dividers sit at Sv
    (h,) = _by_gid(ax, "sv-line-shmax")
    assert_allclose(h.get_ydata(), s["sv_mpa"])
    assert len(_by_gid(ax, "estimate-samples")) == 1
    # dashed polygons for the extremes of the sampled friction (same construction)
    mu = result.samples["friction"]
    dashed = sorted((p.get_xy()[:4] for p in _by_gid(ax, "polygon-friction-range")),
                    key=lambda v: v[1, 1])
    assert_allclose(dashed[0], sc.stress_polygon(s["sv_mpa"], s["pp_mpa"], mu.min()))
    assert_allclose(dashed[1], sc.stress_polygon(s["sv_mpa"], s["pp_mpa"], mu.max()))


def test_map_colours_traces_by_margin_and_scale_bar_is_true(result):
    from pyproj import Geod

    fig = ps.fault_map_figure(result)
    ax = fig.axes[0]
    (lc,) = _by_gid(ax, "fault-traces")
    seg = result.planes["kind"] == "trace segment"
    assert_allclose(lc.get_array(), result.planes["pore_pressure_margin_mpa"][seg])
    assert lc.get_cmap().name == "stressmap-margin"   # our own ember scale
    (bar,) = _by_gid(ax, "scale-bar")
    (x0, x1), (y0, _) = bar.get_data()
    label = [t.get_text() for t in ax.texts if t.get_text().endswith(" km")][0]
    km = float(label.split()[0])
    # independent distance: pyproj.Geod on the 6371 km sphere
    _, _, dist_m = Geod(a=6371000.0, f=0.0).inv(x0, y0, x1, y0)
    assert_allclose(dist_m / 1e3, km, rtol=0.01)


@pytest.mark.parametrize("fn", ["mohr_png", "polygon_png", "fault_map_png"])
def test_png_has_the_caution_footer(result, fn):
    import matplotlib.image as mpimg

    fig = getattr(ps, fn.replace("_png", "_figure"))(result)
    footer = " ".join(t.get_text() for t in fig.texts if t.get_gid() == "caution-footer")
    flat = footer.replace("\n", "").replace(" ", "")
    # the caution ends the footer and is said once: no second sentence repeating it
    assert flat.endswith(CAUTION.replace(" ", ""))
    assert footer.count("licensed") == 1
    png = getattr(ps, fn)(result)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    img = mpimg.imread(io.BytesIO(png), format="png")
    assert img.shape[0] > 400 and img.shape[1] > 600


# -- our own presentation of the probabilistic screening and of the stress polygon ----------

def test_margin_curves_picture_has_a_curve_per_fault(result):
    from stressmap.analyses.sitescreen import fault_margins
    from stressmap.plot.margins import MAX_CURVES, margin_curves_figure, margin_curves_png

    fig = margin_curves_figure(result)
    ax = fig.axes[0]
    curves = [a for a in ax.get_lines() if (a.get_gid() or "").startswith("margin-curve-")]
    fm = fault_margins(result)
    assert len(curves) == min(fm["name"].size, MAX_CURVES) == 20      # 42 faults and planes
    assert any("22 more" in t.get_text() for t in fig.axes[1].texts)
    # each curve is the empirical distribution of its fault's least margin (numpy sort)
    x, y = curves[0].get_data()
    assert np.allclose(x, np.sort(fm["margin_mpa"][:, 0]))
    assert np.isclose(y[-1], 1.0) and np.all(np.diff(y) > 0)
    assert any(t.get_gid() == "caution-footer" and CAUTION in t.get_text().replace("\n", " ")
               for t in fig.texts)
    assert margin_curves_png(result)[:8] == b"\x89PNG\r\n\x1a\n"   # PNG spec 5.2


def test_stress_polygon_names_its_fields_in_words():
    from stressmap.analyses import screening as sc
    from stressmap.plot.screening import polygon_figure

    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "normal",
                         "shmax_azimuth_deg": 40.0, "planes": ["040/60"]})
    res = screen(req)
    ax = polygon_figure(res).axes[0]
    texts = [t.get_text() for t in ax.texts]
    assert not {"NF", "SS", "RF"} & set(texts)
    for regime in ("normal", "strike-slip", "reverse"):
        assert any(t.startswith(f"{regime} faulting") for t in texts)
    fields = {p.get_gid(): p for p in ax.patches if (p.get_gid() or "").startswith("regime-field")}
    assert set(fields) == {"regime-field-normal", "regime-field-strike-slip",
                           "regime-field-reverse"}
    # the three fields tile the polygon (shoelace areas; the polygon from the core)
    def area(v):
        x, y = np.asarray(v).T
        return 0.5 * abs(np.dot(x, np.roll(y, 1)) - np.dot(y, np.roll(x, 1)))
    s = res.site
    parts = sc.regime_fields(s["sv_mpa"], s["pp_mpa"], s["friction"])
    assert np.isclose(sum(area(v) for v in parts.values()), area(s["stress_polygon_mpa"]))
    # each field's centroid is in its own regime (Anderson: order of SHmax, Shmin and Sv)
    for regime, tri in parts.items():
        x, y = tri.mean(axis=0)
        assert sc.REGIMES[int(sc.regime_from_magnitudes(y, x, s["sv_mpa"]))] == regime


# --- pictures a report can use: labels that do not overlap, names and ranks on the map ---------

def _extents(artists):
    """Display boxes of the labels' characters (matplotlib's Text extent, leaders excluded)."""
    from matplotlib.text import Text

    renderer = artists[0].figure.canvas.get_renderer()
    for a in artists:
        a.update_positions(renderer)
    return [tuple(Text.get_window_extent(a, renderer).extents) for a in artists]


@pytest.fixture(scope="module")
def crowded():
    """Ten nearly identical planes: their Mohr points coincide, so naive labels would pile up."""
    planes = [{"strike_deg": 40.0 + 0.2 * i, "dip_deg": 60.0} for i in range(10)]
    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "normal",
                         "shmax_azimuth_deg": 40.0, "planes": planes})
    return screen(req)


def test_mohr_labels_do_not_overlap(crowded):
    from stressmap.plot.labels import label_boxes_overlap

    fig = ps.mohr_figure(crowded)
    ax = fig.axes[0]
    ranks = _by_gid(ax, "rank-label")
    names = _by_gid(ax, "principal-label")
    assert len(ranks) == min(ps.MOHR_LABELLED_PLANES, 10) and len(names) == 3
    assert sorted(int(t.get_text()) for t in ranks) == list(range(1, len(ranks) + 1))
    fig.canvas.draw()  # positions as rendered
    boxes = _extents([a for a in ranks + names])
    assert not label_boxes_overlap(boxes)
    # each rank label points at its own plane's (sigma_n', tau)
    eff = crowded.planes["effective_normal_stress_mpa"]
    for t in ranks:
        r = int(t.get_text())
        assert_allclose(t.xy, (eff[r - 1], crowded.planes["shear_stress_mpa"][r - 1]))


def test_fault_map_names_each_trace_with_its_rank(result):
    fig = ps.fault_map_figure(result)
    ax = fig.axes[0]
    labels = {t.get_text() for t in _by_gid(ax, "fault-label")}
    seg = result.planes["kind"] == "trace segment"
    best_a = int(result.planes["rank"][seg & (result.planes["name"] == "A")].min())
    assert f"A (rank {best_a})" in labels
    (b_rank,) = result.planes["rank"][result.planes["name"] == "B"]
    assert f"B (rank {b_rank})" in labels
    fig.canvas.draw()
    from stressmap.plot.labels import label_boxes_overlap
    assert not label_boxes_overlap(_extents(_by_gid(ax, "fault-label")))


def test_fault_map_frame_has_a_north_arrow(result):
    fig = ps.fault_map_figure(result)
    (arrow,) = _by_gid(fig.axes[0], "north-arrow")
    assert arrow.xy[0] == arrow.xyann[0] and arrow.xy[1] > arrow.xyann[1]


def test_map_from_planes_only_is_not_empty(crowded):
    fig = ps.fault_map_figure(crowded)
    ax = fig.axes[0]
    (lines,) = _by_gid(ax, "site-planes")
    segs = lines.get_segments()
    assert len(segs) == 10
    site = np.array([crowded.site["lon"], crowded.site["lat"]])
    # each strike line is centred on the site and runs along the plane's strike
    coslat = np.cos(np.radians(site[1]))
    for seg, strike in zip(segs, crowded.planes["strike_deg"]):
        assert_allclose(seg.mean(axis=0), site, atol=1e-9)
        d = seg[1] - seg[0]
        assert_allclose(np.mod(np.degrees(np.arctan2(d[0] * coslat, d[1])), 180.0),
                        np.mod(strike, 180.0), atol=1e-6)
    assert_allclose(lines.get_array(), crowded.planes["pore_pressure_margin_mpa"])
    (note,) = _by_gid(ax, "map-note")
    assert "10 plane(s) without a location" in note.get_text()
    assert len(_by_gid(ax, "fault-label")) >= 5  # the first ranks, where there is room


@pytest.fixture(scope="module")
def logged_at_site():
    """Two image-log plane sets logged in the well at the site (one place, two margins) and a
    trace passing by: the situation of the packaged demo faults."""
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "set one, a long name", "strike_deg": 60,
                                           "dip_deg": 45},
         "geometry": {"type": "Point", "coordinates": [-15.0, -20.0]}},
        {"type": "Feature", "properties": {"name": "set two, a long name", "strike_deg": 150,
                                           "dip_deg": 80},
         "geometry": {"type": "Point", "coordinates": [-15.0, -20.0]}},
        {"type": "Feature", "properties": {"name": "trace near the site", "dip_deg": 85,
                                           "dip_direction_deg": 90},
         "geometry": {"type": "LineString", "coordinates": [[-14.99, -20.05], [-14.99, -19.95]]}}]}
    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "strike-slip",
                         "shmax_azimuth_deg": 165.0, "faults": faults})
    return screen(req)


def test_fault_map_labels_keep_the_site_and_the_squares_clear(logged_at_site):
    from stressmap.plot.labels import text_box, label_boxes_overlap

    res = logged_at_site
    fig = ps.fault_map_figure(res)
    ax = fig.axes[0]
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    labels = [text_box(t) for t in _by_gid(ax, "fault-label")]
    assert len(labels) == 3
    (site,) = _by_gid(ax, "site")
    (squares,) = _by_gid(ax, "fault-planes")
    marks = [tuple(site.get_window_extent(renderer).extents)]
    marks += [(x - 3, y - 3, x + 3, y + 3) for x, y in ax.transData.transform(squares.get_offsets())]
    for box in labels:
        assert not label_boxes_overlap([box] + marks[:1]), "a label covers the site star"
        assert not any(label_boxes_overlap([box, m]) for m in marks[1:]), "a label covers a square"
    # both sets sit on the site: the one closer to failure is drawn last (on top), above the star
    located = res.planes["kind"] != "trace segment"
    least = float(np.min(res.planes["pore_pressure_margin_mpa"][located]))
    assert squares.get_array()[-1] == pytest.approx(least)
    assert squares.get_zorder() > site.get_zorder()


def test_fault_map_palest_trace_and_shmax_bar_stand_out(logged_at_site):
    # every trace has a casing darker than the axes background, so the largest margin (the
    # palest colour of the scale) is still seen; the SHmax bar differs in hue from every margin
    from matplotlib.colors import to_rgb, rgb_to_hsv

    fig = ps.fault_map_figure(logged_at_site)
    ax = fig.axes[0]
    (casing,) = _by_gid(ax, "fault-trace-casing")
    (traces,) = _by_gid(ax, "fault-traces")
    assert len(casing.get_segments()) == len(traces.get_segments())
    assert casing.get_zorder() < traces.get_zorder()
    assert max(casing.get_linewidths()) > max(traces.get_linewidths())

    def lum(c):
        r, g, b = to_rgb(c)
        return 0.2126 * r + 0.7152 * g + 0.0722 * b  # relative luminance weights (sRGB, ITU-R BT.709)

    assert lum(ax.get_facecolor()) - lum(casing.get_edgecolor()[0]) > 0.4
    (bar,) = _by_gid(ax, "shmax-direction")
    bar_hue = rgb_to_hsv(to_rgb(bar.get_color()))[0]
    cmap = traces.get_cmap()
    hues = [rgb_to_hsv(cmap(v)[:3])[0] for v in np.linspace(0, 1, 11)]
    assert min(min(abs(bar_hue - h), 1 - abs(bar_hue - h)) for h in hues) > 0.25
