"""Grid layout: the cube's dimension order and the chunks handed to workers."""

from __future__ import annotations

from typing import NamedTuple

__all__ = ["Chunk", "chunks", "speeds_per_chunk"]


class Chunk(NamedTuple):
    """One body and a contiguous run of arrival speeds, all targets and periapses."""

    body: int
    v_inf_start: int
    v_inf_stop: int


def chunks(shape: tuple[int, int, int, int], points_per_chunk: int = 1 << 20) -> list[Chunk]:
    """
    Split a (body, v_inf, target_altitude, periapsis_altitude) grid into chunks.

    Each chunk holds about ``points_per_chunk`` points (at least one arrival speed), so a
    chunk's arrays stay cache- and memory-friendly whatever the grid's size. The list is in
    grid order and depends only on the shape, never on the number of workers.
    """
    bodies, speeds, _, _ = shape
    step = speeds_per_chunk(shape, points_per_chunk)
    return [
        Chunk(body, start, min(start + step, speeds))
        for body in range(bodies)
        for start in range(0, speeds, step)
    ]


def speeds_per_chunk(shape: tuple[int, int, int, int], points_per_chunk: int = 1 << 20) -> int:
    """Arrival speeds in each chunk of :func:`chunks` (the last chunk of a body may hold fewer)."""
    _, _, targets, periapses = shape
    return max(1, points_per_chunk // max(targets * periapses, 1))
