"""Finished finite-burn chunks on disk, so that a killed run resumes where it stopped.

A chunk file is trusted only after it is verified: it must be a regular file owned by this
user, and it carries the run's key (a hash of the config, the catalog, the version and the
strategy set), its chunk index, the name, dtype and shape of every array, and a SHA-256 of
their bytes. A chunk that fails any check is not used: the caller recomputes it (and says so in
a warning); nothing read from a checkpoint folder can change a cube without passing these checks.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import stat
import zipfile
from collections.abc import Iterable
from pathlib import Path

import numpy as np

from sweep.atomic import replacing

__all__ = ["chunk_file", "load_chunk", "run_key", "save_chunk"]

logger = logging.getLogger(__name__)

_META = "__checkpoint__"  # the member of each chunk file holding its metadata (JSON)


def run_key(fingerprint: dict[str, str], strategies: Iterable[str]) -> str:
    """The key a run's chunks carry: the inputs' fingerprint and the strategy set, hashed."""
    text = json.dumps({"fingerprint": fingerprint, "strategies": list(strategies)}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()


def chunk_file(folder: Path, index: int) -> Path:
    """Where chunk ``index`` of a run is saved."""
    return folder / f"chunk-{index:06d}.npz"


def _digest(arrays: dict[str, np.ndarray]) -> str:
    digest = hashlib.sha256()
    for name in sorted(arrays):
        values = np.ascontiguousarray(arrays[name])
        digest.update(f"{name}:{values.dtype.str}:{values.shape};".encode())
        digest.update(values.tobytes())
    return digest.hexdigest()


def _describe(arrays: dict[str, np.ndarray]) -> dict[str, list]:
    return {name: [np.asarray(values).dtype.str, list(np.shape(values))] for name, values in sorted(arrays.items())}


def save_chunk(folder: Path, index: int, result: dict[str, np.ndarray], key: str = "") -> None:
    """
    Write one finished chunk's arrays (the variable registry's checkpointed ones) with their
    metadata and checksum, atomically: a new temporary file (no link followed), fsync, rename over
    the final name.
    """
    meta = {"key": key, "index": index, "arrays": _describe(result), "sha256": _digest(result)}
    with replacing(chunk_file(folder, index)) as temporary, open(temporary, "wb") as stream:
        np.savez(stream, **result, **{_META: np.array(json.dumps(meta))})
        stream.flush()
        os.fsync(stream.fileno())


def load_chunk(folder: Path, index: int, key: str = "",
               expected: dict[str, tuple[np.dtype, tuple[int, ...]]] | None = None) -> dict[str, np.ndarray] | None:
    """
    The arrays of chunk ``index``, verified; None (with a warning naming the file and the
    reason) when the file is not a regular file of this user, unreadable, of another run
    (``key``) or chunk, lacks or adds arrays, has other dtypes or shapes than ``expected``
    (name -> (dtype, shape)), or fails its checksum.
    """
    path = chunk_file(folder, index)
    try:
        arrays, meta = _read(path)
        problem = _problem(arrays, meta, index, key, expected)
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile) as err:
        problem = f"unreadable ({type(err).__name__}: {err})"
    if problem is None:
        return arrays
    logger.warning("checkpoint %s not used, it will be recomputed: %s", path, problem)
    return None


def _read(path: Path) -> tuple[dict[str, np.ndarray], dict]:
    """Read a chunk file without following a symlink; only a regular file this user owns."""
    handle = os.open(path, os.O_RDONLY | os.O_NOFOLLOW)
    with os.fdopen(handle, "rb") as stream:
        status = os.fstat(stream.fileno())
        if not stat.S_ISREG(status.st_mode) or status.st_uid != os.geteuid():
            raise ValueError("not a regular file owned by this user")
        with np.load(stream, allow_pickle=False) as saved:
            arrays = {name: saved[name] for name in saved.files}
    meta = json.loads(str(arrays.pop(_META)))
    return arrays, meta


def _problem(arrays, meta, index, key, expected) -> str | None:
    if meta.get("key") != key:
        return "saved by another run (inputs, version or strategies differ)"
    if meta.get("index") != index:
        return f"holds chunk {meta.get('index')!r}, not chunk {index}"
    described = _describe(arrays)
    if meta.get("arrays") != described:
        return "its arrays differ from those its record lists"
    if expected is not None:
        wanted = {name: [np.dtype(dtype).str, list(shape)] for name, (dtype, shape) in sorted(expected.items())}
        if described != wanted:
            return "its arrays are not this run's (names, dtypes or shapes differ)"
    if meta.get("sha256") != _digest(arrays):
        return "checksum mismatch (the file was altered or damaged)"
    return None
