"""Whole files or none: every output is written under a temporary name and renamed when complete."""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from sweep.safefs import check_folder, temporary_beside

__all__ = ["replacing"]


@contextmanager
def replacing(path: str | Path) -> Iterator[Path]:
    """
    Yield a temporary path in ``path``'s folder to write to; when the block ends without an
    error it is renamed over ``path`` (atomic on one file system), and on any error, Ctrl-C
    included, it is removed: ``path`` is then exactly what it was before.

    Raises
    ------
    SweepError
        ``path``'s folder is one another user could tamper with (:func:`sweep.safefs.check_folder`).

    Notes
    -----
    The temporary is a new, empty regular file that :func:`sweep.safefs.temporary_beside` has
    just made exclusively (no link followed, random name). Writers then open it by name
    (netCDF4/HDF5, matplotlib and pandas take a path and truncate what they open): that is safe
    because the folder passed :func:`sweep.safefs.check_folder`, so nobody else can rename,
    remove or replace our file in it between its creation and their open. Truncating an empty
    file costs nothing (truncating a large one costs netCDF a flush on close). The final
    ``os.replace`` is a rename: a symbolic or hard link planted at ``path`` is itself replaced,
    its target is never written.
    """
    path = Path(path)
    check_folder(path.parent)
    descriptor, temporary = temporary_beside(path)
    os.close(descriptor)
    try:
        yield temporary
        os.replace(temporary, path)
    finally:
        temporary.unlink(missing_ok=True)  # gone already after a successful rename
