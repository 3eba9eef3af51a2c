"""Cumulative margin curves of a sampled site screening, one per fault.

For every input fault (or plane) the curve shows, over the Monte-Carlo samples, the share of
samples (vertical axis, 0 to 100 %) in which the fault's least pore-pressure margin over its
segments is at most a given value (horizontal axis, MPa). Read across at a margin to see how
often the fault comes that close to failure; where a curve crosses the threshold line is its
``reactivation_share``. A steep curve is a well-known fault, a shallow one an uncertain fault.

Layout (our own): one panel; the zone below the margin threshold shaded in a warm grey with a
hatched band for "at or beyond failure" (margin < 0); each curve in a colour of the Okabe & Ito
(2008) colour-blind-safe palette, with a line style cycling after seven faults, and labelled with
its rank (at staggered heights); a side table lists rank, fault name and share within the threshold; the
caption carries the site and the caution.
"""

from __future__ import annotations

import textwrap

import numpy as np

from stressmap.analyses.site_sampling import fault_margins
from stressmap.errors import InputError, problem
from stressmap.plot.maps import figure_png
from stressmap.plot.screening import footer_text

__all__ = ["CURVE_COLOURS", "margin_curves_figure", "margin_curves_png"]

#: Okabe & Ito (2008) palette without black (colour-blind safe), in the order curves use it.
CURVE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442")
_STYLES = ("-", "--", "-.", ":")
#: At most this many faults get a curve (the worst by their first-ranked plane).
MAX_CURVES = 20


def margin_curves_figure(result):
    """Figure of the cumulative margin curves (needs a sampled screening)."""
    from matplotlib.figure import Figure

    fm = fault_margins(result)
    if fm["name"].size == 0:
        raise InputError("the margin curves need a sampled screening with at least one plane",
                         [problem("give uncertainty ranges or samples (and planes or faults)",
                                  field="uncertainty.samples")])
    k = min(fm["name"].size, MAX_CURVES)
    threshold = float(result.request.margin_threshold_mpa)
    least = np.sort(fm["margin_mpa"][:, :k], axis=0)                   # (N, k), sorted
    n = least.shape[0]
    share = np.arange(1, n + 1) / n
    reach = np.mean(fm["margin_mpa"][:, :k] < threshold, axis=0)

    fig = Figure(figsize=(9.0, 5.6), dpi=110, layout="constrained")
    grid = fig.add_gridspec(1, 2, width_ratios=(3.2, 1.3))
    ax = fig.add_subplot(grid[0, 0])
    side = fig.add_subplot(grid[0, 1])
    lo = float(min(least.min(), threshold, 0.0))
    hi = float(max(np.percentile(least, 99.5), threshold + 1.0))
    pad = 0.04 * (hi - lo)
    ax.axvspan(lo - pad, threshold, color="#efe6dc", zorder=0, gid="within-threshold")
    if lo < 0:
        ax.axvspan(lo - pad, 0.0, facecolor="none", edgecolor="#b59b86", hatch="////", lw=0,
                   zorder=0, gid="beyond-failure")
    ax.axvline(threshold, color="#7f5539", lw=1.2, gid="threshold",
               label=f"margin threshold {threshold:g} MPa")
    for j in range(k):  # one curve per fault (at most MAX_CURVES)
        colour = CURVE_COLOURS[j % len(CURVE_COLOURS)]
        style = _STYLES[(j // len(CURVE_COLOURS)) % len(_STYLES)]
        ax.step(least[:, j], share, where="post", color=colour, ls=style, lw=1.6,
                gid=f"margin-curve-{j + 1}")
        level = 0.2 + 0.6 * ((0.382 * j) % 1.0)  # staggered so neighbouring labels part
        at = least[min(int(level * n), n - 1), j]
        ax.annotate(str(j + 1), (at, level), xytext=(3, 0), textcoords="offset points",
                    fontsize=7, color=colour, va="center", gid="curve-label",
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": colour, "lw": 0.6})
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_ylim(0.0, 1.0)
    ax.yaxis.set_major_formatter(_percent)
    ax.set_xlabel("least pore-pressure margin of the fault (MPa; below 0: beyond failure)")
    ax.set_ylabel("share of samples at or below this margin")
    ax.grid(True, color="0.88", lw=0.6)
    ax.legend(loc="lower right", fontsize=7, frameon=False)
    s = result.site
    ax.set_title(f"How close each fault comes to failure over {n} samples "
                 f"({s['depth_km']:g} km)", fontsize=9)
    _side_table(side, fm["name"][:k], reach, threshold, fm["name"].size - k)
    caption = "\n".join(textwrap.wrap(footer_text(result), 150))
    fig.get_layout_engine().set(rect=(0.0, 0.07, 1.0, 0.93))
    fig.text(0.01, 0.01, caption, fontsize=6.5, va="bottom", ha="left", color="0.25",
             gid="caution-footer")
    return fig


def _percent(value, _pos=None) -> str:
    return f"{100 * value:.0f} %"


def _side_table(ax, names, reach, threshold, hidden: int) -> None:
    """Rank, colour key, name and share of samples below the threshold, one row per fault."""
    ax.set_axis_off()
    rows = len(names)
    step = min(0.06, 0.92 / max(rows, 1))
    ax.text(0.0, 0.98, f"fault (share below {threshold:g} MPa)", fontsize=7.5, va="top",
            fontweight="bold", transform=ax.transAxes)
    for j, (name, r) in enumerate(zip(names, reach)):
        y = 0.98 - (j + 1.2) * step
        colour = CURVE_COLOURS[j % len(CURVE_COLOURS)]
        style = _STYLES[(j // len(CURVE_COLOURS)) % len(_STYLES)]
        ax.plot([0.0, 0.09], [y, y], color=colour, ls=style, lw=1.6, transform=ax.transAxes)
        label = textwrap.shorten(str(name), 30, placeholder="...")
        ax.text(0.12, y, f"{j + 1}. {label} ({100 * r:.0f} %)", fontsize=7, va="center",
                transform=ax.transAxes, gid="fault-row")
    if hidden:
        ax.text(0.0, 0.98 - (rows + 1.6) * step, f"... and {hidden} more, not drawn (see the "
                "faults table)", fontsize=7, va="center", style="italic",
                transform=ax.transAxes)


def margin_curves_png(result) -> bytes:
    """PNG of :func:`margin_curves_figure`."""
    return figure_png(margin_curves_figure(result), tight=False)
