"""Feasibility codes: what the cube's ``status`` and ``finite_status`` values mean."""

from __future__ import annotations

from typing import NamedTuple

__all__ = ["STATUSES", "Status", "status_code"]


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
    # Finite burns only (finite_status); same order as sweep.physics.finite_burn.OUTCOMES[1:].
    Status("engine_cannot_capture", "finite burn: the craft leaves the sphere of influence before the "
           "burn reaches the intended orbit's energy"),
    Status("propellant_exhausted", "finite burn: the whole arrival mass would be burned before the "
           "intended orbit's energy is reached"),
    Status("surface_impact", "finite burn: the trajectory, or the orbit finally reached, meets the body's "
           "mean surface"),
    Status("below_safe_altitude", "finite burn: the sequence, aimed as well as it can be, passes below the body's "
           "lowest safe periapsis altitude (by more than 0.1 km) somewhere: approach, burns, coasts or trim"),
    Status("aim_not_met", "finite burn: aimed and split as far as allowed, the burns end so far from the target "
           "orbit that the trim closing the gap would itself be a long burn (over 10 degrees of arc)"),
)


def status_code(name: str) -> int:
    """The code stored in the cube for status ``name``."""
    return [status.name for status in STATUSES].index(name)
