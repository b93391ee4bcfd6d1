"""One writer per output folder: a lock file naming its holder, taken over when the holder is dead."""

from __future__ import annotations

import json
import logging
import os
import socket
import time
from contextlib import contextmanager
from pathlib import Path

from sweep.engine.processes import alive
from sweep.errors import SweepError

__all__ = ["LockError", "output_lock"]

LOCK_NAME = ".capsweep.lock"
logger = logging.getLogger(__name__)


class LockError(SweepError):
    """Another live capsweep process holds the output folder."""


@contextmanager
def output_lock(folder: Path):
    """
    Hold ``folder``'s lock while the block runs.

    The lock file is created exclusively and records pid, host and start time. A lock whose
    holder is a dead process on this host is stale and taken over (logged); a live holder, or a
    holder on another host (which cannot be checked from here), makes this raise :class:`LockError`.
    """
    path = folder / LOCK_NAME
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: cannot write output: {err.strerror or err}") from err
    record = {"pid": os.getpid(), "host": socket.gethostname(), "started": time.strftime("%Y-%m-%dT%H:%M:%S%z")}
    for _ in range(2):
        try:
            handle = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except PermissionError as err:
            raise SweepError(f"{path}: cannot write output: {err.strerror}") from err
        except FileExistsError:
            try:
                holder = json.loads(path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                holder = {}
            pid, host = holder.get("pid"), holder.get("host")
            if isinstance(pid, int) and host == record["host"] and not alive(pid):
                logger.warning("taking over a stale lock %s left by dead process %d", path, pid)
                path.unlink(missing_ok=True)
                continue
            raise LockError(
                f"{folder}: output folder is in use by capsweep pid {pid} on {host} since "
                f"{holder.get('started', '?')} (lock file {path}); wait for it, or remove the lock file if that "
                "process is gone"
            ) from None
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            json.dump(record, stream)
        break
    try:
        yield path
    finally:
        path.unlink(missing_ok=True)
