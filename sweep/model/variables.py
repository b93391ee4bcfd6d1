"""The registry of output variables: every array the engine fills and the cube stores, by name.

One :class:`Variable` says everything about an output: its dimensions, units, long name, dtype,
CF flag meanings, further attributes, which engine stage fills it (and so whether it is
streamed chunk by chunk or checkpointed), and when a cube has it. The engine allocates from
it, the checkpoint saves from it, the CF layer labels from it and ``compare`` reads it; no
other module lists variable names. Strategy-specific outputs hang off their strategy entry
(:attr:`sweep.model.strategies.Strategy.variables`) and each challenger adds its crossover
variables: :func:`cube_variables` assembles the whole list.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from typing import Any, Literal

from sweep.physics.finite_burn import AIM_TOLERANCE, TRIM_SPLIT

__all__ = [
    "DIMENSIONS",
    "FINITE_REFERENCES",
    "FINITE_MODEL",
    "PER_POINT",
    "ROCKET",
    "STAGES",
    "VIS_VIVA",
    "Variable",
    "cube_variables",
    "finite_model",
    "shape_of",
    "winner_variables",
]

# Dimension order of every per-point array (the strategy axis is prepended where present).
DIMENSIONS = ("body", "v_inf", "target_altitude", "periapsis_altitude")
PER_POINT = ("strategy", *DIMENSIONS)
_PER_BURN = ("strategy", "burn", *DIMENSIONS)
_FINITE = (*PER_POINT, "thrust")
_FINITE_PER_BURN = (*_PER_BURN, "thrust")
_PLANE = (*DIMENSIONS, "plane_change")

# Which part of the engine fills a variable, in the order they run:
#   body      per body, independent of the arrival speed where the dims allow (evaluate.prepare)
#   crossover the closed-form equal-cost speed of each challenger (per body plan)
#   impulsive per grid point: streamed to the cube chunk by chunk
#   plane     per grid point and plane change: streamed too
#   finite    per grid point and thrust: worker processes, checkpointed chunk by chunk
#   finite_crossover  the finite-burn equal-cost speeds, once the finite chunks are done
Stage = Literal["body", "crossover", "impulsive", "plane", "finite", "finite_crossover"]
STAGES: tuple[str, ...] = ("impulsive", "crossover", "body", "plane", "finite", "finite_crossover")
# When a cube has a variable: always, or only with a grid axis or target kind.
When = Literal["always", "plane_change", "thrust", "elliptical_target", "period_target"]

VIS_VIVA = "vis-viva energy relation on patched conics (Curtis 2014, Ch. 2, 6, 8)"
ROCKET = "ideal rocket equation (Tsiolkovsky), g0 = 9.80665 m s-2"
FINITE_REFERENCES = ("Robbins 1966, AIAA J. 4(8):1417 (impulsive approximation); Curtis 2014 Ch. 2-4, 6, 11; "
                     "Broyden 1965, Math. Comp. 19:577 (aim)")
FINITE_MODEL = (
    "planar two-body motion with constant thrust and mass flow T/(Isp g0); {steering} steering (thrust "
    "against the velocity for burns that lower the orbital energy, along it for burns that raise it{fixed}); "
    "each burn ends when the specific energy reaches its intended orbit's; ignition half the impulsive-equivalent "
    "burn time before the burn's apsis, then aimed: the approach periapsis (and, for a circular intended orbit, the "
    "ignition time) of the first burn, the ignition time of later burns into circular orbits, so that the orbit "
    "reached meets the intended apsides within {aim:g} m (Broyden iterations in lockstep); what aiming cannot "
    "remove is closed by an impulsive trim (vis-viva) included in the total; a capture is split over periapsis "
    "passes ({passes}); RK4 integration"
)
_FREE = ("an orbit of the target's eccentricity e whose periapsis the mission may choose: r_p = 2 mu (1 - e) / "
         "(v_inf^2 (1 + e)), delta-v = v_inf sqrt((1 - e) / 2) (Curtis 2014, Ch. 8, optimal periapsis; for a "
         "circular target r = 2 mu / v_inf^2); NaN where that periapsis is below the lowest safe periapsis or "
         "its apoapsis beyond the apoapsis bound; not a strategy of the trade, since its orbit is not the target. The "
         "optimum at fixed eccentricity: for a target given by its period, this orbit has the target's shape but "
         "another period (free_periapsis_period_delta_v holds the optimum at the target's period)")
_SAFE = ("the safe periapsis radius is the equatorial radius plus the clearance (the surface a periapsis must clear "
         "is the equator's, which on an oblate giant stands far above the mean radius); the same radius as an altitude "
         "above the mean radius, the reference of every altitude of the cube: body_safe_periapsis_altitude = "
         "body_equatorial_radius + body_safe_periapsis_clearance - body_radius")
_FREE_PERIOD = ("an orbit of the target's period (semi-major axis a) whose periapsis the mission may choose: the "
                "single capture burn sqrt(v_inf^2 + 2 mu / r) - sqrt(2 mu / r - mu / a) falls steadily as r falls, "
                "so the optimum is at the lowest safe periapsis (derivation: sweep.physics.capture."
                "free_periapsis_capture_at_period); NaN where that periapsis lies above a or the apoapsis 2 a - r "
                "beyond the apoapsis bound; not a strategy of the trade, since its orbit is not the target")

# What the apoapsis bound is a fraction of, by the config's [three_burn] apoapsis_bound_of
_BOUND_OF = {
    "smaller": "min(Hill radius, sphere of influence)",
    "hill": "Hill radius (config: apoapsis_bound_of = \"hill\"; the sphere of influence ignored)",
    "sphere_of_influence": "sphere-of-influence radius (config: apoapsis_bound_of = \"sphere_of_influence\"; the "
                           "Hill radius ignored)",
}


def _none(config) -> dict[str, Any]:
    return {}


@dataclass(frozen=True)
class Variable:
    """
    One output array and its cube variable.

    ``attrs`` gives the attributes that follow ``units`` and ``long_name`` (they may depend
    on the config); ``flags`` ("status" or "best") asks the CF layer for flag values and
    meanings from the status and strategy registries instead of units and long name alone.
    """

    name: str
    dims: tuple[str, ...]
    units: str
    long_name: str
    stage: Stage
    dtype: str = "float64"
    flags: Literal["status", "best"] | None = None
    when: When = "always"
    attrs: Callable[[Any], dict[str, Any]] = field(default=_none, compare=False)

    @property
    def streamed(self) -> bool:
        """Written to the cube chunk by chunk, never held whole by a streamed run."""
        return self.stage in ("impulsive", "plane")

    @property
    def checkpointed(self) -> bool:
        """Saved with every finished finite-burn chunk, so a killed run resumes."""
        return self.stage == "finite"

    def present(self, config) -> bool:
        """Whether a cube of ``config`` has this variable."""
        return {
            "always": True,
            "plane_change": config.plane_change is not None,
            "thrust": config.thrust is not None,
            "elliptical_target": config.target_apoapsis_altitude is not None or config.target_period is not None,
            "period_target": config.target_period is not None,
        }[self.when]


def finite_model(config) -> str:
    """The finite-burn model in words, for the finite variables' comment."""
    passes = (f"{config.finite_passes} passes where a longer ellipse than its own is admissible"
              if config.finite_passes != "auto" else
              f"automatically: where a sequence fails for a reason shorter burns may cure, or its trim exceeds "
              f"{TRIM_SPLIT:g} m/s, the burn sweeping the widest arc per pass (above 10 degrees) is split into twice "
              f"the passes, up to {config.finite_max_passes}")
    return FINITE_MODEL.format(
        steering=config.steering, aim=AIM_TOLERANCE, passes=passes,
        fixed="" if config.steering == "tangential" else ", held fixed in inertial space along the velocity "
        "direction the impulsive burn would have",
    )


def _ties(config) -> str:
    """How ties are ranked (the config's [ranking] tie_tolerance)."""
    return (f"a strategy wins over a simpler one (fewer burns) only if it is cheaper by more than "
            f"{config.tie_tolerance:g} m/s: within that they are tied and the simpler wins")


def _finite_attrs(**extra: str) -> Callable[[Any], dict[str, Any]]:
    return lambda config: {"references": FINITE_REFERENCES, "comment": finite_model(config), **extra}


def _static(**attrs: Any) -> Callable[[Any], dict[str, Any]]:
    return lambda config: attrs


def _elliptical_target(config) -> dict[str, Any]:
    how = (f"apoapsis altitude {config.target_apoapsis_altitude} km" if config.target_apoapsis_altitude is not None
           else f"period {config.target_period / 3600.0:g} h")
    return {"comment": f"target orbits given by {how}"}


# Strategy-independent outputs, each group in cube order; a strategy's own outputs follow the
# group of their stage, and each challenger's crossover variables follow the impulsive group.
_IMPULSIVE = (
    Variable("delta_v", PER_POINT, "m s-1", "total delta-v of the capture sequence", "impulsive",
             attrs=_static(references=VIS_VIVA, ancillary_variables="status", comment="NaN where status is not ok")),
    Variable("burn_delta_v", _PER_BURN, "m s-1", "delta-v of each burn", "impulsive",
             attrs=_static(references=VIS_VIVA, ancillary_variables="status",
                           comment="0 for burns a strategy does not make; NaN where status is not ok")),
    Variable("propellant_mass", PER_POINT, "kg", "propellant burned for the whole sequence", "impulsive",
             attrs=lambda config: {"references": ROCKET, "comment": f"arrival mass {config.arrival_mass} kg, "
                                   f"specific impulse {config.specific_impulse} s"}),
    Variable("time_to_orbit", PER_POINT, "s", "time from periapsis arrival to the last burn (on the target orbit)",
             "impulsive"),
    Variable("status", PER_POINT, "1", "feasibility of the strategy at the grid point", "impulsive", dtype="int8",
             flags="status"),
    Variable("best_strategy", DIMENSIONS, "1", "feasible strategy of least total delta-v", "impulsive", dtype="int8",
             flags="best", attrs=lambda config: {"ranking": _ties(config)}),
    Variable("saving_over_direct", DIMENSIONS, "m s-1", "delta-v of direct minus delta-v of the best strategy",
             "impulsive"),
    Variable("propellant_saving", DIMENSIONS, "kg", "propellant of direct minus propellant of the best strategy",
             "impulsive"),
)
_BODY = (
    Variable("body_gm", ("body",), "m3 s-2", "gravitational parameter of the body", "body"),
    Variable("body_radius", ("body",), "km", "mean radius of the body", "body",
             attrs=_static(comment="every altitude of the cube is measured from this radius")),
    Variable("body_equatorial_radius", ("body",), "km", "equatorial radius of the body", "body"),
    Variable("body_safe_periapsis_clearance", ("body",), "km",
             "lowest safe periapsis height above the equatorial radius", "body", attrs=_static(comment=_SAFE)),
    Variable("body_safe_periapsis_altitude", ("body",), "km", "lowest safe periapsis altitude of the body above "
             "the mean radius", "body", attrs=_static(comment=_SAFE)),
    Variable("sphere_of_influence_radius", ("body",), "km", "Laplace sphere-of-influence radius, a (m/M)^(2/5)",
             "body"),
    Variable("hill_radius", ("body",), "km", "Hill radius, a (m/3M)^(1/3)", "body"),
    Variable("apoapsis_bound", ("body",), "km", "largest admissible apoapsis radius", "body",
             attrs=lambda config: {"comment": f"{config.apoapsis_fraction} x {_BOUND_OF[config.apoapsis_bound_of]}; "
                                   "the fraction follows Shen and Tremaine 2008 (AJ 136), prograde orbits bound to "
                                   "about half the Hill radius"}),
    Variable("free_periapsis_altitude", ("body", "v_inf", "target_altitude"), "km",
             "periapsis altitude of the orbit of the target's eccentricity cheapest to capture into (optimum at fixed "
             "eccentricity)", "body", attrs=_static(comment=_FREE)),
    Variable("free_periapsis_delta_v", ("body", "v_inf", "target_altitude"), "m s-1",
             "single-burn delta-v into the orbit of the target's eccentricity cheapest to capture into (optimum at "
             "fixed eccentricity)", "body", attrs=_static(comment=_FREE)),
    Variable("free_periapsis_period_delta_v", ("body", "v_inf"), "m s-1",
             "single-burn delta-v into the orbit of the target's period cheapest to capture into (optimum at fixed "
             "period: at the lowest safe periapsis)", "body", when="period_target",
             attrs=_static(comment=_FREE_PERIOD)),
    Variable("target_apoapsis_altitude", ("body", "target_altitude"), "km",
             "apoapsis altitude of the elliptical target orbit", "body", when="elliptical_target",
             attrs=_elliptical_target),
)
_PLANE_RESULTS = (
    Variable("plane_change_best_strategy", _PLANE, "1", "feasible strategy of least total delta-v including the "
             "plane change", "plane", dtype="int8", flags="best", when="plane_change"),
    Variable("plane_change_saving_over_direct", _PLANE, "m s-1", "delta-v of direct minus that of the best strategy, "
             "including the plane change", "plane", when="plane_change"),
)
_FINITE_VARIABLES = (
    Variable("finite_delta_v", _FINITE, "m s-1", "total delta-v with finite burns, trim included", "finite",
             when="thrust",
             attrs=_finite_attrs(ancillary_variables="finite_status")),
    Variable("finite_burn_delta_v", _FINITE_PER_BURN, "m s-1", "delta-v of each finite burn, v_e ln(m_before / "
             "m_after)", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("gravity_loss", _FINITE_PER_BURN, "m s-1", "finite-burn delta-v minus impulsive delta-v of each burn",
             "finite", when="thrust", attrs=_finite_attrs()),
    Variable("burn_duration", _FINITE_PER_BURN, "s", "duration of each finite burn", "finite", when="thrust",
             attrs=_finite_attrs()),
    Variable("burn_propellant_mass", _FINITE_PER_BURN, "kg", "propellant of each finite burn", "finite",
             when="thrust", attrs=_finite_attrs()),
    Variable("reached_periapsis_altitude", _FINITE_PER_BURN, "km", "periapsis altitude of the orbit reached after "
             "each finite burn", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("reached_apoapsis_altitude", _FINITE_PER_BURN, "km", "apoapsis altitude of the orbit reached after "
             "each finite burn", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("ignition_time", _FINITE_PER_BURN, "s", "ignition of each finite burn (its first pass), from the aimed "
             "approach periapsis passage", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("pitch_rate", _FINITE_PER_BURN, "degree s-1", "rate at which the aim turns each finite burn's thrust "
             "from the velocity, through mid-burn (its first pass; 0 for the first burn)", "finite", when="thrust",
             attrs=_finite_attrs()),
    Variable("burn_passes", _FINITE_PER_BURN, "1", "passes of its apsis each finite burn is split over", "finite",
             dtype="int8", when="thrust", attrs=_finite_attrs(comment="0 for burns a strategy does not make")),
    Variable("aimed_periapsis_altitude", _FINITE, "km", "approach periapsis altitude the first finite burn is "
             "aimed with", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("trim_delta_v", _FINITE, "m s-1", "impulsive trim from the orbit the finite burns reach to the exact "
             "target orbit, included in finite_delta_v", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("lowest_altitude", _FINITE, "km", "lowest altitude reached anywhere in the finite-burn sequence "
             "(approach, burns, coasts, orbit reached, trim)", "finite", when="thrust",
             attrs=_finite_attrs(ancillary_variables="finite_status")),
    Variable("finite_propellant_mass", _FINITE, "kg", "propellant for the whole sequence with finite burns",
             "finite", when="thrust", attrs=_finite_attrs()),
    Variable("finite_time_to_orbit", _FINITE, "s", "time from the approach periapsis passage to the end of the last "
             "finite burn", "finite", when="thrust", attrs=_finite_attrs()),
    Variable("finite_status", _FINITE, "1", "feasibility with finite burns", "finite", dtype="int8", flags="status",
             when="thrust"),
    Variable("finite_best_strategy", _FINITE[1:], "1", "feasible strategy of least total delta-v with finite burns",
             "finite", dtype="int8", flags="best", when="thrust", attrs=lambda config: {"ranking": _ties(config)}),
    Variable("finite_saving_over_direct", _FINITE[1:], "m s-1", "finite-burn delta-v of direct minus that of the "
             "best strategy", "finite", when="thrust", attrs=_finite_attrs()),
)


def _plane_total(strategies: list) -> Variable:
    turns = "; ".join(f"{s.name}: {s.turn_how}" for s in strategies)
    comment = (f"{turns}; combined burns by the law of cosines (Curtis 2014, Ch. 6); feasibility as without a plane "
               "change")
    return Variable("plane_change_delta_v", ("strategy", *_PLANE), "m s-1", "total delta-v including the plane change",
                    "plane", when="plane_change",
                    attrs=_static(comment=comment, references=VIS_VIVA, ancillary_variables="status"))


def _crossover(strategy, reference: str) -> Variable:
    def attrs(config) -> dict[str, Any]:
        low, high = config.crossover_range
        return {"valid_min": low, "valid_max": high,
                "comment": f"closed-form root of the model's cost difference; searched {low} to {high} km s-1; NaN "
                f"where no root lies in that range or where {strategy.name} or {reference} is infeasible"}

    return Variable(strategy.crossover_variable, ("body", "target_altitude", "periapsis_altitude"), "km s-1",
                    f"arrival speed at which {strategy.name} and {reference} need the same delta-v", "crossover",
                    attrs=attrs)


def _crossover_sensitivity(strategy, reference: str) -> Variable:
    comment = (f"1 / |d(delta-v of {strategy.name} - delta-v of {reference}) / d v_inf| at the crossover, closed form "
               "(sweep.physics.capture.equal_cost_sensitivity; each cost is sqrt(v_inf^2 + 2 mu / r_1) + a constant): "
               "the km/s by which the crossover moves when either cost changes by 1 m/s (a model error, a margin); "
               "large where both first burns grow alike with v_inf. NaN where the crossover is NaN")
    return Variable(f"{strategy.crossover_variable}_sensitivity", ("body", "target_altitude", "periapsis_altitude"),
                    "km m-1", f"shift of the {strategy.name} crossover arrival speed per unit change of its cost "
                    f"difference with {reference} (km/s per m/s)", "crossover", attrs=_static(comment=comment))


def _finite_crossover(strategy, reference: str) -> Variable:
    def attrs(config) -> dict[str, Any]:
        v_min, v_max = float(config.v_inf.min()), float(config.v_inf.max())
        return {"valid_min": v_min, "valid_max": v_max,
                "comment": f"first sign change of the cost difference (trims included) on the grid, refined by "
                "regula falsi (Illinois) on the finite-burn model until the difference is within 0.05 m/s or the "
                "bracket is narrower than 1 m/s, at most 4 steps, then the linear estimate in the last bracket; "
                "the aim starts between the bracket ends' aims, with their passes where both ends agree; searched "
                f"{v_min:g} to {v_max:g} km s-1 (the grid); NaN where no sign change, a strategy is infeasible, or "
                "the model fails inside the bracket"}

    return Variable(strategy.finite_crossover_variable, ("body", "target_altitude", "periapsis_altitude", "thrust"),
                    "km s-1", f"arrival speed at which {strategy.name} and {reference} need the same finite-burn "
                    "delta-v", "finite_crossover", when="thrust", attrs=attrs)


def cube_variables(strategies: Iterable, reference: str = "direct", config=None) -> list[Variable]:
    """
    Every output variable of a sweep with ``strategies`` (the strategy registry's entries, in
    cube order), in cube order; with ``config``, only those a cube of that config has.
    """
    strategies = list(strategies)
    own = [v for s in strategies for v in s.variables]
    challengers = [s for s in strategies if s.name != reference]
    found = [
        *_IMPULSIVE, *(v for v in own if v.stage == "impulsive"),
        *(v for s in challengers for v in (_crossover(s, reference), _crossover_sensitivity(s, reference))),
        *_BODY,
        _plane_total(strategies), *(v for v in own if v.stage == "plane"), *_PLANE_RESULTS,
        *_FINITE_VARIABLES, *(_finite_crossover(s, reference) for s in challengers),
    ]
    return found if config is None else [v for v in found if v.present(config)]


def winner_variables(strategies: Iterable) -> list[str]:
    """Names of the variables that hold a winning strategy's index (categorical, not numbers)."""
    return [v.name for v in cube_variables(strategies) if v.flags == "best"]


def shape_of(variable: Variable, sizes: dict[str, int]) -> tuple[int, ...]:
    """The array shape of ``variable`` for dimension ``sizes``."""
    return tuple(sizes[dim] for dim in variable.dims)
