"""Processes and cores: whether a pid is alive, and how many workers a run may use."""

from __future__ import annotations

import os

import joblib

__all__ = ["alive", "worker_count"]


def alive(pid: int) -> bool:
    """True if process ``pid`` exists on this host (owned by anyone)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    except (OverflowError, ValueError):  # not a pid this system can have
        return False
    return True


def worker_count(workers: int | None = None) -> int:
    """
    ``workers``, or every core this process may run on when None or 0. ``joblib.cpu_count``
    honours CPU affinity (``taskset``) and container quotas, where ``os.cpu_count`` does not.
    """
    return workers or max(joblib.cpu_count(), 1)
