"""The SHmax map: a PNG of predicted stress directions and regimes over the plate outline.

The look (DESIGN.md "Pictures") is our own and made for reading:

- predicted SHmax as centred ticks of one fixed length (the orientation is the message, not the
  magnitude), filled with the regime index (Simpson's A-phi, 0 radial extension ... 1
  strike-slip ... 3 radial compression) on the perceptually uniform, colour-blind-safe
  ``cividis`` colormap; a colourbar names normal, strike-slip and reverse at 0.5, 1.5 and 2.5;
- measured indicators (optional) as hollow black ticks drawn over the predicted ones, the outline
  width growing with the misfit when one is given;
- uncertainty (optional) as a translucent fan of +-1 sigma around each predicted tick;
- the plate outline with one line style per boundary kind, listed in a legend;
- a scale bar in km, and a caption carrying the model id and the caution.

Coordinates are drawn in a local equirectangular frame (x = lon, y = lat, aspect 1/cos of the
mean latitude) so that directions on the page match azimuths near the plate's centre.
matplotlib (Agg backend) is imported inside :func:`shmax_map`, so ``import stressmap.plot.maps`` stays
light.
"""

from __future__ import annotations

import io
import math
import textwrap
from collections.abc import Mapping

import numpy as np

from stressmap.constants import CAUTION, EARTH_RADIUS_KM

__all__ = ["shmax_map", "BOUNDARY_STYLES", "REGIME_TICKS", "nice_scale_km", "outline_segments"]

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
    """
    target = max(float(width_km) / 5.0, 1e-9)
    exp = math.floor(math.log10(target))
    best = 1.0
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0**exp <= target:
            best = m * 10.0**exp
    return max(best, 1.0)


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
        Measured indicators: ``lon``, ``lat``, ``azimuth_deg`` arrays and optionally
        ``misfit_deg`` (outline width grows with it).
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
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.cm import ScalarMappable
    from matplotlib.collections import LineCollection, PolyCollection
    from matplotlib.colors import Normalize
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    x = _as_1d("lon", lon)
    y = _as_1d("lat", lat, x.size)
    az = _as_1d("azimuth_deg", azimuth_deg, x.size)
    ri = _as_1d("regime_index", regime_index, x.size)
    sig = None if uncertainty_deg is None else _as_1d("uncertainty_deg", uncertainty_deg, x.size)
    good = np.isfinite(x) & np.isfinite(y) & np.isfinite(az) & np.isfinite(ri)
    segs = outline_segments(outline)

    # Extent from the outline if given, else from the points.
    ex = np.concatenate([s[0] for s in segs] + [x[good]]) if segs or good.any() else np.zeros(1)
    ey = np.concatenate([s[1] for s in segs] + [y[good]]) if segs or good.any() else np.zeros(1)
    if observed is not None:
        ex = np.concatenate([ex, _as_1d("observed lon", observed["lon"])])
        ey = np.concatenate([ey, _as_1d("observed lat", observed["lat"])])
    ex, ey = ex[np.isfinite(ex)], ey[np.isfinite(ey)]
    if ex.size == 0:
        ex, ey = np.zeros(1), np.zeros(1)
    x0, x1, y0, y1 = ex.min(), ex.max(), ey.min(), ey.max()
    if extent is not None:
        x0, y0, x1, y1 = (float(v) for v in extent)
        if x1 < x0:  # across the antimeridian: longitudes continue past 180
            x1 += 360.0
    span = max(x1 - x0, y1 - y0, 1e-3)
    pad = 0.06 * span if extent is None else 0.03 * span
    x0, x1, y0, y1 = x0 - pad, x1 + pad, y0 - pad, y1 + pad
    lat0 = 0.5 * (y0 + y1)
    coslat = max(math.cos(math.radians(lat0)), 0.05)
    kx = 1.0 / coslat  # degrees of longitude per degree of latitude for equal length on the page

    # Tick length: a fraction of the typical point spacing (fixed for every tick).
    n_good = int(good.sum())
    spacing = _typical_spacing(x[good] * coslat, y[good], span)
    half_len = 0.34 * min(spacing, 0.08 * span)

    aspect = kx
    plot_h = (y1 - y0)
    plot_w = (x1 - x0) / kx
    ratio = plot_h / max(plot_w, 1e-9)
    fig_h = min(max(width_in * 0.6 * ratio / 0.72 + 0.6, 4.5), 14.0)
    fig = Figure(figsize=(width_in, fig_h), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_axes([0.07, 0.2, 0.6, 0.72])
    ax.set_aspect(aspect)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_facecolor("#f7f7f4")
    ax.grid(True, color="#dddddd", linewidth=0.5, zorder=0)
    ax.set_xlabel("longitude (deg)")
    ax.set_ylabel("latitude (deg)")
    ax.tick_params(labelsize=8)
    ax.apply_aspect()
    pos = ax.get_position()
    pt_per_deg = pos.height * fig_h * 72.0 / (y1 - y0)  # points per degree of latitude
    # Line widths follow the tick length, so dense grids stay readable (ticks never merge).
    core_w = float(np.clip(0.2 * 2 * half_len * pt_per_deg, 0.7, 2.4))
    case_w = core_w + 1.4

    cmap = matplotlib.colormaps["cividis"]
    norm = Normalize(vmin=0.0, vmax=3.0)

    # Plate outline, one style per kind.
    kinds_seen: list[str] = []
    for sx, sy, kind in segs:
        ls, lw, colour, _label = BOUNDARY_STYLES.get(kind, _OTHER_STYLE)
        ax.plot(sx, sy, linestyle=ls, linewidth=lw, color=colour, zorder=2,
                solid_capstyle="butt")
        in_view = np.any((sx >= x0) & (sx <= x1) & (sy >= y0) & (sy <= y1))
        if kind not in kinds_seen and in_view:
            kinds_seen.append(kind)

    # Uncertainty fans under the ticks.
    if sig is not None:
        ok = good & np.isfinite(sig)
        if ok.any():
            polys = _fans(x[ok], y[ok], az[ok], sig[ok], half_len * 1.6, kx)
            ax.add_collection(PolyCollection(list(polys), facecolors="#d08c1a", alpha=0.55,
                                             edgecolors="none", zorder=3))

    # Predicted ticks: a dark casing under a coloured core keeps light colours readable.
    if n_good:
        ticks = _tick_segments(x[good], y[good], az[good], half_len, kx)
        ax.add_collection(LineCollection(list(ticks), colors="#202020", linewidths=case_w,
                                         capstyle="round", zorder=4))
        ax.add_collection(LineCollection(list(ticks), colors=cmap(norm(ri[good])),
                                         linewidths=core_w, capstyle="round", zorder=5))

    # Measured indicators: hollow ticks (white core, black rim) on top.
    obs_handle = None
    if observed is not None:
        ox = _as_1d("observed lon", observed["lon"])
        oy = _as_1d("observed lat", observed["lat"], ox.size)
        oaz = _as_1d("observed azimuth_deg", observed["azimuth_deg"], ox.size)
        ok = np.isfinite(ox) & np.isfinite(oy) & np.isfinite(oaz)
        misfit = observed.get("misfit_deg") if isinstance(observed, Mapping) else None
        rim = np.full(ox.size, 1.0)
        if misfit is not None:
            m = np.abs(_as_1d("observed misfit_deg", misfit, ox.size))
            rim = 0.8 + 2.4 * np.clip(np.nan_to_num(m, nan=0.0), 0.0, 90.0) / 90.0
        if ok.any():
            oticks = _tick_segments(ox[ok], oy[ok], oaz[ok], half_len * 1.25, kx)
            ax.add_collection(LineCollection(list(oticks), colors="black",
                                             linewidths=3.6 + 2 * rim[ok], capstyle="butt",
                                             zorder=6))
            ax.add_collection(LineCollection(list(oticks), colors="white", linewidths=3.0,
                                             capstyle="butt", zorder=7))
        obs_handle = Line2D([], [], color="black", linewidth=5.0, label="measured SHmax")

    # Scale bar (lower left), length along the parallel at its latitude.
    width_km = (x1 - x0) * math.radians(1.0) * EARTH_RADIUS_KM * coslat
    bar_km = nice_scale_km(width_km)
    bar_deg = bar_km / (math.radians(1.0) * EARTH_RADIUS_KM * coslat)
    bx, by = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0)
    # a white panel keeps the bar readable over dense ticks
    ax.add_patch(Rectangle((bx - 0.015 * (x1 - x0), by - 0.025 * (y1 - y0)),
                           bar_deg + 0.03 * (x1 - x0), 0.075 * (y1 - y0), facecolor="white",
                           edgecolor="none", alpha=0.85, zorder=8))
    ax.plot([bx, bx + bar_deg], [by, by], color="black", linewidth=3.0, zorder=9,
            solid_capstyle="butt")
    tick_y = [by - 0.008 * (y1 - y0), by + 0.008 * (y1 - y0)]
    ax.plot([bx, bx], tick_y, color="black", lw=1, zorder=9)
    ax.plot([bx + bar_deg] * 2, tick_y, color="black", lw=1, zorder=9)
    ax.text(bx + bar_deg / 2, by + 0.015 * (y1 - y0), f"{bar_km:g} km", ha="center",
            va="bottom", fontsize=8, zorder=9)

    # Legend: boundary kinds, then tick meanings.
    handles = []
    for kind in kinds_seen:
        ls, lw, colour, label = BOUNDARY_STYLES.get(kind, _OTHER_STYLE)
        handles.append(Line2D([], [], linestyle=ls, linewidth=lw, color=colour, label=label))
    handles.append(Line2D([], [], color=cmap(norm(1.5)), linewidth=2.8,
                          label="predicted SHmax"))
    if sig is not None:
        handles.append(Line2D([], [], color="#d08c1a", alpha=0.45, linewidth=6,
                              label="SHmax +-1 sigma"))
    if obs_handle is not None:
        handles.append(obs_handle)
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.69, 0.92), fontsize=7.5,
               frameon=False, title="boundary and symbols", title_fontsize=8)

    # Regime colourbar.
    cax = fig.add_axes([0.71, 0.22, 0.022, 0.3])
    bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax)
    bar.set_ticks([t for t, _ in REGIME_TICKS])
    bar.set_ticklabels([name for _, name in REGIME_TICKS])
    bar.ax.tick_params(labelsize=8)
    bar.set_label("regime index (A-phi)", fontsize=8)

    if title:
        ax.set_title(title, fontsize=11, loc="left")
    lines = []
    if caption:
        lines.extend(textwrap.wrap(str(caption), 120))
    lines.extend(textwrap.wrap(CAUTION, 120))
    fig.text(0.02, 0.125, "\n".join(lines), fontsize=7.5, ha="left", va="top",
             color="#333333")

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight", pad_inches=0.15)
    return buf.getvalue()
