"""Progress on long work: a bar on a terminal, periodic log lines otherwise (cron, log files)."""

from __future__ import annotations

import logging
import time
from collections.abc import Iterable, Iterator

from tqdm.auto import tqdm

__all__ = ["LOG_EVERY", "track"]

LOG_EVERY = 10.0  # s between progress log lines when there is no terminal
logger = logging.getLogger("sweep.engine.progress")


def track(items: Iterable, total: int, points: int, label: str, bar: bool) -> Iterator:
    """
    Yield ``items`` (``total`` of them, covering ``points`` grid points) while reporting progress:
    a tqdm bar when ``bar``, else an INFO line at most every ``LOG_EVERY`` seconds and at the end
    with percent done, points per second and the time left.
    """
    if bar:
        yield from tqdm(items, total=total, unit="chunk", desc=label)
        return
    started = last = time.monotonic()
    done = 0
    for item in items:
        yield item
        done += 1
        now = time.monotonic()
        if now - last >= LOG_EVERY or done == total:
            last = now
            elapsed = max(now - started, 1e-9)
            rate = points * done / total / elapsed
            left = elapsed * (total - done) / done
            logger.info("%s: %3.0f%% (%d/%d chunks), %.3g points/s, about %.0f s left",
                        label, 100.0 * done / total, done, total, rate, left)
