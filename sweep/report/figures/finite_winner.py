"""``finite_winner_<body>.png`` (cubes with a thrust axis): the winner map with finite burns, one
column per thrust level beside the impulsive one, one row per periapsis altitude."""

from __future__ import annotations

import xarray as xr
from matplotlib.figure import Figure

from sweep.report.figures import common
from sweep.report.figures.maps import MapAxes, panel_grid
from sweep.report.format import km, ratio
from sweep.report.selection import GRID, array, body_label, challenger_names, feasible_periapses, strategy_labels

__all__ = ["TITLE", "draw"]

TITLE = "cheapest capture strategy with finite burns"
_MAX_THRUST_PANELS = 4  # one column per thrust level (plus the impulsive one)
_MAX_FINITE_ROWS = 3  # one row per periapsis altitude


def draw(cube: xr.Dataset) -> Figure:
    """The finite-burn winner map of the one body in ``cube`` (see :func:`sweep.report.selection.one_body`)."""
    names = strategy_labels(cube)
    periapses = cube["periapsis_altitude"].values
    thrusts, ratios = cube["thrust"].values, cube["thrust_to_weight"].values
    candidates = feasible_periapses(cube, challenger_names(names))
    rows = common.evenly(candidates, _MAX_FINITE_ROWS) or [0]
    levels = common.evenly(list(range(thrusts.size)), _MAX_THRUST_PANELS)
    which = (f"rows: {len(rows)} of the {len(candidates)} periapsis altitudes where a low-periapsis strategy is "
             "feasible, evenly spaced from the lowest" if candidates
             else "no low-periapsis strategy is feasible at any periapsis")
    if len(levels) < thrusts.size:
        which += f"; {len(levels)} of {thrusts.size} thrust levels, evenly spaced"
    columns = len(levels) + 1
    title = common.figure_title(body_label(cube), TITLE)
    figure = common.new_figure(3.0 * columns + 0.9, 2.45 * len(rows) + 1.1, title,
                               f"{which}; grey: no strategy can be flown (see finite_status in the cube); "
                               f"{common.CAPTION}, constant-thrust burns")
    geometry = MapAxes(cube["v_inf"].values, cube["target_altitude"].values, names)
    crossing = common.crossover_names(cube, names)
    finite_crossing = common.crossover_names(cube, names, finite=True)
    labels = [f"periapsis {km(periapses[p])}\n{common.target_label(cube)}" for p in rows]
    axes = panel_grid(figure, len(rows) * columns, columns, labels)
    drawn = cube.isel(periapsis_altitude=rows)  # only the periapses drawn are read
    impulsive = array(drawn, "best_strategy", *GRID)
    best = array(drawn, "finite_best_strategy", *GRID, "thrust")
    for r, p in enumerate(rows):
        row = axes[r * columns:(r + 1) * columns]
        geometry.draw(row[0], impulsive[:, :, r])
        geometry.crossovers(row[0], common.crossover_speeds(cube, crossing, periapsis_altitude=p))
        for ax, f in zip(row[1:], levels, strict=True):
            geometry.draw(ax, best[:, :, r, f])
            geometry.crossovers(ax, common.crossover_speeds(cube, finite_crossing, finite=True, periapsis_altitude=p,
                                                     thrust=f))
        if r == 0:
            row[0].set_title("impulsive burns (reference)", fontsize=9.5)
            for ax, f in zip(row[1:], levels, strict=True):
                ax.set_title(f"{thrusts[f]:,.0f} N, T/W {ratio(ratios[f])}", fontsize=9.5)
    geometry.legend(figure, crossing, contours=False)
    return figure
