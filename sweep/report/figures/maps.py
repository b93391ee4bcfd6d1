"""Winner maps: the cheapest strategy per cell over arrival speed and target altitude, with
crossover lines, saving contours and the legend shared by every map-like figure."""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FixedLocator, FuncFormatter, NullLocator

from sweep.report.figures.common import (
    CONTOUR_COLOUR,
    V_INF_LABEL,
    dark,
    edges,
    fill_colour,
    line_style,
    log_axis,
    message,
    winner_colours,
)
from sweep.report.format import number

__all__ = ["MapAxes", "panel_grid"]

_MAX_COLUMNS = 1500  # arrival speeds drawn per winner map at most: more than a panel has pixels


class MapAxes:
    """Shared geometry of one body's winner-map panels: x = v_inf, y = target altitude."""

    def __init__(self, v_inf: np.ndarray, targets: np.ndarray, names: list[str]):
        self.v_inf, self.targets, self.names = v_inf, targets, names
        self.log_y = log_axis(targets)
        self.x_edges = edges(v_inf, log=False)
        self.y_edges = edges(targets, log=self.log_y)
        self.beyond = False  # some crossover lies off the speed axis (drawn as an arrow at the edge)
        self.shown: set[str] = set()  # strategies whose crossover speed appears in some panel

    def draw(self, ax: Axes, best: np.ndarray) -> None:
        """``best`` (V, T): the winner index per cell, -1 for none."""
        cmap, norm = winner_colours(self.names)
        # Finer than the panel's pixels, a column can't show: every k-th column, drawn k wide
        step = -(-best.shape[0] // _MAX_COLUMNS)
        columns = np.append(self.x_edges[:-1:step], self.x_edges[-1])
        ax.pcolormesh(columns, self.y_edges, best[::step].T, cmap=cmap, norm=norm, shading="flat",
                      edgecolors="face", linewidth=0.0)
        if self.log_y:
            ax.set_yscale("log")
        ax.set_xlim(self.x_edges[0], self.x_edges[-1])
        ax.set_ylim(self.y_edges[0], self.y_edges[-1])
        if self.targets.size <= 8:
            ax.yaxis.set_major_locator(FixedLocator(self.targets))
            ax.yaxis.set_minor_locator(NullLocator())
        ax.yaxis.set_major_formatter(FuncFormatter(number))
        ax.tick_params(labelsize=8)
        if (best < 0).all():
            message(ax, "no feasible strategy")

    def crossovers(self, ax: Axes, values: dict[str, np.ndarray]) -> None:
        """Equal-cost speeds (per target) as lines with markers; off the axis: an arrow at the edge and the value."""
        low, high = self.x_edges[0], self.x_edges[-1]
        for name, speeds in values.items():
            line, marker = line_style(name)
            colour = dark(name, self.names.index(name))
            if np.isfinite(speeds).any():
                self.shown.add(name)
            inside = np.isfinite(speeds) & (speeds >= low) & (speeds <= high)
            ax.plot(np.where(inside, speeds, np.nan), self.targets, line, color=colour, linewidth=1.8,
                    marker=marker, markersize=5, markeredgecolor="white", markeredgewidth=0.8, zorder=4)
            for edge, side, arrow, align in ((high, speeds > high, ">", "right"), (low, speeds < low, "<", "left")):
                for t in np.flatnonzero(side):
                    self.beyond = True
                    ax.plot([edge], [self.targets[t]], arrow, color=colour, markersize=7, clip_on=False, zorder=5,
                            markeredgecolor="white", markeredgewidth=0.8)
                    ax.annotate(f"{speeds[t]:.2f}", (edge, self.targets[t]), xytext=(-8 if align == "right" else 8, 0),
                                textcoords="offset points", ha=align, va="center", fontsize=7, color=colour,
                                zorder=5, bbox={"boxstyle": "round,pad=0.15", "facecolor": "white",
                                                "edgecolor": "none", "alpha": 0.8})

    def contours(self, ax: Axes, saving: np.ndarray, levels: np.ndarray) -> bool:
        """Labelled contours of the saving over direct, m/s; ``saving`` (V, T). True if any were drawn."""
        if self.v_inf.size < 2 or self.targets.size < 2:
            return False
        values = np.ma.masked_invalid(saving.T)
        if values.count() == 0:
            return False
        here = [level for level in levels if values.min() < level < values.max()]
        if not here:
            return False
        lines = ax.contour(self.v_inf, self.targets, values, levels=here, colors=CONTOUR_COLOUR,
                           linewidths=0.8, zorder=3)
        ax.clabel(lines, fmt=number, fontsize=7, inline=True, inline_spacing=2)
        return True

    def legend(self, figure: Figure, crossovers: list[str], contours: bool) -> None:
        """Below the panels: every strategy's fill, 'none', the crossover lines shown and the contours."""
        names = self.names
        handles = [Patch(facecolor=fill_colour(n, i), edgecolor="#808080", linewidth=0.5, label=n)
                   for i, n in enumerate(names)]
        handles.append(Patch(facecolor=fill_colour(None), edgecolor="#808080", linewidth=0.5,
                             label="no feasible strategy"))
        for name in [n for n in crossovers if n in self.shown]:
            line, marker = line_style(name)
            handles.append(Line2D([], [], linestyle=line, marker=marker, color=dark(name, names.index(name)),
                                  markeredgecolor="white", linewidth=1.8,
                                  label=f"{name} = direct (crossover speed)"))
        if self.beyond:
            handles.append(Line2D([], [], linestyle="none", marker=">", color="#404040", markersize=7,
                                  label="crossover off the speed axis (value in km/s)"))
        if contours:
            handles.append(Line2D([], [], color=CONTOUR_COLOUR, linewidth=0.8, label="saving over direct, m/s"))
        wide = figure.get_figwidth() >= 8
        figure.legend(handles=handles, loc="outside lower center", ncol=min(len(handles), 4 if wide else 2),
                      fontsize=8, frameon=False, handlelength=2.6, columnspacing=1.6)


def panel_grid(figure: Figure, count: int, columns: int, y_label: str | list[str]) -> list[Axes]:
    """``count`` panels sharing both axes, row-major; x labels on the lowest panel of each column."""
    rows = -(-count // columns)
    flat = list(figure.subplots(rows, columns, sharex=True, sharey=True, squeeze=False).ravel())
    for ax in flat[count:]:
        ax.set_visible(False)
    for i, ax in enumerate(flat[:count]):
        row, column = divmod(i, columns)
        if column == 0:
            ax.set_ylabel(y_label if isinstance(y_label, str) else y_label[row], fontsize=9)
        if i + columns >= count:
            ax.set_xlabel(V_INF_LABEL, fontsize=9)
            ax.xaxis.set_tick_params(labelbottom=True)
    return flat[:count]
