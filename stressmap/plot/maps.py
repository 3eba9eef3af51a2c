"""Map pictures: the SHmax map, the regime-probability map, and the map frame they share.

The look is our own and made for reading:

- predicted SHmax as centred ticks of one fixed length (the orientation is the message, not the
  magnitude), filled with the regime index (Simpson's A-phi, 0 radial extension ... 1
  strike-slip ... 3 radial compression) on the perceptually uniform, colour-blind-safe
  ``cividis`` colormap; a colourbar names normal, strike-slip and reverse at 0.5, 1.5 and 2.5;
- stress indicators (optional) as hollow black ticks drawn over the predicted ones, the outline
  width growing with the misfit when one is given, and a small white centre mark whose shape
  tells the indicator type (:data:`INDICATOR_MARKS`);
- uncertainty (optional) as a translucent fan of +-1 sigma around each predicted tick;
- the plate outline with one line style per boundary kind, listed in a legend;
- every map frame (:func:`frame_axes`, also used by the fault map of a screening) carries a
  scale bar that is true along the parallel where it is drawn, a north arrow, and a caption with
  the model id and the caution.

Coordinates are drawn in a local equirectangular frame (x = lon, y = lat, aspect 1/cos of the
mean latitude) so that directions on the page match azimuths near the map's centre; north is up
everywhere on the page. matplotlib (Agg canvas, no pyplot state) is imported inside the drawing
functions so that ``import stressmap.plot.maps`` stays light.
"""

from __future__ import annotations

import io
import math
import textwrap
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from stressmap.constants import CAUTION, EARTH_RADIUS_KM

__all__ = [
    "shmax_map", "shmax_figure", "regime_probability_map", "regime_probability_figure",
    "ensemble_regime_png",
    "MapWindow", "map_window", "frame_axes", "draw_scale_bar", "draw_north_arrow",
    "draw_outline", "caption_text", "figure_png",
    "BOUNDARY_STYLES", "REGIME_TICKS", "INDICATOR_MARKS", "PROBABILITY_CMAP", "REGIME_PANELS", "nice_scale_km", "outline_segments",
]

#: Regime index positions named on the colourbar (A-phi: 0-1 normal, 1-2 strike-slip, 2-3 reverse).
REGIME_TICKS = ((0.5, "normal"), (1.5, "strike-slip"), (2.5, "reverse"))

#: Line style per boundary kind: (linestyle, linewidth pt, colour, legend label).
BOUNDARY_STYLES = {
    "ridge": ("-", 2.6, "#3b3b3b", "ridge"),
    "subduction": ((0, (6, 2)), 2.2, "#1f1f1f", "subduction (own slab)"),
    "overriding": ((0, (6, 2, 1, 2)), 1.8, "#1f1f1f", "overriding"),
    "collision": ((0, (1, 1.5)), 2.6, "#1f1f1f", "collision"),
    "transform": ("-", 1.0, "#6b6b6b", "transform"),
    "free": ((0, (2, 3)), 0.9, "#9a9a9a", "free edge"),
    "fixed": ("-", 3.4, "#8a8a8a", "fixed edge"),
}
_OTHER_STYLE = ("-", 1.0, "#444444", "other")

#: Centre mark of an indicator tick per indicator type (matplotlib marker codes): shapes grouped
#: by family -- round marks for borehole wall features, square-ish for in-situ tests, pointed
#: for fault and earthquake data.
INDICATOR_MARKS = {
    "breakout": "o",
    "tensile_fracture": "h",
    "hydraulic_fracture": "s",
    "overcoring": "D",
    "fault_slip_inversion": "^",
    "geological": "p",
    "focal_mechanism": "v",
}
_OTHER_MARK = "X"

#: Regime names and the probability variables of an ensemble, in panel order.
REGIME_PANELS = (("normal", "prob_normal"), ("strike-slip", "prob_strike_slip"),
                 ("reverse", "prob_reverse"))

_KM_PER_DEG = math.radians(1.0) * EARTH_RADIUS_KM


def nice_scale_km(width_km: float) -> float:
    """A round scale-bar length of about a fifth of the map width (1, 2 or 5 times 10^k km).

    Examples
    --------
    >>> nice_scale_km(2600.0)
    500.0
    >>> nice_scale_km(90.0)
    10.0
    >>> nice_scale_km(0.0)
    1.0
    >>> nice_scale_km(3.0)
    0.5
    """
    target = max(float(width_km) / 5.0, 1e-9)
    exp = math.floor(math.log10(target))
    best = 1.0
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0**exp <= target:
            best = m * 10.0**exp
    # sub-kilometre bars only for windows narrower than 5 km (a site's fault map)
    return best if 0.0 < width_km < 5.0 else max(best, 1.0)


def outline_segments(outline) -> list[tuple[np.ndarray, np.ndarray, str]]:
    """Normalise a plate outline to a list of ``(lon (n,), lat (n,), kind)``.

    Accepts a GeoJSON FeatureCollection of LineStrings with a ``kind`` property, a sequence of
    mappings with ``lon``, ``lat`` and ``kind``, a sequence of objects with those attributes, or
    a sequence of ``(lon, lat, kind)`` tuples. ``None`` gives an empty list.

    Examples
    --------
    >>> fc = {"type": "FeatureCollection", "features": [{"type": "Feature",
    ...       "properties": {"kind": "ridge"},
    ...       "geometry": {"type": "LineString", "coordinates": [[0, 0], [1, 1]]}}]}
    >>> [(x.tolist(), y.tolist(), k) for x, y, k in outline_segments(fc)]
    [([0.0, 1.0], [0.0, 1.0], 'ridge')]
    >>> outline_segments(None)
    []
    """
    if outline is None:
        return []
    if isinstance(outline, Mapping) and outline.get("type") == "FeatureCollection":
        out = []
        for feat in outline.get("features", []):
            geom = feat.get("geometry") or {}
            kind = str((feat.get("properties") or {}).get("kind", "other"))
            lines = ([geom.get("coordinates", [])] if geom.get("type") == "LineString"
                     else geom.get("coordinates", []) if geom.get("type") == "MultiLineString"
                     else [])
            for line in lines:
                xy = np.asarray(line, dtype=float).reshape(-1, 2)
                out.append((xy[:, 0], xy[:, 1], kind))
        return out
    out = []
    for seg in outline:
        if isinstance(seg, Mapping):
            lon, lat, kind = seg["lon"], seg["lat"], seg.get("kind", "other")
        elif hasattr(seg, "lon") and hasattr(seg, "lat"):
            lon, lat, kind = seg.lon, seg.lat, getattr(seg, "kind", "other")
        else:
            lon, lat, kind = seg
        out.append((np.asarray(lon, dtype=float).ravel(), np.asarray(lat, dtype=float).ravel(),
                    str(kind)))
    return out


# ---------------------------------------------------------------------------------------------
# The map frame shared by every map (SHmax, regime probability, compare, fault screening)
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class MapWindow:
    """A lon/lat window in degrees (``x1`` may pass 180 across the antimeridian)."""

    x0: float
    x1: float
    y0: float
    y1: float

    @property
    def coslat(self) -> float:
        """cos of the window's middle latitude (floored at 0.05 near the poles)."""
        return max(math.cos(math.radians(0.5 * (self.y0 + self.y1))), 0.05)

    @property
    def kx(self) -> float:
        """Degrees of longitude per degree of latitude for equal length on the page."""
        return 1.0 / self.coslat

    @property
    def span(self) -> float:
        return max(self.x1 - self.x0, self.y1 - self.y0, 1e-3)


def map_window(xs, ys, extent=None, pad_frac: float = 0.06) -> MapWindow:
    """The window that shows every finite point of ``xs``/``ys`` (or ``extent``), padded.

    Parameters
    ----------
    xs, ys : array_like
        Longitudes and latitudes (degrees) the window must hold.
    extent : (W, S, E, N), optional
        A requested window instead (E < W crosses the antimeridian); padded by half as much.

    Examples
    --------
    >>> w = map_window([0.0, 10.0], [0.0, 10.0], pad_frac=0.0)
    >>> (w.x0, w.x1, w.y0, w.y1)
    (0.0, 10.0, 0.0, 10.0)
    >>> map_window([], [], pad_frac=0.0).x1 > map_window([], [], pad_frac=0.0).x0
    True
    """
    if extent is not None:
        x0, y0, x1, y1 = (float(v) for v in extent)
        if x1 < x0:  # across the antimeridian: longitudes continue past 180
            x1 += 360.0
        pad_frac = pad_frac / 2.0
    else:
        x = np.asarray(xs, dtype=float).ravel()
        y = np.asarray(ys, dtype=float).ravel()
        ok = np.isfinite(x) & np.isfinite(y)
        x, y = (x[ok], y[ok]) if ok.any() else (np.zeros(1), np.zeros(1))
        x0, x1, y0, y1 = float(x.min()), float(x.max()), float(y.min()), float(y.max())
    pad = pad_frac * max(x1 - x0, y1 - y0, 1e-3)
    if x1 - x0 < 1e-6 and y1 - y0 < 1e-6:
        pad = max(pad, 0.5)  # a single point: one degree around it
    return MapWindow(x0 - pad, x1 + pad, y0 - pad, y1 + pad)


def frame_axes(ax, window: MapWindow, *, grid: bool = True) -> None:
    """Equirectangular frame: limits, aspect 1/cos(mid latitude), graticule and axis labels."""
    ax.set_aspect(window.kx)
    ax.set_xlim(window.x0, window.x1)
    ax.set_ylim(window.y0, window.y1)
    ax.set_facecolor("#f7f7f4")
    if grid:
        ax.grid(True, color="#dddddd", linewidth=0.5, zorder=0)
    ax.set_xlabel("longitude (\u00b0)")
    ax.set_ylabel("latitude (\u00b0)")
    ax.tick_params(labelsize=8)


def draw_scale_bar(ax, window: MapWindow, *, at=(0.05, 0.05), fontsize: float = 8.0) -> float:
    """A round-length scale bar along the parallel at its own latitude; returns its length, km.

    ``at`` is the bar's left end as a fraction of the window. The bar's length in degrees of
    longitude is ``L / (R * pi/180 * cos(latitude of the bar))`` on the 6371 km sphere, so it is
    true where it is drawn (not at the map's middle latitude). Artists: gid ``scale-bar``
    (the bar), ``scale-bar-label``.
    """
    from matplotlib.patches import Rectangle

    w = window
    bx = w.x0 + at[0] * (w.x1 - w.x0)
    by = w.y0 + at[1] * (w.y1 - w.y0)
    cos_bar = max(math.cos(math.radians(by)), 1e-6)
    width_km = (w.x1 - w.x0) * _KM_PER_DEG * cos_bar
    bar_km = nice_scale_km(width_km)
    bar_deg = bar_km / (_KM_PER_DEG * cos_bar)
    dy = w.y1 - w.y0
    # a white panel keeps the bar readable over dense ticks
    ax.add_patch(Rectangle((bx - 0.015 * (w.x1 - w.x0), by - 0.025 * dy),
                           bar_deg + 0.03 * (w.x1 - w.x0), 0.075 * dy, facecolor="white",
                           edgecolor="none", alpha=0.85, zorder=8, gid="scale-bar-panel"))
    ax.plot([bx, bx + bar_deg], [by, by], color="black", linewidth=3.0, zorder=9,
            solid_capstyle="butt", gid="scale-bar")
    ends = [by - 0.008 * dy, by + 0.008 * dy]
    ax.plot([bx, bx], ends, color="black", lw=1, zorder=9)
    ax.plot([bx + bar_deg] * 2, ends, color="black", lw=1, zorder=9)
    ax.text(bx + bar_deg / 2, by + 0.015 * dy, f"{bar_km:g} km", ha="center", va="bottom",
            fontsize=fontsize, zorder=9, gid="scale-bar-label")
    return bar_km


def draw_north_arrow(ax, window: MapWindow, *, at=(0.93, 0.83)) -> None:
    """A north arrow (gid ``north-arrow``) with an "N" (gid ``north-label``) above it.

    In the equirectangular frame north is straight up everywhere, so the arrow is vertical;
    ``at`` is its tail as a fraction of the window, its length 9 % of the window height.
    """
    w = window
    x = w.x0 + at[0] * (w.x1 - w.x0)
    y = w.y0 + at[1] * (w.y1 - w.y0)
    from matplotlib.patheffects import withStroke

    length = 0.09 * (w.y1 - w.y0)
    halo = [withStroke(linewidth=4.0, foreground="white")]  # readable over dense ticks
    arrow = ax.annotate("", xy=(x, y + length), xytext=(x, y), zorder=9, gid="north-arrow",
                        arrowprops=dict(arrowstyle="-|>,head_width=0.35,head_length=0.7",
                                        color="black", lw=1.6, shrinkA=0, shrinkB=0))
    arrow.arrow_patch.set_path_effects(halo)
    ax.text(x, y + length * 1.08, "N", ha="center", va="bottom", fontsize=9,
            fontweight="bold", zorder=9, gid="north-label", path_effects=halo)


def draw_outline(ax, segs, window: MapWindow) -> list[str]:
    """Plate boundary segments in their kind's style; returns the kinds seen in the window."""
    kinds_seen: list[str] = []
    w = window
    for sx, sy, kind in segs:
        ls, lw, colour, _label = BOUNDARY_STYLES.get(kind, _OTHER_STYLE)
        ax.plot(sx, sy, linestyle=ls, linewidth=lw, color=colour, zorder=2,
                solid_capstyle="butt", gid=f"boundary-{kind}")
        in_view = np.any((sx >= w.x0) & (sx <= w.x1) & (sy >= w.y0) & (sy <= w.y1))
        if kind not in kinds_seen and in_view:
            kinds_seen.append(kind)
    return kinds_seen


def _outline_handles(kinds_seen):
    from matplotlib.lines import Line2D

    handles = []
    for kind in kinds_seen:
        ls, lw, colour, label = BOUNDARY_STYLES.get(kind, _OTHER_STYLE)
        handles.append(Line2D([], [], linestyle=ls, linewidth=lw, color=colour, label=label))
    return handles


def caption_text(caption=None, width: int = 120) -> str:
    """The caption lines of a picture: the given first line(s), then the caution, wrapped."""
    lines = textwrap.wrap(str(caption), width) if caption else []
    return "\n".join(lines + textwrap.wrap(CAUTION, width))


def figure_png(fig, dpi=None, tight: bool = True) -> bytes:
    """PNG bytes of a figure (tight bounding box unless ``tight`` is False)."""
    buf = io.BytesIO()
    kw = dict(bbox_inches="tight", pad_inches=0.15) if tight else {}
    fig.savefig(buf, format="png", dpi=dpi or fig.dpi, **kw)
    return buf.getvalue()


# ---------------------------------------------------------------------------------------------
# The SHmax map
# ---------------------------------------------------------------------------------------------

def _as_1d(name: str, value, n: int | None = None) -> np.ndarray:
    arr = np.asarray(value, dtype=float).ravel()
    if n is not None and arr.size != n:
        raise ValueError(f"{name} has {arr.size} values, expected {n}")
    return arr


def _typical_spacing(x, y, span: float) -> float:
    """Median nearest-neighbour distance of the points (plot units), or span/10 for < 2 points."""
    if x.size < 2:
        return 0.1 * span
    from scipy.spatial import cKDTree

    dist, _ = cKDTree(np.column_stack([x, y])).query(np.column_stack([x, y]), k=2)
    d = dist[:, 1]
    d = d[d > 0]
    return float(np.median(d)) if d.size else 0.1 * span


def _tick_segments(x, y, az_deg, half_len, kx):
    """(n, 2, 2) segment end points of centred ticks in plot coordinates (x stretched by kx)."""
    a = np.deg2rad(az_deg)
    dx = np.sin(a) * half_len * kx
    dy = np.cos(a) * half_len
    return np.stack([np.column_stack([x - dx, y - dy]), np.column_stack([x + dx, y + dy])], axis=1)


def _fans(x, y, az_deg, sigma_deg, radius, kx, steps=9):
    """(n, 2*steps+2, 2) polygons: the two opposite wedges of an axial +-sigma fan."""
    t = np.linspace(-1.0, 1.0, steps)
    sig = np.clip(sigma_deg, 0.0, 90.0)
    ang = np.deg2rad(az_deg[:, None] + t[None, :] * sig[:, None])  # (n, steps)
    ex, ey = np.sin(ang) * radius * kx, np.cos(ang) * radius
    cx, cy = x[:, None], y[:, None]
    front = np.stack([cx + ex, cy + ey], axis=-1)
    back = np.stack([cx - ex, cy - ey], axis=-1)
    centre = np.stack([x, y], axis=-1)[:, None, :]
    return np.concatenate([centre, front, centre, back], axis=1)


@dataclass
class _Ticks:
    """Predicted ticks validated for drawing (arrays (n,), ``good`` marks the drawable ones)."""

    x: np.ndarray
    y: np.ndarray
    az: np.ndarray
    ri: np.ndarray
    sigma: np.ndarray | None
    good: np.ndarray


def _predicted(lon, lat, azimuth_deg, regime_index, uncertainty_deg) -> _Ticks:
    x = _as_1d("lon", lon)
    y = _as_1d("lat", lat, x.size)
    az = _as_1d("azimuth_deg", azimuth_deg, x.size)
    ri = _as_1d("regime_index", regime_index, x.size)
    sig = None if uncertainty_deg is None else _as_1d("uncertainty_deg", uncertainty_deg, x.size)
    good = np.isfinite(x) & np.isfinite(y) & np.isfinite(az) & np.isfinite(ri)
    return _Ticks(x, y, az, ri, sig, good)


def _observed(observed) -> dict | None:
    """Indicator arrays (lon, lat, azimuth_deg, rim width, type) or None."""
    if observed is None:
        return None
    ox = _as_1d("observed lon", observed["lon"])
    oy = _as_1d("observed lat", observed["lat"], ox.size)
    oaz = _as_1d("observed azimuth_deg", observed["azimuth_deg"], ox.size)
    misfit = observed.get("misfit_deg") if isinstance(observed, Mapping) else None
    rim = np.full(ox.size, 1.0)
    if misfit is not None:
        m = np.abs(_as_1d("observed misfit_deg", misfit, ox.size))
        rim = 0.8 + 2.4 * np.clip(np.nan_to_num(m, nan=0.0), 0.0, 90.0) / 90.0
    kinds = observed.get("type") if isinstance(observed, Mapping) else None
    kinds = (np.full(ox.size, "", dtype=object) if kinds is None
             else np.asarray(kinds, dtype=object).ravel())
    if kinds.size != ox.size:
        raise ValueError(f"observed type has {kinds.size} values, expected {ox.size}")
    ok = np.isfinite(ox) & np.isfinite(oy) & np.isfinite(oaz)
    label = str(observed.get("label") or "indicator SHmax") if isinstance(observed, Mapping) \
        else "indicator SHmax"
    return {"x": ox, "y": oy, "az": oaz, "rim": rim, "type": kinds, "ok": ok, "label": label}


def _shmax_axes(window: MapWindow, width_in: float, dpi: int):
    """Figure and map axes sized so the window keeps its aspect; legend space on the right."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    ratio = (window.y1 - window.y0) / max((window.x1 - window.x0) / window.kx, 1e-9)
    fig_h = min(max(width_in * 0.6 * ratio / 0.72 + 0.6, 4.5), 14.0)
    fig = Figure(figsize=(width_in, fig_h), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_axes([0.07, 0.2, 0.6, 0.72])
    frame_axes(ax, window)
    ax.apply_aspect()
    return fig, ax


def _tick_size(ax, window: MapWindow, ticks: _Ticks):
    """(half tick length in degrees of latitude, core width pt, casing width pt)."""
    spacing = _typical_spacing(ticks.x[ticks.good] * window.coslat, ticks.y[ticks.good],
                               window.span)
    half_len = 0.34 * min(spacing, 0.08 * window.span)
    fig_h = ax.figure.get_figheight()
    pt_per_deg = ax.get_position().height * fig_h * 72.0 / (window.y1 - window.y0)
    # Line widths follow the tick length, so dense grids stay readable (ticks never merge).
    core_w = float(np.clip(0.2 * 2 * half_len * pt_per_deg, 0.7, 2.4))
    return half_len, core_w, core_w + 1.4


def _draw_fans(ax, ticks: _Ticks, radius, kx) -> bool:
    from matplotlib.collections import PolyCollection

    if ticks.sigma is None:
        return False
    ok = ticks.good & np.isfinite(ticks.sigma)
    if ok.any():
        polys = _fans(ticks.x[ok], ticks.y[ok], ticks.az[ok], ticks.sigma[ok], radius, kx)
        ax.add_collection(PolyCollection(list(polys), facecolors="#d08c1a", alpha=0.55,
                                         edgecolors="none", zorder=3, gid="uncertainty-fans"))
    return True


def _draw_predicted(ax, ticks: _Ticks, half_len, core_w, case_w, kx, cmap, norm) -> None:
    """Filled ticks: a dark casing under a coloured core keeps light colours readable."""
    from matplotlib.collections import LineCollection

    if not ticks.good.any():
        return
    g = ticks.good
    segs = list(_tick_segments(ticks.x[g], ticks.y[g], ticks.az[g], half_len, kx))
    ax.add_collection(LineCollection(segs, colors="#202020", linewidths=case_w,
                                     capstyle="round", zorder=4, gid="predicted-casing"))
    ax.add_collection(LineCollection(segs, colors=cmap(norm(ticks.ri[g])), linewidths=core_w,
                                     capstyle="round", zorder=5, gid="predicted-ticks"))


def _draw_indicators(ax, obs: dict, half_len, kx) -> list:
    """Hollow ticks (white core, black rim growing with misfit) and a centre mark per type.

    Returns the legend handles: one for the ticks and one per indicator type present.
    """
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    ok = obs["ok"]
    if ok.any():
        segs = list(_tick_segments(obs["x"][ok], obs["y"][ok], obs["az"][ok], half_len * 1.25, kx))
        ax.add_collection(LineCollection(segs, colors="black", linewidths=3.6 + 2 * obs["rim"][ok],
                                         capstyle="butt", zorder=6, gid="indicator-rims"))
        ax.add_collection(LineCollection(segs, colors="white", linewidths=3.0, capstyle="butt",
                                         zorder=7, gid="indicator-ticks"))
    handles = [Line2D([], [], color="black", linewidth=5.0, label=obs["label"])]
    kinds = obs["type"][ok].astype(str)
    for kind in [k for k in dict.fromkeys(kinds.tolist()) if k]:
        sel = kinds == kind
        mark = INDICATOR_MARKS.get(kind, _OTHER_MARK)
        ax.plot(obs["x"][ok][sel], obs["y"][ok][sel], ls="none", marker=mark, ms=3.6,
                mfc="white", mec="black", mew=0.8, zorder=8, gid=f"indicator-type-{kind}")
        handles.append(Line2D([], [], ls="none", marker=mark, ms=5, mfc="white", mec="black",
                              label=kind.replace("_", " ")))
    return handles


def _regime_colourbar(fig, cmap, norm) -> None:
    from matplotlib.cm import ScalarMappable

    cax = fig.add_axes([0.71, 0.22, 0.022, 0.3])
    bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax)
    bar.set_ticks([t for t, _ in REGIME_TICKS])
    bar.set_ticklabels([name for _, name in REGIME_TICKS])
    bar.ax.tick_params(labelsize=8)
    bar.set_label("regime index (A-phi)", fontsize=8)


def _shmax_legend(fig, kinds_seen, cmap, norm, fans: bool, indicator_handles) -> None:
    from matplotlib.lines import Line2D

    handles = _outline_handles(kinds_seen)
    handles.append(Line2D([], [], color=cmap(norm(1.5)), linewidth=2.8, label="predicted SHmax"))
    if fans:
        handles.append(Line2D([], [], color="#d08c1a", alpha=0.45, linewidth=6,
                              label="SHmax +-1 sigma"))
    handles.extend(indicator_handles)
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.69, 0.92), fontsize=7.5,
               frameon=False, title="boundary and symbols", title_fontsize=8)


def shmax_figure(lon, lat, azimuth_deg, regime_index, outline=None, *, observed=None,
                 uncertainty_deg=None, title=None, caption=None, extent=None,
                 width_in: float = 9.0, dpi: int = 130):
    """The SHmax map as a :class:`matplotlib.figure.Figure` (arguments as :func:`shmax_map`)."""
    import matplotlib
    from matplotlib.colors import Normalize

    ticks = _predicted(lon, lat, azimuth_deg, regime_index, uncertainty_deg)
    obs = _observed(observed)
    segs = outline_segments(outline)
    xs = [s[0] for s in segs] + [ticks.x[ticks.good]] + ([obs["x"]] if obs else [])
    ys = [s[1] for s in segs] + [ticks.y[ticks.good]] + ([obs["y"]] if obs else [])
    window = map_window(np.concatenate(xs) if xs else [], np.concatenate(ys) if ys else [],
                        extent)
    fig, ax = _shmax_axes(window, width_in, dpi)
    half_len, core_w, case_w = _tick_size(ax, window, ticks)
    cmap, norm = matplotlib.colormaps["cividis"], Normalize(vmin=0.0, vmax=3.0)

    kinds_seen = draw_outline(ax, segs, window)
    fans = _draw_fans(ax, ticks, half_len * 1.6, window.kx)
    _draw_predicted(ax, ticks, half_len, core_w, case_w, window.kx, cmap, norm)
    ind_handles = _draw_indicators(ax, obs, half_len, window.kx) if obs else []
    draw_scale_bar(ax, window)
    draw_north_arrow(ax, window)
    _shmax_legend(fig, kinds_seen, cmap, norm, fans, ind_handles)
    _regime_colourbar(fig, cmap, norm)
    if title:
        ax.set_title(title, fontsize=11, loc="left")
    fig.text(0.02, 0.125, caption_text(caption), fontsize=7.5, ha="left", va="top",
             color="#333333", gid="caption")
    return fig


def shmax_map(lon, lat, azimuth_deg, regime_index, outline=None, *, observed=None,
              uncertainty_deg=None, title=None, caption=None, extent=None,
              width_in: float = 9.0, dpi: int = 130) -> bytes:
    """Draw predicted SHmax ticks (coloured by regime) over a plate outline; return PNG bytes.

    Parameters
    ----------
    lon, lat : array_like (n,)
        Tick positions, degrees. Points whose azimuth or regime index is NaN (outside the plate)
        are not drawn.
    azimuth_deg : array_like (n,)
        SHmax azimuth, degrees clockwise from north (axial).
    regime_index : array_like (n,)
        A-phi regime index in [0, 3].
    outline : optional
        Plate boundary; anything :func:`outline_segments` accepts (kinds select line styles).
    observed : mapping, optional
        Stress indicators: ``lon``, ``lat``, ``azimuth_deg`` arrays and optionally
        ``misfit_deg`` (outline width grows with it), ``type`` (indicator type per row; each
        type gets its centre mark, :data:`INDICATOR_MARKS`) and ``label`` (legend text, e.g.
        "fictional indicators"; default "indicator SHmax").
    uncertainty_deg : array_like (n,), optional
        One-sigma SHmax uncertainty, drawn as a translucent fan around each tick.
    title : str, optional
    extent : (W, S, E, N), optional
        Map window in degrees (e.g. the requested region); default: the outline, the points and
        the observed ticks.
    caption : str, optional
        First caption line (e.g. "Model 3f2a... built 2026-05-01T12:00:00Z"); the caution is
        always added after it.
    width_in, dpi : figure width in inches and resolution.

    Returns
    -------
    bytes
        A PNG image.

    Examples
    --------
    >>> png = shmax_map([0.0, 1.0], [0.0, 1.0], [0.0, 45.0], [2.5, 1.0], caption="Model demo")
    >>> png[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    fig = shmax_figure(lon, lat, azimuth_deg, regime_index, outline, observed=observed,
                       uncertainty_deg=uncertainty_deg, title=title, caption=caption,
                       extent=extent, width_in=width_in, dpi=dpi)
    return figure_png(fig, dpi)


# ---------------------------------------------------------------------------------------------
# The regime-probability map of an ensemble
# ---------------------------------------------------------------------------------------------

#: Colormap of regime probabilities (perceptually uniform, colour-blind safe, and unlike the
#: cividis of the regime index so the two pictures are not confused).
PROBABILITY_CMAP = "magma_r"


def _probability_axes(window: MapWindow, width_in: float, dpi: int):
    """Figure with three equal map panels in a row, and a colourbar axes on the right."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    ratio = (window.y1 - window.y0) / max((window.x1 - window.x0) / window.kx, 1e-9)
    panel_w = 0.27 * width_in
    fig_h = min(max(panel_w * ratio / 0.62 + 0.4, 3.8), 12.0)
    fig = Figure(figsize=(width_in, fig_h), dpi=dpi)
    FigureCanvasAgg(fig)
    axes = [fig.add_axes([0.05 + 0.295 * i, 0.24, 0.27, 0.64]) for i in range(3)]
    for ax in axes:
        frame_axes(ax, window, grid=False)
        ax.apply_aspect()
    for ax in axes[1:]:
        ax.set_ylabel("")
        ax.tick_params(labelleft=False)
    cax = fig.add_axes([0.94, 0.3, 0.012, 0.5])
    return fig, axes, cax


def regime_probability_figure(lon, lat, probabilities, outline=None, *, title=None,
                              caption=None, extent=None, width_in: float = 12.0, dpi: int = 120):
    """Three map panels: the probability of normal, strike-slip and reverse faulting.

    Parameters
    ----------
    lon, lat : array_like (n,)
        Point positions, degrees (a flattened grid or scattered points).
    probabilities : array_like (n, 3)
        Share of ensemble members in each regime (normal, strike-slip, reverse) per point;
        NaN rows (outside the plate) are not drawn.
    outline, title, caption, extent, width_in, dpi : as :func:`shmax_map`.

    Each point is a square cell (side: the median spacing of the points) coloured on
    :data:`PROBABILITY_CMAP` from 0 to 1; artists carry gid ``probability-<regime>``.
    """
    import matplotlib
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    x = _as_1d("lon", lon)
    y = _as_1d("lat", lat, x.size)
    prob = np.asarray(probabilities, dtype=float).reshape(-1, 3) if x.size else np.zeros((0, 3))
    if prob.shape[0] != x.size:
        raise ValueError(f"probabilities has {prob.shape[0]} rows, expected {x.size}")
    good = np.isfinite(x) & np.isfinite(y) & np.all(np.isfinite(prob), axis=1)
    segs = outline_segments(outline)
    window = map_window(np.concatenate([s[0] for s in segs] + [x[good]]),
                        np.concatenate([s[1] for s in segs] + [y[good]]), extent)
    fig, axes, cax = _probability_axes(window, width_in, dpi)
    cmap, norm = matplotlib.colormaps[PROBABILITY_CMAP], Normalize(0.0, 1.0)
    spacing = _typical_spacing(x[good] * window.coslat, y[good], window.span)
    pt_per_deg = axes[0].get_position().height * fig.get_figheight() * 72.0 / (window.y1 - window.y0)
    side_pt = max(spacing * pt_per_deg, 1.0)
    for i, (ax, (name, _var)) in enumerate(zip(axes, REGIME_PANELS)):
        ax.scatter(x[good], y[good], c=prob[good, i], cmap=cmap, norm=norm, marker="s",
                   s=side_pt**2, linewidths=0, zorder=1, gid=f"probability-{name}")
        draw_outline(ax, segs, window)
        ax.set_title(f"P({name})", fontsize=10, loc="left")
    draw_scale_bar(axes[0], window, fontsize=7)
    draw_north_arrow(axes[0], window)
    bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax)
    bar.set_label("share of ensemble members", fontsize=8)
    bar.ax.tick_params(labelsize=8)
    fig.suptitle(title or "Regime probability", x=0.05, ha="left", fontsize=11)
    fig.text(0.02, 0.13, caption_text(caption, 160), fontsize=7, ha="left", va="top",
             color="#333333", gid="caption")
    return fig


def regime_probability_map(lon, lat, probabilities, outline=None, **kwargs) -> bytes:
    """PNG bytes of :func:`regime_probability_figure`.

    Examples
    --------
    >>> png = regime_probability_map([0.0, 1.0], [0.0, 1.0], [[1, 0, 0], [0.2, 0.3, 0.5]])
    >>> png[:4] == b"\\x89PNG"
    True
    """
    fig = regime_probability_figure(lon, lat, probabilities, outline, **kwargs)
    return figure_png(fig)


def ensemble_regime_png(ds, outline=None, *, title=None, caption=None) -> bytes:
    """PNG of the regime probabilities of an ensemble Dataset (points or a lat/lon grid).

    ``ds`` holds ``prob_normal``, ``prob_strike_slip`` and ``prob_reverse`` over ``point`` or
    (``lat``, ``lon``), as :func:`stressmap.analyses.ensemble.ensemble_grid` and
    :func:`~stressmap.analyses.ensemble.ensemble_points` return it.
    """
    if "point" in ds.dims:
        lon = np.asarray(ds["lon"].values, float)
        lat = np.asarray(ds["lat"].values, float)
        probs = np.column_stack([np.asarray(ds[v].values, float) for _, v in REGIME_PANELS])
    else:
        lon2, lat2 = np.meshgrid(np.asarray(ds["lon"].values, float),
                                 np.asarray(ds["lat"].values, float))
        lon, lat = lon2.ravel(), lat2.ravel()
        probs = np.column_stack([np.asarray(ds[v].transpose("lat", "lon").values, float).ravel()
                                 for _, v in REGIME_PANELS])
    members = ds.attrs.get("members", "")
    return regime_probability_map(
        lon, lat, probs, outline, caption=caption,
        title=title or f"Regime probability over {members} ensemble members".replace("  ", " "))
