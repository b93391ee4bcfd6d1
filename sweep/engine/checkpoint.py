"""Finished finite-burn chunks on disk, so that a killed run resumes where it stopped."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from sweep.atomic import replacing

__all__ = ["chunk_file", "load_chunk", "save_chunk"]


def chunk_file(folder: Path, index: int) -> Path:
    """Where chunk ``index`` of a run is saved."""
    return folder / f"chunk-{index:06d}.npz"


def save_chunk(folder: Path, index: int, result: dict[str, np.ndarray]) -> None:
    """Write one finished chunk's arrays (the variable registry's checkpointed ones) atomically:
    a new temporary file (no link followed), fsync, rename."""
    with replacing(chunk_file(folder, index)) as temporary, open(temporary, "wb") as stream:
        np.savez(stream, **result)
        stream.flush()
        os.fsync(stream.fileno())


def load_chunk(folder: Path, index: int) -> dict[str, np.ndarray]:
    """The arrays of chunk ``index`` as :func:`save_chunk` wrote them."""
    with np.load(chunk_file(folder, index)) as saved:
        return {name: saved[name] for name in saved.files}
