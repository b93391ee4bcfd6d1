"""``winner_<body>.png``: the cheapest feasible strategy over arrival speed and target altitude, one
panel per periapsis altitude, with the crossover speeds and contours of the saving over direct."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib.figure import Figure

from sweep.report.figures import common
from sweep.report.figures.maps import MapAxes, panel_grid
from sweep.report.format import km
from sweep.report.selection import (
    GRID,
    MAX_PERIAPSIS_PANELS,
    array,
    body_label,
    challenger_names,
    feasible_periapses,
    strategy_labels,
)

__all__ = ["TITLE", "draw"]

TITLE = "cheapest capture strategy"


def draw(cube: xr.Dataset) -> Figure:
    """The winner map of the one body in ``cube`` (see :func:`sweep.report.selection.one_body`)."""
    names = strategy_labels(cube)
    periapses = cube["periapsis_altitude"].values
    candidates = feasible_periapses(cube, challenger_names(names))
    pool = candidates or list(range(periapses.size))
    shown = common.evenly(pool, MAX_PERIAPSIS_PANELS)
    nothing = common.nothing_feasible(cube)
    if nothing:  # one grey panel says it; more would repeat it
        shown, which = shown[:1], f"{nothing}; one periapsis altitude shown"
    elif len(shown) == periapses.size:
        which = f"one panel per periapsis altitude (all {periapses.size})"
    elif len(pool) == periapses.size:
        which = f"{len(shown)} of {periapses.size} periapsis altitudes, evenly spaced"
    elif len(shown) == len(pool):
        which = f"the {len(shown)} of {periapses.size} periapsis altitudes where a low-periapsis strategy is feasible"
    else:
        which = (f"{len(shown)} of {periapses.size} periapsis altitudes, evenly spaced over the {len(pool)} "
                 "where a low-periapsis strategy is feasible")
    panels = cube.isel(periapsis_altitude=shown)  # only the periapses drawn are read
    best = array(panels, "best_strategy", *GRID)
    saving = array(panels, "saving_over_direct", *GRID)
    finite_saving = saving[np.isfinite(saving)]
    levels = common.nice_levels(float(finite_saving.max()) if finite_saving.size else 0.0)
    targets = cube["target_altitude"].values
    if levels.size and 2 <= targets.size < 10:
        which += f"; contours interpolate between the {targets.size} target altitudes of the grid"
    columns = min(3, len(shown))
    rows = -(-len(shown) // columns)
    figure = common.new_figure(3.7 * columns + 0.9, 2.75 * rows + 1.1, common.figure_title(body_label(cube), TITLE),
                               f"{which}; {common.CAPTION}")
    geometry = MapAxes(cube["v_inf"].values, targets, names)
    crossing = common.crossover_names(cube, names)
    contoured = False
    for i, (ax, p) in enumerate(zip(panel_grid(figure, len(shown), columns, common.target_label(cube)), shown,
                                    strict=True)):
        geometry.draw(ax, best[:, :, i])
        contoured |= geometry.contours(ax, saving[:, :, i], levels)
        geometry.crossovers(ax, common.crossover_speeds(cube, crossing, periapsis_altitude=p))
        ax.set_title(f"periapsis {km(periapses[p])}", fontsize=9.5)
    geometry.legend(figure, crossing, contours=contoured)
    return figure
