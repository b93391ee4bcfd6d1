"""``saving_<body>.png``: the saving of the cheapest strategy over direct against arrival speed,
one line per target altitude, one panel per periapsis altitude (a few, where some strategy pays)."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FuncFormatter

from sweep.report.figures.common import (
    CAPTION,
    V_INF_LABEL,
    evenly,
    figure_title,
    message,
    new_figure,
    nothing_feasible,
    target_colours,
)
from sweep.report.format import km, number
from sweep.report.selection import GRID, any_along, array, body_label

__all__ = ["TITLE", "draw"]

TITLE = "saving over direct capture"
_MAX_SAVING_PANELS = 3  # a few periapses


def draw(cube: xr.Dataset) -> Figure:
    """The saving curves of the one body in ``cube`` (see :func:`sweep.report.selection.one_body`)."""
    v_inf, targets = cube["v_inf"].values, cube["target_altitude"].values
    periapses = cube["periapsis_altitude"].values
    paying = [int(p) for p in np.flatnonzero(any_along(cube["saving_over_direct"] > 0, "periapsis_altitude"))]
    shown = evenly(paying, _MAX_SAVING_PANELS)
    saving = array(cube.isel(periapsis_altitude=shown), "saving_over_direct", *GRID)  # only the periapses drawn
    nothing = nothing_feasible(cube)
    if nothing:
        which = nothing
    elif not paying:
        which = "no strategy beats direct anywhere on this grid"
    elif len(shown) == len(paying):
        which = f"every periapsis altitude where some strategy beats direct ({len(shown)} of {periapses.size})"
    else:
        which = (f"{len(shown)} of the {len(paying)} periapsis altitudes where some strategy beats direct, "
                 "evenly spaced from the lowest")
    count = max(len(shown), 1)
    figure = new_figure(4.0 * count + 0.9, 3.8, figure_title(body_label(cube), TITLE),
                        f"saving of the cheapest strategy (the winner map shows which); {which}; {CAPTION}")
    axes = figure.subplots(1, count, sharex=True, sharey=True, squeeze=False)[0]
    colours = target_colours(targets.size)
    for i, (ax, p) in enumerate(zip(axes, shown or [None], strict=True)):
        ax.axhline(0.0, color="#909090", linewidth=0.8, zorder=1)
        ax.set_xlabel(V_INF_LABEL, fontsize=9)
        ax.tick_params(labelsize=8)
        ax.grid(True, color="#E6E6E6", linewidth=0.6)
        if p is None:
            message(ax, "no feasible strategy" if nothing else "direct is never beaten")
            ax.set_xlim(v_inf[0], v_inf[-1])
            continue
        ax.set_title(f"periapsis {km(periapses[p])}", fontsize=9.5)
        for t in range(targets.size):
            ax.plot(v_inf, saving[:, t, i], color=colours[t], linewidth=1.8, zorder=3)
    axes[0].set_ylabel("saving over direct, m/s", fontsize=9)
    axes[0].yaxis.set_major_formatter(FuncFormatter(number))
    handles = [Line2D([], [], color=colours[t], linewidth=1.8, label=f"target orbit {km(target)}")
               for t, target in enumerate(targets) if shown and np.isfinite(saving[:, t]).any()]
    if handles:
        figure.legend(handles=handles, loc="outside lower center", ncol=min(len(handles), 5), fontsize=8,
                      frameon=False)
    return figure
