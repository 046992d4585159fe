"""The report's figures: matplotlib (Agg) figures built from the API's numbers.

Every figure is a :class:`Panel`: the matplotlib ``Figure`` (kept until the
page is written, so tests can read the plotted arrays back), a title and a
caption. Each curve is tagged with its role (``line.modelgen_role``): one
colour, line style and marker per role in every panel, so physics, solver,
card, simulator and measurement look the same wherever they appear.

The palette is Okabe & Ito's colour-blind-safe set (M. Okabe and K. Ito,
"Color Universal Design (CUD): how to make figures and presentations that
are friendly to colorblind people", J*FLY, 2002/2008); line styles and
markers differ too, so a print in grey stays readable.

matplotlib is imported here and nowhere else in modelgen: only ``modelgen
report`` loads it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

import matplotlib
from matplotlib.figure import Figure  # the figures are made without pyplot: no GUI backend is ever loaded

#: Okabe-Ito colours (Okabe & Ito 2008).
OKABE_ITO = {"black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
             "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7"}

#: One look per role, in every panel.
STYLE = {
    "physics": dict(color=OKABE_ITO["blue"], linestyle="-", linewidth=1.8),
    "solver": dict(color=OKABE_ITO["bluish green"], linestyle="none", marker="o", markersize=4,
                   markerfacecolor="none"),
    "card": dict(color=OKABE_ITO["vermillion"], linestyle="--", linewidth=1.6),
    "simulator": dict(color=OKABE_ITO["reddish purple"], linestyle="none", marker="x", markersize=5),
    "measurement": dict(color=OKABE_ITO["black"], linestyle="none", marker=".", markersize=4),
    "excluded": dict(color="#999999", linestyle="none", marker=".", markersize=3),
    "corner": dict(color=OKABE_ITO["orange"], linestyle="none", marker="D", markersize=7,
                   markeredgecolor=OKABE_ITO["black"]),
    "reference": dict(color="#777777", linestyle=":", linewidth=1.2),
}
#: Shading of a fit window.
WINDOW_COLOUR = OKABE_ITO["yellow"]
#: Bars of histograms and the points of a lot's scatter.
LOT_COLOUR = OKABE_ITO["sky blue"]

_RC = {"font.size": 9, "axes.titlesize": 10, "axes.labelsize": 9, "legend.fontsize": 8, "svg.fonttype": "path",
       "axes.grid": True, "grid.color": "#dddddd", "grid.linewidth": 0.6, "axes.spines.top": False,
       "axes.spines.right": False, "path.simplify": True}


@dataclass
class Panel:
    """One figure of a report: ``figure`` (matplotlib), ``key`` (file-name stem), ``title``, ``caption``."""

    key: str
    title: str
    figure: Figure
    caption: str = ""
    table: list = field(default_factory=list)  # optional rows (first the header) shown under the figure


def new_figure(rows=1, cols=1, size=(6.4, 4.0), **kw):
    """A figure and its axes, styled; not attached to pyplot (no global state)."""
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=size, layout="constrained")
        axes = fig.subplots(rows, cols, squeeze=False, **kw)
    for ax in axes.flat:
        ax.grid(True, color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
    return fig, axes


def plot(ax, role, x, y, label):
    """A curve of ``role`` (see :data:`STYLE`) tagged with it; returns the Line2D."""
    (line,) = ax.plot(np.asarray(x, float), np.asarray(y, float), label=label, **STYLE[role])
    line.modelgen_role = role
    return line


def series(figure, role, axis=0):
    """The (x, y) arrays of the curves of ``role`` on axis ``axis`` of ``figure`` (what was plotted)."""
    ax = figure.axes[axis]
    return [(np.asarray(ln.get_xdata(), float), np.asarray(ln.get_ydata(), float)) for ln in ax.get_lines()
            if getattr(ln, "modelgen_role", None) == role]


def legend(ax, **kw):
    if ax.get_legend_handles_labels()[0]:
        ax.legend(frameon=False, **kw)


def shade_window(ax, low, high, label):
    """The fit window as a shaded band of the x axis."""
    if np.isfinite(low) and np.isfinite(high) and high > low:
        patch = ax.axvspan(low, high, color=WINDOW_COLOUR, alpha=0.35, linewidth=0, label=label)
        patch.modelgen_role = "window"
