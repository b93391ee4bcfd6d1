"""One writer per output folder: an OS lock (``flock``) on a file that names its holder.

The lock is :class:`filelock.UnixFileLock`: the kernel holds it for the open file and drops it
when the holder exits however it exits (``kill -9`` included), so a stale lock cannot exist and
there is nothing to take over; of processes racing for a free lock exactly one wins. What the
file holds is only a note for people: the holder writes its pid, host and start time into it
once it has the lock, and a refused run quotes that note. An empty, garbled or old note (a
process that died, or this very pid after a container restart) blocks nothing.
"""

from __future__ import annotations

import errno
import json
import logging
import os
import socket
import stat
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from sweep.errors import SweepError
from sweep.safefs import make_folder

__all__ = ["LOCK_NAME", "LockError", "output_lock"]

LOCK_NAME = ".capsweep.lock"
_NOTE_BYTES = 4096  # a note is well under this; a longer file is not one of ours
_ATTEMPTS = 3  # tries of a lock seen held without a note (released meanwhile)
_NOTE_WAIT = 1.0  # s: how long a refused run waits for the holder's note, written just after its lock
logger = logging.getLogger(__name__)


class LockError(SweepError):
    """Another live capsweep process holds the output folder."""


@contextmanager
def output_lock(folder: str | Path) -> Iterator[Path]:
    """
    Hold ``folder``'s lock while the block runs; yield the lock file's path.

    Raises
    ------
    LockError
        Another process (or another ``output_lock`` in this one) holds the lock; the message
        names its pid, host and start time from its note.
    SweepError
        The folder or the lock file cannot be made or opened (a symbolic link at the lock
        file's name is refused, not followed).

    Notes
    -----
    The lock is tried once, not waited for. The lock file is removed while still locked, just
    before the release: a run that opened it meanwhile sees an unlinked file and does not count
    its lock, so the next run locks a new file and only one writer ever holds the name.
    """
    from filelock import Timeout, UnixFileLock  # here, not above: the command line's --help stays light

    folder = Path(folder)
    path = folder / LOCK_NAME
    try:
        make_folder(folder)
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: cannot write output: {err.strerror or err}") from err
    note = {"pid": os.getpid(), "host": socket.gethostname(), "started": time.strftime("%Y-%m-%dT%H:%M:%S%z")}
    found = _read_note(path)  # what an earlier holder left, if anything
    held: list[os.stat_result] = []
    refused: list[os.stat_result] = []

    def write_note(descriptor: int) -> None:
        info = os.fstat(descriptor)
        if not stat.S_ISREG(info.st_mode) or info.st_uid != os.geteuid() or info.st_nlink != 1:
            refused.append(info)  # another user's file, or a hard link to some file: truncating it would destroy it
            return
        os.ftruncate(descriptor, 0)
        os.pwrite(descriptor, json.dumps(note).encode(), 0)
        held.append(os.fstat(descriptor))

    # Separate instances (no singleton), tried once: a second output_lock in this process is refused too.
    # No soft (existence-file) fallback: without flock there is no safe lock to take.
    lock = UnixFileLock(path, blocking=False, is_singleton=False, fallback_to_soft=False, on_acquired=write_note)
    for attempt in range(_ATTEMPTS):
        try:
            lock.acquire()
            break
        except Timeout:
            holder = _holder_note(path)
            # No note: the holder released and removed the file in the meantime; try the new file.
            if holder or attempt == _ATTEMPTS - 1:
                raise LockError(
                    f"{folder}: output folder is in use by capsweep pid {holder.get('pid', '?')} on "
                    f"{holder.get('host', '?')} since {holder.get('started', '?')} (lock file {path}); "
                    "wait for it to finish"
                ) from None
        except OSError as err:
            reason = "a symbolic link, not followed; remove it" if err.errno == errno.ELOOP else err.strerror or err
            raise SweepError(f"{path}: cannot take the output folder's lock file: {reason}") from err
    if refused:
        lock.release()
        raise SweepError(f"{path}: cannot take the output folder's lock file: not a regular file of yours with one "
                         f"link (owner uid {refused[0].st_uid}, {refused[0].st_nlink} links); remove it")
    if found:
        logger.info("lock file %s was left by pid %s on %s since %s; its lock was free (that run has ended)",
                    path, found.get("pid", "?"), found.get("host", "?"), found.get("started", "?"))
    try:
        yield path
    finally:
        try:
            if held and os.path.samestat(os.lstat(path), held[0]):
                path.unlink()
        except OSError:
            pass  # removed or replaced by hand: nothing of ours to remove
        finally:
            lock.release()


def _holder_note(path: Path) -> dict:
    """The holder's note; it writes it just after taking the lock, so a moment's wait may be needed."""
    deadline = time.monotonic() + _NOTE_WAIT
    while not (note := _read_note(path)) and path.exists() and time.monotonic() < deadline:
        time.sleep(0.02)
    return note


def _read_note(path: Path) -> dict:
    """The note in the lock file, or {} for anything else: no file, a symbolic link, empty, partial, garbage."""
    try:
        descriptor = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK)
    except OSError:
        return {}
    try:
        note = json.loads(os.read(descriptor, _NOTE_BYTES).decode("utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return {}
    finally:
        os.close(descriptor)
    return note if isinstance(note, dict) and isinstance(note.get("pid"), int) else {}
