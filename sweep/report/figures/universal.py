"""``universal_map.png``: every body at once, the winner in dimensionless form (from the
universal dataset of :mod:`sweep.universal`, not a sweep cube)."""

from __future__ import annotations

import xarray as xr
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from sweep.report.figures.common import (
    CAPTION,
    CONTOUR_COLOUR,
    dark,
    edges,
    fill_colour,
    log_axis,
    new_figure,
    winner_colours,
)
from sweep.report.selection import array, strategy_labels

__all__ = ["draw_universal_map"]


def draw_universal_map(dataset: xr.Dataset) -> Figure:
    """
    The universal regime map: winner over (arrival speed ratio, periapsis ratio), one panel per
    intermediate-apoapsis ratio, with the two crossover speeds drawn (from the dataset).
    """
    names = strategy_labels(dataset)
    speed = dataset["speed_ratio"].values
    periapsis = dataset["periapsis_ratio"].values
    apoapses = dataset["apoapsis_ratio"].values
    best = array(dataset, "best_strategy", "speed_ratio", "periapsis_ratio", "apoapsis_ratio")
    figure = new_figure(
        3.6 * min(len(apoapses), 3) + 0.6, 3.3 * -(-len(apoapses) // 3) + 0.8,
        "Every body at once: cheapest capture strategy in dimensionless form",
        "speeds over the circular speed at the target radius, radii over the target radius; no body limits "
        f"(safe periapsis, sphere of influence, time) applied; {CAPTION}",
    )
    panels = list(figure.subplots(-(-len(apoapses) // 3), min(len(apoapses), 3), sharex=True, sharey=True,
                                  squeeze=False).ravel())
    for ax in panels[len(apoapses):]:
        ax.set_visible(False)
    colours, norm = winner_colours(names)
    log = log_axis(periapsis)
    crossing_two = float(dataset["two_burn_crossover_speed_ratio"])
    for a, ax in enumerate(panels[:len(apoapses)]):
        ax.pcolormesh(edges(speed, False), edges(periapsis, log), best[:, :, a].T, cmap=colours, norm=norm)
        if log:
            ax.set_yscale("log")
        ax.axhline(1.0, color=CONTOUR_COLOUR, lw=0.8)
        style = {"color": dark("two_burn", 1), "ls": "--", "lw": 1.4}
        ax.plot([crossing_two, crossing_two], [periapsis.min(), 1.0], **style)
        crossing_three = float(dataset["three_burn_crossover_speed_ratio"].isel(apoapsis_ratio=a))
        ax.plot([crossing_three, crossing_three], [periapsis.min(), 1.0],
                **{"color": dark("three_burn", 2), "ls": ":", "lw": 1.6})
        ax.set_title(f"apoapsis / target radius {apoapses[a]:g}", fontsize=10)
        ax.set_xlabel("arrival speed / circular speed at the target", fontsize=9)
        if a % 3 == 0:
            ax.set_ylabel("periapsis radius / target radius", fontsize=9)
    handles = [Patch(facecolor=fill_colour(n, i), edgecolor="#606060", label=n) for i, n in enumerate(names)]
    handles += [
        Line2D([], [], color=dark("two_burn", 1), ls="--", label="two_burn = direct (sqrt 2)"),
        Line2D([], [], color=dark("three_burn", 2), ls=":", label="three_burn = direct (sqrt(2 r_t / r_a))"),
        Line2D([], [], color=CONTOUR_COLOUR, lw=0.8, label="periapsis at the target radius"),
    ]
    figure.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    return figure
