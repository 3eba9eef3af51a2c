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
- Map: trace segments coloured by margin on a sequential colour-blind-safe colormap
  (cividis; low margin dark), strike/dip planes as points, the site with its SHmax direction,
  a scale bar; longitude scaled by cos(latitude).
"""

from __future__ import annotations

import io
import math
import textwrap

import numpy as np

from stressmap.analyses.screening import regime_fields, stress_polygon
from stressmap.constants import CAUTION

__all__ = [
    "mohr_figure", "mohr_png", "polygon_figure", "polygon_png", "fault_map_figure",
    "fault_map_png", "footer_text", "MARGIN_CMAP", "REGIME_FIELD_STYLE",
]

#: Colormap for pore-pressure margins (perceptually uniform, colour-blind safe).
MARGIN_CMAP = "cividis"


def footer_text(result=None) -> str:
    """The footer of every picture: site, depth and the caution."""
    head = ""
    if result is not None:
        s = result.site
        model = (result.model_info or {}).get("name") or (result.model_info or {}).get("id")
        head = (f"Site {s['lon']:.3f}, {s['lat']:.3f}, {s['depth_km']:g} km; "
                f"{s['regime']}, SHmax {s['shmax_azimuth_deg']:.0f} deg"
                + (f"; model {model}" if model else "") + ". ")
    return head + CAUTION + " Follow local codes and licensed practice."


def _figure(width=7.5, height=6.2):
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), dpi=110, layout="constrained")


def _add_footer(fig, result):
    text = "\n".join(textwrap.wrap(footer_text(result), 125))
    fig.get_layout_engine().set(rect=(0.0, 0.07, 1.0, 0.93))
    fig.text(0.01, 0.01, text, fontsize=6.5, va="bottom", ha="left", color="0.25",
             gid="caution-footer")


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


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
    fig = _figure(8.0, 5.2)
    ax = fig.add_subplot()
    for (a, b), style in (((s3, s1), dict(lw=1.8, color="0.1")),
                          ((s2, s1), dict(lw=1.0, color="0.35")),
                          ((s3, s2), dict(lw=1.0, color="0.35"))):
        ax.add_patch(Circle(((a + b) / 2, 0.0), (b - a) / 2, fill=False, gid="mohr-circle",
                            **style))
    x_max = s1 * 1.08 + 1.0
    x = np.linspace(0.0, x_max, 50)
    ax.plot(x, coh + mu * x, color="#b2182b", lw=1.4, ls="--", gid="failure-envelope",
            label=f"Coulomb envelope, friction {mu:g}, cohesion {coh:g} MPa")
    planes = result.planes
    if planes.get("strike_deg") is not None and planes["strike_deg"].size:
        eff = planes["effective_normal_stress_mpa"]
        tau = planes["shear_stress_mpa"]
        sc = ax.scatter(eff, tau, c=planes["pore_pressure_margin_mpa"], cmap=MARGIN_CMAP,
                        norm=_margin_norm(planes["pore_pressure_margin_mpa"]), s=28,
                        edgecolors="k", linewidths=0.5, zorder=3, gid="fault-points",
                        label="planes")
        fig.colorbar(sc, ax=ax, shrink=0.6, label="pore-pressure margin to failure (MPa)")
        for r, xe, yt in zip(planes["rank"][:5], eff[:5], tau[:5]):
            ax.annotate(str(r), (xe, yt), textcoords="offset points", xytext=(4, 4),
                        fontsize=7)
    for name, v in (("\u03c3\u2083'", s3), ("\u03c3\u2082'", s2), ("\u03c3\u2081'", s1)):
        ax.annotate(name, (v, 0.0), textcoords="offset points", xytext=(3, 3), ha="left",
                    va="bottom", fontsize=8)
    ax.set_xlim(min(0.0, s3 - 1.0), x_max)
    ax.set_ylim(0.0, max((s1 - s3) / 2 * 1.25, coh + 1.0))
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("effective normal stress \u03c3\u2099 \u2212 Pp (MPa, compression positive)")
    ax.set_ylabel("shear stress \u03c4 (MPa)")
    ax.set_title(f"Mohr diagram at {s['depth_km']:g} km: Sv {s['sv_mpa']:.1f}, "
                 f"SHmax {s['shmax_mpa']:.1f}, Shmin {s['shmin_mpa']:.1f}, Pp {pp:.1f} MPa",
                 fontsize=9)
    ax.legend(loc="upper left", fontsize=7, frameon=False)
    _add_footer(fig, result)
    return fig


def mohr_png(result) -> bytes:
    """PNG of :func:`mohr_figure`."""
    return _png(mohr_figure(result))


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
    return _png(polygon_figure(result))


def _nice_length_km(span_km):
    raw = span_km / 4.0
    power = 10 ** math.floor(math.log10(raw)) if raw > 0 else 1.0
    return max(v * power for v in (1, 2, 5) if v * power <= raw) if raw >= power else power


def fault_map_figure(result):
    """Map of trace segments (lines) and planes (points) coloured by pore-pressure margin."""
    from matplotlib.collections import LineCollection
    from matplotlib.colors import Normalize  # noqa: F401  (norm built by _margin_norm)

    s = result.site
    planes = result.planes
    geom = result.plane_geometry
    fig = _figure(7.5, 6.6)
    ax = fig.add_subplot()
    coslat = max(math.cos(math.radians(s["lat"])), 1e-3)
    pts = [np.array([[s["lon"], s["lat"]]])]
    margins = planes.get("pore_pressure_margin_mpa", np.zeros(0))
    norm = _margin_norm(margins)
    kind = planes.get("kind", np.zeros(0, dtype=object))
    is_seg = kind == "trace segment"
    mappable = None
    if is_seg.any():
        segs = geom[is_seg].copy()
        # keep segments continuous across the antimeridian relative to the site
        segs[..., 0] = s["lon"] + (np.mod(segs[..., 0] - s["lon"] + 180.0, 360.0) - 180.0)
        lc = LineCollection(segs, cmap=MARGIN_CMAP, norm=norm, linewidths=2.6,
                            gid="fault-traces")
        lc.set_array(margins[is_seg])
        ax.add_collection(lc)
        mappable = lc
        pts.append(segs.reshape(-1, 2))
    located = (~is_seg) & np.isfinite(geom[:, 0, 0]) if geom.size else np.zeros(0, bool)
    if located.any():
        xy = geom[located, 0]
        xy = np.column_stack([s["lon"] + (np.mod(xy[:, 0] - s["lon"] + 180, 360) - 180),
                              xy[:, 1]])
        mappable = ax.scatter(xy[:, 0], xy[:, 1], c=margins[located], cmap=MARGIN_CMAP,
                              norm=norm, marker="s", s=36, edgecolors="k", linewidths=0.5,
                              zorder=3, gid="fault-planes")
        pts.append(xy)
    allpts = np.concatenate(pts)
    x0, y0 = allpts.min(0)
    x1, y1 = allpts.max(0)
    half = max((x1 - x0) * coslat, y1 - y0, 0.05) * 0.6
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    ax.set_xlim(cx - half / coslat, cx + half / coslat)
    ax.set_ylim(cy - half, cy + half)
    ax.set_aspect(1.0 / coslat)
    ax.plot([s["lon"]], [s["lat"]], marker="*", ms=13, mfc="white", mec="k", ls="none",
            zorder=4, gid="site", label="site")
    # SHmax direction through the site: a centred bar, length 30 % of the view
    a = math.radians(s["shmax_azimuth_deg"])
    d = 0.3 * half
    ax.plot([s["lon"] - d * math.sin(a) / coslat, s["lon"] + d * math.sin(a) / coslat],
            [s["lat"] - d * math.cos(a), s["lat"] + d * math.cos(a)], color="#b2182b", lw=2,
            zorder=4, gid="shmax-direction", label=f"SHmax {s['shmax_azimuth_deg']:.0f}\u00b0")
    # scale bar (km on the 6371 km sphere)
    span_km = 2 * half * math.pi / 180 * 6371.0
    bar_km = _nice_length_km(span_km)
    bar_deg = bar_km / (math.pi / 180 * 6371.0) / coslat
    bx, by = cx - 0.9 * half / coslat, cy - 0.9 * half
    ax.plot([bx, bx + bar_deg], [by, by], color="k", lw=3, gid="scale-bar")
    ax.text(bx + bar_deg / 2, by + 0.03 * half, f"{bar_km:g} km", ha="center", fontsize=7)
    if mappable is not None:
        fig.colorbar(mappable, ax=ax, shrink=0.8, label="pore-pressure margin to failure (MPa)")
    ax.set_xlabel("longitude (\u00b0)")
    ax.set_ylabel("latitude (\u00b0)")
    ax.set_title(f"Fault planes at {s['depth_km']:g} km coloured by margin (dark = closer to "
                 "failure)", fontsize=9)
    ax.legend(loc="upper right", fontsize=7)
    _add_footer(fig, result)
    return fig


def fault_map_png(result) -> bytes:
    """PNG of :func:`fault_map_figure`."""
    return _png(fault_map_figure(result))
