"""The capture strategies and the feasibility codes, by name: what the cube's labels mean."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from sweep.physics.capture import Maneuver, direct_capture, three_burn_capture, two_burn_capture

__all__ = [
    "CHALLENGERS",
    "CROSSOVER_VARIABLES",
    "DIRECT",
    "FINITE_CROSSOVER_VARIABLES",
    "NO_STRATEGY",
    "THREE_BURN",
    "TWO_BURN",
    "STRATEGIES",
    "Geometry",
    "Strategy",
    "cube_labels",
    "pick_best",
    "strategy_names",
]

NO_STRATEGY = -1  # best strategy where no strategy is feasible


class Geometry(NamedTuple):
    """Radii of one body's grid, SI, shaped to broadcast as (v_inf, target, periapsis)."""

    gm: float  # m3 s-2
    periapsis_radius: np.ndarray  # m, shape (1, P)
    target_radius: np.ndarray  # m, shape (T, 1)
    apoapsis_radius: np.ndarray  # m, shape (T, P): the chosen three-burn apoapsis
    target_apoapsis: np.ndarray | None = None  # m, shape (T, 1): an elliptical target's apoapsis

    @property
    def target_far(self) -> np.ndarray:
        """The target orbit's apoapsis radius (its radius, for a circle)."""
        return self.target_radius if self.target_apoapsis is None else self.target_apoapsis


@dataclass(frozen=True)
class Strategy:
    """A capture sequence: its kernel, where its first burn is made, and what it means."""

    name: str
    description: str
    burns: int
    kernel: Callable[[np.ndarray, Geometry], Maneuver]
    first_burn_radius: Callable[[Geometry], np.ndarray]
    uses_periapsis: bool
    # For finite burns: where each burn is made, and the apsides of the orbit it aims for.
    burn_radii: Callable[[Geometry], list[np.ndarray]]
    orbits: Callable[[Geometry], list[tuple[np.ndarray, np.ndarray]]]


STRATEGIES: tuple[Strategy, ...] = (
    Strategy(
        name="direct",
        description="one burn at a periapsis placed at the target radius, hyperbola to circle",
        burns=1,
        kernel=lambda v, g: direct_capture(v, g.gm, g.target_radius, target_apoapsis=g.target_apoapsis),
        first_burn_radius=lambda g: g.target_radius,
        uses_periapsis=False,
        burn_radii=lambda g: [g.target_radius],
        orbits=lambda g: [(g.target_radius, g.target_far)],
    ),
    Strategy(
        name="two_burn",
        description="capture at the grid periapsis into the ellipse reaching the target radius, "
        "circularize there",
        burns=2,
        kernel=lambda v, g: two_burn_capture(v, g.gm, g.periapsis_radius, g.target_radius,
                                             target_apoapsis=g.target_apoapsis),
        first_burn_radius=lambda g: g.periapsis_radius,
        uses_periapsis=True,
        burn_radii=lambda g: [g.periapsis_radius, g.target_far],
        orbits=lambda g: [(g.periapsis_radius, g.target_far), (g.target_radius, g.target_far)],
    ),
    Strategy(
        name="three_burn",
        description="capture at the grid periapsis into a high ellipse, move periapsis to the target "
        "radius at apoapsis, lower apoapsis to the target radius",
        burns=3,
        kernel=lambda v, g: three_burn_capture(
            v, g.gm, g.periapsis_radius, g.target_radius, g.apoapsis_radius, target_apoapsis=g.target_apoapsis
        ),
        first_burn_radius=lambda g: g.periapsis_radius,
        uses_periapsis=True,
        burn_radii=lambda g: [g.periapsis_radius, g.apoapsis_radius, g.target_radius],
        orbits=lambda g: [(g.periapsis_radius, g.apoapsis_radius), (g.target_radius, g.apoapsis_radius),
                          (g.target_radius, g.target_far)],
    ),
)


def strategy_names() -> list[str]:
    """Names in cube order (the index along the ``strategy`` dimension)."""
    return [strategy.name for strategy in STRATEGIES]


DIRECT = strategy_names().index("direct")  # the reference every saving and crossover is measured against
TWO_BURN = strategy_names().index("two_burn")
THREE_BURN = strategy_names().index("three_burn")
CHALLENGERS = tuple(i for i, name in enumerate(strategy_names()) if name != "direct")  # crossover_v_inf order

# Cube variables holding each challenger's equal-cost arrival speed against direct.
CROSSOVER_VARIABLES = {"two_burn": "crossover_v_inf", "three_burn": "three_burn_crossover_v_inf"}
FINITE_CROSSOVER_VARIABLES = {"two_burn": "finite_crossover_v_inf", "three_burn": "finite_three_burn_crossover_v_inf"}


def cube_labels(dataset) -> tuple[list[str], list[str]]:
    """Body and strategy names of a cube, in dimension order (from its label variables)."""
    return ([str(n) for n in dataset["body_name"].values], [str(n) for n in dataset["strategy_name"].values])


def pick_best(totals: np.ndarray, propellant: np.ndarray, direct: int = DIRECT):
    """
    Cheapest feasible strategy along axis 0 (first on ties), with the savings over ``direct``.

    A pairwise pass: several times faster than argmin and take_along_axis over the short
    strategy axis. Returns (best index or -1, saving in delta-v, saving in propellant).
    """
    best = np.zeros(totals.shape[1:], dtype=np.int8)
    best_dv = np.where(np.isnan(totals[0]), np.inf, totals[0])
    best_propellant = propellant[0].copy()
    for index in range(1, totals.shape[0]):
        better = totals[index] < best_dv
        best[better] = index
        np.copyto(best_dv, totals[index], where=better)
        np.copyto(best_propellant, propellant[index], where=better)
    best[np.isinf(best_dv)] = NO_STRATEGY
    return best, totals[direct] - best_dv, propellant[direct] - best_propellant
