"""Pictures of a site screening: Mohr diagram, stress polygon, map of traces by margin.

Each ``*_figure`` function returns a :class:`matplotlib.figure.Figure` (no pyplot state, safe in
threads); each ``*_png`` function renders it to PNG bytes. Every picture carries the caution in
its footer. Geometry follows the textbook constructions:

- Mohr diagram in effective stress (sigma_n - Pp, tau): the three circles spanning
  (sigma3', sigma2'), (sigma2', sigma1') and (sigma3', sigma1'), the Coulomb envelope
  tau = C + mu sigma_n', and each plane as a point, coloured by its pore-pressure margin;
  equal scales on both axes so circles are round.
- Stress polygon in the (Shmin, SHmax) plane: the frictional-limit polygon with the lines
  Shmin = Sv and SHmax = Sv that separate the normal, strike-slip and reverse faulting fields
  (each lightly shaded in the colour the maps give that regime and named in words), the
  SHmax = Shmin diagonal, the central estimate and, when sampled, its spread.
- Map: trace segments coloured by margin on our own sequential scale (ember: dark brown near
  failure to pale sand far from it; lightness falls monotonically, so it reads without colour
  vision), strike/dip planes as points, the site with its SHmax direction,
  a scale bar; longitude scaled by cos(latitude).
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

from stressmap.analyses.screening import regime_fields, stress_polygon
from stressmap.constants import CAUTION
from stressmap.plot.labels import freeze_layout, place_labels, text_box
from stressmap.plot.maps import (
    MapWindow,
    draw_north_arrow,
    draw_scale_bar,
    figure_png,
    frame_axes,
)

__all__ = [
    "mohr_figure", "mohr_png", "polygon_figure", "polygon_png", "fault_map_figure",
    "fault_map_png", "footer_text", "MARGIN_CMAP", "REGIME_FIELD_STYLE",
]

#: Colours of the pore-pressure margin scale, dark (near failure) to light: our own "ember".
MARGIN_CMAP = ("#4a1a0c", "#8c3a17", "#c8662a", "#e5a45a", "#f3d9a4", "#faf4e6")


def _margin_cmap():
    """The ember scale of :data:`MARGIN_CMAP` as a matplotlib colormap (low margin dark)."""
    # matplotlib is only needed for pictures
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("stressmap-margin", MARGIN_CMAP)


def footer_text(result=None) -> str:
    """The footer of every picture: site, depth and the caution."""
    head = ""
    if result is not None:
        s = result.site
        model = (result.model_info or {}).get("name") or (result.model_info or {}).get("id")
        head = (f"Site {s['lon']:.3f}, {s['lat']:.3f}, {s['depth_km']:g} km; "
                f"{s['regime']}, SHmax {s['shmax_azimuth_deg']:.0f} deg"
                + (f"; model {model}" if model else "") + ". ")
    return head + CAUTION


def _figure(width=7.5, height=6.2):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _add_footer(fig, result):
    text = "\n".join(textwrap.wrap(footer_text(result), 125))
    fig.get_layout_engine().set(rect=(0.0, 0.07, 1.0, 0.93))
    fig.text(0.01, 0.01, text, fontsize=6.5, va="bottom", ha="left", color="0.25",
             gid="caution-footer")



def _margin_norm(margins):
    from matplotlib.colors import Normalize

    m = np.asarray(margins, dtype=float)
    m = m[np.isfinite(m)]
    hi = float(np.percentile(m, 95)) if m.size else 1.0
    return Normalize(vmin=min(0.0, float(m.min())) if m.size else 0.0, vmax=max(hi, 1.0))


def mohr_figure(result):
    """Mohr diagram of a :class:`stressmap.analyses.sitescreen.ScreenResult`."""
    from matplotlib.patches import Circle

    s = result.site
    pp, mu, coh = s["pp_mpa"], s["friction"], s["cohesion_mpa"]
    principal = np.sort(np.linalg.eigvalsh(result.stress_ned))[::-1] - pp   # s1' >= s2' >= s3'
    s1, s2, s3 = principal
    x_max = s1 * 1.08 + 1.0
    y_max = max((s1 - s3) / 2 * 1.25, coh + 1.0)
    # equal scales on both axes: size the figure to the data so the page is not half empty
    x_span = x_max - min(0.0, s3 - 1.0)
    fig = _figure(8.0, float(np.clip(5.6 * y_max / x_span + 2.4, 3.6, 7.0)))
    ax = fig.add_subplot()
    for (a, b), style in (((s3, s1), dict(lw=1.8, color="0.1")),
                          ((s2, s1), dict(lw=1.0, color="0.35")),
                          ((s3, s2), dict(lw=1.0, color="0.35"))):
        ax.add_patch(Circle(((a + b) / 2, 0.0), (b - a) / 2, fill=False, gid="mohr-circle",
                            **style))
    x = np.linspace(0.0, x_max, 50)
    ax.plot(x, coh + mu * x, color="#b2182b", lw=1.4, ls="--", gid="failure-envelope",
            label=f"Coulomb envelope, friction {mu:g}, cohesion {coh:g} MPa")
    planes = result.planes
    if planes.get("strike_deg") is not None and planes["strike_deg"].size:
        eff = planes["effective_normal_stress_mpa"]
        tau = planes["shear_stress_mpa"]
        sc = ax.scatter(eff, tau, c=planes["pore_pressure_margin_mpa"], cmap=_margin_cmap(),
                        norm=_margin_norm(planes["pore_pressure_margin_mpa"]), s=28,
                        edgecolors="k", linewidths=0.5, zorder=3, gid="fault-points",
                        label="planes")
        fig.colorbar(sc, ax=ax, shrink=0.6, label="pore-pressure margin to failure (MPa)")
    ax.set_xlim(min(0.0, s3 - 1.0), x_max)
    ax.set_ylim(0.0, y_max)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("effective normal stress \u03c3\u2099 \u2212 Pp (MPa, compression positive)")
    ax.set_ylabel("shear stress \u03c4 (MPa)")
    ax.set_title(f"Mohr diagram at {s['depth_km']:g} km: Sv {s['sv_mpa']:.1f}, "
                 f"SHmax {s['shmax_mpa']:.1f}, Shmin {s['shmin_mpa']:.1f}, Pp {pp:.1f} MPa",
                 fontsize=9)
    ax.legend(loc="upper left", fontsize=7, frameon=False)
    _add_footer(fig, result)
    freeze_layout(fig)
    _mohr_labels(ax, planes, principal)
    return fig


#: How many planes (least margin first) get their rank written beside them on the Mohr diagram.
MOHR_LABELLED_PLANES = 8


def _mohr_labels(ax, planes, principal) -> None:
    """Principal-stress names on the axis and the ranks of the first planes, none overlapping."""
    renderer = ax.figure.canvas.get_renderer()
    reserved = [tuple(ax.get_legend().get_window_extent(renderer).extents)]
    names = ("\u03c3\u2081'", "\u03c3\u2082'", "\u03c3\u2083'")
    placed = place_labels(ax, np.column_stack([principal, np.zeros(3)]), names,
                          reserved=reserved, fontsize=8, gid="principal-label")
    reserved += [text_box(a, renderer, pad=1.5) for a in placed]
    if planes.get("strike_deg") is not None and planes["strike_deg"].size:
        k = MOHR_LABELLED_PLANES
        xy = np.column_stack([planes["effective_normal_stress_mpa"][:k],
                              planes["shear_stress_mpa"][:k]])
        place_labels(ax, xy, [str(r) for r in planes["rank"][:k]], reserved=reserved,
                     fontsize=7, gid="rank-label")


def mohr_png(result) -> bytes:
    """PNG of :func:`mohr_figure`."""
    return figure_png(mohr_figure(result), tight=False)


def polygon_figure(result):
    """Stress polygon of a :class:`stressmap.analyses.sitescreen.ScreenResult`."""
    from matplotlib.patches import Polygon

    s = result.site
    sv = s["sv_mpa"]
    verts = np.asarray(s["stress_polygon_mpa"])
    floor, ceiling = verts[0, 0], verts[1, 1]
    fig = _figure(6.8, 6.6)
    ax = fig.add_subplot()
    _shade_regime_fields(ax, sv, s["pp_mpa"], s["friction"])
    ax.add_patch(Polygon(verts, closed=True, fill=False, edgecolor="0.1", lw=1.6,
                         gid="stress-polygon"))
    ax.plot([floor, sv], [sv, sv], color="0.3", lw=0.9, gid="sv-line-shmax")
    ax.plot([sv, sv], [sv, ceiling], color="0.3", lw=0.9, gid="sv-line-shmin")
    lo, hi = floor - 0.05 * (ceiling - floor), ceiling + 0.05 * (ceiling - floor)
    ax.plot([lo, hi], [lo, hi], color="0.5", lw=0.7, ls=":", gid="diagonal")
    if result.samples is not None:

        smp = result.samples
        mu_lo, mu_hi = float(np.min(smp["friction"])), float(np.max(smp["friction"]))
        if mu_hi > mu_lo:  # the polygons of the sampled friction range (central Sv and Pp)
            for mu in (mu_lo, mu_hi):
                ax.add_patch(Polygon(stress_polygon(sv, s["pp_mpa"], mu), closed=True,
                                     fill=False, ls="--", lw=0.7, ec="0.45",
                                     gid="polygon-friction-range"))
            ax.plot([], [], ls="--", lw=0.7, color="0.45",
                    label=f"limits for friction {mu_lo:.2f} and {mu_hi:.2f}")
        xs = np.concatenate([smp["shmin_mpa"], smp["shmax_mpa"]])
        xs = xs[np.isfinite(xs)]
        if xs.size:
            pad = 0.05 * (ceiling - floor)
            lo = min(lo, float(np.percentile(xs, 0.5)) - pad)
            hi = max(hi, float(np.percentile(xs, 99.5)) + pad)
        ax.scatter(result.samples["shmin_mpa"], result.samples["shmax_mpa"], s=4, alpha=0.25,
                   color="#2166ac", lw=0, gid="estimate-samples", label="sampled estimates")
        p = result.uncertainty or {}
        if "shmin_percentiles_mpa" in p:
            x5, _, x95 = p["shmin_percentiles_mpa"]
            y5, _, y95 = p["shmax_percentiles_mpa"]
            ax.add_patch(Polygon([(x5, y5), (x95, y5), (x95, y95), (x5, y95)], fill=False,
                                 ls="--", ec="#2166ac", lw=1.0, gid="estimate-spread",
                                 label="5-95 % of samples"))
    ax.plot([s["shmin_mpa"]], [s["shmax_mpa"]], marker="o", ms=8, mfc="#b2182b", mec="k",
            ls="none", gid="central-estimate", label="central estimate")
    ax.set_xlim(lo, hi)
    ax.set_ylim(lo, hi)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("Shmin (MPa)")
    ax.set_ylabel("SHmax (MPa)")
    ax.set_title(f"Frictional limits at {s['depth_km']:g} km (friction {s['friction']:g}): "
                 f"Sv {sv:.1f} MPa, Pp {s['pp_mpa']:.1f} MPa", fontsize=9)
    ax.legend(loc="lower right", fontsize=7, frameon=False)
    _add_footer(fig, result)
    return fig


#: Words and fill of each regime field of the stress polygon: the colours of the regime index
#: (Simpson's A-phi, cividis) at the middle of each regime's range, so the polygon reads like
#: the maps.
REGIME_FIELD_STYLE = {
    "normal": ("normal faulting\n(Sv largest)", 0.5 / 3.0),
    "strike-slip": ("strike-slip faulting\n(Sv intermediate)", 1.5 / 3.0),
    "reverse": ("reverse faulting\n(Sv least)", 2.5 / 3.0),
}


def _shade_regime_fields(ax, sv, pp, mu) -> None:
    """Each regime's part of the polygon lightly filled, named in words at its centroid (above
    any samples, on a white box)."""
    from matplotlib import colormaps
    from matplotlib.patches import Polygon

    cmap = colormaps["cividis"]
    for regime, tri in regime_fields(sv, pp, mu).items():
        words, position = REGIME_FIELD_STYLE[regime]
        ax.add_patch(Polygon(tri, closed=True, facecolor=cmap(position), alpha=0.22, lw=0,
                             zorder=0, gid=f"regime-field-{regime}"))
        cx, cy = tri.mean(axis=0)
        ax.text(cx, cy, words, ha="center", va="center", fontsize=7.5, color="0.15", zorder=6,
                gid=f"regime-label-{regime}",
                bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": "none", "alpha": 0.8})


def polygon_png(result) -> bytes:
    """PNG of :func:`polygon_figure`."""
    return figure_png(polygon_figure(result), tight=False)


def _wrap_lon(lon, centre):
    """Longitudes continued across the antimeridian relative to ``centre`` (degrees)."""
    return centre + (np.mod(np.asarray(lon, dtype=float) - centre + 180.0, 360.0) - 180.0)


def _fault_window(site, pts) -> MapWindow:
    """A square window (on the page) around every point, at least about 6 km across."""
    allpts = np.concatenate(pts)
    coslat = max(math.cos(math.radians(site["lat"])), 1e-3)
    x0, y0 = allpts.min(0)
    x1, y1 = allpts.max(0)
    half = max((x1 - x0) * coslat, y1 - y0, 0.05) * 0.6
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    return MapWindow(cx - half / coslat, cx + half / coslat, cy - half, cy + half)


#: Colour of the site's SHmax bar: a blue that no colour of the ember margin scale comes near.
SHMAX_BAR = "#1f5fa8"

#: Colour of the thin outline drawn under fault traces (keeps light margin colours visible).
TRACE_CASING = "#5a5550"


def _draw_traces(ax, result, is_seg, norm):
    """Trace segments coloured by margin; returns (collection or None, [(lon, lat)...])."""
    from matplotlib.collections import LineCollection

    if not is_seg.any():
        return None, []
    segs = result.plane_geometry[is_seg].copy()
    segs[..., 0] = _wrap_lon(segs[..., 0], result.site["lon"])
    # a dark casing under each trace: the palest margin colour would vanish into the background
    ax.add_collection(LineCollection(segs, colors=TRACE_CASING, linewidths=4.0, zorder=1.9,
                                     capstyle="round", gid="fault-trace-casing"))
    lc = LineCollection(segs, cmap=_margin_cmap(), norm=norm, linewidths=2.6, zorder=2,
                        capstyle="round", gid="fault-traces")
    lc.set_array(result.planes["pore_pressure_margin_mpa"][is_seg])
    ax.add_collection(lc)
    return lc, [segs.reshape(-1, 2)]


def _trace_labels(result, is_seg):
    """One label per fault: its name and the rank of its least-margin segment, placed at the
    middle of that segment. Returns (xy (k, 2), texts)."""
    planes, geom = result.planes, result.plane_geometry
    feature = np.asarray(planes["feature"])[is_seg]
    ranks = np.asarray(planes["rank"])[is_seg]
    names = np.asarray(planes["name"], dtype=object)[is_seg]
    mids = geom[is_seg].mean(axis=1)
    mids[:, 0] = _wrap_lon(mids[:, 0], result.site["lon"])
    # planes are ranked, so the first segment of each feature is its least-margin one
    _, first = np.unique(feature, return_index=True)
    first = np.sort(first)
    return mids[first], [f"{names[i] or 'fault'} (rank {ranks[i]})" for i in first]


def _draw_site_planes(ax, result, unlocated, norm, half):
    """Planes without a location as strike lines through the site, coloured by margin."""
    from matplotlib.collections import LineCollection

    s = result.site
    coslat = max(math.cos(math.radians(s["lat"])), 1e-3)
    strike = np.radians(np.asarray(result.planes["strike_deg"], dtype=float)[unlocated])
    d = 0.55 * half
    ends = np.stack([np.sin(strike) * d / coslat, np.cos(strike) * d], axis=-1)  # (k, 2)
    centre = np.array([s["lon"], s["lat"]])
    segs = np.stack([centre - ends, centre + ends], axis=1)
    lc = LineCollection(segs, cmap=_margin_cmap(), norm=norm, linewidths=1.8, zorder=3,
                        gid="site-planes")
    lc.set_array(result.planes["pore_pressure_margin_mpa"][unlocated])
    ax.add_collection(lc)
    ranks = np.asarray(result.planes["rank"])[unlocated]
    return lc, centre + ends, [f"{r}" for r in ranks]


def _draw_site(ax, s, half) -> None:
    """The site star and a centred bar along its SHmax azimuth (30 % of the view)."""
    coslat = max(math.cos(math.radians(s["lat"])), 1e-3)
    ax.plot([s["lon"]], [s["lat"]], marker="*", ms=13, mfc="white", mec="k", ls="none",
            zorder=4, gid="site", label="site")
    a = math.radians(s["shmax_azimuth_deg"])
    d = 0.3 * half
    ax.plot([s["lon"] - d * math.sin(a) / coslat, s["lon"] + d * math.sin(a) / coslat],
            [s["lat"] - d * math.cos(a), s["lat"] + d * math.cos(a)], color=SHMAX_BAR, lw=2,
            zorder=5, gid="shmax-direction", label=f"SHmax {s['shmax_azimuth_deg']:.0f}\u00b0")


def fault_map_figure(result):
    """Map of trace segments (lines) and planes coloured by pore-pressure margin.

    Traces carry their fault's name and rank; planes with a location are squares labelled by
    rank; planes without one (strike/dip only) are drawn as strike lines through the site,
    labelled by rank, and the map says so. The frame (scale bar true along its parallel, north
    arrow) is the one every map shares (:func:`stressmap.plot.maps.frame_axes`).
    """
    s = result.site
    planes, geom = result.planes, result.plane_geometry
    fig = _figure(7.5, 6.6)
    ax = fig.add_subplot()
    margins = planes.get("pore_pressure_margin_mpa", np.zeros(0))
    norm = _margin_norm(margins)
    kind = np.asarray(planes.get("kind", np.zeros(0, dtype=object)), dtype=object)
    is_seg = kind == "trace segment"
    located = (~is_seg) & np.isfinite(geom[:, 0, 0]) if geom.size else np.zeros(0, bool)
    unlocated = (~is_seg) & ~located
    pts = [np.array([[s["lon"], s["lat"]]])]
    mappable, trace_pts = _draw_traces(ax, result, is_seg, norm)
    pts += trace_pts
    labels_xy, labels, site_xy, site_labels = [], [], np.zeros((0, 2)), []
    if is_seg.any():
        xy, texts = _trace_labels(result, is_seg)
        labels_xy.append(xy)
        labels += texts
    if located.any():
        xy = np.column_stack([_wrap_lon(geom[located, 0, 0], s["lon"]), geom[located, 0, 1]])
        # planes logged at one place share a square: the least margin is drawn last, on top,
        # and above the site star (a well's image-log planes sit at the site)
        order = np.argsort(-margins[located], kind="stable")
        mappable = ax.scatter(xy[order, 0], xy[order, 1], c=margins[located][order],
                              cmap=_margin_cmap(), norm=norm, marker="s", s=36, edgecolors="k",
                              linewidths=0.5, zorder=4.5, gid="fault-planes")
        pts.append(xy)
        labels_xy.append(xy)
        names = np.asarray(planes["name"], dtype=object)[located]
        labels += [f"{n} (rank {r})" for n, r in zip(names, np.asarray(planes["rank"])[located])]
    window = _fault_window(s, pts)
    half = 0.5 * (window.y1 - window.y0)
    if unlocated.any():
        lc, site_xy, site_labels = _draw_site_planes(ax, result, unlocated, norm, half)
        mappable = mappable or lc
    frame_axes(ax, window, grid=False)
    _draw_site(ax, s, half)
    draw_scale_bar(ax, window, fontsize=7)
    draw_north_arrow(ax, window)
    _fault_map_note(ax, int(unlocated.sum()), int(planes.get("kind", np.zeros(0)).size))
    if mappable is not None:
        fig.colorbar(mappable, ax=ax, shrink=0.8, label="pore-pressure margin to failure (MPa)")
    ax.set_title(f"Fault planes at {s['depth_km']:g} km coloured by margin (dark = closer to "
                 "failure; rank 1 = least margin)", fontsize=9)
    ax.legend(loc="upper left", fontsize=7)
    _add_footer(fig, result)
    freeze_layout(fig)
    renderer = fig.canvas.get_renderer()
    taken = [tuple(ax.get_legend().get_window_extent(renderer).extents)]
    taken += _marks_to_keep_clear(ax, renderer, labels_xy + [site_xy])
    if labels:  # every fault and located plane is named
        placed = place_labels(ax, np.concatenate(labels_xy), labels, fontsize=7,
                              gid="fault-label", reserved=taken)
        taken += [text_box(a, renderer, pad=1.5) for a in placed]
    k = MAP_LABELLED_SITE_PLANES  # the first ranks of the planes at the site, where there is room
    place_labels(ax, site_xy[:k], site_labels[:k], fontsize=7, gid="fault-label",
                 reserved=taken, optional=True)
    return fig


def _marks_to_keep_clear(ax, renderer, anchors) -> list:
    """Display boxes that labels must not cover: the site star, the scale bar, the north
    arrow, the map note and a small box around every labelled point (so that one fault's name
    never hides another's square or trace middle)."""
    gids = {"site", "scale-bar-panel", "north-arrow", "north-label", "map-note"}
    boxes = [tuple(a.get_window_extent(renderer).extents) for a in ax.get_children()
             if a.get_gid() in gids]
    pts = np.concatenate([np.reshape(a, (-1, 2)) for a in anchors]) if anchors else np.zeros((0, 2))
    r = 3.0  # pixels around an anchor
    boxes += [(x - r, y - r, x + r, y + r) for x, y in ax.transData.transform(pts)]
    return boxes


#: How many planes without a location (least margin first) may get a rank label on the map.
MAP_LABELLED_SITE_PLANES = 12


def _fault_map_note(ax, n_unlocated: int, n_planes: int) -> None:
    """Say what the map cannot show: planes without a location, or no planes at all."""
    if n_planes == 0:
        text = "no planes or faults were given:\nonly the site is shown"
    elif n_unlocated:
        text = (f"{n_unlocated} plane(s) without a location:\ndrawn through the site along "
                "their strike;\nthe first ranks labelled where there is room")
    else:
        return
    ax.text(0.98, 0.02, text, transform=ax.transAxes, ha="right", va="bottom", fontsize=7,
            color="0.2", gid="map-note", bbox=dict(facecolor="white", edgecolor="0.7",
                                                   alpha=0.9, boxstyle="round,pad=0.3"))


def fault_map_png(result) -> bytes:
    """PNG of :func:`fault_map_figure`."""
    return figure_png(fault_map_figure(result), tight=False)
