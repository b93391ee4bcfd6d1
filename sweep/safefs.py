"""Files made safely in folders other users may write: nothing followed, nothing of theirs touched.

An output folder other users can write lets them plant symbolic links (or hard links, or
FIFOs) at the names capsweep writes; following one would truncate or append to their target,
with our rights. So every file capsweep makes in an output folder is new: created
exclusively (``O_CREAT | O_EXCL | O_NOFOLLOW``, which :func:`tempfile.mkstemp` does) under a
random name, then renamed over the final name (a rename replaces a link at that name, it
never writes through it). The log, the one file appended to, is opened with ``O_NOFOLLOW``
and kept only if it is a regular file of ours with one link. And :func:`check_folder` refuses
a folder where another user could rename or remove our files between our steps.
"""

from __future__ import annotations

import errno
import logging
import os
import re
import stat
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import TextIO

from sweep.errors import SweepError

__all__ = ["PART_SUFFIX", "check_folder", "make_folder", "open_log", "output_mode", "remove_stale_parts",
           "temporary_beside"]

PART_SUFFIX = ".part"
# What temporary_beside names: ".<final name>.<pid>.<mkstemp's 8 random characters>.part"; the
# uuid4 hex (32 characters) of older versions matches too. fullmatch: no newline slips through.
_PART = re.compile(r"\.[^\n/]+\.(?P<pid>[0-9]+)\.[a-z0-9_]{8,32}\.part")
# Checkpoint temporaries of older versions, without a pid: written only under the folder's lock.
_OLD_CHUNK_PART = re.compile(r"chunk-[0-9]{6}\.part")
_FOLDER_MODE = 0o755  # new folders: nobody else may write (the umask can only remove more)
logger = logging.getLogger(__name__)


def output_mode() -> int:
    """The permissions an ordinary ``open(path, "w")`` would give a new file: 0o666 less the umask."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:  # reads the umask without changing it
            umask = next(int(line.split()[1], 8) for line in status if line.startswith("Umask:"))
    except (OSError, StopIteration, ValueError, IndexError):
        umask = 0o022
    return 0o666 & ~umask


def check_folder(folder: str | Path) -> None:
    """
    Refuse ``folder`` if another user could tamper with the files we make in it.

    Accepted: a folder owned by the current user that only they can write, or one with the
    sticky bit (``chmod +t``: others may add entries but not rename or remove ours). A
    symbolic link as the folder must be ours (or root's). A folder that does not exist passes
    (whoever makes it next makes it ours).

    Raises
    ------
    SweepError
        Naming the folder, its owner and mode, and what to do.
    """
    folder = Path(folder)
    me = os.geteuid()
    try:
        link, info = os.lstat(folder), os.stat(folder)
    except (FileNotFoundError, NotADirectoryError):
        return  # making it will fail or make it ours
    except OSError as err:
        raise SweepError(f"{folder}: output folder cannot be written: {err.strerror or err} (choose another with --out)"
                         ) from err
    mode = stat.S_IMODE(info.st_mode)
    hint = "choose another with --out"
    if stat.S_ISLNK(link.st_mode) and link.st_uid not in (me, 0):
        raise SweepError(f"{folder}: output folder is a symbolic link owned by uid {link.st_uid}, not by you "
                         f"(uid {me}): another user chose where it points; {hint}")
    if not stat.S_ISDIR(info.st_mode):
        raise SweepError(f"{folder}: output folder is not a folder; {hint}")
    if info.st_uid != me:
        raise SweepError(f"{folder}: output folder is owned by uid {info.st_uid} (mode {mode:04o}), not by you "
                         f"(uid {me}): its owner could replace your files; {hint}")
    if mode & 0o022 and not mode & stat.S_ISVTX:
        raise SweepError(f"{folder}: output folder is writable by group or others (mode {mode:04o}) without the "
                         f"sticky bit: they could replace your files; run chmod go-w (or chmod +t) on it, or {hint}")


def make_folder(folder: str | Path, mode: int = _FOLDER_MODE) -> None:
    """Make ``folder`` (and its parents) if missing, writable by us only, then :func:`check_folder` it.

    Raises OSError when it cannot be made, :class:`SweepError` when it is not safe to write in.
    """
    Path(folder).mkdir(mode=mode, parents=True, exist_ok=True)
    check_folder(folder)


def temporary_beside(path: str | Path) -> tuple[int, Path]:
    """
    A new, empty, regular file in ``path``'s folder, named for ``path`` and this process; return
    its open descriptor (the caller closes it) and its path.

    Made by :func:`tempfile.mkstemp` (exclusive, no link followed, random name), then given the
    permissions of an ordinary new file (:func:`output_mode`) since mkstemp makes it 0o600.
    """
    path = Path(path)
    descriptor, name = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=PART_SUFFIX, dir=path.parent)
    try:
        os.fchmod(descriptor, output_mode())
    except OSError:
        os.close(descriptor)
        os.unlink(name)
        raise
    return descriptor, Path(name)


def open_log(path: str | Path) -> TextIO:
    """
    Open the log file ``path`` for appending (making it if missing), as text.

    Raises
    ------
    SweepError
        ``path`` is a symbolic link (not followed), not a regular file (a FIFO, a folder), not
        owned by the current user, or has other hard links: appending could write into
        someone else's file.
    """
    flags = os.O_WRONLY | os.O_APPEND | os.O_CREAT | os.O_NOFOLLOW | os.O_NONBLOCK | os.O_CLOEXEC
    refusal = f"{path}: refusing to append to the log file: "
    try:
        descriptor = os.open(path, flags, output_mode())  # O_NONBLOCK: a planted FIFO cannot hang the run
    except OSError as err:
        reason = {errno.ELOOP: "it is a symbolic link (not followed)", errno.ENXIO: "it is not a regular file",
                  errno.EISDIR: "it is a folder"}.get(err.errno)
        if reason is None:  # not a planted file: a full disk, a read-only folder; reported as a failed write
            raise
        raise SweepError(f"{refusal}{reason}; remove it") from err
    info = os.fstat(descriptor)
    problem = ("it is not a regular file" if not stat.S_ISREG(info.st_mode)
               else f"it is owned by uid {info.st_uid}, not by you (uid {os.geteuid()})" if info.st_uid != os.geteuid()
               else f"it has {info.st_nlink} hard links" if info.st_nlink != 1 else None)
    if problem:
        os.close(descriptor)
        raise SweepError(f"{refusal}{problem}; remove it")
    os.set_blocking(descriptor, True)
    return os.fdopen(descriptor, "a", encoding="utf-8")


def remove_stale_parts(folder: str | Path, alive: Callable[[int], bool]) -> list[Path]:
    """
    Remove the temporaries (``*.part``) that killed capsweep runs left in ``folder``; return them.

    Only files of ours: named as :func:`temporary_beside` names them (or as older versions
    named checkpoint temporaries), regular files (not links) owned by the current user, whose
    writer ``alive(pid)`` says is gone. Call it holding the folder's lock (:mod:`sweep.lock`):
    every writer of checkpoints holds it, so a pid-less old checkpoint temporary is stale then.
    Anything else is left alone (a DEBUG line at most).
    """
    removed = []
    with os.scandir(folder) as entries:
        for entry in entries:
            match = _PART.fullmatch(entry.name) or _OLD_CHUNK_PART.fullmatch(entry.name)
            if match is None:
                continue
            info = entry.stat(follow_symlinks=False)
            if not stat.S_ISREG(info.st_mode) or info.st_uid != os.geteuid():
                logger.debug("leaving %r alone: not a regular file of this user", entry.path)
                continue
            if "pid" in match.groupdict() and alive(int(match["pid"])):
                continue  # a live writer's, e.g. `capsweep plot` into the same folder
            Path(entry.path).unlink(missing_ok=True)
            removed.append(Path(entry.path))
    return sorted(removed)
