"""PNG figures of where each strategy wins, drawn from a cube alone, and the registry of figure kinds.

Like :mod:`sweep.report.summary`, nothing here recomputes physics: every cell, line and contour is read
from the Dataset, so an old ``.nc`` file draws the same way it did when it was written.

Each kind of figure is one entry of :data:`FIGURES` (its name, file-name pattern, title, which
cubes get it, and how to draw it) and one module beside this one:

- ``winner_<body>.png`` (:mod:`~sweep.report.figures.winner`): the cheapest feasible strategy over
  arrival speed and target altitude, one panel per periapsis altitude, with the crossover speeds
  and contours of the saving over direct;
- ``saving_<body>.png`` (:mod:`~sweep.report.figures.saving`): the saving over direct against
  arrival speed, one line per target;
- with a thrust axis, ``finite_winner_<body>.png`` (:mod:`~sweep.report.figures.finite_winner`: the
  winner map with finite burns, one panel per thrust level beside the impulsive one) and
  ``finite_crossover_<body>.png`` (:mod:`~sweep.report.figures.finite_crossover`: the finite-burn
  crossover speed against thrust-to-weight, the impulsive one as reference);
- with a plane-change axis, ``plane_change_<body>.png`` (:mod:`~sweep.report.figures.plane_change`):
  the winner map including the plane change, one panel per plane-change angle, at the lowest
  periapsis where a low-periapsis strategy is feasible, with contours of the saving over direct.

``<body>`` is the cube's lower-case body name. A figure is drawn from one body's part of the cube
(:func:`sweep.report.selection.one_body`), so a cube opened from a file loads one body at a time.
A new kind of figure is one :func:`register_figure` call; :func:`write_figures`,
:func:`figure_files` and :func:`draw_figure` loop over the registry.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import joblib
import xarray as xr
from joblib import Parallel, delayed
from matplotlib.figure import Figure

from sweep.atomic import replacing
from sweep.model.strategies import cube_labels
from sweep.report.figures import finite_crossover, finite_winner, plane_change, saving, winner
from sweep.report.figures.common import DPI, figure_title, fill_colour, safe
from sweep.report.figures.universal import draw_universal_map
from sweep.report.selection import one_body
from sweep.safefs import make_folder

__all__ = ["DPI", "FIGURES", "FigureKind", "draw_figure", "draw_universal_map", "figure_files", "fill_colour",
           "register_figure", "unregister_figure", "write_figures"]

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class FigureKind:
    """
    A kind of figure, drawn once per body of every cube it applies to.

    Attributes
    ----------
    name : str
        The kind, as :func:`draw_figure` takes it, e.g. ``"winner"``.
    file_pattern : str
        The file name, with ``{body}`` standing for the body's name as files spell it.
    title : str
        The figure's heading after the body's name, e.g. ``"cheapest capture strategy"``.
    applies : callable
        Whether a cube (the whole Dataset) gets this figure, e.g. only cubes with a thrust axis.
    draw : callable
        One body's cube (:func:`sweep.report.selection.one_body`) to a Figure on the Agg canvas.
    """

    name: str
    file_pattern: str
    title: str
    applies: Callable[[xr.Dataset], bool]
    draw: Callable[[xr.Dataset], Figure]

    def file_name(self, body: str) -> str:
        """The file this kind is written to for ``body``."""
        return self.file_pattern.format(body=safe(body))


def _every_cube(dataset: xr.Dataset) -> bool:
    return True


def _with_thrust(dataset: xr.Dataset) -> bool:
    return "finite_best_strategy" in dataset


def _with_plane_change(dataset: xr.Dataset) -> bool:
    return "plane_change_best_strategy" in dataset


# The registry, in the order figures are listed and drawn for each body.
FIGURES: list[FigureKind] = [
    FigureKind("winner", "winner_{body}.png", winner.TITLE, _every_cube, winner.draw),
    FigureKind("saving", "saving_{body}.png", saving.TITLE, _every_cube, saving.draw),
    FigureKind("finite_winner", "finite_winner_{body}.png", finite_winner.TITLE, _with_thrust, finite_winner.draw),
    FigureKind("finite_crossover", "finite_crossover_{body}.png", finite_crossover.TITLE, _with_thrust,
               finite_crossover.draw),
    FigureKind("plane_change", "plane_change_{body}.png", plane_change.TITLE, _with_plane_change,
               plane_change.draw),
]


def register_figure(kind: FigureKind) -> None:
    """Add a kind of figure to the registry (drawn after the others for each body); its name must be new."""
    if any(k.name == kind.name for k in FIGURES):
        raise ValueError(f"figure kind {kind.name!r} is registered already")
    FIGURES.append(kind)


def unregister_figure(name: str) -> None:
    """Remove the kind of figure called ``name`` from the registry."""
    if not any(k.name == name for k in FIGURES):
        raise ValueError(f"no figure kind {name!r} is registered")
    FIGURES[:] = [k for k in FIGURES if k.name != name]


def _figures(dataset: xr.Dataset) -> list[tuple[FigureKind, str, str, str]]:
    """(kind, body, file name, title) of every figure, in order: per body, the registry's kinds that apply."""
    bodies, _ = cube_labels(dataset)
    kinds = [kind for kind in FIGURES if kind.applies(dataset)]
    return [(kind, body, kind.file_name(body), figure_title(body, kind.title)) for body in bodies for kind in kinds]


def figure_files(dataset: xr.Dataset) -> list[tuple[str, str, str]]:
    """
    The figures :func:`write_figures` draws for ``dataset``, in order: (body, file name, title).

    Read from the cube's labels only, so the summary can link the files without drawing them.
    """
    return [(body, file_name, title) for _, body, file_name, title in _figures(dataset)]


def draw_figure(dataset: xr.Dataset, kind: str, body: str) -> Figure:
    """
    One figure as a :class:`matplotlib.figure.Figure` on the Agg canvas, e.g.
    ``draw_figure(cube, "winner", "mars")``; ``kind`` is the name of a registered kind that
    applies to the cube: ``winner``, ``saving``, ``finite_winner``, ``finite_crossover`` (these two
    need a thrust axis) and ``plane_change`` (needs a plane-change axis), or one registered since.
    """
    bodies, _ = cube_labels(dataset)
    kinds = {k.name: k for k in FIGURES if k.applies(dataset)}
    if kind not in kinds:
        raise ValueError(f"unknown figure kind {kind!r} for this cube; expected one of {sorted(kinds)}")
    if body not in bodies:
        raise ValueError(f"body {body!r} is not in the cube; it has {bodies}")
    return kinds[kind].draw(one_body(dataset, body))


def write_figures(dataset: xr.Dataset, folder: str | Path, workers: int | None = None) -> list[Path]:
    """
    Draw every figure of :func:`figure_files` from ``dataset`` into ``folder`` as PNG.

    Figures are independent, so they are drawn in ``workers`` processes (default: every core this
    process may run on; each figure takes about a second, nearly all of it in matplotlib). A cube
    opened from a file travels to the workers as a reference to that file, not as data, and each
    figure reads only its body's part. The files are the same whatever the worker count.

    Returns
    -------
    list of Path
        The files written, in the order of :func:`figure_files`.
    """
    folder = Path(folder)
    make_folder(folder)
    figures = _figures(dataset)
    processes = max(1, min(workers or max(joblib.cpu_count(), 1), len(figures)))
    logger.debug("drawing %d figures in %d process(es)", len(figures), processes)
    runner = Parallel(n_jobs=processes, backend="loky" if processes > 1 else "sequential")
    return runner(delayed(_draw_to_file)(dataset, kind, body, folder / file_name, processes > 1)
                  for kind, body, file_name, _ in figures)


def _draw_to_file(dataset: xr.Dataset, kind: FigureKind, body: str, path: Path, in_worker: bool) -> Path:
    try:
        with replacing(path) as temporary:
            kind.draw(one_body(dataset, body)).savefig(temporary, format="png", dpi=DPI, facecolor="white",
                                                       metadata={"Software": None})
    finally:
        if in_worker:  # the worker's own copy: let go of the cube file (it may be replaced or unmounted)
            dataset.close()
    return path
