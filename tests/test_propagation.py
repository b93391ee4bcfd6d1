"""Fly every capture sequence with an independent numerical propagator.

The strategy kernels in ``sweep.physics.capture`` are closed-form (vis-viva and Kepler's
third law). Here each sequence is flown instead: the craft starts far out on the inbound
hyperbola, set up from energy and angular momentum only, and the planar two-body equations
of motion are integrated with scipy's DOP853 between apsides, found as sign changes of
r.v. The kernel's burn magnitudes are applied along (or against) the velocity at each
apsis, and after the last burn the orbit must be the target circle, reached after exactly
the kernel's ``time``.

# independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass,
#   planar equations of motion r'' = -mu r / |r|^3, written out below.

All bodies and radii below are test inputs chosen here (rounded textbook magnitudes, not
read from the package's catalog); the checks hold for any positive values.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from sweep.physics.capture import (
    best_intermediate_apoapsis,
    direct_capture,
    three_burn_capture,
    two_burn_capture,
)
from sweep.physics.conics import hyperbolic_periapsis_speed

# ---------------------------------------------------------------------------------------
# Test inputs (SI). Gravitational parameters and radii are rounded textbook magnitudes,
# chosen here as inputs; nothing is compared against them.
# ---------------------------------------------------------------------------------------
MU_MARS, R_MARS = 4.2828e13, 3389.5e3
MU_MOON, R_MOON = 4.9049e12, 1737.4e3
MU_JUPITER, R_JUPITER = 1.26687e17, 69911e3

# (label, mu, periapsis radius r_p, target radius r_t)
LOW_DIVE = [  # r_p below the target: capture low, raise to the target
    ("mars", MU_MARS, R_MARS + 250e3, R_MARS + 400e3),
    ("moon", MU_MOON, R_MOON + 50e3, R_MOON + 100e3),
    ("jupiter", MU_JUPITER, 1.1 * R_JUPITER, 2.0 * R_JUPITER),
]
HIGH_CAPTURE = [  # r_p above the target: capture high, lower to the target
    ("mars", MU_MARS, R_MARS + 2000e3, R_MARS + 400e3),
    ("moon", MU_MOON, R_MOON + 1000e3, R_MOON + 100e3),
    ("jupiter", MU_JUPITER, 4.0 * R_JUPITER, 1.5 * R_JUPITER),
]
V_INF = [500.0, 2000.0, 5000.0, 8000.0]  # arrival speeds [m/s], test inputs

# ---------------------------------------------------------------------------------------
# Integrator settings and tolerances.
# ---------------------------------------------------------------------------------------
RTOL = 1e-12  # DOP853 relative tolerance: local errors ~1e-12 per step; over the approach
#               and a few orbits the global relative error stays near 1e-10 (measured:
#               worst 2e-10, on the closure of the final circle, over all cases here).
ATOL_POSITION = 1e-6  # m; at or below rtol * radius (radii >= 1.7e6 m), so rtol governs
ATOL_VELOCITY = 1e-9  # m/s; far below rtol * speed (speeds >= ~1e2 m/s)
START_FACTOR = 200.0  # start the approach at 200 r_p, where the hyperbola is well open

# Radius and speed: measured errors are at most 1e-12 relative at the approach periapsis
# and 3.5e-11 around the final circle (integrator rtol 1e-12 accumulated over a few hundred
# steps); 1e-8 relative leaves more than two orders of margin, yet a 1 mm/s error in the
# last burn (~3e-7 of the orbital speed, so ~6e-7 of the semi-major axis) still fails
# (see test_wrong_burn_is_detected).
RADIUS_RTOL = 1e-8
SPEED_RTOL = 1e-8
# Coast time: apsis events are located by root-finding on DOP853's dense output; r.v
# crosses zero linearly in time there, so the event time is as accurate as the state
# (measured worst 1e-10 relative); 1e-8 relative leaves two orders of margin.
TIME_RTOL = 1e-8
SAMPLES_PER_CIRCLE = 361  # radius sampled every degree around the final circle


def _two_body(_t, y, mu):
    """Planar two-body point-mass equations of motion: y = (x, y, vx, vy)."""
    x, yy, vx, vy = y
    r3 = (x * x + yy * yy) ** 1.5
    return [vx, vy, -mu * x / r3, -mu * yy / r3]


def _radial_rate(_t, y, _mu):
    """r.v: zero at an apsis, rising through zero at periapsis, falling at apoapsis."""
    return y[0] * y[2] + y[1] * y[3]


def _periapsis_event():
    event = functools.partial(_radial_rate)  # a fresh callable to carry the event attributes
    event.terminal, event.direction = True, 1.0
    return event


def _apoapsis_event():
    event = functools.partial(_radial_rate)
    event.terminal, event.direction = True, -1.0
    return event


_ATOL = np.array([ATOL_POSITION, ATOL_POSITION, ATOL_VELOCITY, ATOL_VELOCITY])


def _energy_period(state, mu):
    """Period of the (bound) conic through ``state``, from its specific energy."""
    r, v = np.hypot(state[0], state[1]), np.hypot(state[2], state[3])
    energy = 0.5 * v * v - mu / r
    assert energy < 0.0, "expected a bound orbit after the burn"
    a = -mu / (2.0 * energy)
    return 2.0 * math.pi * math.sqrt(a**3 / mu)


def _coast_to(state, mu, event, t_max):
    """Integrate from ``state`` until ``event`` fires; return (elapsed time, state)."""
    sol = solve_ivp(
        _two_body, (0.0, t_max), state, method="DOP853", rtol=RTOL, atol=_ATOL,
        events=event, args=(mu,),
    )
    assert sol.status == 1 and sol.t_events[0].size == 1, "apsis not reached"
    return float(sol.t_events[0][0]), sol.y_events[0][0]


def _coast_to_periapsis(state, mu, t_max):
    return _coast_to(state, mu, _periapsis_event(), t_max)


def _coast_to_apoapsis(state, mu, t_max):
    return _coast_to(state, mu, _apoapsis_event(), t_max)


def _burn(state, dv, sign):
    """Tangential impulse: change the speed by sign * dv along the velocity."""
    v = state[2:]
    new = state.copy()
    new[2:] = v * (1.0 + sign * dv / np.linalg.norm(v))
    return new


def _radius(state):
    return float(np.hypot(state[0], state[1]))


def _speed(state):
    return float(np.hypot(state[2], state[3]))


@functools.cache
def _approach(v_inf, mu, r_p):
    """Propagate the inbound hyperbola from far out to its periapsis.

    Set up without the periapsis-speed formula: at r0 the speed follows from energy,
    v0^2 / 2 - mu / r0 = v_inf^2 / 2, and the angular momentum from the aiming radius,
    h = b v_inf with b = r_p sqrt(1 + 2 mu / (r_p v_inf^2)) (Curtis, Orbital Mechanics
    for Engineering Students, Ch. 8, aiming radius; from memory). Counter-clockwise motion.
    """
    r0 = START_FACTOR * r_p
    v0 = math.sqrt(v_inf**2 + 2.0 * mu / r0)
    h = r_p * v_inf * math.sqrt(1.0 + 2.0 * mu / (r_p * v_inf**2))
    v_transverse = h / r0
    v_radial = -math.sqrt(v0**2 - v_transverse**2)  # inbound
    state = np.array([r0, 0.0, v_radial, v_transverse])
    # bound on the time to periapsis: the speed never drops below v0 inbound, and the
    # path is shorter than a few r0
    _, periapsis = _coast_to_periapsis(state, mu, 10.0 * r0 / v0)
    periapsis.setflags(write=False)
    return periapsis


def _check_target_circle(state, mu, r_t):
    """Propagate one full circular period from ``state``; it must stay on the circle."""
    period = 2.0 * math.pi * math.sqrt(r_t**3 / mu)  # Kepler's third law, a = r_t
    t_eval = np.linspace(0.0, period, SAMPLES_PER_CIRCLE)
    sol = solve_ivp(
        _two_body, (0.0, period), state, method="DOP853", rtol=RTOL, atol=_ATOL,
        t_eval=t_eval, args=(mu,),
    )
    assert sol.status == 0
    radii = np.hypot(sol.y[0], sol.y[1])
    speeds = np.hypot(sol.y[2], sol.y[3])
    np.testing.assert_allclose(radii, r_t, rtol=RADIUS_RTOL, atol=0.0)
    np.testing.assert_allclose(speeds, math.sqrt(mu / r_t), rtol=SPEED_RTOL, atol=0.0)
    # after one circular period the craft is back where it started (closes the circle:
    # checks the period, not only the radius); same relative tolerance, on position
    np.testing.assert_allclose(sol.y[:2, -1], state[:2], rtol=0.0, atol=RADIUS_RTOL * r_t)


def _cases(geometries):
    return [
        pytest.param(mu, r_p, r_t, v_inf, id=f"{label}-rp{r_p / 1e3:.0f}km-rt{r_t / 1e3:.0f}km-vinf{v_inf:.0f}")
        for label, mu, r_p, r_t in geometries
        for v_inf in V_INF
    ]


# ---------------------------------------------------------------------------------------
# 1. The approach: periapsis radius and speed, from the far-out start.
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("mu, r_p, r_t, v_inf", _cases(LOW_DIVE + HIGH_CAPTURE))
def test_approach_reaches_periapsis_at_hyperbolic_speed(mu, r_p, r_t, v_inf):
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass,
    # started at 200 r_p from energy and aiming radius only
    periapsis = _approach(v_inf, mu, r_p)
    assert _radius(periapsis) == pytest.approx(r_p, rel=RADIUS_RTOL)  # rtol: see RADIUS_RTOL
    # the kernel's first-burn input speed (every strategy's burn 1 starts from it)
    kernel_speed = float(hyperbolic_periapsis_speed(v_inf, mu, r_p))
    assert _speed(periapsis) == pytest.approx(kernel_speed, rel=SPEED_RTOL)  # see SPEED_RTOL


# ---------------------------------------------------------------------------------------
# 2-3. Fly each strategy's burns and check the final circle and the time.
# ---------------------------------------------------------------------------------------
DIRECT_TARGETS = [  # every distinct circle above, each flown as a direct-capture target
    (label, mu, r, r)
    for label, mu, r in sorted({(lb, mu, r) for lb, mu, rp, rt in LOW_DIVE + HIGH_CAPTURE for r in (rp, rt)})
]


@pytest.mark.parametrize("mu, r_p, r_t, v_inf", _cases(DIRECT_TARGETS))
def test_direct_capture_flies_to_target_circle(mu, r_p, r_t, v_inf):
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass.
    # Direct capture burns at the target radius, so the approach periapsis is r_t here.
    maneuver = direct_capture(v_inf, mu, r_t)
    assert len(maneuver.burns) == 1
    state = _burn(_approach(v_inf, mu, r_t), float(maneuver.burns[0]), -1.0)
    _check_target_circle(state, mu, r_t)
    assert float(maneuver.time) == 0.0  # no coast: the only burn is at periapsis arrival


@pytest.mark.parametrize("mu, r_p, r_t, v_inf", _cases(LOW_DIVE + HIGH_CAPTURE))
def test_two_burn_capture_flies_to_target_circle(mu, r_p, r_t, v_inf):
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass
    maneuver = two_burn_capture(v_inf, mu, r_p, r_t)
    dv1, dv2 = (float(b) for b in maneuver.burns)
    state = _burn(_approach(v_inf, mu, r_p), dv1, -1.0)  # retrograde at r_p
    bound = _energy_period(state, mu)  # one period bounds a half-orbit coast
    if r_t > r_p:  # r_p is the periapsis of the new ellipse: coast to its apoapsis
        coast, state = _coast_to_apoapsis(state, mu, bound)
        sign = +1.0  # raise the periapsis from r_p to r_t
    else:  # r_p is the apoapsis: coast down to periapsis
        coast, state = _coast_to_periapsis(state, mu, bound)
        sign = -1.0  # lower the apoapsis from r_p to r_t
    assert _radius(state) == pytest.approx(r_t, rel=RADIUS_RTOL)  # opposite apsis at r_t
    state = _burn(state, dv2, sign)
    _check_target_circle(state, mu, r_t)
    assert float(maneuver.time) == pytest.approx(coast, rel=TIME_RTOL)  # see TIME_RTOL


def _fly_three_burn(mu, r_p, r_t, r_a, v_inf):
    """Fly the three-burn sequence; return the kernel's Maneuver, the total coast time from
    periapsis arrival to the last burn, and the state just after the last burn."""
    maneuver = three_burn_capture(v_inf, mu, r_p, r_t, r_a)
    dv1, dv2, dv3 = (float(b) for b in maneuver.burns)
    state = _burn(_approach(v_inf, mu, r_p), dv1, -1.0)  # retrograde at r_p
    first, state = _coast_to_apoapsis(state, mu, _energy_period(state, mu))
    assert _radius(state) == pytest.approx(r_a, rel=RADIUS_RTOL)  # capture ellipse apoapsis
    state = _burn(state, dv2, +1.0 if r_t > r_p else -1.0)  # move the far apsis to r_t
    second, state = _coast_to_periapsis(state, mu, _energy_period(state, mu))
    assert _radius(state) == pytest.approx(r_t, rel=RADIUS_RTOL)  # new periapsis at r_t
    state = _burn(state, dv3, -1.0)  # retrograde: lower the apoapsis to r_t
    return maneuver, first + second, state


THREE_BURN_CASES = _cases(LOW_DIVE + HIGH_CAPTURE)


@pytest.mark.parametrize("mu, r_p, r_t, v_inf", THREE_BURN_CASES)
def test_three_burn_capture_flies_to_target_circle(mu, r_p, r_t, v_inf):
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass
    r_a = 20.0 * r_t  # test input: a high intermediate apoapsis
    maneuver, coast, state = _fly_three_burn(mu, r_p, r_t, r_a, v_inf)
    _check_target_circle(state, mu, r_t)
    assert float(maneuver.time) == pytest.approx(coast, rel=TIME_RTOL)  # see TIME_RTOL


@pytest.mark.parametrize("mu, r_p, r_t, v_inf", THREE_BURN_CASES)
def test_three_burn_at_best_apoapsis_flies_to_target_circle(mu, r_p, r_t, v_inf):
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass
    upper = 12.0 * max(r_p, r_t)  # test input: apoapsis bound
    r_a = float(best_intermediate_apoapsis(mu, r_p, r_t, upper))
    assert max(r_p, r_t) <= r_a <= upper  # within the admissible interval
    maneuver, coast, state = _fly_three_burn(mu, r_p, r_t, r_a, v_inf)
    _check_target_circle(state, mu, r_t)
    assert float(maneuver.time) == pytest.approx(coast, rel=TIME_RTOL)  # see TIME_RTOL


# ---------------------------------------------------------------------------------------
# The checks above can fail: a burn off by 1 mm/s is caught on the final circle.
# ---------------------------------------------------------------------------------------
def test_wrong_burn_is_detected():
    # independent: scipy.integrate.solve_ivp (DOP853, rtol=1e-12), two-body point mass
    label, mu, r_p, r_t = LOW_DIVE[0]
    v_inf = 2000.0
    maneuver = two_burn_capture(v_inf, mu, r_p, r_t)
    dv1, dv2 = (float(b) for b in maneuver.burns)
    state = _burn(_approach(v_inf, mu, r_p), dv1, -1.0)
    _, state = _coast_to_apoapsis(state, mu, _energy_period(state, mu))
    state = _burn(state, dv2 + 1e-3, +1.0)  # 1 mm/s too much: radius varies ~6e-7 relative
    with pytest.raises(AssertionError, match="Not equal to tolerance"):
        _check_target_circle(state, mu, r_t)
