"""``finite_crossover_<body>.png`` (cubes with a thrust axis): the finite-burn crossover speed against
thrust-to-weight at the lowest feasible periapsis below each target, the impulsive one as reference."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullLocator

from sweep.model.strategies import crossover_variable
from sweep.report.figures.common import CAPTION, crossover_names, figure_title, message, new_figure, target_colours
from sweep.report.format import km, ratio
from sweep.report.selection import body_label, challenger_names, lowest_periapsis_below, strategy_labels

__all__ = ["TITLE", "draw"]

TITLE = "where the low-periapsis capture starts to pay, against thrust-to-weight"


def draw(cube: xr.Dataset) -> Figure:
    """The finite-burn crossover figure of the one body in ``cube`` (see :func:`sweep.report.selection.one_body`)."""
    names = strategy_labels(cube)
    v_inf, targets = cube["v_inf"].values, cube["target_altitude"].values
    periapses = cube["periapsis_altitude"].values
    thrusts, ratios = cube["thrust"].values, cube["thrust_to_weight"].values
    crossing = [n for n in crossover_names(cube, names, finite=True) if crossover_variable(n) in cube]
    count = max(len(crossing), 1)
    figure = new_figure(
        4.6 * count + 0.9, 4.6, figure_title(body_label(cube), TITLE),
        "arrival speed at which the strategy and direct cost the same, at the lowest feasible periapsis below "
        f"each target; finite-burn crossovers are searched only within the grid's {v_inf[0]:g}-{v_inf[-1]:g} km/s; "
        f"{CAPTION}")
    below = {t: lowest_periapsis_below(cube, challenger_names(names), t) for t in range(targets.size)}
    plotted = [t for t in range(targets.size) if below[t] is not None]
    grid = figure.subplots(2, count, sharex=True, squeeze=False,
                           gridspec_kw={"height_ratios": [5.0, 0.4 + 0.25 * max(len(plotted), 1)]})
    colours = target_colours(targets.size)
    markers = "osD^vP*X"
    sizes = np.linspace(9.0, 4.0, targets.size) if targets.size > 1 else np.array([6.0])
    widths = np.linspace(2.6, 1.4, targets.size) if targets.size > 1 else np.array([1.8])
    scale = thrusts[0] / ratios[0]  # N per unit of T/W: arrival mass x g0
    above_grid = False
    for column, name in enumerate(crossing or [None]):
        ax, strip = grid[0, column], grid[1, column]
        ax.set_xscale("log")
        ax.tick_params(labelsize=8)
        ax.grid(True, color="#E6E6E6", linewidth=0.6)
        drawn = missing = over = False
        highest = 0.0
        for t in plotted if name else []:
            p = below[t]
            at = {"target_altitude": t, "periapsis_altitude": p}
            finite = cube[crossover_variable(name, finite=True)].isel(at).values  # per thrust level
            impulsive = float(cube[crossover_variable(name)].isel(at))
            if np.isfinite(impulsive):
                ax.axhline(impulsive, color=colours[t], linestyle="--", linewidth=1.2, zorder=2)
                drawn = True
                over |= impulsive > v_inf[-1]
            highest = float(np.nanmax([highest, impulsive, *finite]))
            if np.isfinite(finite).any():
                # larger markers and wider lines first, so that equal values show as nested markers
                ax.plot(ratios, finite, "-", marker=markers[t % len(markers)], color=colours[t], linewidth=widths[t],
                        markersize=sizes[t], markeredgecolor="white", markeredgewidth=0.7, zorder=3 + t)
                drawn = True
            gaps = ~np.isfinite(finite)
            if gaps.any():
                missing = True
                strip.plot(ratios[gaps], np.full(gaps.sum(), plotted.index(t)), linestyle="none", marker="x",
                           color=colours[t], markersize=6, markeredgewidth=1.6)
        if over:
            above_grid = True
            ax.axhline(v_inf[-1], color="#606060", linestyle=":", linewidth=1.2, zorder=1)
        ax.set_ylim(0.0, highest * 1.1 if highest > 0 else 1.0)
        ax.set_title(f"{name} = direct" if name else "no crossover variables in the cube", fontsize=9.5)
        if not drawn:
            message(ax, "no crossover at any target")
        if name and plotted and not missing:
            strip.text(0.5, 0.5, "found at every thrust level", transform=strip.transAxes, ha="center",
                       va="center", fontsize=7.5, color="#606060")
        strip.set_xlabel("initial thrust-to-weight ratio", fontsize=9)
        strip.set_ylim(max(len(plotted), 1) - 0.5, -0.5)
        strip.yaxis.set_major_locator(FixedLocator(range(len(plotted))))
        strip.yaxis.set_major_formatter(FuncFormatter(lambda y, _=None: km(targets[plotted[int(round(y))]])
                                                      if 0 <= round(y) < len(plotted) else ""))
        strip.tick_params(labelsize=7.5)
        strip.grid(True, axis="x", color="#E6E6E6", linewidth=0.6)
        strip.xaxis.set_major_locator(FixedLocator(ratios) if ratios.size <= 8 else LogLocator())
        strip.xaxis.set_minor_locator(NullLocator())
        strip.xaxis.set_major_formatter(FuncFormatter(ratio))
        top = ax.secondary_xaxis("top", functions=(lambda r: r * scale, lambda f: f / scale))
        top.set_xlabel("thrust, N", fontsize=9)
        top.xaxis.set_major_locator(FixedLocator(thrusts) if thrusts.size <= 8 else LogLocator())
        top.xaxis.set_minor_locator(NullLocator())
        top.xaxis.set_major_formatter(FuncFormatter(lambda x, _=None: f"{x:,.0f}"))
        top.tick_params(labelsize=8)
    if ratios.size == 1:
        grid[0, 0].set_xlim(ratios[0] / 2, ratios[0] * 2)
    else:
        grid[0, 0].set_xlim(ratios[0] / 1.25, ratios[-1] * 1.25)
    grid[0, 0].set_ylabel("crossover arrival speed, km/s", fontsize=9)
    grid[1, 0].set_ylabel("none\nfound", fontsize=8, rotation=0, ha="right", va="center")
    handles = [Line2D([], [], color=colours[t], marker=markers[t % len(markers)], markeredgecolor="white",
                      linewidth=1.8, label=f"target {km(targets[t])}, periapsis {km(periapses[below[t]])}")
               for t in plotted]
    handles += [Line2D([], [], color="#404040", linestyle="-", linewidth=1.8, label="finite burns"),
                Line2D([], [], color="#404040", linestyle="--", linewidth=1.2, label="impulsive (reference)"),
                Line2D([], [], color="#404040", linestyle="none", marker="x", markeredgewidth=1.6,
                       label="no finite-burn crossover: none within the grid's speeds, or a strategy cannot fly")]
    if above_grid:
        handles.append(Line2D([], [], color="#606060", linestyle=":", linewidth=1.2,
                              label=f"fastest arrival speed on the grid, {v_inf[-1]:g} km/s"))
    figure.legend(handles=handles, loc="outside lower center", ncol=min(len(handles), 3), fontsize=8,
                  frameon=False)
    return figure
