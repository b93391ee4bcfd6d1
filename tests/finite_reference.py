"""Independent per-point reference for finite-thrust capture sequences (scipy ``solve_ivp``).

Written from the model description of ``sweep.physics.finite_burn`` (planar two-body motion,
constant thrust, mass flow T/v_e, tangential or inertially fixed steering, centred ignition,
burns ending on the intended orbit's specific energy), not from its code: nothing here calls
that module. Every arc, coasts included, is integrated numerically with DOP853, and every
switching instant is an integrator event:

* approach: from the hyperbola's periapsis (x = r_p, y = 0, vx = 0,
  vy = sqrt(v_inf^2 + 2 mu / r_p), counter-clockwise) integrated *backward* by t_b/2;
* later burns: coast to the next apsis (event r.v = 0, rising through zero at periapsis,
  falling at apoapsis) of the kind whose osculating radius, a(1 - e) or a(1 + e), lies nearest
  the impulsive burn radius; ignition t_b/2 before it (state by integrating back from the
  apsis), or at once if that moment has already passed;
* burns: thrust term with m(t) = m_ign - (T/v_e) t, until the energy event
  v^2/2 - mu/r = target, or until the radius leaves the sphere of influence outbound
  (engine_cannot_capture), falls to the body radius (surface_impact) or the propellant is
  spent (propellant_exhausted: the mass would fall below 0.1 % of the arrival mass);
* after the last burn, an orbit whose periapsis lies below the body radius is a surface impact.

Here t_b = (m v_e / T)(1 - exp(-dv_imp / v_e)) with m the mass before that burn (rocket
equation at constant thrust). The delta-v of a burn is v_e ln(m_before / m_after).

``replay_flight`` replays a whole flight plan as given (the aimed model): from the approach
periapsis at t = 0, every coast integrated numerically (backward for an ignition before the
periapsis passage) to each pass's ignition time, then a burn with the tangential thrust turned
counter-clockwise by clip(rate (t - centre), -0.5, 0.5) rad until the energy event, and so on.
It reports each pass's delta-v, the orbit reached after each pass and the lowest radius of the
whole path (the smallest of the arc ends and of the radii at every rising r.v = 0 event, the
only places a smooth path has a radius minimum), the final orbit's periapsis included.

Used by ``tests/physics/test_finite_burn.py``, ``tests/physics/test_finite_aim.py`` and, for
per-point timing, by a benchmark.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from scipy.integrate import solve_ivp

__all__ = ["ReferenceCapture", "ReplayedFlight", "fly_capture_reference", "replay_flight"]

RTOL = 1e-11  # DOP853 relative tolerance (local error per step)
ATOL = (1e-6, 1e-6, 1e-9, 1e-9)  # m, m, m/s, m/s: below rtol * |value| for every body used
RESERVE = 1e-3  # the burns may spend all but this fraction of the arrival mass
STOPPED = 1e-3  # m/s: speed below which a braking craft counts as brought to rest
CIRCULAR = 1e-9  # eccentricity below which an orbit has no apsis to wait for: ignite at once
MAX_TURN = 0.5  # rad: the aimed model's clip on the turn of the thrust from the tangential direction
LATE = 1e-6  # s: an ignition this much before the previous burn's end is a malformed plan


class ReferenceCapture(NamedTuple):
    """Per-burn lists (NaN for burns not completed) and per-sequence values. SI units."""

    delta_v: list[float]  # m/s
    duration: list[float]  # s
    periapsis_radius: list[float]  # m, of the orbit reached after each burn
    apoapsis_radius: list[float]  # m (inf when unbound)
    time: float  # s, approach periapsis passage to the end of the last burn; NaN on failure
    outcome: str


# --- equations of motion -----------------------------------------------------------------
def _gravity(s, gm):
    x, y = s[0], s[1]
    r2 = x * x + y * y
    k = -gm / (r2 * math.sqrt(r2))
    return k * x, k * y


def _coast_rhs(_t, s, gm):
    gx, gy = _gravity(s, gm)
    return [s[2], s[3], gx, gy]


def _burn_rhs(t, s, gm, thrust, mass, mass_flow, sign, direction):
    """Gravity plus thrust; ``direction`` None = along sign * v-hat, else a fixed unit vector."""
    gx, gy = _gravity(s, gm)
    acc = thrust / (mass - mass_flow * t)
    if direction is None:
        speed = math.hypot(s[2], s[3])
        ux, uy = sign * s[2] / speed, sign * s[3] / speed
    else:
        ux, uy = direction
    return [s[2], s[3], gx + acc * ux, gy + acc * uy]


def _energy(s, gm):
    return 0.5 * (s[2] * s[2] + s[3] * s[3]) - gm / math.hypot(s[0], s[1])


def _elements(s, gm):
    """Semi-major axis, eccentricity, periapsis and apoapsis radius of the osculating conic."""
    energy = _energy(s, gm)
    h = s[0] * s[3] - s[1] * s[2]
    e = math.sqrt(max(1.0 + 2.0 * energy * h * h / (gm * gm), 0.0))
    periapsis = h * h / (gm * (1.0 + e))
    apoapsis = h * h / (gm * (1.0 - e)) if e < 1.0 else math.inf
    a = -gm / (2.0 * energy) if energy != 0.0 else math.inf
    return a, e, periapsis, apoapsis


def _event(function, direction):
    function.terminal = True
    function.direction = direction
    return function


def _integrate(rhs, t_end, state, args, events=None):
    return solve_ivp(rhs, (0.0, t_end), state, method="DOP853", rtol=RTOL, atol=ATOL,
                     events=events, args=args)


# --- arcs ----------------------------------------------------------------------------------
def _coast_for(state, gm, duration):
    """State after coasting ``duration`` seconds (negative: backward in time)."""
    if duration == 0.0:
        return list(state)
    sol = _integrate(_coast_rhs, duration, list(state), (gm,))
    assert sol.status == 0, sol.message
    return list(sol.y[:, -1])


def _coast_to_apsis(state, gm, body_radius, at_apoapsis):
    """Time to, and state at, the next apsis of the requested kind; None if the coast hits
    the surface first."""
    a, _, _, _ = _elements(state, gm)
    period = 2.0 * math.pi * math.sqrt(a**3 / gm)
    apsis = _event(lambda _t, s, _gm: s[0] * s[2] + s[1] * s[3], -1.0 if at_apoapsis else 1.0)
    surface = _event(lambda _t, s, _gm: math.hypot(s[0], s[1]) - body_radius, -1.0)
    sol = _integrate(_coast_rhs, 1.01 * period, list(state), (gm,), events=[apsis, surface])
    if sol.t_events[1].size:
        return None
    assert sol.t_events[0].size == 1, "no apsis within one period"
    return float(sol.t_events[0][0]), list(sol.y_events[0][0])


def _burn(state, gm, target, thrust, mass, mass_flow, sign, direction, t_max, soi_radius, body_radius):
    """Integrate one burn; return (outcome, duration, final state)."""
    if abs(target - _energy(state, gm)) <= 1e-12 * abs(target):
        return "ok", 0.0, list(state)
    reached = _event(lambda _t, s, *_args: _energy(s, gm) - target, sign)
    escaped = _event(lambda _t, s, *_args: math.hypot(s[0], s[1]) - soi_radius, 1.0)
    impact = _event(lambda _t, s, *_args: math.hypot(s[0], s[1]) - body_radius, -1.0)
    # Tangential braking can bring the craft to rest where the thrust outweighs gravity; the
    # steering -v/|v| is then undefined and flips every instant. Stop there (see below).
    at_rest = _event(lambda _t, s, *_args: math.hypot(s[2], s[3]) - STOPPED, -1.0)
    events = [reached, escaped, impact] + ([at_rest] if direction is None else [])
    elapsed = 0.0
    while True:
        sol = solve_ivp(_burn_rhs, (elapsed, t_max), list(state), method="DOP853", rtol=RTOL, atol=ATOL,
                        events=events, args=(gm, thrust, mass, mass_flow, sign, direction))
        for index, outcome in enumerate(("ok", "engine_cannot_capture", "surface_impact")):
            if sol.t_events[index].size:
                return outcome, float(sol.t_events[index][0]), list(sol.y_events[index][0])
        if len(events) == 4 and sol.t_events[3].size:
            elapsed, state = float(sol.t_events[3][0]), list(sol.y_events[3][0])
            r = math.hypot(state[0], state[1])
            if thrust / (mass - mass_flow * elapsed) > gm / (r * r):
                # Held at rest: the braking thrust cancels gravity until the tanks run dry.
                return "propellant_exhausted", t_max, state
            events = events[:3]  # gravity wins: the craft falls back and the speed grows again
            continue
        assert sol.status == 0, sol.message
        return "propellant_exhausted", float(sol.t[-1]), list(sol.y[:, -1])


def fly_capture_reference(
    gm: float,
    body_radius: float,
    soi_radius: float,
    v_inf: float,
    periapsis_radius: float,
    burn_radii: list[float],
    target_energies: list[float],
    impulsive_delta_v: list[float],
    thrust: float,
    exhaust_speed: float,
    initial_mass: float,
    steering: str = "tangential",
) -> ReferenceCapture:
    """Fly one capture sequence with a finite-thrust engine (see the module notes)."""
    if steering not in ("tangential", "inertial"):
        raise ValueError(f"unknown steering {steering!r}")
    burns = len(burn_radii)
    nan = [math.nan] * burns
    delta_v, duration, periapsis, apoapsis = list(nan), list(nan), list(nan), list(nan)
    mass_flow = thrust / exhaust_speed
    mass = initial_mass
    dry_limit = RESERVE * initial_mass

    def result(time, outcome):
        return ReferenceCapture(delta_v, duration, periapsis, apoapsis, time, outcome)

    # Approach periapsis, then back along the hyperbola by half the first burn time.
    state = [periapsis_radius, 0.0, 0.0, math.sqrt(v_inf**2 + 2.0 * gm / periapsis_radius)]
    clock = 0.0
    for k in range(burns):
        t_b = mass * exhaust_speed / thrust * -math.expm1(-impulsive_delta_v[k] / exhaust_speed)
        if k == 0:
            state = _coast_for(state, gm, -0.5 * t_b)
            clock = -0.5 * t_b
            apsis_velocity = (0.0, 1.0)
        elif abs(target_energies[k] - _energy(state, gm)) <= 1e-12 * abs(target_energies[k]):
            apsis_velocity = (0.0, 1.0)  # nothing to burn: no wait either
        else:
            a, e, _, _ = _elements(state, gm)
            if e < CIRCULAR:
                speed = math.hypot(state[2], state[3])
                apsis_velocity = (state[2] / speed, state[3] / speed)
            else:
                at_apoapsis = abs(a * (1.0 + e) - burn_radii[k]) < abs(a * (1.0 - e) - burn_radii[k])
                found = _coast_to_apsis(state, gm, body_radius, at_apoapsis)
                if found is None:
                    return result(math.nan, "surface_impact")
                to_apsis, at_apsis = found
                speed = math.hypot(at_apsis[2], at_apsis[3])
                apsis_velocity = (at_apsis[2] / speed, at_apsis[3] / speed)
                if to_apsis > 0.5 * t_b:  # ignite half a burn before the apsis
                    state = _coast_for(at_apsis, gm, -0.5 * t_b)
                    clock += to_apsis - 0.5 * t_b
                # else: that moment has passed, ignite at once
        sign = 1.0 if target_energies[k] >= _energy(state, gm) else -1.0
        direction = None if steering == "tangential" else (sign * apsis_velocity[0], sign * apsis_velocity[1])
        outcome, burn_time, state = _burn(
            state, gm, target_energies[k], thrust, mass, mass_flow, sign, direction,
            (mass - dry_limit) / mass_flow, soi_radius, body_radius,
        )
        if outcome != "ok":
            return result(math.nan, outcome)
        after = mass - mass_flow * burn_time
        delta_v[k] = exhaust_speed * math.log(mass / after)
        duration[k] = burn_time
        mass = after
        clock += burn_time
        _, _, periapsis[k], apoapsis[k] = _elements(state, gm)
    if periapsis[-1] < body_radius:
        return result(math.nan, "surface_impact")
    return result(clock, "ok")


# --- replay of an aimed flight plan --------------------------------------------------------
class ReplayedFlight(NamedTuple):
    """Per pass, in flight order (lists), and for the whole flight. SI units."""

    delta_v: list[float]  # m/s, v_e ln(m_before / m_after) of each pass
    duration: list[float]  # s
    periapsis_radius: list[float]  # m, of the orbit reached after each pass
    apoapsis_radius: list[float]  # m (inf when unbound)
    lowest_radius: float  # m, lowest radius on the whole path, the final orbit's periapsis included
    end_time: float  # s from the approach periapsis passage to the end of the last pass
    outcome: str  # "ok", "surface_impact", "propellant_exhausted" (energy never reached)


def _pitched_rhs(t, s, gm, thrust, mass, mass_flow, sign, rate, centre, ignition, direction):
    """Gravity plus thrust along sign * v-hat (or the fixed ``direction``), turned counter-clockwise
    by clip(rate (ignition + t - centre), -MAX_TURN, MAX_TURN); ``t`` counts from ignition."""
    gx, gy = _gravity(s, gm)
    acc = thrust / (mass - mass_flow * t)
    if direction is None:
        speed = math.hypot(s[2], s[3])
        ux, uy = sign * s[2] / speed, sign * s[3] / speed
    else:
        ux, uy = direction
    angle = min(max(rate * (ignition + t - centre), -MAX_TURN), MAX_TURN)
    c, n = math.cos(angle), math.sin(angle)
    ux, uy = ux * c - uy * n, ux * n + uy * c
    return [s[2], s[3], gx + acc * ux, gy + acc * uy]


def _periapsis_event(_t, s, *_args):
    return s[0] * s[2] + s[1] * s[3]


_periapsis_event.direction = 1.0  # r.v rising through zero: a local minimum of the radius


def _lowest_on(sol):
    """Lowest radius of an integrated arc: its ends and every rising r.v = 0 event."""
    radii = [math.hypot(sol.y[0, 0], sol.y[1, 0]), math.hypot(sol.y[0, -1], sol.y[1, -1])]
    radii += [math.hypot(y[0], y[1]) for y in sol.y_events[0]]
    return min(radii)


def replay_flight(
    gm: float,
    body_radius: float,
    v_inf: float,
    approach_periapsis: float,
    passes: list[tuple[float, float, float, float]],
    thrust: float,
    exhaust_speed: float,
    initial_mass: float,
    steering: str = "tangential",
    directions: list[tuple[float, float]] | None = None,
    rtol: float = RTOL,
) -> ReplayedFlight:
    """
    Replay a flight plan: ``passes`` in flight order, each (ignition time [s from the approach
    periapsis passage], pitch rate [rad/s], turn centre [s, same clock], stop energy [J/kg]).
    ``steering="inertial"`` takes each pass's fixed thrust direction from ``directions``
    (unit vectors, before the braking sign and the turn). See the module notes.
    """
    if steering not in ("tangential", "inertial"):
        raise ValueError(f"unknown steering {steering!r}")
    if steering == "inertial" and (directions is None or len(directions) != len(passes)):
        raise ValueError("inertial steering needs one direction per pass")
    atol = ATOL
    state = [approach_periapsis, 0.0, 0.0, math.sqrt(v_inf**2 + 2.0 * gm / approach_periapsis)]
    clock, mass = 0.0, initial_mass
    mass_flow = thrust / exhaust_speed
    dry_limit = RESERVE * initial_mass
    delta_v, duration, periapsis, apoapsis = [], [], [], []
    lowest = math.inf
    surface = _event(lambda _t, s, *_args: math.hypot(s[0], s[1]) - body_radius, -1.0)
    surface.terminal = True

    def result(outcome):
        return ReplayedFlight(delta_v, duration, periapsis, apoapsis, lowest, clock, outcome)

    for index, (ignition, rate, centre, stop_energy) in enumerate(passes):
        # Coast to ignition. Before the first burn the approach comes in from infinity, so its
        # lowest point before ignition is the ignition point itself (backward coast: not counted).
        if ignition < clock - LATE and index > 0:
            raise ValueError(f"pass {index} ignites at {ignition} s, before the previous burn ends at {clock} s")
        span = ignition - clock
        if span != 0.0:
            sol = solve_ivp(_coast_rhs, (0.0, span), state, method="DOP853", rtol=rtol, atol=atol,
                            events=[_periapsis_event, surface], args=(gm,))
            assert sol.status >= 0, sol.message
            if span > 0.0:
                if sol.t_events[1].size:
                    lowest = body_radius
                    return result("surface_impact")
                lowest = min(lowest, _lowest_on(sol))
            state = list(sol.y[:, -1])
        clock = ignition
        lowest = min(lowest, math.hypot(state[0], state[1]))
        if abs(stop_energy - _energy(state, gm)) <= 1e-12 * abs(stop_energy):  # nothing to burn
            delta_v.append(0.0)
            duration.append(0.0)
            _, _, rp, ra = _elements(state, gm)
            periapsis.append(rp)
            apoapsis.append(ra)
            continue
        # Burn until the energy event.
        sign = 1.0 if stop_energy >= _energy(state, gm) else -1.0
        direction = None if steering == "tangential" else directions[index]
        reached = _event(lambda _t, s, *_args, e=stop_energy: _energy(s, gm) - e, sign)
        t_max = (mass - dry_limit) / mass_flow
        sol = solve_ivp(_pitched_rhs, (0.0, t_max), state, method="DOP853", rtol=rtol, atol=atol,
                        events=[_periapsis_event, surface, reached],
                        args=(gm, thrust, mass, mass_flow, sign, rate, centre, ignition, direction))
        assert sol.status >= 0, sol.message
        lowest = min(lowest, _lowest_on(sol))
        if sol.t_events[1].size:
            return result("surface_impact")
        if not sol.t_events[2].size:
            return result("propellant_exhausted")
        burn_time = float(sol.t_events[2][0])
        state = list(sol.y_events[2][0])
        after = mass - mass_flow * burn_time
        delta_v.append(exhaust_speed * math.log(mass / after))
        duration.append(burn_time)
        mass, clock = after, clock + burn_time
        _, _, rp, ra = _elements(state, gm)
        periapsis.append(rp)
        apoapsis.append(ra)
    if periapsis:
        lowest = min(lowest, periapsis[-1])  # the craft stays on the final orbit
    return result("ok" if not periapsis or periapsis[-1] >= body_radius else "surface_impact")
