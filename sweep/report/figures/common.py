"""What every figure shares: the canvas with its title and caption, colours, axis helpers and labels.

Figures are bare :class:`matplotlib.figure.Figure` objects on the Agg canvas: no pyplot, no
global backend switch, no display needed.
"""

from __future__ import annotations

import re
import textwrap

import numpy as np
import xarray as xr
from matplotlib import colormaps
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import BoundaryNorm, ListedColormap, to_rgb
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from sweep.model.strategies import crossover_variable, lookup, strategy_colour
from sweep.report.selection import any_along, challenger_names, count_values

__all__ = ["CAPTION", "CONTOUR_COLOUR", "DPI", "NONE_COLOUR", "V_INF_LABEL", "crossover_names", "crossover_speeds",
           "dark", "edges", "evenly", "figure_title", "fill_colour", "line_style", "log_axis", "message", "new_figure",
           "nice_levels", "nothing_feasible", "safe", "target_colours", "target_label", "winner_colours"]

DPI = 120
CAPTION = "preliminary patched-conic estimates"

NONE_COLOUR = "#B4B4B4"  # no feasible strategy: neutral grey, darker than every fill tint below
_TINT = 0.55  # map fills: this share of the strategy colour, the rest white, so lines and labels on top read
CONTOUR_COLOUR = "#262626"
V_INF_LABEL = "arrival speed $v_\\infty$, km/s"
_TARGET_LABEL = "target orbit altitude, km"
_TARGET_PERIAPSIS_LABEL = "target orbit periapsis altitude, km"  # elliptical targets


def target_label(cube: xr.Dataset) -> str:
    """The target axis label: altitude of a circle, or periapsis altitude of an elliptical target."""
    return _TARGET_PERIAPSIS_LABEL if "target_apoapsis_altitude" in cube else _TARGET_LABEL


def figure_title(body: str, title: str) -> str:
    """A figure's heading: 'Mars: cheapest capture strategy'."""
    return f"{body.capitalize()}: {title}"


def safe(name: str) -> str:
    """A body name as it appears in file names: lower case, other characters as '_'."""
    return re.sub(r"[^a-z0-9._-]+", "_", name.lower()) or "body"


# ---- colours -----------------------------------------------------------------------------------

def fill_colour(name: str | None, index: int = 0) -> tuple[float, float, float]:
    """RGB (0-1) a winner map fills a cell with: a tint of the strategy colour, or grey for none."""
    if name is None:
        return to_rgb(NONE_COLOUR)
    rgb = np.array(to_rgb(strategy_colour(name, index)))
    return tuple(float(c) for c in _TINT * rgb + (1 - _TINT) * np.ones(3))


def dark(name: str, index: int) -> tuple[float, float, float]:
    """A darker shade of the strategy colour, for lines drawn over its fills."""
    return tuple(float(c) * 0.7 for c in to_rgb(strategy_colour(name, index)))


def winner_colours(names: list[str]) -> tuple[ListedColormap, BoundaryNorm]:
    """Colour map and norm of winner indices: -1 (none) grey, then each strategy's fill."""
    colours = [fill_colour(None)] + [fill_colour(n, i) for i, n in enumerate(names)]
    bounds = np.arange(-1.5, len(names), 1.0)
    return ListedColormap(colours), BoundaryNorm(bounds, len(colours))


def target_colours(count: int) -> list:
    """Ordered colours for target altitudes: viridis (perceptually uniform, colour-blind safe), no pale end."""
    return [colormaps["viridis"](x) for x in np.linspace(0.0, 0.82, max(count, 1))][:count]


def line_style(name: str) -> tuple[str, str]:
    """Dash pattern and marker of strategy ``name``'s crossover lines."""
    entry = lookup(name)
    return entry.line_style if entry is not None else ("-.", "D")


# ---- axes and panels ---------------------------------------------------------------------------

def evenly(indices: list[int], most: int) -> list[int]:
    """Up to ``most`` of ``indices``, evenly spaced, first and last included."""
    if len(indices) <= most:
        return list(indices)
    picks = np.linspace(0, len(indices) - 1, most).round().astype(int)
    return [indices[i] for i in sorted(set(picks))]


def log_axis(values: np.ndarray) -> bool:
    """Whether grid values span a decade or more (all positive): then the axis is logarithmic."""
    return values.size >= 2 and values.min() > 0 and values.max() / values.min() >= 10


def edges(values: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges around grid values: midpoints (geometric on a log axis), half a step beyond the ends."""
    values = np.asarray(values, dtype=float)
    if values.size == 1:
        v = values[0]
        half = max(abs(v) * 0.1, 0.5)
        return np.array([v / 1.25, v * 1.25]) if log else np.array([v - half, v + half])
    if log:
        return np.exp(edges(np.log(values), log=False))
    middle = (values[1:] + values[:-1]) / 2
    return np.concatenate([[2 * values[0] - middle[0]], middle, [2 * values[-1] - middle[-1]]])


def nice_levels(maximum: float) -> np.ndarray:
    """Round contour levels strictly between 0 and ``maximum``; none for a maximum that is not positive."""
    if not np.isfinite(maximum) or maximum <= 0:
        return np.array([])
    levels = MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]).tick_values(0.0, maximum)
    return levels[(levels > 0) & (levels < maximum)]


def new_figure(width: float, height: float, title: str, subtitle: str) -> Figure:
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


def message(ax: Axes, text: str) -> None:
    """A boxed note in the middle of a panel, e.g. 'no feasible strategy'."""
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center", fontsize=9, color="#262626",
            bbox={"boxstyle": "round,pad=0.4", "facecolor": "white", "edgecolor": "#909090", "alpha": 0.9})


# ---- what the cube says ------------------------------------------------------------------------

def nothing_feasible(cube: xr.Dataset) -> str | None:
    """For a body (one-body cube) where no strategy is feasible anywhere: the most common reason; else None."""
    if any_along(cube["best_strategy"] >= 0, "target_altitude").any():
        return None
    meanings = cube["status"].attrs.get("flag_meanings", "").split()
    code = int(np.argmax(count_values(cube["status"], max(len(meanings), 1))))
    reason = meanings[code] if code < len(meanings) else f"status {code}"
    return f"no strategy is feasible anywhere on this grid (mostly: {reason})"


def crossover_names(cube: xr.Dataset, names: list[str], finite: bool = False) -> list[str]:
    """The challengers whose crossover variable the cube holds."""
    return [n for n in challenger_names(names) if crossover_variable(n, finite) in cube]


def crossover_speeds(cube: xr.Dataset, names: list[str], finite: bool = False, **at: int) -> dict[str, np.ndarray]:
    """Each named strategy's crossover speeds (per target) in a one-body cube, at the indices ``at`` by dimension."""
    return {n: cube[crossover_variable(n, finite)].isel(at).values for n in names}
