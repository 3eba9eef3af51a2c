"""The SHmax map PNG (stressmap/plot/maps.py): decodes as PNG, colours ticks by regime on cividis,
skips points outside the plate, carries the caution.

PNG decoding is Pillow's (independent of the matplotlib code that draws); the colour check uses
matplotlib's published cividis table.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from stressmap.plot.maps import (BOUNDARY_STYLES, nice_scale_km, outline_segments,
                                  regime_probability_figure, regime_probability_map, shmax_figure,
                                  shmax_map)

PIL = pytest.importorskip("PIL.Image")

SQUARE = {"type": "FeatureCollection", "features": [
    {"type": "Feature", "properties": {"kind": kind},
     "geometry": {"type": "LineString", "coordinates": coords}}
    for kind, coords in [
        ("ridge", [[0, 0], [10, 0]]), ("subduction", [[10, 0], [10, 10]]),
        ("collision", [[10, 10], [0, 10]]), ("transform", [[0, 10], [0, 0]])]]}


def _grid():
    lon, lat = np.meshgrid(np.arange(1.0, 10.0, 1.0), np.arange(1.0, 10.0, 1.0))
    return lon.ravel(), lat.ravel()


def _pixels(png: bytes) -> np.ndarray:
    img = PIL.open(io.BytesIO(png))
    assert img.format == "PNG"
    return np.asarray(img.convert("RGB"), dtype=float) / 255.0


def _share_near(pixels: np.ndarray, rgb, tol=0.03) -> float:
    d = np.abs(pixels - np.asarray(rgb)[:3]).max(axis=-1)
    return float((d < tol).mean())


@pytest.mark.parametrize("index, other", [(0.5, 2.5), (2.5, 0.5)])
def test_ticks_are_coloured_by_regime_on_cividis(index, other):
    import matplotlib

    cividis = matplotlib.colormaps["cividis"]
    lon, lat = _grid()
    png = shmax_map(lon, lat, np.full(lon.size, 30.0), np.full(lon.size, index), SQUARE)
    pix = _pixels(png)
    assert pix.shape[0] > 300 and pix.shape[1] > 500
    # The regime colour fills the tick cores; the other regime's colour appears only in the
    # colourbar, which is much smaller than 81 ticks.
    assert _share_near(pix, cividis(index / 3.0)) > 3 * _share_near(pix, cividis(other / 3.0))


def test_points_outside_the_plate_are_not_drawn():
    import matplotlib

    cividis = matplotlib.colormaps["cividis"]
    lon, lat = _grid()
    inside = shmax_map(lon, lat, np.full(lon.size, 30.0), np.full(lon.size, 2.5), SQUARE)
    outside = shmax_map(lon, lat, np.full(lon.size, np.nan), np.full(lon.size, np.nan), SQUARE)
    colour = cividis(2.5 / 3.0)
    assert _share_near(_pixels(inside), colour) > 5 * _share_near(_pixels(outside), colour)


def test_map_is_non_trivial_with_observed_and_uncertainty():
    lon, lat = _grid()
    png = shmax_map(lon, lat, (lon * 17) % 180, (lat / 3.3), SQUARE,
                    observed={"lon": [5.0], "lat": [5.0], "azimuth_deg": [100.0],
                              "misfit_deg": [60.0]},
                    uncertainty_deg=np.full(lon.size, 20.0), title="Square (fictional)",
                    caption="Model 00ff built 2026-01-01T00:00:00Z")
    pix = _pixels(png)
    colours = np.unique((pix * 255).astype(np.uint8).reshape(-1, 3), axis=0)
    assert len(colours) > 200  # ticks, fans, outline, legend, colourbar, text


def test_mismatched_lengths_are_refused():
    with pytest.raises(ValueError, match="azimuth_deg has 1 values, expected 2"):
        shmax_map([0.0, 1.0], [0.0, 1.0], [10.0], [1.0, 1.0])


def test_outline_forms_agree():
    from_fc = outline_segments(SQUARE)
    from_dicts = outline_segments([{"lon": x, "lat": y, "kind": k} for x, y, k in from_fc])
    from_tuples = outline_segments([(x, y, k) for x, y, k in from_fc])
    for a, b, c in zip(from_fc, from_dicts, from_tuples):
        np.testing.assert_allclose(a[0], b[0], atol=0)
        np.testing.assert_allclose(a[1], c[1], atol=0)
        assert a[2] == b[2] == c[2]
    assert {k for *_, k in from_fc} <= set(BOUNDARY_STYLES)


@pytest.mark.parametrize("width_km, expected", [(2600.0, 500.0), (5000.0, 1000.0), (9.0, 1.0),
                                                (49.0, 5.0), (120.0, 20.0)])
def test_scale_bar_lengths_are_round(width_km, expected):
    assert nice_scale_km(width_km) == expected


# --- the map frame: a true scale bar, a north arrow (issue: pictures a report can use) --------

TALL = {"type": "FeatureCollection", "features": [
    {"type": "Feature", "properties": {"kind": "ridge"},
     "geometry": {"type": "LineString", "coordinates": [[0, 20], [30, 20], [30, 70], [0, 70],
                                                         [0, 20]]}}]}


def _by_gid(fig, gid):
    return [a for ax in fig.axes for a in ax.get_children() if a.get_gid() == gid]


def _tall_figure(**kw):
    lon, lat = np.meshgrid(np.arange(2.0, 30.0, 4.0), np.arange(22.0, 70.0, 4.0))
    return shmax_figure(lon.ravel(), lat.ravel(), np.full(lon.size, 10.0),
                        np.full(lon.size, 1.5), TALL, **kw)


def test_scale_bar_is_true_at_its_own_latitude():
    """A window from 20 to 70 N: at the bar (near 22 N) a degree of longitude is 1.3 times
    longer than at the middle latitude (45 N), so a bar sized at the middle would be 30 % off."""
    from pyproj import Geod

    fig = _tall_figure()
    (bar,) = _by_gid(fig, "scale-bar")
    (x0, x1), (y0, y1) = bar.get_data()
    assert y0 == y1  # drawn along a parallel
    (label,) = _by_gid(fig, "scale-bar-label")
    km = float(label.get_text().split()[0])
    # independent distance along the parallel: pyproj.Geod on the 6371 km sphere, 50 steps
    lons = np.linspace(x0, x1, 51)
    _, _, d = Geod(a=6371000.0, f=0.0).inv(lons[:-1], np.full(50, y0), lons[1:], np.full(50, y0))
    np.testing.assert_allclose(d.sum() / 1e3, km, rtol=1e-3)


def test_map_has_a_north_arrow_pointing_up():
    fig = _tall_figure()
    (arrow,) = _by_gid(fig, "north-arrow")
    (tx, ty), (hx, hy) = arrow.xyann, arrow.xy  # tail, head in data coordinates
    assert tx == hx and hy > ty  # equirectangular frame: north is +latitude everywhere
    (n,) = _by_gid(fig, "north-label")
    assert n.get_text() == "N" and n.get_position()[1] > hy


def test_indicator_types_are_told_apart_and_labelled_as_given():
    obs = {"lon": [5.0, 10.0, 15.0, 20.0], "lat": [30.0, 40.0, 50.0, 60.0],
           "azimuth_deg": [10.0, 20.0, 30.0, 40.0], "misfit_deg": [0.0, 10.0, 20.0, 80.0],
           "type": ["breakout", "focal_mechanism", "breakout", "hydraulic_fracture"],
           "label": "fictional indicators"}
    fig = _tall_figure(observed=obs)
    marks = {g: _by_gid(fig, f"indicator-type-{g}") for g in
             ("breakout", "focal_mechanism", "hydraulic_fracture")}
    assert [len(v) for v in marks.values()] == [1, 1, 1]
    shapes = {g: v[0].get_marker() for g, v in marks.items()}
    assert len(set(shapes.values())) == 3  # one shape per type
    np.testing.assert_allclose(marks["breakout"][0].get_xdata(), [5.0, 15.0])
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert "fictional indicators" in labels
    assert {"breakout", "focal mechanism", "hydraulic fracture"} <= set(labels)
    assert not any("measured" in t for t in labels)


def test_regime_probability_map_colours_each_panel_by_its_probability():
    import matplotlib

    lon, lat = _grid()
    p_rev = (lon - 1.0) / 8.0  # 0 at the west edge, 1 at the east edge
    probs = np.column_stack([np.zeros_like(p_rev), 1.0 - p_rev, p_rev])
    probs[0] = np.nan  # a point outside the plate is not drawn
    fig = regime_probability_figure(lon, lat, probs, SQUARE, caption="Model 00ff")
    for name, column in (("normal", 0), ("strike-slip", 1), ("reverse", 2)):
        (cells,) = _by_gid(fig, f"probability-{name}")
        np.testing.assert_allclose(cells.get_array(), probs[1:, column])
        assert cells.norm.vmin == 0.0 and cells.norm.vmax == 1.0
    # pixels: the reverse panel's east column is the colormap's 1.0 colour
    png = regime_probability_map(lon, lat, probs, SQUARE)
    top = matplotlib.colormaps["magma_r"](1.0)
    assert _share_near(_pixels(png), top) > 0.002
    caption = " ".join(t.get_text() for t in fig.texts if t.get_gid() == "caption")
    assert "Model 00ff" in caption and "licensed professionals" in caption
