"""Output arrays by name: their shapes and dtypes for a grid or one chunk, from the variable registry."""

from __future__ import annotations

import numpy as np

from sweep.config import SweepConfig
from sweep.model.strategies import REFERENCE, STRATEGIES, max_burns
from sweep.model.variables import Variable, cube_variables, shape_of

__all__ = ["HELD", "STREAMED", "Arrays", "allocate", "layout", "sizes", "variables"]

Arrays = dict[str, np.ndarray]  # output variable name (the registry's) -> values in cube units and order
STREAMED = ("impulsive", "plane")  # stages whose arrays a streamed run writes chunk by chunk
HELD = ("body", "crossover", "finite", "finite_crossover")  # stages whose arrays a run holds whole



def variables(config: SweepConfig, stages: tuple[str, ...] | None = None) -> list[Variable]:
    """The registry's output variables a cube of ``config`` has (of ``stages`` only, if given)."""
    return [v for v in cube_variables(STRATEGIES, REFERENCE, config) if stages is None or v.stage in stages]


def sizes(config: SweepConfig, bodies: int | None = None, speeds: int | None = None) -> dict[str, int]:
    """Length of every dimension; ``bodies`` and ``speeds`` override the grid's (one chunk's arrays)."""
    nbody, nspeed, ntarget, nperiapsis = config.shape
    return {"strategy": len(STRATEGIES), "burn": max_burns(), "body": nbody if bodies is None else bodies,
            "v_inf": nspeed if speeds is None else speeds, "target_altitude": ntarget,
            "periapsis_altitude": nperiapsis,
            "plane_change": 0 if config.plane_change is None else config.plane_change.size,
            "thrust": 0 if config.thrust is None else config.thrust.size}


def layout(config: SweepConfig, stages: tuple[str, ...] | None = None, bodies: int | None = None,
            speeds: int | None = None) -> dict[str, tuple[tuple[int, ...], np.dtype]]:
    """Shape and dtype of the output arrays of ``stages`` (all when None), for the grid or one chunk."""
    dims = sizes(config, bodies, speeds)
    return {v.name: (shape_of(v, dims), np.dtype(v.dtype)) for v in variables(config, stages)}


def allocate(config: SweepConfig, stages: tuple[str, ...], bodies: int | None = None,
             speeds: int | None = None) -> Arrays:
    """The arrays of ``stages`` allocated, for the grid or (``bodies``, ``speeds``) one chunk."""
    return {name: np.empty(shape, dtype) for name, (shape, dtype) in layout(config, stages, bodies, speeds).items()}
