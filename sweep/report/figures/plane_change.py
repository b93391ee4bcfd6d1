"""``plane_change_<body>.png`` (cubes with a plane-change axis): the winner map including the plane
change, one panel per plane-change angle, at the lowest periapsis where a low-periapsis strategy is
feasible, with contours of the saving over direct."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib.figure import Figure

from sweep.report.figures import common
from sweep.report.figures.maps import MapAxes, panel_grid
from sweep.report.format import degrees, km
from sweep.report.selection import array, body_label, challenger_names, feasible_periapses, strategy_labels

__all__ = ["TITLE", "draw"]

TITLE = "cheapest capture strategy with a plane change"
_MAX_PLANE_PANELS = 4  # one panel per plane-change angle
_PANEL = ("v_inf", "target_altitude", "plane_change")


def draw(cube: xr.Dataset) -> Figure:
    """The plane-change winner map of the one body in ``cube`` (see :func:`sweep.report.selection.one_body`)."""
    names = strategy_labels(cube)
    periapses = cube["periapsis_altitude"].values
    targets = cube["target_altitude"].values
    angles = cube["plane_change"].values
    candidates = feasible_periapses(cube, challenger_names(names))
    challengers = " or ".join(challenger_names(names))
    shown = common.evenly(list(range(angles.size)), _MAX_PLANE_PANELS)
    nothing = common.nothing_feasible(cube)
    p = candidates[0] if candidates else 0
    if nothing:  # one grey panel says it; more would repeat it
        shown = shown[:1]
        which = f"{nothing}; plane change {degrees(angles[shown])}, periapsis {km(periapses[p])} shown"
    else:
        if len(shown) == angles.size:
            which = f"one panel per plane-change angle (all {angles.size}: {degrees(angles)})"
        else:
            which = (f"{len(shown)} of {angles.size} plane-change angles, evenly spaced along the grid: "
                     f"{degrees(angles[shown])}")
        which += (f"; periapsis {km(periapses[p])}, the lowest where {challengers} is feasible" if candidates
                  else f"; {challengers} feasible at no periapsis, periapsis {km(periapses[p])} shown")
    which += "; feasibility as without a plane change"
    at = cube.isel(periapsis_altitude=p)  # only the one periapsis is drawn: only it is read
    best = array(at, "plane_change_best_strategy", *_PANEL)
    saving = array(at, "plane_change_saving_over_direct", *_PANEL)
    panels = saving[..., shown]
    finite_saving = panels[np.isfinite(panels)]
    levels = common.nice_levels(float(finite_saving.max()) if finite_saving.size else 0.0)
    if levels.size and 2 <= targets.size < 10:
        which += f"; contours interpolate between the {targets.size} target altitudes of the grid"
    columns = len(shown) if len(shown) <= 3 else 2
    rows = -(-len(shown) // columns)
    title = common.figure_title(body_label(cube), TITLE)
    # one panel alone would clip the long title: bold 13 pt is about 0.115 inch a character
    width = max(3.7 * columns + 0.9, 0.115 * len(title) + 0.6)
    figure = common.new_figure(width, 2.75 * rows + 1.1, title, f"{which}; {common.CAPTION}")
    geometry = MapAxes(cube["v_inf"].values, targets, names)
    contoured = False
    for ax, a in zip(panel_grid(figure, len(shown), columns, common.target_label(cube)), shown, strict=True):
        geometry.draw(ax, best[:, :, a])
        contoured |= geometry.contours(ax, saving[:, :, a], levels)
        ax.set_title(f"plane change {angles[a]:g}°", fontsize=9.5)
    geometry.legend(figure, [], contours=contoured)
    return figure
