"""capsweep: sweeps of capture strategies for spacecraft arriving on hyperbolic approaches.

Pipeline: :func:`load_config` -> :func:`run` (grid, physics, evaluation) -> :func:`write_dataset`
(CF netCDF cube) -> :func:`render_summary` (where each strategy wins, from the cube alone).
This module only gathers the public names; no module of the package imports it.
"""

from __future__ import annotations

from sweep.config import load_config, parse_config
from sweep.cube.conventions import build_dataset
from sweep.cube.netcdf import open_cube, write_dataset
from sweep.pipeline import run, run_to_file
from sweep.report.summary import render_summary, write_summary
from sweep.version import __version__

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
