"""The pipeline as a library: config -> engine -> cube -> report, for Python callers and the CLI."""

from __future__ import annotations

from sweep.cube.conventions import build_dataset
from sweep.cube.netcdf import write_dataset
from sweep.engine.grid import speeds_per_chunk
from sweep.engine.impulsive import STREAM_CHUNK_POINTS, add_placeholders, evaluate, prepare, sweep_chunks

__all__ = ["run", "run_to_file"]


def run(config, workers: int | None = None, progress: bool = False, scheduler: str | None = None, checkpoint=None):
    """Evaluate ``config`` and return the labelled cube as an ``xarray.Dataset``."""
    arrays = evaluate(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
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
