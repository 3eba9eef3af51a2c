"""Pictures of a model-data comparison: the SHmax map with indicators, and a rose diagram.

* :func:`comparison_map_png` -- predicted SHmax ticks on a grid over the plate (filled, coloured
  by regime index) with the indicators drawn on top as hollow ticks whose outline width grows
  with the misfit, through :func:`stressmap.plot.maps.shmax_map` (plate outline, scale bar, caption
  with the model id and the caution).
* :func:`rose_png` -- a rose diagram (axial: each azimuth counted at theta and theta + 180) of the
  observed SHmax against the predicted SHmax at the same indicators, weighted by indicator
  weight, with the caution as caption.

matplotlib is imported inside the functions (Agg canvas, no global state).
"""

from __future__ import annotations

import io
import textwrap

import numpy as np

from stressmap.constants import CAUTION
from stressmap.model import plate_outline, predict_grid
from stressmap.plot.maps import shmax_map

__all__ = ["comparison_map_png", "rose_png", "rose_counts"]


def rose_counts(azimuth_deg, weight=None, bin_deg=10.0):
    """Weighted counts of axial data in bins over [0, 180) (NaN ignored).

    Returns ``(edges (k+1,), counts (k,))``.

    Examples
    --------
    >>> edges, counts = rose_counts([5.0, 175.0, 185.0, 95.0], bin_deg=90.0)
    >>> edges.tolist(), counts.tolist()
    ([0.0, 90.0, 180.0], [2.0, 2.0])
    """
    az = np.mod(np.asarray(azimuth_deg, dtype=float), 180.0)
    w = np.ones_like(az) if weight is None else np.asarray(weight, dtype=float)
    ok = np.isfinite(az) & np.isfinite(w)
    edges = np.arange(0.0, 180.0 + bin_deg / 2, bin_deg)
    counts, _ = np.histogram(az[ok], bins=edges, weights=w[ok])
    return edges, counts.astype(float)


def rose_png(observed_deg, predicted_deg, weight=None, *, bin_deg=10.0, title=None,
             caption=None, dpi=120) -> bytes:
    """Rose diagram of observed against predicted SHmax; returns PNG bytes.

    Observed: filled petals; predicted (at the same indicators): outlined petals. Both are
    normalised to their largest bin, drawn at theta and theta + 180 (axial data).

    Examples
    --------
    >>> png = rose_png([10.0, 20.0, 170.0], [15.0, 15.0, 15.0])
    >>> png[:4] == b"\\x89PNG"
    True
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    edges, obs = rose_counts(observed_deg, weight, bin_deg)
    _, pred = rose_counts(predicted_deg, weight, bin_deg)
    theta = np.radians(np.concatenate([edges[:-1], edges[:-1] + 180.0]))
    width = np.radians(bin_deg)
    obs_n = np.tile(obs / obs.max() if obs.max() > 0 else obs, 2)
    pred_n = np.tile(pred / pred.max() if pred.max() > 0 else pred, 2)

    fig = Figure(figsize=(5.6, 6.4))
    FigureCanvasAgg(fig)
    ax = fig.add_axes([0.1, 0.2, 0.8, 0.7], projection="polar")
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    ax.bar(theta, obs_n, width=width, align="edge", color="#7a8fb0", edgecolor="#2d3e5c",
           linewidth=0.6, label="observed SHmax")
    ax.bar(theta, pred_n, width=width, align="edge", fill=False, edgecolor="#b0651c",
           linewidth=1.6, label="predicted SHmax at the indicators")
    ax.set_yticklabels([])
    ax.set_title(title or "SHmax: observed vs predicted", pad=14, fontsize=11)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.05), fontsize=8, frameon=False, ncol=1)
    text = "\n".join(([caption] if caption else []) + textwrap.wrap(CAUTION, 90))
    fig.text(0.5, 0.02, text, ha="center", va="bottom", fontsize=6.2, color="#333333")
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def comparison_map_png(model, table, *, caption=None, title=None, grid_nodes=900) -> bytes:
    """The SHmax map of a comparison: predicted grid ticks, indicators as hollow ticks.

    Parameters
    ----------
    model : stressmap.model.BuiltModel
    table : DataFrame
        Output of :func:`stressmap.analyses.compare.compare` (``lon``, ``lat``, ``shmax_azimuth_deg``,
        ``misfit_deg``).
    caption : str, optional
        First caption line (model id, build time); the caution is always added by the map.
    grid_nodes : int
        About how many predicted ticks to draw over the plate's bounding box.
    """

    ring_lon = np.asarray(model.fields["ring_lon"].values, dtype=float)
    ring_lat = np.asarray(model.fields["ring_lat"].values, dtype=float)
    w, e = float(ring_lon.min()), float(ring_lon.max())
    s, n = float(ring_lat.min()), float(ring_lat.max())
    km_per_deg = 111.195
    width_km = (e - w) * km_per_deg * np.cos(np.radians(0.5 * (s + n)))
    height_km = (n - s) * km_per_deg
    spacing = max(np.sqrt(max(width_km * height_km, 1.0) / grid_nodes), 1.0)
    grid = predict_grid(model, (w, s, e, n), spacing)
    lon2, lat2 = np.meshgrid(grid["lon"].values, grid["lat"].values)
    inside = np.asarray(grid["inside"].values, dtype=bool).ravel()
    observed = {
        "lon": table["lon"].to_numpy(float),
        "lat": table["lat"].to_numpy(float),
        "azimuth_deg": table["shmax_azimuth_deg"].to_numpy(float),
        "misfit_deg": np.abs(table["misfit_deg"].to_numpy(float)),
    }
    return shmax_map(
        np.mod(lon2.ravel()[inside] + 180.0, 360.0) - 180.0,
        lat2.ravel()[inside],
        grid["shmax_azimuth_deg"].values.ravel()[inside],
        grid["regime_index"].values.ravel()[inside],
        plate_outline(model),
        observed=observed,
        title=title or "Predicted SHmax (filled) and indicators (hollow)",
        caption=caption,
    )
