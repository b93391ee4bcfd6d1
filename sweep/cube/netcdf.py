"""The netCDF backend: a cube written whole or streamed chunk by chunk by one writer, atomically; reads."""

from __future__ import annotations

import errno
import shutil
from collections.abc import Iterable
from pathlib import Path

import netCDF4
import numpy as np
import xarray as xr

from sweep.atomic import replacing
from sweep.model.strategies import STRATEGIES
from sweep.model.variables import cube_variables
from sweep.safefs import make_folder

__all__ = ["open_cube", "write_dataset"]


def _encoding(dataset: xr.Dataset, compression: int) -> dict:
    """
    No fill values on coordinates (CF); NaN fill on float data; none on flag data. With
    ``compression`` (a zlib level, 1-9; 0 for none) every data variable is compressed in chunks
    of one body, so reading one body never decompresses another's data.
    """
    encoding = {name: {"_FillValue": None} for name in dataset.coords}
    for name, variable in dataset.data_vars.items():
        entry = {"_FillValue": np.nan} if variable.dtype.kind == "f" else (
            {"_FillValue": None} if "_FillValue" not in variable.attrs else {})
        if compression and variable.ndim:
            entry.update(zlib=True, complevel=compression, shuffle=True,
                         chunksizes=tuple(1 if dim == "body" else size for dim, size in variable.sizes.items()))
        encoding[name] = entry
    return encoding


def write_dataset(dataset: xr.Dataset, path: str | Path, compression: int = 0,
                  stream: Iterable[tuple] | None = None, speeds_per_chunk: int = 1) -> Path:
    """
    Write ``dataset`` to ``path`` (netCDF4) atomically: a temporary file in the same folder,
    renamed over the target only once complete. A failure leaves any earlier file intact.
    ``compression``: zlib level 1-9, or 0 (the default) for none.

    With ``stream`` (the ``(chunk, arrays)`` pairs of :func:`sweep.engine.impulsive.sweep_chunks`) the
    dataset's streamed variables (as the variable registry marks them) are placeholders
    (:func:`sweep.engine.impulsive.add_placeholders`):
    the file is made with them empty, and this one writer puts each chunk's values in place as
    it arrives, so memory holds a few chunks, not the cube. Compressed, those variables are
    stored in HDF5 chunks of one strategy, one body and ``speeds_per_chunk`` arrival speeds
    (the streamed chunk): a write never re-reads a stored chunk, and reading one body never
    decompresses another's data.
    """
    if compression not in range(10):
        raise ValueError(f"compression must be a zlib level 0-9, got {compression!r}")
    path = Path(path)
    make_folder(path.parent)
    with replacing(path) as temporary:
        try:
            if stream is None:
                dataset.to_netcdf(temporary, format="NETCDF4", engine="netcdf4",
                                  encoding=_encoding(dataset, compression))
            else:
                names = [v.name for v in cube_variables(STRATEGIES) if v.streamed and v.name in dataset]
                _write_streamed(dataset, stream, temporary, compression, speeds_per_chunk, names)
        except RuntimeError as err:  # netCDF-C reports a full disk as "NetCDF: HDF error", not as an OSError
            raise _write_error(err, path) from err
    return path


def _write_error(err: RuntimeError, path: Path) -> OSError:
    """The OSError a failed netCDF write stands for, judged while its partial file still takes space."""
    free = shutil.disk_usage(path.parent).free
    if free < _NEARLY_FULL:
        return OSError(errno.ENOSPC, f"No space left on device ({_mib(free)} free; netCDF: {err})", str(path))
    return OSError(errno.EIO, f"netCDF write failed: {err}", str(path))


_NEARLY_FULL = 64 << 20  # bytes free below which a failed write is taken for a full disk


def _mib(count: int) -> str:
    return f"{count / (1 << 20):.1f} MiB"


def _chunk_variables(arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Cube variable name -> array, for the streamed arrays of one chunk."""
    return arrays


def _write_streamed(dataset: xr.Dataset, stream, path: Path, compression: int, speeds_per_chunk: int,
                    names: list[str]) -> None:
    """The file without the streamed variables ``names`` (xarray), then those variables chunk by chunk (netCDF4)."""
    skeleton = dataset.drop_vars(names)
    skeleton.to_netcdf(path, format="NETCDF4", engine="netcdf4", encoding=_encoding(skeleton, compression))
    auxiliary = {name: set(coordinate.dims) for name, coordinate in dataset.coords.items() if name not in dataset.dims}
    with netCDF4.Dataset(path, "a") as file:
        file.set_fill_off()  # every value is written below: no prefill pass
        placed, used = {}, set()
        for name in names:
            variable = dataset[name]
            options = {"fill_value": np.nan if variable.dtype.kind == "f" else False}
            if compression:
                options.update(zlib=True, complevel=compression, shuffle=True, chunksizes=tuple(
                    1 if dim in ("strategy", "burn", "body") else min(speeds_per_chunk, size) if dim == "v_inf"
                    else size for dim, size in variable.sizes.items()))
            else:
                options["contiguous"] = True
            target = file.createVariable(name, variable.dtype, variable.dims, **options)
            target.set_auto_maskandscale(False)
            # as xarray writes it: the auxiliary coordinates (labels) whose dimensions the variable has
            labels = " ".join(sorted(k for k, dims in auxiliary.items() if dims <= set(variable.dims)))
            target.setncatts({**variable.attrs, **({"coordinates": labels} if labels else {})})
            placed[name] = (target, variable.dims.index("body"))
            used |= set(labels.split())
        # xarray lists labels no variable of the skeleton uses in a global attribute: drop those used now
        orphans = [name for name in getattr(file, "coordinates", "").split() if name not in used]
        if "coordinates" in file.ncattrs():
            file.delncattr("coordinates")
            if orphans:
                file.setncattr("coordinates", " ".join(orphans))
        for chunk, arrays in stream:
            for name, values in _chunk_variables(arrays).items():
                target, axis = placed[name]
                where = [slice(None)] * values.ndim
                where[axis + 1] = slice(chunk.v_inf_start, chunk.v_inf_stop)
                where[axis] = chunk.body
                target[tuple(where)] = values[(slice(None),) * axis + (0,)]


def open_cube(path: str | Path) -> xr.Dataset:
    """
    Open a cube with ``body`` and ``strategy`` indexed by name, e.g.
    ``open_cube(p).delta_v.sel(body="mars", strategy="two_burn")``.

    The labels are assigned in memory only; the file keeps CF's integer dimensions with the
    ``body_name`` and ``strategy_name`` label variables.
    """
    dataset = xr.open_dataset(path)
    return dataset.assign_coords(
        body=dataset["body_name"].values.astype(str), strategy=dataset["strategy_name"].values.astype(str)
    )
