"""Pictures of a model-data comparison: the SHmax map with indicators, and a rose diagram.

* :func:`comparison_map_png` -- predicted SHmax ticks on a grid over the plate (filled, coloured
  by regime index) with the indicators drawn on top as hollow ticks whose outline width grows
  with the misfit and a centre mark per indicator type, through
  :func:`stressmap.plot.maps.shmax_map` (plate outline, scale bar, north arrow, caption with the
  model id and the caution). Invented data is called fictional in the legend, never measured.
* :func:`rose_png` -- a rose diagram (axial: each azimuth counted at theta and theta + 180) of the
  observed SHmax against the predicted SHmax at the same indicators, weighted by indicator
  weight, on a count scale with n and the bin width stated, with the caution as caption.

matplotlib is imported inside the functions (Agg canvas, no global state).
"""

from __future__ import annotations

import math

import numpy as np

from stressmap.model import plate_outline, predict_grid
from stressmap.plot.maps import caption_text, figure_png, shmax_map

__all__ = ["comparison_map_png", "indicator_label", "rose_figure", "rose_png", "rose_counts"]


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


def rose_figure(observed_deg, predicted_deg, weight=None, *, bin_deg=10.0, title=None,
                caption=None):
    """Rose diagram of observed against predicted SHmax as a Figure (see :func:`rose_png`)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    edges, obs = rose_counts(observed_deg, weight, bin_deg)
    _, pred = rose_counts(predicted_deg, weight, bin_deg)
    n = int(np.count_nonzero(np.isfinite(np.asarray(observed_deg, dtype=float))))
    weighted = weight is not None and not np.allclose(np.asarray(weight, dtype=float), 1.0)
    theta = np.radians(np.concatenate([edges[:-1], edges[:-1] + 180.0]))
    width = np.radians(bin_deg)
    top = max(float(obs.max(initial=0.0)), float(pred.max(initial=0.0)), 1e-9)

    fig = Figure(figsize=(5.6, 6.6))
    FigureCanvasAgg(fig)
    ax = fig.add_axes([0.1, 0.24, 0.8, 0.66], projection="polar")
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    ax.bar(theta, np.tile(obs, 2), width=width, align="edge", color="#7a8fb0",
           edgecolor="#2d3e5c", linewidth=0.6, label="observed SHmax", gid="rose-observed")
    ax.bar(theta, np.tile(pred, 2), width=width, align="edge", fill=False, edgecolor="#b0651c",
           linewidth=1.6, label="predicted SHmax at the indicators", gid="rose-predicted")
    # count scale: a few round rings labelled in counts, drawn along the 100 degree spoke
    ax.set_ylim(0.0, top * 1.05)
    rings = _round_rings(top)
    ax.set_yticks(rings)
    ax.set_yticklabels([f"{r:g}" for r in rings], fontsize=7, color="#333333")
    ax.set_rlabel_position(100.0)
    ax.set_title(title or "SHmax: observed vs predicted", pad=14, fontsize=11)
    scale = "sum of indicator weights" if weighted else "count"
    ax.text(0.5, -0.07, f"n = {n} indicators; bins {bin_deg:g}\u00b0 (axial, shown twice); "
            f"rings: {scale} per bin", transform=ax.transAxes, ha="center", va="top",
            fontsize=8, gid="rose-scale")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), fontsize=8, frameon=False, ncol=1)
    fig.text(0.5, 0.02, caption_text(caption, 90), ha="center", va="bottom", fontsize=6.2,
             color="#333333", gid="caption")
    return fig


def _round_rings(top: float) -> list[float]:
    """Two to five round ring values (1, 2 or 5 times 10^k) up to ``top``.

    Examples
    --------
    >>> _round_rings(7.0), _round_rings(0.8)
    ([2.0, 4.0, 6.0], [0.2, 0.4, 0.6, 0.8])
    """
    raw = top / 4.0
    exp = math.floor(math.log10(raw))
    step = next(m * 10.0**exp for m in (1.0, 2.0, 5.0, 10.0) if m * 10.0**exp >= raw)
    return [round(float(v), 10) for v in np.arange(step, top + step * 1e-9, step)]


def rose_png(observed_deg, predicted_deg, weight=None, *, bin_deg=10.0, title=None,
             caption=None, dpi=120) -> bytes:
    """Rose diagram of observed against predicted SHmax; returns PNG bytes.

    Observed: filled petals; predicted (at the same indicators): outlined petals, on one count
    scale (rings labelled in counts, or in summed weights when the indicators are weighted),
    drawn at theta and theta + 180 (axial data). The picture states n and the bin width.

    Examples
    --------
    >>> png = rose_png([10.0, 20.0, 170.0], [15.0, 15.0, 15.0])
    >>> png[:4] == b"\\x89PNG"
    True
    """
    fig = rose_figure(observed_deg, predicted_deg, weight, bin_deg=bin_deg, title=title,
                      caption=caption)
    return figure_png(fig, dpi, tight=False)


def indicator_label(table) -> str:
    """Legend text for the indicators of a table: never "measured" for invented data.

    Rows whose ``source`` or ``note`` mentions "fictional" (the demo data set says so in every
    row) make the whole set "fictional indicators"; otherwise "indicator SHmax".

    Examples
    --------
    >>> import pandas as pd
    >>> indicator_label(pd.DataFrame({"source": ["fictional demo data (stressmap)"]}))
    'fictional indicators (not measurements)'
    >>> indicator_label(pd.DataFrame({"source": ["borehole 7"], "note": [""]}))
    'indicator SHmax'
    """
    for col in ("source", "note"):
        if col in table and table[col].astype(str).str.contains("fictional", case=False).any():
            return "fictional indicators (not measurements)"
    return "indicator SHmax"


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
        "label": indicator_label(table),
    }
    if "type" in table:
        observed["type"] = table["type"].astype(str).to_numpy(object)
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
