"""Reading a cube by label, one body at a time, and the periapsis the summary and the figures single out.

A cube keeps CF's integer ``body`` and ``strategy`` dimensions with the label variables
``body_name`` and ``strategy_name`` (see :func:`sweep.model.strategies.cube_labels`).
:func:`labelled` attaches those labels as indexes in memory, so that
``labelled(cube).sel(body="mars", strategy="two_burn")`` works; the file is not changed.
:func:`one_body` selects one body before anything is read, so a cube opened from a file loads
only that body's values when they are asked for.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import xarray as xr

from sweep.model.strategies import REFERENCE

__all__ = ["BLOCK_BYTES", "GRID", "MAX_PERIAPSIS_PANELS", "any_along", "array", "blocks", "body_label",
           "challenger_names", "count_values", "feasible_periapses", "labelled", "lowest_periapsis_below", "one_body",
           "strategy_labels"]

BLOCK_BYTES = 64 << 20  # the most one blockwise read holds at once
MAX_PERIAPSIS_PANELS = 6  # periapsis altitudes a winner map draws at most, one small multiple each

GRID = ("v_inf", "target_altitude", "periapsis_altitude")  # the grid's dimensions, in the order the report reads


def labelled(dataset: xr.Dataset) -> xr.Dataset:
    """``dataset`` with ``body`` and ``strategy`` indexed by their names (in memory; nothing is loaded)."""
    bodies = [str(n) for n in dataset["body_name"].values]
    names = [str(n) for n in dataset["strategy_name"].values]
    return dataset.assign_coords(body=bodies, strategy=names)


def one_body(dataset: xr.Dataset, body: str) -> xr.Dataset:
    """Only ``body``'s part of the cube; from a file, still lazy: only this body's values load when read."""
    return labelled(dataset).sel(body=body)


def body_label(cube: xr.Dataset) -> str:
    """The name of the body a :func:`one_body` cube holds."""
    return str(cube["body_name"].values.item())


def strategy_labels(cube: xr.Dataset) -> list[str]:
    """Strategy names in the order of the ``strategy`` dimension."""
    return [str(n) for n in cube["strategy_name"].values]


def challenger_names(names: list[str]) -> list[str]:
    """Every strategy measured against the reference (direct), in cube order."""
    return [n for n in names if n != REFERENCE]


def array(cube: xr.Dataset, name: str, *dims: str) -> np.ndarray:
    """The values of variable ``name`` with its dimensions in the order ``dims`` (all of them, by name)."""
    return cube[name].transpose(*dims).values


def blocks(variable: xr.DataArray, dim: str = "v_inf") -> Iterator[xr.DataArray]:
    """
    ``variable`` read in slices along ``dim`` of about :data:`BLOCK_BYTES` each: a reduction over
    a large cube holds one slice at a time, not the whole variable.
    """
    size = variable.sizes.get(dim, 1)
    per_slice = variable.dtype.itemsize * variable.size // max(size, 1)
    step = max(1, BLOCK_BYTES // max(per_slice, 1))
    if dim not in variable.dims:
        yield variable.load()
        return
    for start in range(0, size, step):
        yield variable.isel({dim: slice(start, start + step)}).load()


def any_along(condition: xr.DataArray, keep: str) -> np.ndarray:
    """Whether ``condition`` holds anywhere, for each value of dimension ``keep``; read block by block."""
    found = np.zeros(condition.sizes[keep], dtype=bool)
    for block in blocks(condition):
        found |= block.any([d for d in block.dims if d != keep]).transpose(keep).values
    return found


def count_values(variable: xr.DataArray, size: int) -> np.ndarray:
    """How often each integer 0 .. size - 1 occurs in ``variable`` (values outside ignored); read block by block."""
    counts = np.zeros(size, dtype=np.int64)
    for block in blocks(variable):
        values = block.values
        counts += [np.count_nonzero(values == code) for code in range(size)]  # no copy wider than a mask
    return counts


def feasible_periapses(cube: xr.Dataset, strategies: list[str], target: int | None = None) -> list[int]:
    """
    Indices along ``periapsis_altitude`` (ascending) where one of ``strategies`` is feasible at
    some arrival speed: at any target, or, with ``target`` (an index along ``target_altitude``),
    at that target and below its altitude. ``cube`` holds one body (:func:`one_body`).
    """
    status = cube["status"].sel(strategy=strategies)
    if target is None:
        ok = any_along(status == 0, "periapsis_altitude")
    else:
        below = (cube["periapsis_altitude"] < cube["target_altitude"].isel(target_altitude=target)).values
        ok = any_along(status.isel(target_altitude=target) == 0, "periapsis_altitude") & below
    return [int(p) for p in np.flatnonzero(ok)]


def lowest_periapsis_below(cube: xr.Dataset, strategies: list[str], target: int) -> int | None:
    """The lowest periapsis index below target ``target`` where one of ``strategies`` is feasible; None if none."""
    found = feasible_periapses(cube, strategies, target)
    return found[0] if found else None
