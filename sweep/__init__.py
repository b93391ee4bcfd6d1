"""capsweep: sweeps of capture strategies for spacecraft arriving on hyperbolic approaches.

Pipeline: :func:`load_config` -> :func:`run` (grid, physics, evaluation) -> :func:`write_dataset`
(CF netCDF cube) -> :func:`render_summary` (where each strategy wins, from the cube alone).
"""

from __future__ import annotations

__version__ = "0.1.0"

from sweep.config import load_config, parse_config  # noqa: E402
from sweep.dataset import build_dataset, open_cube, write_dataset  # noqa: E402
from sweep.evaluate import STREAM_CHUNK_POINTS, add_placeholders, prepare, sweep_chunks  # noqa: E402
from sweep.evaluate import evaluate as _evaluate  # noqa: E402  (module sweep.evaluate keeps its name)
from sweep.grid import speeds_per_chunk  # noqa: E402
from sweep.summary import render_summary, write_summary  # noqa: E402


def run(config, workers: int | None = None, progress: bool = False, scheduler: str | None = None, checkpoint=None):
    """Evaluate ``config`` and return the labelled cube as an ``xarray.Dataset``."""
    arrays = _evaluate(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
    return build_dataset(config, arrays)


def run_to_file(config, path, workers: int | None = None, progress: bool = False, scheduler: str | None = None,
                checkpoint=None, compression: int = 0, points_per_chunk: int = STREAM_CHUNK_POINTS):
    """
    Evaluate ``config`` straight into the netCDF cube at ``path`` and return the path.

    The per-point arrays are streamed: each chunk is written as it is computed, so memory is a
    few chunks (``points_per_chunk`` grid points each) plus the per-body and finite-burn arrays,
    whatever the grid's size. The file equals ``write_dataset(run(config), path)`` value for
    value; it appears at ``path`` only once complete.
    """
    plans, arrays = prepare(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
    dataset = build_dataset(config, add_placeholders(config, arrays))
    stream = sweep_chunks(config, plans, workers=workers, progress=progress, points_per_chunk=points_per_chunk)
    return write_dataset(dataset, path, compression, stream=stream,
                         speeds_per_chunk=speeds_per_chunk(config.shape, points_per_chunk))


__all__ = [
    "__version__",
    "build_dataset",
    "load_config",
    "open_cube",
    "parse_config",
    "render_summary",
    "run",
    "run_to_file",
    "write_dataset",
    "write_summary",
]
