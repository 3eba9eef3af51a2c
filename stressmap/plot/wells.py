"""Pictures of well screening: stress with depth, tendency net, mud-weight window chart and
pore-pressure change to failure along a stress path.

Each ``*_figure`` takes a result of :mod:`stressmap.analyses.wells` (after unit conversion by
:func:`stressmap.formats.wells.in_units`, so the axes read in the units the user asked for) and
returns a :class:`matplotlib.figure.Figure` (no pyplot state); ``*_png`` renders PNG bytes.
Every picture carries the caution and the note that it is not a well design. Colours are our
own: a sand-to-ink sequential scale for tendencies (lightness falls monotonically, readable
without colour vision) and a dark-teal / clay pair for the window bounds.
"""

from __future__ import annotations

import textwrap

import numpy as np

from stressmap.analyses.wells import WELL_NOTE
from stressmap.constants import CAUTION
from stressmap.plot.labels import freeze_layout, place_labels
from stressmap.plot.maps import figure_png

__all__ = ["TENDENCY_COLOURS", "profile_png", "net_png", "window_png", "path_png",
           "profile_figure", "net_figure", "window_figure", "path_figure"]

#: Our sequential scale for tendencies, light (low) to dark (high).
TENDENCY_COLOURS = ["#f4efe1", "#dcc99a", "#a9a66f", "#5f8a72", "#2f5f68", "#1b3046", "#0d1424"]
_STRESS_STYLE = {"sv": ("#1b3046", "-", "Sv"), "pp": ("#3f88c5", "--", "Pp"),
                 "shmin": ("#b5651d", "-", "Shmin"), "shmax": ("#6b2d5c", "-", "SHmax")}


def _figure(width=7.2, height=6.4):
    # matplotlib is heavy and only needed for pictures
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110, layout="constrained")
    FigureCanvasAgg(fig)  # a renderer to measure labels with
    return fig


def _footer(fig, doc):
    s = doc["site"]
    depth = f"{s['depth_km']:g} km" if "depth_km" in s else f"{s['depth_ft']:.0f} ft"
    head = (f"Site {s['lon']:.3f}, {s['lat']:.3f} at {depth}; {s['regime']}, SHmax "
            f"{s['shmax_azimuth_deg']:.0f} deg. ")
    text = "\n".join(textwrap.wrap(head + CAUTION + " " + WELL_NOTE, 120))
    bottom = min(0.3, 0.7 / fig.get_size_inches()[1])   # about 0.7 inch for four lines
    fig.get_layout_engine().set(rect=(0.0, bottom, 1.0, 1.0 - bottom))
    fig.text(0.01, 0.01, text, fontsize=6.5, va="bottom", ha="left", color="0.25",
             gid="caution-footer")



def _unit(doc) -> tuple[str, str, str]:
    return ("psi", "ft", "_psi") if doc.get("units") == "oilfield" else ("MPa", "km", "_mpa")


def profile_figure(doc):
    """Sv, Pp, Shmin and SHmax against depth (down), bounds shaded, percentile bands."""
    fig = _figure(6.4, 7.2)
    ax = fig.add_subplot()
    p_unit, z_unit, suffix = _unit(doc)
    cols = doc["columns"]
    z = np.asarray(cols["depth_" + z_unit])
    for key, (colour, style, label) in _STRESS_STYLE.items():
        ax.plot(cols[key + suffix], z, color=colour, ls=style, lw=1.8, label=label)
        lo, hi = cols.get(f"{key}_p5{suffix}"), cols.get(f"{key}_p95{suffix}")
        if lo is not None and hi is not None and key in ("shmin", "shmax"):
            ax.fill_betweenx(z, lo, hi, color=colour, alpha=0.18, lw=0,
                             label=f"{label} 5-95 % of samples")
    for key in ("shmin", "shmax"):
        colour = _STRESS_STYLE[key][0]
        ax.plot(cols[f"{key}_lower{suffix}"], z, color=colour, lw=0.8, ls=":")
        ax.plot(cols[f"{key}_upper{suffix}"], z, color=colour, lw=0.8, ls=":")
    ax.plot([], [], color="0.3", lw=0.8, ls=":", label="frictional bounds")
    ax.invert_yaxis()
    ax.set_xlabel(f"stress, pressure ({p_unit}), compression positive")
    ax.set_ylabel(f"depth ({z_unit})")
    ax.set_title("Stress with depth: central estimate at the frictional limit", fontsize=10)
    ax.grid(color="0.9")
    # stresses grow with depth down and to the right: the top right corner is always empty
    ax.legend(fontsize=8, loc="upper right")
    _footer(fig, doc)
    return fig


def _tendency_cmap():
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("stressmap-tendency", TENDENCY_COLOURS)


def net_figure(doc, which: str = "slip_tendency"):
    """Tendency on the lower-hemisphere equal-area net; the friction contour; the planes."""
    fig = _figure(6.6, 6.8)
    ax = fig.add_subplot(aspect="equal")
    net = doc["net"]
    x, y = np.asarray(net["x"]), np.asarray(net["y"])
    values = np.asarray(net[which], dtype=float)
    friction = doc["site"]["friction"]
    vmax = max(float(np.nanmax(values[np.isfinite(values)])), friction) \
        if which == "slip_tendency" else 1.0
    mesh = ax.pcolormesh(x, y, np.clip(values, 0, vmax), cmap=_tendency_cmap(), vmin=0.0,
                         vmax=vmax, shading="nearest")
    if which == "slip_tendency":
        top = float(np.nanmax(values))
        if top >= friction:
            ax.contour(x, y, np.nan_to_num(values, nan=-1.0), levels=[friction],
                       colors="#c2412d", linewidths=1.6)
            ax.plot([], [], color="#c2412d", lw=1.6,
                    label=f"slip tendency = friction {friction:g}: poles inside it slip")
        elif top >= 0.98 * friction:
            ax.plot([], [], color="none", label=f"the friction coefficient {friction:g} is "
                    "reached only by the optimally oriented planes (darkest)")
        else:
            ax.plot([], [], color="none", label=f"no orientation reaches the friction "
                    f"coefficient {friction:g}")
    t = np.linspace(0, 2 * np.pi, 361)
    ax.plot(np.sin(t), np.cos(t), color="0.2", lw=1.0)
    for label, (px, py) in {"N": (0, 1.07), "E": (1.07, 0), "S": (0, -1.09),
                            "W": (-1.09, 0)}.items():
        ax.text(px, py, label, ha="center", va="center", fontsize=9)
    planes = doc.get("planes")
    if planes:
        ax.scatter(planes["x"], planes["y"], marker="^", s=42, facecolor="none",
                   edgecolor="#c2412d", linewidth=1.3, label="poles of the given planes",
                   zorder=3)
    ax.set_xlim(-1.15, 1.15)
    ax.set_ylim(-1.15, 1.15)
    ax.axis("off")
    name = which.replace("_", " ")
    fig.colorbar(mesh, ax=ax, shrink=0.7, label=name)
    ax.set_title(f"{name.capitalize()} of every plane, by its pole\n(lower hemisphere, "
                 "equal area)", fontsize=10)
    ax.legend(fontsize=7.5, loc="lower center", bbox_to_anchor=(0.5, -0.08), frameon=False)
    _footer(fig, doc)
    if planes:
        _pole_labels(ax, planes)
    return fig


def _pole_labels(ax, planes) -> None:
    """Name each fault once, at its first pole, whole and without overlaps (a fault traced
    in several segments has several poles; the names of one fault would otherwise pile up)."""
    ax.figure.canvas.draw()  # the constrained layout settles over two passes (colour bar, aspect)
    freeze_layout(ax.figure)
    names = [str(n) for n in planes["name"]]
    first = sorted({n: i for i, n in reversed(list(enumerate(names)))}.values())
    xy = np.column_stack([np.asarray(planes["x"], float), np.asarray(planes["y"], float)])
    renderer = ax.figure.canvas.get_renderer()
    reserved = [tuple(t.get_window_extent(renderer).extents) for t in ax.texts]  # N, E, S, W
    place_labels(ax, xy[first], [names[i] for i in first], reserved=reserved, fontsize=6.5,
                 gid="pole-label")


def window_figure(doc):
    """The mud-weight window over every azimuth (angle) and inclination (radius)."""
    fig = _figure(9.6, 5.4)
    grid, window = doc["grid"], doc["window"]
    az = np.radians(np.asarray(grid["azimuth_deg"], dtype=float))
    inc = np.asarray(grid["inclination_deg"], dtype=float)
    oil = doc.get("units") == "oilfield"
    key = "_emw_ppg" if oil else "_mpa"
    unit = "ppg equivalent mud weight" if oil else "MPa"
    panels = (("lower" + key, "least safe mud pressure (collapse or pore pressure)"),
              ("width" + key, "window width (upper - lower); hatched: no window"))
    theta = np.append(az, az[:1] + 2 * np.pi)
    for i, (name, title) in enumerate(panels):
        ax = fig.add_subplot(1, 2, i + 1, projection="polar")
        ax.set_theta_zero_location("N")
        ax.set_theta_direction(-1)
        values = np.asarray(window[name], dtype=float)
        values = np.concatenate([values, values[:, :1]], axis=1)
        cmap = _tendency_cmap() if i == 0 else "cividis"
        mesh = ax.pcolormesh(theta, inc, values, cmap=cmap, shading="nearest")
        if i == 1:
            closed = np.where(values < 0, 1.0, np.nan)
            ax.contourf(theta, inc, closed, levels=[0.5, 1.5], colors="none", hatches=["////"])
        ax.set_rlim(0, 90)
        ax.set_rticks([30, 60, 90])
        ax.set_yticklabels(["30", "60", "90 deg"], fontsize=7)
        ax.set_title(title, fontsize=9)
        fig.colorbar(mesh, ax=ax, shrink=0.7, label=unit, pad=0.1)
    fig.suptitle("Mud-weight window by well azimuth (around) and inclination (outward; "
                 "centre = vertical)", fontsize=10)
    _footer(fig, doc)
    return fig


def path_figure(doc):
    """Pore-pressure change to failure per plane, with and without the stress path."""
    cols = doc["columns"]
    names = [str(n)[:28] for n in cols["name"]]
    n = len(names)
    fig = _figure(7.2, max(4.2, 0.45 * n + 3.0))
    ax = fig.add_subplot()
    unit = "psi" if doc.get("units") == "oilfield" else "MPa"
    suffix = "_psi" if unit == "psi" else "_mpa"
    y = np.arange(n)
    bars = (("injection_fixed_stress", "#9fb8ad", -0.2, "injection, stresses fixed"),
            ("injection_with_path", "#2f5f68", -0.2, None),
            ("depletion_fixed_stress", "#e3b58f", 0.2, "depletion, stresses fixed"),
            ("depletion_with_path", "#b5651d", 0.2, None))
    for key, colour, dy, label in bars:
        values = np.asarray(cols[key + suffix], dtype=float)
        hollow = label is None
        ax.barh(y + dy, np.nan_to_num(values), height=0.36, color="none" if hollow else colour,
                edgecolor=colour, lw=1.6 if hollow else 0,
                label=label or key.replace("_", " ").replace("with path", "with stress path"))
    ax.axvline(0, color="0.2", lw=0.8)
    ax.set_yticks(y, names, fontsize=8)
    ax.invert_yaxis()
    ax.set_xlabel(f"pore-pressure change to Coulomb failure ({unit})\n"
                  "no bar: no failure in that direction (depletion stops at zero pressure)",
                  fontsize=9)
    a = doc["stress_path"]["coefficient"]
    ax.set_title(f"Stress path dSh = {a:.2f} dPp (Engelder & Fischer 1994)", fontsize=10)
    ax.legend(fontsize=7.5, loc="best")
    ax.grid(axis="x", color="0.9")
    _footer(fig, doc)
    return fig


def profile_png(doc) -> bytes:
    return figure_png(profile_figure(doc), tight=False)


def net_png(doc, which: str = "slip_tendency") -> bytes:
    return figure_png(net_figure(doc, which), tight=False)


def window_png(doc) -> bytes:
    return figure_png(window_figure(doc), tight=False)


def path_png(doc) -> bytes:
    return figure_png(path_figure(doc), tight=False)
