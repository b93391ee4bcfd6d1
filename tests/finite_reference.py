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

import functools
import math
from typing import NamedTuple

from scipy.integrate import solve_ivp
from scipy.optimize import root, root_scalar

__all__ = ["AimedCapture", "ReferenceCapture", "ReplayedFlight", "fly_capture_aimed_reference", "fly_capture_reference",
           "replay_flight", "trim_cost"]

RTOL = 1e-11  # DOP853 relative tolerance (local error per step)
ATOL = (1e-6, 1e-6, 1e-9, 1e-9)  # m, m, m/s, m/s: below rtol * |value| for every body used
RESERVE = 1e-3  # the burns may spend all but this fraction of the arrival mass
STOPPED = 1e-3  # m/s: speed below which a braking craft counts as brought to rest
CIRCULAR = 1e-9  # eccentricity below which an orbit has no apsis to wait for: ignite at once
MAX_TURN = 0.5  # rad: the aimed model's clip on the turn of the thrust from the tangential direction
# An ignition more than this before the previous burn's end (s, plus this share of the burn time
# flown so far) is a malformed plan; within it, the plan's "ignite at once" met the replay's own end of
# the burn, which differs from the kernel's by the kernel's RK4 timing error (measured 4 ms after
# a split Ganymede burn, about 1e-6 of the burn time before it), and the burn starts at once.
LATE = 1e-6
LATE_SHARE = 1e-5


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
    return _pitched_rhs(t, s, gm, thrust, mass, mass_flow, sign, 0.0, 0.0, 0.0, direction)  # no turn


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
        if index > 0:
            if ignition < clock - LATE - LATE_SHARE * sum(duration):
                raise ValueError(f"pass {index} ignites at {ignition} s, before the previous burn ends at {clock} s")
            ignition = max(ignition, clock)  # within the allowance: at once
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


# --- aimed model, per point ----------------------------------------------------------------
# The aimed model as the kernel's notes describe it (module notes of sweep.physics.finite_burn:
# "Aim", "Model"), for captures of one pass per burn. Written from that description; nothing
# here calls the kernel. Burns and the short coasts to ignition are integrated with DOP853
# (solve_ivp); the controls are found with scipy.optimize root finders:
#
# * burn 1 by the approach periapsis radius it is flown with (secant from the impulsive one;
#   the periapsis reached follows it about one for one); for a circular intended orbit also by
#   a shift of the ignition along the track (``scipy.optimize.root``, MINPACK ``hybr``);
# * every later burn by a turn of the tangential thrust at a constant rate through mid-burn,
#   clipped at +-0.5 rad (secant from zero); circles also by the ignition shift (``hybr``);
# * an aim stops as soon as the orbit reached misses its intended one by at most
#   ``AIM_TOLERANCE`` in every coordinate aimed; otherwise the best flight tried is kept
#   (flown beats failed, then the smaller miss). The miss of an ellipse is the apsis on the
#   burn's side against the intended one; of a near-circle (eccentricity below ``ROUND``) the
#   eccentricity vector times the semi-major axis, along and across the burn's end position.
# * an ellipse whose aim by one control still misses (or that hits the surface) is aimed again,
#   with both controls (``hybr``), to end on it at its apsis, horizontal: the circle's miss with
#   the intended eccentricity; the better of the two flights by the ellipse's miss is kept.
# * the rest is closed by an impulsive trim: the cheaper order of two apsis changes (vis-viva).
#
# Ignition of each burn: half its impulsive-equivalent time t_b = (m v_e / T)(1 - exp(-dv / v_e))
# before the apsis (the approach periapsis for burn 1; later, the apsis of the orbit reached that
# lies nearest the burn radius), moved later by shift / v (v: the approach periapsis speed for
# burn 1, the vis-viva speed at the burn radius on the orbit reached for later burns); at once if
# that moment has passed. dv is the vis-viva speed change of the impulsive plan at that radius.
AIM_TOLERANCE = 15.0  # m: a little inside the kernel's 20 m, so the reference is the sharper of the two
AIM_FLIGHTS = 15  # flights per burn's aim at most (the first shot and the differences included)
ROUND = 0.1  # intended orbits below this eccentricity are aimed as circles (the model's rule)
SAFE_MARGIN = 100.0  # m: a coast passing this far below the body radius is below_safe_altitude


class AimedCapture(NamedTuple):
    """One aimed capture sequence (one pass per burn). SI units."""

    delta_v: list[float]  # m/s per burn (NaN beyond a failure)
    trim: float  # m/s, impulsive trim to the exact target orbit (NaN on failure)
    total: float  # m/s, burns plus trim (NaN on failure)
    approach_periapsis: float  # m, the approach periapsis burn 1 was flown with
    misses: list[float]  # m, largest aimed miss left after each burn
    flights: int  # burn integrations flown, all aims together
    outcome: str


class _Done(Exception):
    """Raised inside a root finder's function once a flight is within the aim tolerance."""


def _speed_on(gm, radius, periapsis, apoapsis):
    return math.sqrt(max(gm * (2.0 / radius - 2.0 / (periapsis + apoapsis)), 0.0))


def trim_cost(gm, periapsis, apoapsis, target_periapsis, target_apoapsis):
    """Cheaper order of two apsis-to-apsis impulses from one coplanar orbit to another
    (Hohmann-type, Curtis 2014 Sec. 6.2-6.3; written here from vis-viva)."""
    s = _speed_on
    first = (abs(s(gm, periapsis, periapsis, target_apoapsis) - s(gm, periapsis, periapsis, apoapsis))
             + abs(s(gm, target_apoapsis, target_periapsis, target_apoapsis)
                   - s(gm, target_apoapsis, periapsis, target_apoapsis)))
    second = (abs(s(gm, apoapsis, target_periapsis, apoapsis) - s(gm, apoapsis, periapsis, apoapsis))
              + abs(s(gm, target_periapsis, target_periapsis, target_apoapsis)
                    - s(gm, target_periapsis, target_periapsis, apoapsis)))
    return min(first, second)


def _turned_rhs(t, s, gm, acc0, mass, mass_flow, sign, rate, middle):
    """Gravity plus thrust along sign * v-hat turned counter-clockwise by clip(rate (t - middle))."""
    gx, gy = _gravity(s, gm)
    acc = acc0 / (mass - mass_flow * t)
    speed = max(math.hypot(s[2], s[3]), STOPPED)
    ux, uy = sign * s[2] / speed, sign * s[3] / speed
    if rate:
        angle = min(max(rate * (t - middle), -MAX_TURN), MAX_TURN)
        c, n = math.cos(angle), math.sin(angle)
        ux, uy = ux * c - uy * n, ux * n + uy * c
    return [s[2], s[3], gx + acc * ux, gy + acc * uy]


def _coast_span(state, gm, span, rtol, atol):
    if span == 0.0:
        return list(state)
    sol = solve_ivp(_coast_rhs, (0.0, span), list(state), method="DOP853", rtol=rtol, atol=atol, args=(gm,))
    return list(sol.y[:, -1])


def fly_capture_aimed_reference(
    gm: float,
    body_radius: float,
    soi_radius: float,
    v_inf: float,
    burn_radii: list[float],
    orbits: list[tuple[float, float]],
    thrust: float,
    exhaust_speed: float,
    initial_mass: float,
    rtol: float = RTOL,
) -> AimedCapture:
    """
    Fly one aimed capture sequence, one pass per burn, tangential steering (see the notes
    above). ``orbits``: the intended (periapsis, apoapsis) after each burn, the last the
    target; burn 1 is made at its orbit's periapsis, which the aim starts from.
    """
    atol = ATOL
    burns = len(burn_radii)
    mass_flow = thrust / exhaust_speed
    dry_limit = RESERVE * initial_mass
    mass = initial_mass
    delta_v, misses = [math.nan] * burns, []
    flights = 0
    lowest = math.inf
    approach = float(orbits[0][0])

    def failed(outcome):
        return AimedCapture(delta_v, math.nan, math.nan, approach, misses, flights, outcome)

    def burn(state, target, mass, rate, middle, t_b):
        """Integrate one burn from ignition: (outcome, duration, final state)."""
        nonlocal flights
        flights += 1
        sign = 1.0 if target >= _energy(state, gm) else -1.0
        reached = _event(lambda _t, s, *_a: _energy(s, gm) - target, sign)
        escaped = _event(lambda _t, s, *_a: math.hypot(s[0], s[1]) - soi_radius, 1.0)
        impact = _event(lambda _t, s, *_a: math.hypot(s[0], s[1]) - body_radius, -1.0)
        # Brought to rest by braking: the tangential direction is lost; counted as out of propellant.
        at_rest = _event(lambda _t, s, *_a: math.hypot(s[2], s[3]) - 10.0 * STOPPED, -1.0)
        t_max = (mass - dry_limit) / mass_flow
        sol = solve_ivp(_turned_rhs, (0.0, t_max), list(state), method="DOP853", rtol=rtol, atol=atol,
                        events=[reached, escaped, impact, at_rest],
                        args=(gm, thrust, mass, mass_flow, sign, rate, middle),
                        first_step=min(max(t_b, 1e-3) / 16.0, t_max))
        for index, outcome in enumerate(("ok", "engine_cannot_capture", "surface_impact")):
            if sol.t_events[index].size:
                return outcome, float(sol.t_events[index][0]), list(sol.y_events[index][0])
        return "propellant_exhausted", float(sol.t[-1]), list(sol.y[:, -1])

    def miss_of(outcome, state, periapsis, apoapsis, at_periapsis, round_):
        """(along, across) miss in metres, or None for a failure other than a surface impact."""
        _, _, reached_periapsis, reached_apoapsis = _elements(state, gm)
        if outcome == "surface_impact":
            return (reached_periapsis - periapsis, 0.0)
        if outcome != "ok":
            return None
        if not round_:
            return (reached_periapsis - periapsis if at_periapsis else reached_apoapsis - apoapsis, 0.0)
        x, y, vx, vy = state
        r = math.hypot(x, y)
        v2 = vx * vx + vy * vy
        radial = x * vx + y * vy
        ex = ((v2 - gm / r) * x - radial * vx) / gm
        ey = ((v2 - gm / r) * y - radial * vy) / gm
        axis = 0.5 * (periapsis + apoapsis)
        target_e = (apoapsis - periapsis) / (apoapsis + periapsis)
        along_e, across_e = (ex * x + ey * y) / r, (ey * x - ex * y) / r
        return (-axis * (along_e - (1.0 if at_periapsis else -1.0) * target_e), axis * across_e)

    def aim(fly, start, round_, first_step, identity_first, scale):
        """
        Root-find the controls ``x`` (list of 1 or 2) so that ``fly(x) -> (miss, record)`` misses
        by at most AIM_TOLERANCE. ``scale``: the size of a first step in each control (the
        secant's first step is clipped to it; ``hybr``'s first trust region spans it). Returns
        the best record and its largest miss.
        """
        best = {"key": (2, math.inf), "record": None, "miss": math.inf}
        seen = {}

        def evaluate(x):
            x = tuple(float(v) for v in x)
            if x in seen:
                return seen[x]
            if len(seen) >= AIM_FLIGHTS:
                raise _Done
            miss, record = fly(list(x))
            size = math.inf if miss is None else max(abs(miss[0]), abs(miss[1]) if round_ else 0.0)
            key = (0 if record[0] == "ok" else 1, size)
            if key < best["key"]:
                best.update(key=key, record=record, miss=size)
            if record[0] == "ok" and size <= AIM_TOLERANCE:
                raise _Done
            if miss is None or not all(map(math.isfinite, miss)):
                raise _Done  # a failed flight ends the aim: the best so far is kept
            seen[x] = miss
            return miss

        try:
            if not round_:
                f0 = evaluate(start)[0]
                x1 = start[0] + (min(max(-f0, -scale[0]), scale[0]) if identity_first else first_step[0])
                root_scalar(lambda v: evaluate([v])[0], method="secant", x0=start[0], x1=x1,
                            maxiter=AIM_FLIGHTS - 1, xtol=1e-12, rtol=1e-15)
            else:
                def jacobian(x):
                    base = evaluate(x)
                    columns = []
                    for column in (0, 1):
                        if column == 0 and identity_first:
                            columns.append((1.0, 0.0))
                            continue
                        shifted = list(x)
                        shifted[column] += first_step[column]
                        moved = evaluate(shifted)
                        columns.append(((moved[0] - base[0]) / first_step[column],
                                        (moved[1] - base[1]) / first_step[column]))
                    return [[columns[0][0], columns[1][0]], [columns[0][1], columns[1][1]]]

                # Solved in controls relative to the start, so that the first trust region is
                # factor * |diag^-1| = scale in each control.
                root(lambda u: evaluate([start[0] + u[0], start[1] + u[1]]), [0.0, 0.0], method="hybr",
                     jac=lambda u: jacobian([start[0] + u[0], start[1] + u[1]]),
                     options={"maxfev": AIM_FLIGHTS, "xtol": 1e-12, "factor": 1.0,
                              "diag": [1.0 / scale[0], 1.0 / scale[1]]})
        except (_Done, ZeroDivisionError, OverflowError, ValueError):
            pass
        return best["record"], best["miss"]

    # Burn 1: from the approach periapsis, back along the hyperbola to ignition.
    clock = 0.0
    state = None
    for k in range(burns):
        periapsis, apoapsis = orbits[k]
        radius = burn_radii[k]
        target = -gm / (periapsis + apoapsis)
        round_ = (apoapsis - periapsis) / (apoapsis + periapsis) < ROUND
        at_periapsis = abs(radius - periapsis) <= abs(radius - apoapsis)
        if k == 0:
            before = math.sqrt(v_inf * v_inf + 2.0 * gm / periapsis)
        else:
            before = _speed_on(gm, radius, *orbits[k - 1])
        impulse = abs(before - _speed_on(gm, radius, periapsis, apoapsis))
        t_b = mass * exhaust_speed / thrust * -math.expm1(-impulse / exhaust_speed)
        if k == 0:
            def fly(x, t_b=t_b, mass=mass, periapsis=periapsis, apoapsis=apoapsis, at_periapsis=at_periapsis,
                    round_=round_):
                rp = max(x[0], body_radius + 1.0)
                speed = math.sqrt(v_inf * v_inf + 2.0 * gm / rp)
                lead = 0.5 * t_b - (x[1] / speed if round_ else 0.0)
                start = _coast_span([rp, 0.0, 0.0, speed], gm, -lead, rtol, atol)
                outcome, duration, end = burn(start, target, mass, 0.0, 0.0, t_b)  # noqa: B023 (called within this iteration only)
                low = rp if lead < 0.0 else math.inf  # ignited after the approach periapsis: passed it
                record = (outcome, duration, end, -lead + duration, rp, low)
                return miss_of(outcome, end, periapsis, apoapsis, at_periapsis, round_), record

            arc = math.sqrt(v_inf * v_inf + 2.0 * gm / periapsis) * t_b
            aim_args = ([periapsis, 0.0], [1.0, 0.05 * arc + 1.0], True, [periapsis - body_radius + 1e4, arc + 1e3])
        else:
            a, e, _, _ = _elements(state, gm)
            speed = max(_speed_on(gm, radius, *_elements(state, gm)[2:]), 1.0)
            apsis_state, to_apsis = None, 0.0
            if e >= CIRCULAR and abs(target - _energy(state, gm)) > 1e-12 * abs(target):
                at_apoapsis = abs(a * (1.0 + e) - radius) < abs(a * (1.0 - e) - radius)
                period = 2.0 * math.pi * math.sqrt(a**3 / gm)
                apsis = _event(lambda _t, s, _gm: s[0] * s[2] + s[1] * s[3], -1.0 if at_apoapsis else 1.0)
                sol = solve_ivp(_coast_rhs, (0.0, 1.01 * period), list(state), method="DOP853", rtol=rtol,
                                atol=atol, events=[apsis, _periapsis_event], args=(gm,))
                to_apsis, apsis_state = float(sol.t_events[0][0]), list(sol.y_events[0][0])
                passed = [math.hypot(y[0], y[1]) for t, y in zip(sol.t_events[1], sol.y_events[1], strict=True)
                          if t < to_apsis]
                coast_low = min(passed, default=math.inf)

            def fly(x, t_b=t_b, mass=mass, periapsis=periapsis, apoapsis=apoapsis, at_periapsis=at_periapsis,
                    round_=round_, state=state, speed=speed, apsis_state=apsis_state, to_apsis=to_apsis):
                lead = 0.5 * t_b - (x[1] / speed if round_ else 0.0)
                if apsis_state is not None and to_apsis > lead:
                    start, coast = _coast_span(apsis_state, gm, -lead, rtol, atol), to_apsis - lead
                else:
                    start, coast = list(state), 0.0
                rate = x[0] / max(0.5 * t_b, 1e-9)
                outcome, duration, end = burn(start, target, mass, rate, 0.5 * t_b, t_b)  # noqa: B023 (called within this iteration only)
                low = coast_low if apsis_state is not None and coast > 0.0 else math.inf  # noqa: B023 (called within this iteration only)
                record = (outcome, duration, end, clock + coast + duration, None, low)  # noqa: B023 (called within this iteration only)
                return miss_of(outcome, end, periapsis, apoapsis, at_periapsis, round_), record

            arc = speed * t_b
            aim_args = ([0.0, 0.0], [0.01, 0.05 * arc + 1.0], False, [MAX_TURN, arc + 1e3])
        start_x, first_step, identity_first, scale = aim_args
        record, miss = aim(fly, start_x, round_, first_step, identity_first, scale)
        if not round_:
            # An ellipse whose aim by one control missed (or hit the surface) is aimed again to end
            # on it at its apsis, horizontal, with both controls; the better flight by the
            # ellipse's own miss is kept (flown beats failed, then the smaller miss).
            def ellipse_key(record, periapsis=periapsis, apoapsis=apoapsis, at_periapsis=at_periapsis):
                found = miss_of(record[0], record[2], periapsis, apoapsis, at_periapsis, False)
                return (0 if record[0] == "ok" else 1, math.inf if found is None else abs(found[0]))

            key = ellipse_key(record)
            if record[0] == "surface_impact" or (record[0] == "ok" and key[1] > AIM_TOLERANCE):
                again, _ = aim(functools.partial(fly, round_=True), start_x, True, first_step, identity_first, scale)
                if again is not None and ellipse_key(again) < key:
                    record = again
                miss = ellipse_key(record)[1]
        if k == 0:
            approach = record[4]
        outcome, duration, state, clock, _, low = record
        lowest = min(lowest, low)
        misses.append(miss)
        if outcome != "ok":
            return failed(outcome)
        after = mass - mass_flow * duration
        delta_v[k] = exhaust_speed * math.log(mass / after)
        mass = after
    _, _, reached_periapsis, reached_apoapsis = _elements(state, gm)
    if reached_periapsis < body_radius:
        return failed("surface_impact")
    if lowest < body_radius - SAFE_MARGIN:
        return failed("below_safe_altitude")
    trim = trim_cost(gm, reached_periapsis, reached_apoapsis, *orbits[-1])
    # The trim is costed as an impulse only if it is a short burn itself: at most 10 degrees of the
    # target orbit at its periapsis speed, at this thrust (the model's rule); else the aim did not meet it.
    target_periapsis, target_apoapsis = orbits[-1]
    trim_time = mass * exhaust_speed / thrust * -math.expm1(-trim / exhaust_speed)
    periapsis_speed = math.sqrt(gm * (2.0 / target_periapsis - 2.0 / (target_periapsis + target_apoapsis)))
    if periapsis_speed / target_periapsis * trim_time > math.radians(10.0):
        return failed("aim_not_met")
    if mass * math.exp(-trim / exhaust_speed) < RESERVE * initial_mass:  # the trim comes from the same tanks
        return failed("propellant_exhausted")
    return AimedCapture(delta_v, trim, sum(delta_v) + trim, approach, misses, flights, "ok")
