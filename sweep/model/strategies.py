"""The strategy registry: every capture sequence by name, with all that differs between them."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from sweep.model.variables import DIMENSIONS, Variable
from sweep.physics.capture import (
    Maneuver,
    best_plane_change_split,
    best_three_burn_turn,
    direct_capture,
    three_burn_capture,
    two_burn_capture,
)

__all__ = [
    "DIRECT",
    "NO_STRATEGY",
    "OKABE_ITO",
    "REFERENCE",
    "STRATEGIES",
    "Geometry",
    "Strategy",
    "Turn",
    "challengers",
    "crossover_variable",
    "cube_labels",
    "lookup",
    "max_burns",
    "pick_best",
    "register",
    "strategy_colour",
    "strategy_names",
    "unregister",
]

NO_STRATEGY = -1  # best strategy where no strategy is feasible
_KM = 1.0e3  # m per km


class _GeometryFields(NamedTuple):
    gm: float
    periapsis_radius: np.ndarray
    target_radius: np.ndarray
    apoapsis_radius: np.ndarray
    target_apoapsis: np.ndarray | None
    apoapsis_limit: np.ndarray


class Geometry(_GeometryFields):
    """
    Radii of one body's grid, SI, shaped to broadcast as (v_inf, target, periapsis).

    ``gm`` [m3 s-2]; ``periapsis_radius`` [m] (1, P); ``target_radius`` [m] (T, 1);
    ``apoapsis_radius`` [m] (T, P), the chosen coplanar three-burn apoapsis; ``target_apoapsis``
    [m] (T, 1), an elliptical target's apoapsis, None for a circle; ``apoapsis_limit`` [m] (T, P),
    the largest admissible three-burn apoapsis (the bound and any time cap), within which a
    sequence with a plane change may choose its own. Without one it is ``apoapsis_radius``: no
    higher apoapsis is known to be admissible. Every field is then an array (or the float
    ``gm``), so code that indexes each field of a Geometry keeps working.
    """

    __slots__ = ()

    def __new__(cls, gm, periapsis_radius, target_radius, apoapsis_radius, target_apoapsis=None,
                apoapsis_limit=None):
        return super().__new__(cls, gm, periapsis_radius, target_radius, apoapsis_radius, target_apoapsis,
                               apoapsis_radius if apoapsis_limit is None else apoapsis_limit)

    @property
    def target_far(self) -> np.ndarray:
        """The target orbit's apoapsis radius (its radius, for a circle)."""
        return self.target_radius if self.target_apoapsis is None else self.target_apoapsis


# Okabe and Ito (2008), "Color Universal Design": distinguishable with the common colour-vision deficiencies.
OKABE_ITO = {
    "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73", "yellow": "#F0E442",
    "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7", "black": "#000000",
}


class Turn(NamedTuple):
    """A strategy's sequence with a plane change: its burns, and named extra per-point results."""

    maneuver: Maneuver
    extras: dict[str, np.ndarray]  # cube variable name -> values, e.g. how a turn was split


@dataclass(frozen=True)
class Strategy:
    """
    A capture sequence: everything that differs from one strategy to the next. The engine, the
    cube, the reports and the figures loop over :data:`STRATEGIES`; a new strategy is one
    entry (and its kernels in :mod:`sweep.physics`).
    """

    name: str
    description: str
    burns: int
    kernel: Callable[[np.ndarray, Geometry], Maneuver]
    first_burn_radius: Callable[[Geometry], np.ndarray]
    uses_periapsis: bool  # feasibility: the grid periapsis must be safe and inside the bound
    # For finite burns: where each burn is made, and the apsides of the orbit it aims for.
    burn_radii: Callable[[Geometry], list[np.ndarray]]
    orbits: Callable[[Geometry], list[tuple[np.ndarray, np.ndarray]]]
    # The sequence with a plane change ``angle`` (radians) made as this strategy makes it;
    # ``how`` says so in the cube's metadata.
    turn: Callable[[np.ndarray, Geometry, np.ndarray], Turn]
    turn_how: str
    colour: str  # figures: fills and lines
    line_style: tuple[str, str] = ("-", "o")  # figures: its crossover lines (dash pattern, marker)
    # Cube variables holding its equal-cost arrival speed against the reference (direct);
    # None: "<name>_crossover_v_inf" and "finite_<name>_crossover_v_inf".
    crossover_name: str | None = None
    finite_crossover_name: str | None = None
    # Outputs of its own (registry entries, with their stage), beyond those every strategy has:
    # ``outputs(geometry, body_radius)`` gives the per-point ones of the "impulsive" stage in
    # cube units, shaped (target, periapsis); ``turn`` gives those of the "plane" stage.
    variables: tuple[Variable, ...] = ()
    outputs: Callable[[Geometry, float], dict[str, np.ndarray]] = field(default=lambda g, radius: {}, compare=False)

    @property
    def crossover_variable(self) -> str:
        return self.crossover_name or f"{self.name}_crossover_v_inf"

    @property
    def finite_crossover_variable(self) -> str:
        return self.finite_crossover_name or f"finite_{self.name}_crossover_v_inf"


def _two_burn_turn(v, g: Geometry, angle) -> Turn:
    split = best_plane_change_split(v, g.gm, g.periapsis_radius, g.target_radius, angle, g.target_apoapsis)
    maneuver = two_burn_capture(v, g.gm, g.periapsis_radius, g.target_radius, angle, split,
                                target_apoapsis=g.target_apoapsis)
    return Turn(maneuver, {"two_burn_first_plane_change": np.degrees(split)})


def _three_burn_turn(v, g: Geometry, angle) -> Turn:
    # Apoapsis and split chosen jointly for the turn, up to the coplanar plan's limit (bound and time
    # cap); without a turn exactly the coplanar sequence, so the cube's zero angle equals delta_v.
    radius, first, third = best_three_burn_turn(v, g.gm, g.periapsis_radius, g.target_radius, g.apoapsis_limit,
                                                angle, g.target_apoapsis, g.apoapsis_radius)
    coplanar = np.equal(angle, 0.0)
    radius = np.where(coplanar, g.apoapsis_radius, radius)
    first, third = (np.where(coplanar, 0.0, share) for share in (first, third))
    return Turn(three_burn_capture(v, g.gm, g.periapsis_radius, g.target_radius, radius, angle, g.target_apoapsis,
                                   first, third), {})


# The registry, in cube order (the index along the ``strategy`` dimension). The reference every
# saving and crossover is measured against comes first.
STRATEGIES: list[Strategy] = [
    Strategy(
        name="direct",
        description="one burn at a periapsis placed at the target radius, hyperbola to circle",
        burns=1,
        kernel=lambda v, g: direct_capture(v, g.gm, g.target_radius, target_apoapsis=g.target_apoapsis),
        first_burn_radius=lambda g: g.target_radius,
        uses_periapsis=False,
        burn_radii=lambda g: [g.target_radius],
        orbits=lambda g: [(g.target_radius, g.target_far)],
        turn=lambda v, g, angle: Turn(direct_capture(v, g.gm, g.target_radius, angle, g.target_apoapsis), {}),
        turn_how="with its one burn",
        colour=OKABE_ITO["blue"],
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
        turn=_two_burn_turn,
        turn_how="split between its burns as cheapest (scan and golden section)",
        variables=(Variable("two_burn_first_plane_change", (*DIMENSIONS, "plane_change"), "degree",
                            "part of the plane change two_burn makes with its first burn (the rest with the second)",
                            "plane", when="plane_change"),),
        colour=OKABE_ITO["orange"],
        line_style=("--", "o"),
        crossover_name="crossover_v_inf",
        finite_crossover_name="finite_crossover_v_inf",
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
        turn=_three_burn_turn,
        turn_how="split over its three burns as cheapest, jointly with an apoapsis chosen anew for the turn "
        "within the coplanar bound and time cap (scan, then golden section): mostly at apoapsis, a part with the "
        "first (periapsis) and third (target) burns, whose large speed changes absorb a small turn almost free, "
        "and most or all of it with the first burn where the apoapsis is held low",
        variables=(Variable("intermediate_apoapsis_altitude", DIMENSIONS, "km", "three_burn intermediate apoapsis "
                            "altitude minimising total delta-v within the bound", "impulsive",
                            attrs=lambda config: {"comment": "NaN where three_burn is infeasible"}),),
        outputs=lambda g, radius: {"intermediate_apoapsis_altitude": (g.apoapsis_radius - radius) / _KM},
        colour=OKABE_ITO["bluish_green"],
        line_style=(":", "s"),
    ),
]
REFERENCE = "direct"  # the strategy every saving and crossover is measured against
DIRECT = 0  # its index: always first
# Colours for strategies a cube names but this registry does not (cubes of other versions).
SPARE_COLOURS = (OKABE_ITO["reddish_purple"], OKABE_ITO["sky_blue"], OKABE_ITO["yellow"])


def register(strategy: Strategy) -> None:
    """Add ``strategy`` to the registry (last in cube order); its name must be new."""
    if strategy.name in strategy_names():
        raise ValueError(f"strategy {strategy.name!r} is registered already")
    STRATEGIES.append(strategy)


def unregister(name: str) -> None:
    """Remove strategy ``name`` (not the reference)."""
    if name == REFERENCE:
        raise ValueError(f"the reference strategy {REFERENCE!r} cannot be removed")
    STRATEGIES[:] = [s for s in STRATEGIES if s.name != name]


def strategy_names() -> list[str]:
    """Names in cube order (the index along the ``strategy`` dimension)."""
    return [strategy.name for strategy in STRATEGIES]


def challengers() -> list[tuple[int, Strategy]]:
    """(cube index, entry) of every strategy measured against the reference, in cube order."""
    return [(i, s) for i, s in enumerate(STRATEGIES) if s.name != REFERENCE]


def max_burns() -> int:
    """Burns of the longest sequence: the length of the cube's ``burn`` axis."""
    return max(s.burns for s in STRATEGIES)


def lookup(name: str) -> Strategy | None:
    """The registry entry called ``name``; None for a name this version does not know."""
    return next((s for s in STRATEGIES if s.name == name), None)


def crossover_variable(name: str, finite: bool = False) -> str:
    """The cube variable of strategy ``name``'s crossover speed (registered or not)."""
    entry = lookup(name)
    if entry is not None:
        return entry.finite_crossover_variable if finite else entry.crossover_variable
    return f"finite_{name}_crossover_v_inf" if finite else f"{name}_crossover_v_inf"


def strategy_colour(name: str, index: int = 0) -> str:
    """The figure colour of strategy ``name``; a spare one for names this registry lacks."""
    entry = lookup(name)
    return entry.colour if entry is not None else SPARE_COLOURS[index % len(SPARE_COLOURS)]


def cube_labels(dataset) -> tuple[list[str], list[str]]:
    """Body and strategy names of a cube, in dimension order (from its label variables)."""
    return ([str(n) for n in dataset["body_name"].values], [str(n) for n in dataset["strategy_name"].values])


def pick_best(totals: np.ndarray, propellant: np.ndarray, direct: int = DIRECT, tie_tolerance: float = 0.0):
    """
    The winning feasible strategy along axis 0, with its savings over ``direct``.

    Strategies are taken in registry order, from the simplest (fewest burns: direct, two_burn,
    three_burn), and a strategy replaces the one holding the lead only if it is cheaper by more
    than ``tie_tolerance`` (m/s): within it the two are tied and the simpler keeps the lead. So
    every win is a saving of more than the tolerance over each strategy it displaced (over
    direct, where direct is feasible), and the winner costs at most the tolerance more than the
    cheapest. With a tolerance of zero the winner is the cheapest, first on exact ties.
    Pairwise passes: several times faster than argmin and take_along_axis over the short
    strategy axis. Returns (best index or -1, saving in delta-v, saving in propellant).
    """
    best = np.zeros(totals.shape[1:], dtype=np.int8)
    best_dv = np.where(np.isnan(totals[0]), np.inf, totals[0])
    best_propellant = propellant[0].copy()
    for index in range(1, totals.shape[0]):
        better = totals[index] < best_dv - tie_tolerance
        best[better] = index
        np.copyto(best_dv, totals[index], where=better)
        np.copyto(best_propellant, propellant[index], where=better)
    best[np.isinf(best_dv)] = NO_STRATEGY
    return best, totals[direct] - best_dv, propellant[direct] - best_propellant
