"""A run is one transaction: the output folder's manifest says which files a finished run wrote.

``capsweep run`` writes ``.capsweep-manifest.json`` twice: once when the cube lands (the cube's
size and SHA-256, the run's fingerprint, ``complete`` false) and once more, last of all, after
the figures and the summary (every file it wrote, ``complete`` true). A folder is up to date
only when its manifest is complete, records the run's fingerprint and every file it lists is
there with the same size and hash. A run killed after the cube landed leaves the first
manifest, so the next run knows the cube is whole and redoes the report only.

Hashing reads every listed file once per check, the cube included: SHA-256 of a 1 GiB file from
the page cache took 0.72 to 0.77 s with :func:`file_digest` on this 2-core machine (best of 3,
2026-12-03; about 1.4 GB/s), so checking a 17 GB cube costs some 12 s from the cache, the disk's
read time otherwise; far below recomputing it, and memory stays at one block.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import stat
from dataclasses import dataclass, field
from pathlib import Path

from sweep.atomic import replacing

__all__ = ["MANIFEST_NAME", "Assessment", "Manifest", "assess", "file_digest", "read_manifest", "record",
           "write_manifest"]

MANIFEST_NAME = ".capsweep-manifest.json"
_MANIFEST_BYTES = 1 << 20  # a manifest lists a few hundred files at most; a larger file is not ours
logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class Manifest:
    """What a run wrote into its output folder.

    Attributes
    ----------
    fingerprint : dict of str
        :func:`sweep.cube.conventions.fingerprint` of the run's config.
    cube : str
        The cube's file name.
    files : dict
        File name -> (size in bytes, SHA-256 hex digest), the cube included.
    complete : bool
        False when written as the cube landed, before the report.
    figures : bool
        Whether the run drew the figures.
    leftover : tuple of str
        Files of an earlier run's manifest still to be removed once the report is written.
    """

    fingerprint: dict[str, str]
    cube: str
    files: dict[str, tuple[int, str]]
    complete: bool
    figures: bool = True
    leftover: tuple[str, ...] = field(default=())

    def names(self) -> set[str]:
        """Every file this manifest answers for: those listed and the leftovers."""
        return set(self.files) | set(self.leftover)


@dataclass(frozen=True)
class Assessment:
    """What a run must redo in a folder: ``"nothing"``, ``"report"`` or ``"cube"`` (everything), and why."""

    redo: str
    reason: str
    manifest: Manifest | None


def file_digest(path: str | Path) -> str:
    """SHA-256 of a file, read in blocks (memory stays small whatever the size)."""
    with open(path, "rb") as file:
        return hashlib.file_digest(file, "sha256").hexdigest()


def record(paths: list[Path]) -> dict[str, tuple[int, str]]:
    """File name -> (size, SHA-256) of each path."""
    return {path.name: (path.stat().st_size, file_digest(path)) for path in paths}


def read_manifest(folder: str | Path) -> Manifest | None:
    """The folder's manifest, or None when there is none or it is not a readable manifest (logged)."""
    path = Path(folder) / MANIFEST_NAME
    try:
        descriptor = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK)
    except FileNotFoundError:
        return None
    except OSError as err:
        logger.info("manifest %s unreadable (%s): the run starts over", path, err.strerror or err)
        return None
    try:
        if not stat.S_ISREG(os.fstat(descriptor).st_mode):
            raise ValueError("not a regular file")
        with os.fdopen(descriptor, "rb", closefd=False) as file:
            raw = file.read(_MANIFEST_BYTES + 1)
        if len(raw) > _MANIFEST_BYTES:
            raise ValueError(f"larger than {_MANIFEST_BYTES} bytes")
        data = json.loads(raw.decode("utf-8"))
        files = {_plain(name): (int(size), str(digest)) for name, (size, digest) in data["files"].items()}
        manifest = Manifest({str(k): str(v) for k, v in data["fingerprint"].items()}, _plain(data["cube"]), files,
                            data["complete"] is True, data.get("figures", True) is True,
                            tuple(_plain(name) for name in data.get("leftover", [])))
    except (OSError, ValueError, KeyError, TypeError, AttributeError) as err:  # JSON errors are ValueErrors
        logger.info("manifest %s is not a capsweep manifest (%s): the run starts over", path, err)
        return None
    finally:
        os.close(descriptor)
    return manifest


def write_manifest(folder: str | Path, manifest: Manifest) -> Path:
    """Write ``manifest`` into ``folder`` atomically (whole or not at all); return its path."""
    path = Path(folder) / MANIFEST_NAME
    data = {"fingerprint": manifest.fingerprint, "cube": manifest.cube, "complete": manifest.complete,
            "figures": manifest.figures, "files": {name: list(entry) for name, entry in sorted(manifest.files.items())},
            "leftover": sorted(manifest.leftover)}
    with replacing(path) as temporary:
        temporary.write_text(json.dumps(data, indent=1) + "\n", encoding="utf-8")
    return path


def assess(folder: str | Path, cube: str, fingerprint: dict[str, str], figures: bool = True) -> Assessment:
    """
    What a run with ``fingerprint`` writing the cube ``cube`` must redo in ``folder``.

    ``"cube"``: no readable manifest, another fingerprint or cube name, or the cube missing or
    changed (size or hash); ``"report"``: the cube is the one recorded but the report was not
    finished, was drawn without the figures wanted now, or a file of it is missing or changed;
    ``"nothing"``: every file is as recorded.
    """
    folder = Path(folder)
    manifest = read_manifest(folder)
    if manifest is None:
        return Assessment("cube", "no manifest of a finished cube", None)
    if manifest.fingerprint != fingerprint or manifest.cube != cube:
        return Assessment("cube", "the manifest records other inputs or another capsweep version", manifest)
    if cube not in manifest.files or _differs(folder / cube, manifest.files[cube]):
        return Assessment("cube", f"{cube} is missing or differs from the manifest (size or SHA-256)", manifest)
    if not manifest.complete:
        return Assessment("report", "the report was not finished", manifest)
    if figures and not manifest.figures:
        return Assessment("report", "the figures were not drawn", manifest)
    changed = sorted(name for name, entry in manifest.files.items() if name != cube and _differs(folder / name, entry))
    if changed:
        return Assessment("report", f"missing or changed: {', '.join(changed)}", manifest)
    return Assessment("nothing", "every file matches the manifest", manifest)


def _differs(path: Path, entry: tuple[int, str]) -> bool:
    size, digest = entry
    try:
        return not path.is_file() or path.stat().st_size != size or file_digest(path) != digest
    except OSError:
        return True


def _plain(name: object) -> str:
    """A bare file name (no folder part, not hidden): a manifest never points outside its folder."""
    if not isinstance(name, str) or not name or name != Path(name).name or name.startswith("."):
        raise ValueError(f"not a plain file name: {name!r}")
    return name
