"""capsweep: sweeps of capture strategies for spacecraft arriving on hyperbolic approaches.

Pipeline: :func:`load_config` -> :func:`run` (grid, physics, evaluation) -> :func:`write_dataset`
(CF netCDF cube) -> :func:`render_summary` (where each strategy wins, from the cube alone).
This module only gathers the public names; no module of the package imports it.

The names are imported on first use (PEP 562), so ``import sweep`` and the command line's
``--help`` and ``--version`` do not load numpy, xarray or matplotlib.
"""

from __future__ import annotations

from importlib import import_module

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

_HOMES = {
    "build_dataset": "sweep.cube.conventions",
    "load_config": "sweep.config",
    "open_cube": "sweep.cube.netcdf",
    "parse_config": "sweep.config",
    "render_summary": "sweep.report.summary",
    "run": "sweep.pipeline",
    "run_to_file": "sweep.pipeline",
    "write_dataset": "sweep.cube.netcdf",
    "write_summary": "sweep.report.summary",
}


def __getattr__(name: str):
    """Import a public name from its module on first use and keep it here."""
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(import_module(home), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
