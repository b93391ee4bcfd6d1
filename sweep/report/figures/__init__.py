"""PNG figures of where each strategy wins, drawn from a cube alone.

Like :mod:`sweep.report.summary`, nothing here recomputes physics: every cell, line and contour is read
from the Dataset, so an old ``.nc`` file draws the same way it did when it was written. Figures
are bare :class:`matplotlib.figure.Figure` objects on the Agg canvas: no pyplot, no global
backend switch, no display needed.

Per body (``<body>`` is the cube's lower-case body name):

- ``winner_<body>.png``: the cheapest feasible strategy over arrival speed and target altitude,
  one panel per periapsis altitude, with the crossover speeds and contours of the saving over
  direct;
- ``saving_<body>.png``: the saving over direct against arrival speed, one line per target;
- with a thrust axis, ``finite_winner_<body>.png`` (the winner map with finite burns, one panel
  per thrust level beside the impulsive one) and ``finite_crossover_<body>.png`` (the finite-burn
  crossover speed against thrust-to-weight, the impulsive one as reference);
- with a plane-change axis, ``plane_change_<body>.png``: the winner map including the plane change,
  one panel per plane-change angle, at the lowest periapsis where a low-periapsis strategy is
  feasible, with contours of the saving over direct.
"""

from __future__ import annotations

import os
import re
import textwrap
from pathlib import Path

import numpy as np
import xarray as xr
from joblib import Parallel, delayed
from matplotlib import colormaps
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import BoundaryNorm, ListedColormap, to_rgb
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, MaxNLocator, NullLocator

from sweep.atomic import replacing
from sweep.model.strategies import crossover_variable, cube_labels, lookup, strategy_colour

__all__ = ["DPI", "draw_figure", "figure_files", "fill_colour", "write_figures"]

DPI = 120
CAPTION = "preliminary patched-conic estimates"
_MAX_PERIAPSIS_PANELS = 6  # winner map: small multiples, one per periapsis altitude
_MAX_SAVING_PANELS = 3  # saving curves: a few periapses
_MAX_THRUST_PANELS = 4  # finite winner map: one column per thrust level (plus the impulsive one)
_MAX_FINITE_ROWS = 3  # finite winner map: one row per periapsis altitude
_MAX_PLANE_PANELS = 4  # plane-change winner map: one panel per plane-change angle

NONE_COLOUR = "#B4B4B4"  # no feasible strategy: neutral grey, darker than every fill tint below
_TINT = 0.55  # map fills: this share of the strategy colour, the rest white, so lines and labels on top read
_CONTOUR_COLOUR = "#262626"
_V_INF_LABEL = "arrival speed $v_\\infty$, km/s"
_TARGET_LABEL = "target orbit altitude, km"
_TARGET_PERIAPSIS_LABEL = "target orbit periapsis altitude, km"  # elliptical targets


def _target_label(dataset: xr.Dataset) -> str:
    return _TARGET_PERIAPSIS_LABEL if "target_apoapsis_altitude" in dataset else _TARGET_LABEL


# ---- names -------------------------------------------------------------------------------------

def _safe(name: str) -> str:
    return re.sub(r"[^a-z0-9._-]+", "_", name.lower()) or "body"


def _figures(dataset: xr.Dataset) -> list[tuple[str, int, str, str]]:
    """(kind, body index, file name, title) of every figure, in order."""
    bodies, _ = cube_labels(dataset)
    kinds = (["winner", "saving"]
             + (["finite_winner", "finite_crossover"] if "finite_best_strategy" in dataset else [])
             + (["plane_change"] if "plane_change_best_strategy" in dataset else []))
    return [(kind, b, f"{kind}_{_safe(body)}.png", _title(body, kind))
            for b, body in enumerate(bodies) for kind in kinds]


_TITLES = {"winner": "cheapest capture strategy", "saving": "saving over direct capture",
           "finite_winner": "cheapest capture strategy with finite burns",
           "finite_crossover": "where the low-periapsis capture starts to pay, against thrust-to-weight",
           "plane_change": "cheapest capture strategy with a plane change"}


def _title(body: str, kind: str) -> str:
    return f"{body.capitalize()}: {_TITLES[kind]}"


def figure_files(dataset: xr.Dataset) -> list[tuple[str, str, str]]:
    """
    The figures :func:`write_figures` draws for ``dataset``, in order: (body, file name, title).

    Read from the cube's labels only, so the summary can link the files without drawing them.
    """
    bodies, _ = cube_labels(dataset)
    return [(bodies[b], file_name, title) for _, b, file_name, title in _figures(dataset)]


# ---- colours and small helpers -----------------------------------------------------------------

def _strategy_colour(name: str, index: int) -> str:
    return strategy_colour(name, index)


def fill_colour(name: str | None, index: int = 0) -> tuple[float, float, float]:
    """RGB (0-1) a winner map fills a cell with: a tint of the strategy colour, or grey for none."""
    if name is None:
        return to_rgb(NONE_COLOUR)
    rgb = np.array(to_rgb(_strategy_colour(name, index)))
    return tuple(float(c) for c in _TINT * rgb + (1 - _TINT) * np.ones(3))


def _dark(name: str, index: int) -> tuple[float, float, float]:
    return tuple(float(c) * 0.7 for c in to_rgb(_strategy_colour(name, index)))


def _winner_colours(names: list[str]) -> tuple[ListedColormap, BoundaryNorm]:
    colours = [fill_colour(None)] + [fill_colour(n, i) for i, n in enumerate(names)]
    bounds = np.arange(-1.5, len(names), 1.0)
    return ListedColormap(colours), BoundaryNorm(bounds, len(colours))


def _evenly(indices: list[int], most: int) -> list[int]:
    """Up to ``most`` of ``indices``, evenly spaced, first and last included."""
    if len(indices) <= most:
        return list(indices)
    picks = np.linspace(0, len(indices) - 1, most).round().astype(int)
    return [indices[i] for i in sorted(set(picks))]


def _log_axis(values: np.ndarray) -> bool:
    return values.size >= 2 and values.min() > 0 and values.max() / values.min() >= 10


def _edges(values: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges around grid values: midpoints (geometric on a log axis), half a step beyond the ends."""
    values = np.asarray(values, dtype=float)
    if values.size == 1:
        v = values[0]
        half = max(abs(v) * 0.1, 0.5)
        return np.array([v / 1.25, v * 1.25]) if log else np.array([v - half, v + half])
    if log:
        return np.exp(_edges(np.log(values), log=False))
    middle = (values[1:] + values[:-1]) / 2
    return np.concatenate([[2 * values[0] - middle[0]], middle, [2 * values[-1] - middle[-1]]])


def _degrees(values) -> str:
    return ", ".join(f"{v:g}°" for v in values)


def _km(value: float) -> str:
    return f"{value:,.0f} km" if value >= 10 else f"{value:g} km"


def _number(value: float, _=None) -> str:
    return f"{value:,.0f}" if abs(value) >= 10 else f"{value:g}"


def _ratio(value: float, _=None) -> str:
    """Thrust-to-weight: three significant digits, no exponent."""
    return f"{value:,.0f}" if abs(value) >= 100 else f"{value:.3g}"


def _new_figure(width: float, height: float, title: str, subtitle: str) -> Figure:
    """
    A figure with a bold title and a smaller caption (wrapped to the width) above a
    constrained-layout area; ``height`` is that of the panels and legend, the title band is added.
    """
    caption = textwrap.fill(subtitle, width=int(width * 15))  # about 15 characters per inch at 9 pt
    band = 0.62 + 0.17 * caption.count("\n")  # inches for the title and the caption lines
    figure = Figure(figsize=(width, height + band), dpi=DPI, layout="constrained")
    FigureCanvasAgg(figure)
    total = height + band
    figure.get_layout_engine().set(rect=(0, 0, 1, 1 - band / total), h_pad=0.06, w_pad=0.06)
    figure.text(0.5, 1 - 0.1 / total, title, ha="center", va="top", fontsize=13, fontweight="bold")
    figure.text(0.5, 1 - 0.36 / total, caption, ha="center", va="top", fontsize=9, color="#404040",
                linespacing=1.3)
    return figure


def _message(ax: Axes, text: str) -> None:
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center", fontsize=9, color="#262626",
            bbox={"boxstyle": "round,pad=0.4", "facecolor": "white", "edgecolor": "#909090", "alpha": 0.9})


def _challenger_periapses(status: np.ndarray, names: list[str]) -> list[int]:
    """Periapsis indices where some low-periapsis strategy is feasible somewhere; status (S, V, T, P)."""
    challengers = [s for s, n in enumerate(names) if n != "direct"]
    ok = (status[challengers] == 0).any(axis=(0, 1, 2))
    return [int(p) for p in np.flatnonzero(ok)]


def _nothing_feasible(dataset: xr.Dataset, b: int) -> str | None:
    """For a body where no strategy is feasible anywhere: a phrase naming the most common reason; else None."""
    if (dataset["best_strategy"].values[b] >= 0).any():
        return None
    codes, counts = np.unique(dataset["status"].values[:, b], return_counts=True)
    meanings = dataset["status"].attrs.get("flag_meanings", "").split()
    code = int(codes[np.argmax(counts)])
    reason = meanings[code] if code < len(meanings) else f"status {code}"
    return f"no strategy is feasible anywhere on this grid (mostly: {reason})"


def _lowest_below(status: np.ndarray, names: list[str], periapses: np.ndarray, targets: np.ndarray,
                  t: int) -> int | None:
    """Lowest periapsis below target ``t`` where a low-periapsis strategy is feasible (as the summary picks)."""
    challengers = [s for s, n in enumerate(names) if n != "direct"]
    ok = (status[challengers][:, :, t, :] == 0).any(axis=(0, 1)) & (periapses < targets[t])
    found = np.flatnonzero(ok)
    return int(found[0]) if found.size else None


# ---- winner maps -------------------------------------------------------------------------------

_MAX_COLUMNS = 1500  # arrival speeds drawn per winner map at most: more than a panel has pixels


class _MapAxes:
    """Shared geometry of one body's winner-map panels: x = v_inf, y = target altitude."""

    def __init__(self, v_inf: np.ndarray, targets: np.ndarray, names: list[str]):
        self.v_inf, self.targets, self.names = v_inf, targets, names
        self.log_y = _log_axis(targets)
        self.x_edges = _edges(v_inf, log=False)
        self.y_edges = _edges(targets, log=self.log_y)
        self.beyond = False  # some crossover lies off the speed axis (drawn as an arrow at the edge)
        self.shown: set[str] = set()  # strategies whose crossover speed appears in some panel

    def draw(self, ax: Axes, best: np.ndarray) -> None:
        """``best`` (V, T): the winner index per cell, -1 for none."""
        cmap, norm = _winner_colours(self.names)
        # Finer than the panel's pixels, a column can't show: every k-th column, drawn k wide
        step = -(-best.shape[0] // _MAX_COLUMNS)
        edges = np.append(self.x_edges[:-1:step], self.x_edges[-1])
        ax.pcolormesh(edges, self.y_edges, best[::step].T, cmap=cmap, norm=norm, shading="flat",
                      edgecolors="face", linewidth=0.0)
        if self.log_y:
            ax.set_yscale("log")
        ax.set_xlim(self.x_edges[0], self.x_edges[-1])
        ax.set_ylim(self.y_edges[0], self.y_edges[-1])
        if self.targets.size <= 8:
            ax.yaxis.set_major_locator(FixedLocator(self.targets))
            ax.yaxis.set_minor_locator(NullLocator())
        ax.yaxis.set_major_formatter(FuncFormatter(_number))
        ax.tick_params(labelsize=8)
        if (best < 0).all():
            _message(ax, "no feasible strategy")

    def crossovers(self, ax: Axes, values: dict[str, np.ndarray]) -> None:
        """Equal-cost speeds (per target) as lines with markers; off the axis: an arrow at the edge and the value."""
        low, high = self.x_edges[0], self.x_edges[-1]
        for name, speeds in values.items():
            line, marker = _line_style(name)
            colour = _dark(name, self.names.index(name))
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
        lines = ax.contour(self.v_inf, self.targets, values, levels=here, colors=_CONTOUR_COLOUR,
                           linewidths=0.8, zorder=3)
        ax.clabel(lines, fmt=_number, fontsize=7, inline=True, inline_spacing=2)
        return True

    def legend(self, figure: Figure, crossovers: list[str], contours: bool) -> None:
        names = self.names
        handles = [Patch(facecolor=fill_colour(n, i), edgecolor="#808080", linewidth=0.5, label=n)
                   for i, n in enumerate(names)]
        handles.append(Patch(facecolor=fill_colour(None), edgecolor="#808080", linewidth=0.5,
                             label="no feasible strategy"))
        for name in [n for n in crossovers if n in self.shown]:
            line, marker = _line_style(name)
            handles.append(Line2D([], [], linestyle=line, marker=marker, color=_dark(name, names.index(name)),
                                  markeredgecolor="white", linewidth=1.8,
                                  label=f"{name} = direct (crossover speed)"))
        if self.beyond:
            handles.append(Line2D([], [], linestyle="none", marker=">", color="#404040", markersize=7,
                                  label="crossover off the speed axis (value in km/s)"))
        if contours:
            handles.append(Line2D([], [], color=_CONTOUR_COLOUR, linewidth=0.8, label="saving over direct, m/s"))
        wide = figure.get_figwidth() >= 8
        figure.legend(handles=handles, loc="outside lower center", ncol=min(len(handles), 4 if wide else 2),
                      fontsize=8, frameon=False, handlelength=2.6, columnspacing=1.6)


def _panel_grid(figure: Figure, count: int, columns: int, y_label: str | list[str]) -> list[Axes]:
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
            ax.set_xlabel(_V_INF_LABEL, fontsize=9)
            ax.xaxis.set_tick_params(labelbottom=True)
    return flat[:count]


def _nice_levels(maximum: float) -> np.ndarray:
    if not np.isfinite(maximum) or maximum <= 0:
        return np.array([])
    levels = MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]).tick_values(0.0, maximum)
    return levels[(levels > 0) & (levels < maximum)]


def _line_style(name: str) -> tuple[str, str]:
    """Dash pattern and marker of strategy ``name``'s crossover lines."""
    entry = lookup(name)
    return entry.line_style if entry is not None else ("-.", "D")


def _crossover_names(dataset: xr.Dataset, names: list[str], finite: bool = False) -> list[str]:
    """The challengers whose crossover variable the cube holds."""
    return [n for n in names[1:] if crossover_variable(n, finite) in dataset]


def _winner_figure(dataset: xr.Dataset, b: int) -> Figure:
    bodies, names = cube_labels(dataset)
    periapses = dataset["periapsis_altitude"].values
    best = dataset["best_strategy"].values[b]  # (V, T, P)
    saving = dataset["saving_over_direct"].values[b]
    candidates = _challenger_periapses(dataset["status"].values[:, b], names)
    pool = candidates or list(range(periapses.size))
    shown = _evenly(pool, _MAX_PERIAPSIS_PANELS)
    nothing = _nothing_feasible(dataset, b)
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
    finite_saving = saving[..., shown][np.isfinite(saving[..., shown])]
    levels = _nice_levels(float(finite_saving.max()) if finite_saving.size else 0.0)
    targets = dataset["target_altitude"].values
    if levels.size and 2 <= targets.size < 10:
        which += f"; contours interpolate between the {targets.size} target altitudes of the grid"
    columns = min(3, len(shown))
    rows = -(-len(shown) // columns)
    figure = _new_figure(3.7 * columns + 0.9, 2.75 * rows + 1.1, _title(bodies[b], "winner"), f"{which}; {CAPTION}")
    geometry = _MapAxes(dataset["v_inf"].values, targets, names)
    crossing = _crossover_names(dataset, names)
    contoured = False
    for ax, p in zip(_panel_grid(figure, len(shown), columns, _target_label(dataset)), shown, strict=True):
        geometry.draw(ax, best[:, :, p])
        contoured |= geometry.contours(ax, saving[:, :, p], levels)
        geometry.crossovers(ax, {n: dataset[crossover_variable(n)].values[b, :, p] for n in crossing})
        ax.set_title(f"periapsis {_km(periapses[p])}", fontsize=9.5)
    geometry.legend(figure, crossing, contours=contoured)
    return figure


def _finite_winner_figure(dataset: xr.Dataset, b: int) -> Figure:
    bodies, names = cube_labels(dataset)
    periapses = dataset["periapsis_altitude"].values
    thrusts, ratios = dataset["thrust"].values, dataset["thrust_to_weight"].values
    candidates = _challenger_periapses(dataset["status"].values[:, b], names)
    rows = _evenly(candidates, _MAX_FINITE_ROWS) or [0]
    levels = _evenly(list(range(thrusts.size)), _MAX_THRUST_PANELS)
    which = (f"rows: {len(rows)} of the {len(candidates)} periapsis altitudes where a low-periapsis strategy is "
             "feasible, evenly spaced from the lowest" if candidates
             else "no low-periapsis strategy is feasible at any periapsis")
    if len(levels) < thrusts.size:
        which += f"; {len(levels)} of {thrusts.size} thrust levels, evenly spaced"
    columns = len(levels) + 1
    figure = _new_figure(3.0 * columns + 0.9, 2.45 * len(rows) + 1.1,
                         _title(bodies[b], "finite_winner"),
                         f"{which}; grey: no strategy can be flown (see finite_status in the cube); {CAPTION}, "
                         "constant-thrust burns")
    geometry = _MapAxes(dataset["v_inf"].values, dataset["target_altitude"].values, names)
    crossing = _crossover_names(dataset, names)
    finite_crossing = _crossover_names(dataset, names, finite=True)
    labels = [f"periapsis {_km(periapses[p])}\n{_target_label(dataset)}" for p in rows]
    axes = _panel_grid(figure, len(rows) * columns, columns, labels)
    impulsive = dataset["best_strategy"].values[b]  # (V, T, P)
    best = dataset["finite_best_strategy"].values[b]  # (V, T, P, F)
    for r, p in enumerate(rows):
        row = axes[r * columns:(r + 1) * columns]
        geometry.draw(row[0], impulsive[:, :, p])
        geometry.crossovers(row[0], {n: dataset[crossover_variable(n)].values[b, :, p] for n in crossing})
        for ax, f in zip(row[1:], levels, strict=True):
            geometry.draw(ax, best[:, :, p, f])
            geometry.crossovers(ax, {n: dataset[crossover_variable(n, finite=True)].values[b, :, p, f]
                                     for n in finite_crossing})
        if r == 0:
            row[0].set_title("impulsive burns (reference)", fontsize=9.5)
            for ax, f in zip(row[1:], levels, strict=True):
                ax.set_title(f"{thrusts[f]:,.0f} N, T/W {_ratio(ratios[f])}", fontsize=9.5)
    geometry.legend(figure, crossing, contours=False)
    return figure


def _plane_change_figure(dataset: xr.Dataset, b: int) -> Figure:
    bodies, names = cube_labels(dataset)
    periapses = dataset["periapsis_altitude"].values
    targets = dataset["target_altitude"].values
    angles = dataset["plane_change"].values
    best = dataset["plane_change_best_strategy"].values[b]  # (V, T, P, A)
    saving = dataset["plane_change_saving_over_direct"].values[b]
    candidates = _challenger_periapses(dataset["status"].values[:, b], names)
    challengers = " or ".join(n for n in names if n != "direct")
    shown = _evenly(list(range(angles.size)), _MAX_PLANE_PANELS)
    nothing = _nothing_feasible(dataset, b)
    p = candidates[0] if candidates else 0
    if nothing:  # one grey panel says it; more would repeat it
        shown = shown[:1]
        which = f"{nothing}; plane change {_degrees(angles[shown])}, periapsis {_km(periapses[p])} shown"
    else:
        if len(shown) == angles.size:
            which = f"one panel per plane-change angle (all {angles.size}: {_degrees(angles)})"
        else:
            which = (f"{len(shown)} of {angles.size} plane-change angles, evenly spaced along the grid: "
                     f"{_degrees(angles[shown])}")
        which += (f"; periapsis {_km(periapses[p])}, the lowest where {challengers} is feasible" if candidates
                  else f"; {challengers} feasible at no periapsis, periapsis {_km(periapses[p])} shown")
    which += "; feasibility as without a plane change"
    panels = saving[:, :, p][..., shown]
    finite_saving = panels[np.isfinite(panels)]
    levels = _nice_levels(float(finite_saving.max()) if finite_saving.size else 0.0)
    if levels.size and 2 <= targets.size < 10:
        which += f"; contours interpolate between the {targets.size} target altitudes of the grid"
    columns = len(shown) if len(shown) <= 3 else 2
    rows = -(-len(shown) // columns)
    title = _title(bodies[b], "plane_change")
    # one panel alone would clip the long title: bold 13 pt is about 0.115 inch a character
    width = max(3.7 * columns + 0.9, 0.115 * len(title) + 0.6)
    figure = _new_figure(width, 2.75 * rows + 1.1, title, f"{which}; {CAPTION}")
    geometry = _MapAxes(dataset["v_inf"].values, targets, names)
    contoured = False
    for ax, a in zip(_panel_grid(figure, len(shown), columns, _target_label(dataset)), shown, strict=True):
        geometry.draw(ax, best[:, :, p, a])
        contoured |= geometry.contours(ax, saving[:, :, p, a], levels)
        ax.set_title(f"plane change {angles[a]:g}°", fontsize=9.5)
    geometry.legend(figure, [], contours=contoured)
    return figure


# ---- curves ------------------------------------------------------------------------------------

def _target_colours(count: int) -> list:
    """Ordered colours for target altitudes: viridis (perceptually uniform, colour-blind safe), no pale end."""
    return [colormaps["viridis"](x) for x in np.linspace(0.0, 0.82, max(count, 1))][:count]


def _saving_figure(dataset: xr.Dataset, b: int) -> Figure:
    bodies, names = cube_labels(dataset)
    v_inf, targets = dataset["v_inf"].values, dataset["target_altitude"].values
    periapses = dataset["periapsis_altitude"].values
    saving = dataset["saving_over_direct"].values[b]  # (V, T, P)
    paying = [int(p) for p in np.flatnonzero((np.nan_to_num(saving) > 0).any(axis=(0, 1)))]
    shown = _evenly(paying, _MAX_SAVING_PANELS)
    nothing = _nothing_feasible(dataset, b)
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
    figure = _new_figure(4.0 * count + 0.9, 3.8, _title(bodies[b], "saving"),
                         f"saving of the cheapest strategy (the winner map shows which); {which}; {CAPTION}")
    axes = figure.subplots(1, count, sharex=True, sharey=True, squeeze=False)[0]
    colours = _target_colours(targets.size)
    for ax, p in zip(axes, shown or [None], strict=True):
        ax.axhline(0.0, color="#909090", linewidth=0.8, zorder=1)
        ax.set_xlabel(_V_INF_LABEL, fontsize=9)
        ax.tick_params(labelsize=8)
        ax.grid(True, color="#E6E6E6", linewidth=0.6)
        if p is None:
            _message(ax, "no feasible strategy" if nothing else "direct is never beaten")
            ax.set_xlim(v_inf[0], v_inf[-1])
            continue
        ax.set_title(f"periapsis {_km(periapses[p])}", fontsize=9.5)
        for t in range(targets.size):
            ax.plot(v_inf, saving[:, t, p], color=colours[t], linewidth=1.8, zorder=3)
    axes[0].set_ylabel("saving over direct, m/s", fontsize=9)
    axes[0].yaxis.set_major_formatter(FuncFormatter(_number))
    handles = [Line2D([], [], color=colours[t], linewidth=1.8, label=f"target orbit {_km(target)}")
               for t, target in enumerate(targets) if shown and np.isfinite(saving[:, t, shown]).any()]
    if handles:
        figure.legend(handles=handles, loc="outside lower center", ncol=min(len(handles), 5), fontsize=8,
                      frameon=False)
    return figure


def _finite_crossover_figure(dataset: xr.Dataset, b: int) -> Figure:
    bodies, names = cube_labels(dataset)
    v_inf, targets = dataset["v_inf"].values, dataset["target_altitude"].values
    periapses = dataset["periapsis_altitude"].values
    thrusts, ratios = dataset["thrust"].values, dataset["thrust_to_weight"].values
    status = dataset["status"].values[:, b]
    crossing = [n for n in _crossover_names(dataset, names, finite=True)
                if crossover_variable(n) in dataset]
    count = max(len(crossing), 1)
    figure = _new_figure(
        4.6 * count + 0.9, 4.6, _title(bodies[b], "finite_crossover"),
        "arrival speed at which the strategy and direct cost the same, at the lowest feasible periapsis below "
        f"each target; finite-burn crossovers are searched only within the grid's {v_inf[0]:g}-{v_inf[-1]:g} km/s; "
        f"{CAPTION}")
    below = {t: _lowest_below(status, names, periapses, targets, t) for t in range(targets.size)}
    plotted = [t for t in range(targets.size) if below[t] is not None]
    grid = figure.subplots(2, count, sharex=True, squeeze=False,
                           gridspec_kw={"height_ratios": [5.0, 0.4 + 0.25 * max(len(plotted), 1)]})
    colours = _target_colours(targets.size)
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
            finite = dataset[crossover_variable(name, finite=True)].values[b, t, p]
            impulsive = float(dataset[crossover_variable(name)].values[b, t, p])
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
            _message(ax, "no crossover at any target")
        if name and plotted and not missing:
            strip.text(0.5, 0.5, "found at every thrust level", transform=strip.transAxes, ha="center",
                       va="center", fontsize=7.5, color="#606060")
        strip.set_xlabel("initial thrust-to-weight ratio", fontsize=9)
        strip.set_ylim(max(len(plotted), 1) - 0.5, -0.5)
        strip.yaxis.set_major_locator(FixedLocator(range(len(plotted))))
        strip.yaxis.set_major_formatter(FuncFormatter(lambda y, _=None: _km(targets[plotted[int(round(y))]])
                                                      if 0 <= round(y) < len(plotted) else ""))
        strip.tick_params(labelsize=7.5)
        strip.grid(True, axis="x", color="#E6E6E6", linewidth=0.6)
        strip.xaxis.set_major_locator(FixedLocator(ratios) if ratios.size <= 8 else LogLocator())
        strip.xaxis.set_minor_locator(NullLocator())
        strip.xaxis.set_major_formatter(FuncFormatter(_ratio))
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
                      linewidth=1.8, label=f"target {_km(targets[t])}, periapsis {_km(periapses[below[t]])}")
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


# ---- writing -----------------------------------------------------------------------------------

_DRAW = {"winner": _winner_figure, "saving": _saving_figure,
         "finite_winner": _finite_winner_figure, "finite_crossover": _finite_crossover_figure,
         "plane_change": _plane_change_figure}


def draw_figure(dataset: xr.Dataset, kind: str, body: str) -> Figure:
    """
    One figure as a :class:`matplotlib.figure.Figure` on the Agg canvas, e.g.
    ``draw_figure(cube, "winner", "mars")``; ``kind`` is one of ``winner``, ``saving``,
    ``finite_winner``, ``finite_crossover`` (these two need a thrust axis) and ``plane_change``
    (needs a plane-change axis).
    """
    bodies, _ = cube_labels(dataset)
    kinds = {kind for kind, *_ in _figures(dataset)}
    if kind not in kinds:
        raise ValueError(f"unknown figure kind {kind!r} for this cube; expected one of {sorted(kinds)}")
    if body not in bodies:
        raise ValueError(f"body {body!r} is not in the cube; it has {bodies}")
    return _DRAW[kind](dataset, bodies.index(body))


def write_figures(dataset: xr.Dataset, folder: str | Path, workers: int | None = None) -> list[Path]:
    """
    Draw every figure of :func:`figure_files` from ``dataset`` into ``folder`` as PNG.

    Figures are independent, so they are drawn in ``workers`` processes (default: every core;
    each figure takes about a second, nearly all of it in matplotlib). A cube opened from a file
    travels to the workers as a reference to that file, not as data. The files are the same
    whatever the worker count.

    Returns
    -------
    list of Path
        The files written, in the order of :func:`figure_files`.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    figures = _figures(dataset)
    processes = max(1, min(workers or os.cpu_count() or 1, len(figures)))
    runner = Parallel(n_jobs=processes, backend="loky" if processes > 1 else "sequential")
    return runner(delayed(_draw_to_file)(dataset, kind, b, folder / file_name, processes > 1)
                  for kind, b, file_name, _ in figures)


def _draw_to_file(dataset: xr.Dataset, kind: str, b: int, path: Path, in_worker: bool) -> Path:
    try:
        with replacing(path) as temporary:
            _DRAW[kind](dataset, b).savefig(temporary, format="png", dpi=DPI, facecolor="white",
                                            metadata={"Software": None})
    finally:
        if in_worker:  # the worker's own copy: let go of the cube file (it may be replaced or unmounted)
            dataset.close()
    return path


def draw_universal_map(dataset: xr.Dataset) -> Figure:
    """
    The universal regime map: winner over (arrival speed ratio, periapsis ratio), one panel per
    intermediate-apoapsis ratio, with the two crossover speeds drawn (from the dataset).
    """
    names = [str(n) for n in dataset["strategy_name"].values]
    speed = dataset["speed_ratio"].values
    periapsis = dataset["periapsis_ratio"].values
    apoapses = dataset["apoapsis_ratio"].values
    best = dataset["best_strategy"].values  # (speed, periapsis, apoapsis)
    figure = _new_figure(
        3.6 * min(len(apoapses), 3) + 0.6, 3.3 * -(-len(apoapses) // 3) + 0.8,
        "Every body at once: cheapest capture strategy in dimensionless form",
        "speeds over the circular speed at the target radius, radii over the target radius; no body limits "
        f"(safe periapsis, sphere of influence, time) applied; {CAPTION}",
    )
    panels = list(figure.subplots(-(-len(apoapses) // 3), min(len(apoapses), 3), sharex=True, sharey=True,
                                  squeeze=False).ravel())
    for ax in panels[len(apoapses):]:
        ax.set_visible(False)
    colours, norm = _winner_colours(names)
    log = _log_axis(periapsis)
    crossing_two = float(dataset["two_burn_crossover_speed_ratio"])
    for a, ax in enumerate(panels[:len(apoapses)]):
        ax.pcolormesh(_edges(speed, False), _edges(periapsis, log), best[:, :, a].T, cmap=colours, norm=norm)
        if log:
            ax.set_yscale("log")
        ax.axhline(1.0, color=_CONTOUR_COLOUR, lw=0.8)
        style = {"color": _dark("two_burn", 1), "ls": "--", "lw": 1.4}
        ax.plot([crossing_two, crossing_two], [periapsis.min(), 1.0], **style)
        crossing_three = float(dataset["three_burn_crossover_speed_ratio"].values[a])
        ax.plot([crossing_three, crossing_three], [periapsis.min(), 1.0],
                **{"color": _dark("three_burn", 2), "ls": ":", "lw": 1.6})
        ax.set_title(f"apoapsis / target radius {apoapses[a]:g}", fontsize=10)
        ax.set_xlabel("arrival speed / circular speed at the target", fontsize=9)
        if a % 3 == 0:
            ax.set_ylabel("periapsis radius / target radius", fontsize=9)
    handles = [Patch(facecolor=fill_colour(n, i), edgecolor="#606060", label=n) for i, n in enumerate(names)]
    handles += [
        Line2D([], [], color=_dark("two_burn", 1), ls="--", label="two_burn = direct (sqrt 2)"),
        Line2D([], [], color=_dark("three_burn", 2), ls=":", label="three_burn = direct (sqrt(2 r_t / r_a))"),
        Line2D([], [], color=_CONTOUR_COLOUR, lw=0.8, label="periapsis at the target radius"),
    ]
    figure.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    return figure
