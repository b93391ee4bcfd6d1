"""Whole files or none: every output is written under a temporary name and renamed when complete."""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["replacing"]


@contextmanager
def replacing(path: str | Path) -> Iterator[Path]:
    """
    Yield a temporary path in ``path``'s folder to write to; when the block ends without an
    error it is renamed over ``path`` (atomic on one file system), and on any error, Ctrl-C
    included, it is removed: ``path`` is then exactly what it was before.

    The temporary name is new (pid and a random part), never an existing file: netCDF
    truncating an existing file costs a flush on close (0.4 s per 1.7 GB on ext4 here).
    """
    path = Path(path)
    temporary = path.with_name(f".{path.name}.{os.getpid()}.{uuid.uuid4().hex}.part")
    try:
        yield temporary
        os.replace(temporary, path)
    finally:
        temporary.unlink(missing_ok=True)  # gone already after a successful rename
