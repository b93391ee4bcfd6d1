"""capsweep: sweeps of capture strategies for spacecraft arriving on hyperbolic approaches.

Pipeline: :func:`load_config` -> :func:`run` (grid, physics, evaluation) -> :func:`write_dataset`
(CF netCDF cube) -> :func:`render_summary` (where each strategy wins, from the cube alone).
"""

from __future__ import annotations

__version__ = "0.1.0"

from sweep.config import load_config, parse_config  # noqa: E402
from sweep.dataset import build_dataset, open_cube, write_dataset  # noqa: E402
from sweep.evaluate import evaluate as _evaluate  # noqa: E402  (module sweep.evaluate keeps its name)
from sweep.summary import render_summary, write_summary  # noqa: E402


def run(config, workers: int | None = None, progress: bool = False, scheduler: str | None = None, checkpoint=None):
    """Evaluate ``config`` and return the labelled cube as an ``xarray.Dataset``."""
    arrays = _evaluate(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
    return build_dataset(config, arrays)


__all__ = [
    "__version__",
    "build_dataset",
    "load_config",
    "open_cube",
    "parse_config",
    "render_summary",
    "run",
    "write_dataset",
    "write_summary",
]
