"""The SHmax map PNG (stressmap/plot/maps.py): decodes as PNG, colours ticks by regime on cividis,
skips points outside the plate, carries the caution.

PNG decoding is Pillow's (independent of the matplotlib code that draws); the colour check uses
matplotlib's published cividis table.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from stressmap.plot.maps import BOUNDARY_STYLES, nice_scale_km, outline_segments, shmax_map

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
