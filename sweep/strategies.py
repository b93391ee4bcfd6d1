"""The capture strategies and the feasibility codes, by name: what the cube's labels mean."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from sweep.physics.capture import Maneuver, direct_capture, three_burn_capture, two_burn_capture

__all__ = ["STATUSES", "STRATEGIES", "Geometry", "Status", "Strategy", "strategy_names"]


class Geometry(NamedTuple):
    """Radii of one body's grid, SI, shaped to broadcast as (v_inf, target, periapsis)."""

    gm: float  # m3 s-2
    periapsis_radius: np.ndarray  # m, shape (1, P)
    target_radius: np.ndarray  # m, shape (T, 1)
    apoapsis_radius: np.ndarray  # m, shape (T, P): the chosen three-burn apoapsis


@dataclass(frozen=True)
class Strategy:
    """A capture sequence: its kernel, where its first burn is made, and what it means."""

    name: str
    description: str
    burns: int
    kernel: Callable[[np.ndarray, Geometry], Maneuver]
    first_burn_radius: Callable[[Geometry], np.ndarray]
    uses_periapsis: bool


STRATEGIES: tuple[Strategy, ...] = (
    Strategy(
        name="direct",
        description="one burn at a periapsis placed at the target radius, hyperbola to circle",
        burns=1,
        kernel=lambda v, g: direct_capture(v, g.gm, g.target_radius),
        first_burn_radius=lambda g: g.target_radius,
        uses_periapsis=False,
    ),
    Strategy(
        name="two_burn",
        description="capture at the grid periapsis into the ellipse reaching the target radius, "
        "circularize there",
        burns=2,
        kernel=lambda v, g: two_burn_capture(v, g.gm, g.periapsis_radius, g.target_radius),
        first_burn_radius=lambda g: g.periapsis_radius,
        uses_periapsis=True,
    ),
    Strategy(
        name="three_burn",
        description="capture at the grid periapsis into a high ellipse, move periapsis to the target "
        "radius at apoapsis, lower apoapsis to the target radius",
        burns=3,
        kernel=lambda v, g: three_burn_capture(
            v, g.gm, g.periapsis_radius, g.target_radius, g.apoapsis_radius
        ),
        first_burn_radius=lambda g: g.periapsis_radius,
        uses_periapsis=True,
    ),
)


def strategy_names() -> list[str]:
    """Names in cube order (the index along the ``strategy`` dimension)."""
    return [strategy.name for strategy in STRATEGIES]


class Status(NamedTuple):
    """A feasibility code of the cube's ``status`` variable."""

    name: str
    reason: str


# Index = code stored in the cube. Where several apply, the lowest non-zero code is stored.
STATUSES: tuple[Status, ...] = (
    Status("ok", "feasible"),
    Status(
        "sphere_of_influence_too_small",
        "the apoapsis bound (a fraction of the smaller of sphere of influence and Hill radius) does "
        "not reach above the lowest safe periapsis: no Keplerian capture is meaningful here",
    ),
    Status("target_below_safe_altitude", "target altitude below the body's lowest safe periapsis altitude"),
    Status("target_outside_bound", "target radius beyond the apoapsis bound"),
    Status("periapsis_below_safe_altitude", "grid periapsis below the body's lowest safe periapsis altitude"),
    Status("periapsis_outside_bound", "grid periapsis beyond the apoapsis bound"),
    Status(
        "time_limit_exceeded",
        "even the smallest admissible sequence takes longer than three_burn.max_time_to_orbit",
    ),
)
