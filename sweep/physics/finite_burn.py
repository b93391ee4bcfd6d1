r"""Finite-thrust capture sequences: planar two-body motion with constant thrust, integrated
for many points at once.

Every point of a batch is advanced together with numpy arrays by a classical fourth-order
Runge-Kutta scheme, each point with its own step size and its own stop condition. Coasts
between burns are Keplerian and solved analytically. SI units throughout. The burn
integrator also exists compiled per point (``finite_burn_compiled``, numba), used when numba
imports and the environment does not set ``CAPSWEEP_KERNEL=numpy``: same operations, same
order, equal results (tested); the numpy one here is the reference and the fallback.

Model
-----
* Planar two-body motion, point-mass gravity: :math:`\ddot{\mathbf r} = -\mu \mathbf r / r^3
  + (T/m)\,\hat{\mathbf u}`, constant thrust :math:`T`, mass flow :math:`\dot m = -T/v_e`,
  :math:`v_e = I_{sp} g_0`.
* Steering ``"tangential"``: :math:`\hat{\mathbf u} = \pm \hat{\mathbf v}`, against the velocity
  for a burn that lowers the orbital energy (braking), along it for a burn that raises it.
  ``"inertial"``: a fixed direction, the velocity direction the impulsive burn would have at
  its apsis (with the same sign rule); used to compare with Robbins' estimate.
* Ignition: half of the burn's *impulsive-equivalent* time
  :math:`t_b = (m v_e / T)(1 - e^{-\Delta v_{imp}/v_e})` before the apsis where the impulsive
  burn would be made (the approach periapsis for the first burn; for later burns the apsis of
  the orbit actually reached that lies nearest the burn radius), moved by the aim below. Where
  that moment has already passed when the previous burn ends, the burn starts at once.
* A burn ends when the orbit's specific energy :math:`v^2/2 - \mu/r` reaches its intended
  orbit's, :math:`-\mu / (r_p + r_a)`.

Aim
---
Every burn is aimed, all points in lockstep by Broyden's method ([4]_), so that the orbit it
reaches has the intended apsides within 0.1 km (``AIM_TOLERANCE``, 20 m on each miss):

* the first burn by the approach periapsis it is flown with (which may lie well above the
  impulsive one: the braking arc then sinks to the intended periapsis rather than below it);
* every later burn by a turn of the thrust from its steering law at a constant rate through
  mid-burn, :math:`\delta = \dot\delta\,(t - t_{ign} - t_b/2)`, held at :math:`\pm 0.5` rad
  beyond: a turn of one sign before the apsis and the other after changes the eccentricity at
  first order, which shifting the ignition of a burn centred on an apsis cannot;
* and, where the intended orbit is a circle or nearly one (eccentricity below 0.1), also by
  the ignition time, so that the burn ends on it at its apsis, horizontal.

The miss of an ellipse is the radius of its apsis on the burn's side against the intended
one; the miss of a circle is the eccentricity vector times the semi-major axis, along and
across the position where the burn ends. An ellipse that one control cannot meet (for a
small intended eccentricity the reached one may have a floor above it) is aimed again with
both controls to end on it at its apsis, horizontal (the circle's miss with the intended
eccentricity), and the better flight kept. A Broyden step that fails or misses by more is
not taken and the next may reach half as far; an aim that stalls starts afresh from its best
flight with its Jacobian measured there by differences, up to five times, each start taking
half the reach of the last. What aiming cannot remove is closed by an impulsive
*trim* to the exact target orbit (any orientation): the cheaper order of two apsis changes,
costed with vis-viva ([2]_ Ch. 2), reported apart and added to the total by the engine.

Split burns
-----------
A burn may be split over several passes of its apsis: each pass keeps the burn's apsis and
takes an equal share of the speed change there; a split capture's first pass at least enters
the long ellipse reaching ``split_apoapsis``. Each pass is aimed like a later burn. With
``passes="auto"`` a sequence that fails for a reason shorter burns may cure (it cannot capture,
it hits the surface, it passes below the safe radius) or needs a trim above ``TRIM_SPLIT``
(1 m/s) is flown again with the passes of one burn doubled, up to ``max_passes``: of the burns
up to the one that failed, the one sweeping the widest arc per pass (its impulsive-equivalent
time at the angular rate of its apsis), if that exceeds 10 degrees. The first flight that flies
with a small trim is kept; else the cheapest that flies; else the last failure.

Safety
------
The lowest radius reached is tracked through the whole sequence: each RK4 step's end, the
osculating periapsis where the radial velocity turns outward within a step, the approach
periapsis if ignition comes after it, the periapsis of any coast that passes one, the orbit
finally reached and the trim's intermediate orbit. A sequence passing more than
``SAFE_TOLERANCE`` (0.1 km) below the safe radius is ``below_safe_altitude``; one that meets
the surface is ``surface_impact``. A sequence whose trim would itself be a long burn (sweeping
more than 10 degrees of the target orbit at its periapsis speed, at the engine's thrust) is
``aim_not_met``: costing it as an impulse would not hold, and the orbit was not reached.

References
----------
.. [1] H. M. Robbins, "An analytical study of the impulsive approximation", AIAA Journal
   4(8):1417-1423, 1966, doi:10.2514/3.3687.
.. [2] H. D. Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed. Oxford, UK:
   Butterworth-Heinemann, 2014. Ch. 3 (Kepler's equation), Ch. 4 (elements from state),
   Ch. 6 (finite burns, rocket equation).
.. [3] E. Hairer, S. P. Norsett and G. Wanner, *Solving Ordinary Differential Equations I*,
   2nd ed. Berlin: Springer, 1993, Sec. II.1 (the classical Runge-Kutta method).
.. [4] C. G. Broyden, "A class of methods for solving nonlinear simultaneous equations",
   Mathematics of Computation 19(92):577-593, 1965, doi:10.2307/2003941.
"""

from __future__ import annotations

import os
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from sweep.physics.conics import hyperbolic_periapsis_speed

__all__ = [
    "AIM_TOLERANCE",
    "MAX_PASSES",
    "OUTCOMES",
    "SAFE_TOLERANCE",
    "TRIM_SPLIT",
    "FiniteCapture",
    "fly_capture",
    "impulsive_burn_time",
]

# RK4 step: the smallest of three limits, taken afresh at every step of every point. Measured
# on 8,000 seeded Mars captures (T/W 0.05 to 3, v_inf 0.5 to 7 km/s, all strategies): at most
# 5e-3 m/s of delta-v from a run with 8x smaller steps, against the 1 m/s the issue asks.
STEPS_PER_BURN = 16  # a burn's impulsive-equivalent duration over this many steps
STEPS_PER_ORBIT = 200  # 1/200 of the circular period at the current radius
MASS_STEP = 0.05  # the time to burn 5 % of the current mass (T/m changes by 5 % a step)
_NEWTON_STEPS = 3  # end-of-burn refinement: Newton on the energy from a secant start
_KEPLER_STEPS = 200  # Newton (or bisection) steps on Kepler's equation at most; stops once converged
_MAX_STEPS = 200_000  # a burn still going after this many steps is reported propellant_exhausted
_LEAST_SPEED = 1e-3  # m/s: floor on the speed dividing tangential thrust (no direction at rest)
_RESERVE = 1e-3  # fraction of the arrival mass that cannot be burned (propellant_exhausted below it)

# m: the aim stops once each miss is below this; a circle's two misses together then put its
# apsides within sqrt(2) x 20 m of the intended radius, well inside the 0.1 km asked. Tighter
# than 0.1 km needs because a later burn pays for the miss its predecessor left: at 70 m the
# totals of a three-burn sequence moved by up to 0.09 m/s with where the aims stopped, at 20 m
# by 0.03 m/s (tests/bench/bench_finite.py, 2026-12-03), for about a fifth more flights.
AIM_TOLERANCE = 20.0
SAFE_TOLERANCE = 100.0  # m: passing below the safe radius by more than this is below_safe_altitude
MAX_PASSES = 8  # "auto" splits a burn over at most this many passes of its apsis
TRIM_SPLIT = 1.0  # m/s: "auto" splits further where the trim would exceed this
SPLIT_ARC = np.radians(10.0)  # "auto" splits only burns sweeping a wider arc than this per pass
_AIM_STEPS = 12  # Broyden iterations at most per pass (after the first shot and the differences)
_RESTARTS = 5  # a stalled aim starts afresh from its best flight this many times, its Jacobian measured there
# Where a capture burn aimed to end at its apsis starts its aim: the ignition moved by this share
# of the burn's arc (along-track speed times impulsive-equivalent time), earlier. Only a starting
# guess, the aim decides: the median of the aimed shifts over 3,000 seeded bench points (Mars,
# Venus, Moon, Jupiter, T/W 0.1-3; quartiles -0.21 and -0.10, about the same at every arc
# length), measured 2026-12-03; it saves about a fifth of those aims' flights.
_FIRST_SHIFT = -0.14
_STALL = 3  # iterations without the best miss shrinking by a tenth before the aim of a point stops
_MAX_TURN = 0.5  # rad: the aim turns a later burn's thrust at most this far from its law, at the burn's ends
# Intended orbits of smaller eccentricity are aimed as circles are: to end on them at their apsis,
# horizontal, with both controls. Measured on 4,000 seeded bench points (2026-12-03): below 0.1 the
# aim by the apsis radius alone failed for about half of the near-circular two_burn captures, and
# aiming those at the apsis from the start takes 11 % fewer flights over all three strategies than
# trying the one control first (0.2: the same; 1: 59 % more).
_ROUND = 0.1

# Outcome codes of a sequence (index = code).
OUTCOMES = ("ok", "engine_cannot_capture", "propellant_exhausted", "surface_impact", "below_safe_altitude",
            "aim_not_met")
# Failures a capture split over more periapsis passes may cure: shorter burns stay closer to the periapsis.
_SPLIT_FIXES = [OUTCOMES.index(name) for name in ("engine_cannot_capture", "surface_impact", "below_safe_altitude",
                                                 "aim_not_met")]


class FiniteCapture(NamedTuple):
    """Per-burn arrays have shape (burns, n); per-sequence arrays shape (n,). SI units."""

    delta_v: np.ndarray  # m/s, v_e ln(m_before / m_after) of each burn (a split capture: its passes summed)
    duration: np.ndarray  # s
    periapsis_radius: np.ndarray  # m, of the orbit reached after each burn (before the trim)
    apoapsis_radius: np.ndarray  # m
    time: np.ndarray  # s, from the aimed approach periapsis passage to the end of the last burn
    outcome: np.ndarray  # int8, index into OUTCOMES
    ignition: np.ndarray  # s, (burns, n): each burn's ignition (its first pass) from the approach periapsis passage
    pitch_rate: np.ndarray  # rad/s, (burns, n): rate the thrust turns from its law through mid-burn (first pass)
    trim_delta_v: np.ndarray  # m/s, impulsive trim from the orbit reached to the exact target orbit
    lowest_radius: np.ndarray  # m, lowest radius reached anywhere in the sequence (trim included)
    approach_periapsis: np.ndarray  # m, the approach periapsis the first burn is aimed with
    passes: np.ndarray  # int8, (burns, n): passes of its apsis each burn is split over
    # s, (burns, passes, n): ignition of each pass of each burn (NaN beyond its passes; for a failed
    # sequence, the passes as flown until it failed)
    pass_ignition: np.ndarray
    pass_pitch_rate: np.ndarray  # rad/s, (burns, passes, n)
    pass_turn_centre: np.ndarray  # s from the approach periapsis passage: when the turn passes through zero
    pass_energy: np.ndarray  # J/kg: the specific energy each pass ends on
    pass_delta_v: np.ndarray  # m/s, (burns, passes, n)


def impulsive_burn_time(delta_v: ArrayLike, mass: ArrayLike, thrust: ArrayLike, exhaust_speed: ArrayLike):
    r"""
    Burn time at constant thrust to deliver ``delta_v`` from ``mass``.

    Returns
    -------
    time : numeric
        :math:`t_b = (m v_e / T)(1 - e^{-\Delta v / v_e})` ([2]_ Ch. 6). [s]
    """
    return np.asarray(mass) * exhaust_speed / thrust * -np.expm1(-np.asarray(delta_v) / exhaust_speed)


class _Engine(NamedTuple):
    """Per-point parameters of one burn (arrays of equal length); ``ux, uy`` None = tangential."""

    gm: np.ndarray
    thrust: np.ndarray
    mass: np.ndarray  # at ignition
    mass_flow: np.ndarray
    sign: np.ndarray  # +1 raises the orbital energy, -1 lowers it
    ux: np.ndarray | None = None
    uy: np.ndarray | None = None
    rate: np.ndarray | None = None  # rad/s: the thrust turns from its law at this rate (None: it does not) ...
    middle: np.ndarray | None = None  # s after ignition: ... passing through it at this moment

    def take(self, index: np.ndarray) -> _Engine:
        return _Engine(*(None if value is None else value[index] for value in self))

    @staticmethod
    def join(parts: list[_Engine]) -> _Engine:
        return _Engine(*(None if values[0] is None else np.concatenate(values) for values in zip(*parts, strict=True)))


def _energy(x, y, vx, vy, gm):
    return 0.5 * (vx * vx + vy * vy) - gm / np.sqrt(x * x + y * y)


def _apsides(x, y, vx, vy, gm):
    """Periapsis and apoapsis radii of the osculating conic (apoapsis inf when unbound)."""
    r = np.sqrt(x * x + y * y)
    energy = 0.5 * (vx * vx + vy * vy) - gm / r
    h = x * vy - y * vx
    eccentricity = np.sqrt(np.maximum(1.0 + 2.0 * energy * h * h / (gm * gm), 0.0))
    periapsis = h * h / (gm * (1.0 + eccentricity))
    with np.errstate(divide="ignore"):
        apoapsis = np.where(eccentricity < 1.0, h * h / (gm * (1.0 - eccentricity)), np.inf)
    return periapsis, apoapsis


def _accelerations(x, y, vx, vy, thrust, p: _Engine):
    """
    Two-body gravity plus thrust. ``thrust`` is (signed T/m, cos, sin of the turn from the
    steering law, or None for no turn): the direction is the law's (velocity or fixed) turned
    counter-clockwise by that angle.
    """
    acceleration, cos, sin = thrust
    r2 = x * x + y * y
    gravity = p.gm / (r2 * np.sqrt(r2))
    if p.ux is None:
        scale = acceleration / np.maximum(np.sqrt(vx * vx + vy * vy), _LEAST_SPEED)
        ux, uy = vx * scale, vy * scale
    else:
        ux, uy = p.ux * acceleration, p.uy * acceleration
    if cos is not None:
        ux, uy = ux * cos - uy * sin, ux * sin + uy * cos
    return ux - gravity * x, uy - gravity * y


def _thrust(tau, p: _Engine):
    """
    Signed thrust acceleration T/m at ``tau`` after ignition (the sign is unity for fixed
    steering) and the cosine and sine of the turn ``rate (tau - middle)`` (None without one).
    """
    acceleration = p.thrust / (p.mass - p.mass_flow * tau)
    acceleration = acceleration * p.sign if p.ux is None else acceleration
    if p.rate is None:
        return acceleration, None, None
    # Held at its end values past the burn's expected length: the thrust never turns across the velocity.
    angle = np.minimum(np.maximum(p.rate * (tau - p.middle), -_MAX_TURN), _MAX_TURN)
    return acceleration, np.cos(angle), np.sin(angle)


def _rk4(state, tau, dt, p):
    """One classical Runge-Kutta step ([3]_) of every point with its own ``dt``."""
    x, y, vx, vy = state
    half = 0.5 * dt
    start, middle, end = (_thrust(t, p) for t in (tau, tau + half, tau + dt))
    ax1, ay1 = _accelerations(x, y, vx, vy, start, p)
    x2, y2, vx2, vy2 = x + half * vx, y + half * vy, vx + half * ax1, vy + half * ay1
    ax2, ay2 = _accelerations(x2, y2, vx2, vy2, middle, p)
    x3, y3, vx3, vy3 = x + half * vx2, y + half * vy2, vx + half * ax2, vy + half * ay2
    ax3, ay3 = _accelerations(x3, y3, vx3, vy3, middle, p)
    x4, y4, vx4, vy4 = x + dt * vx3, y + dt * vy3, vx + dt * ax3, vy + dt * ay3
    ax4, ay4 = _accelerations(x4, y4, vx4, vy4, end, p)
    sixth = dt / 6.0
    return (
        x + sixth * (vx + 2.0 * (vx2 + vx3) + vx4),
        y + sixth * (vy + 2.0 * (vy2 + vy3) + vy4),
        vx + sixth * (ax1 + 2.0 * (ax2 + ax3) + ax4),
        vy + sixth * (ay1 + 2.0 * (ay2 + ay3) + ay4),
    )


def _step_size(burn_step, x, y, gm, mass, mass_flow, refinement):
    """RK4 step per point: the burn step, the local-period limit and the mass limit."""
    r2 = x * x + y * y
    local_period = 2.0 * np.pi * np.sqrt(r2 * np.sqrt(r2) / gm)
    with np.errstate(divide="ignore"):
        mass_time = MASS_STEP * mass / mass_flow
    return np.minimum(np.minimum(burn_step, local_period / STEPS_PER_ORBIT), mass_time) / refinement


def _stumpff(z):
    """Stumpff functions C(z), S(z) ([2]_ Ch. 3): each branch only where it applies, series near 0."""
    c, s = np.empty_like(z), np.empty_like(z)
    small = np.abs(z) < 1e-3
    c[small] = 1 / 2 - z[small] / 24 + z[small] ** 2 / 720 - z[small] ** 3 / 40320
    s[small] = 1 / 6 - z[small] / 120 + z[small] ** 2 / 5040 - z[small] ** 3 / 362880
    for mask, cosine, sine in ((~small & (z > 0), np.cos, np.sin), (~small & (z < 0), np.cosh, np.sinh)):
        if mask.any():
            root = np.sqrt(np.abs(z[mask]))
            sign = 1.0 if cosine is np.cos else -1.0
            c[mask] = sign * (1.0 - cosine(root)) / root**2
            s[mask] = sign * (root - sine(root)) / root**3
    return c, s


def _coast_back(state, duration, gm):
    """
    Coast the approach back in time by ``duration`` (>= 0) from its periapsis, any conic.

    Universal-variable Kepler propagation with Lagrange coefficients ([2]_ Ch. 3), Newton on
    the universal anomaly: exact for hyperbolic, parabolic (zero excess speed) and elliptic arcs.
    """
    x0, y0, vx0, vy0 = (np.asarray(s, dtype=float) for s in state)
    compiled = _compiled()
    if compiled is not None:
        n = x0.size
        return compiled.coast_back(*(np.ascontiguousarray(np.broadcast_to(v, (n,)), dtype=float) for v in (
            x0, y0, vx0, vy0, duration, gm)), _KEPLER_STEPS)
    r0 = np.sqrt(x0 * x0 + y0 * y0)
    radial = (x0 * vx0 + y0 * vy0) / r0
    alpha = 2.0 / r0 - (vx0 * vx0 + vy0 * vy0) / gm  # reciprocal semi-major axis
    root_mu = np.sqrt(gm)
    dt = -np.asarray(duration, dtype=float)
    # The universal time equation rises monotonically in chi with slope r >= r0 > 0 on this arc,
    # so the root lies between 0 and sqrt(mu) dt / r0: Newton, with bisection where it would
    # leave that bracket or meets an overflow (very long hyperbolic coasts).
    low, high = np.minimum(root_mu * dt / r0, 0.0), np.maximum(root_mu * dt / r0, 0.0)
    offset = r0 * radial / root_mu

    def residual_and_slope(x_, a_, k_, r_, target):
        z = a_ * x_ * x_
        c, s = _stumpff(z)
        residual = k_ * x_ * x_ * c + (1.0 - a_ * r_) * x_**3 * s + r_ * x_ - target
        # Overflow (inf - inf) only happens far beyond the root, where the time has chi's sign.
        residual = np.where(np.isfinite(residual), residual, np.sign(x_) * np.inf)
        return residual, k_ * x_ * (1.0 - z * s) + (1.0 - a_ * r_) * x_ * x_ * c + r_

    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # Two starting guesses, keep the better: the near-periapsis one (short arcs) and, on
        # hyperbolas, sqrt(|a|) asinh(M / e) from the hyperbolic Kepler equation (long arcs).
        near = root_mu * dt / r0
        semi_major = 1.0 / np.where(alpha < 0, -alpha, np.inf)
        eccentricity = 1.0 - alpha * r0
        mean_anomaly = np.sqrt(gm / semi_major**3) * dt
        far = np.where(alpha < 0, np.sqrt(semi_major) * np.arcsinh(mean_anomaly / eccentricity), near)
        target = root_mu * dt
        near_residual = residual_and_slope(near, alpha, offset, r0, target)[0]
        far_residual = residual_and_slope(far, alpha, offset, r0, target)[0]
        chi = np.where(np.abs(far_residual) < np.abs(near_residual), far, near)
        last_step = high - low
        todo = np.arange(chi.size)
        for _ in range(_KEPLER_STEPS):
            if todo.size == 0:
                break
            x_ = chi[todo]
            residual, slope = residual_and_slope(x_, alpha[todo], offset[todo], r0[todo], target[todo])
            lo = np.where(residual < 0, x_, low[todo])
            hi = np.where(residual > 0, x_, high[todo])
            newton = x_ - residual / slope
            # Newton where it stays in the bracket and at least halves the previous step
            # (safeguarded Newton); bisection otherwise.
            good = np.isfinite(newton) & (newton >= lo) & (newton <= hi) & \
                (np.abs(2.0 * residual) <= np.abs(last_step[todo] * slope))
            update = np.where(good, newton, 0.5 * (lo + hi))
            low[todo], high[todo], chi[todo] = lo, hi, update
            last_step[todo] = update - x_
            converged = np.abs(update - x_) <= 1e-11 * np.maximum(np.abs(x_), 1.0)  # rounding floor ~1e-13
            todo = todo[~converged]
    z = alpha * chi * chi
    c, s = _stumpff(z)
    f = 1.0 - chi * chi / r0 * c
    g = dt - chi**3 / root_mu * s
    x, y = f * x0 + g * vx0, f * y0 + g * vy0
    r = np.sqrt(x * x + y * y)
    f_dot = root_mu / (r * r0) * (alpha * chi**3 * s - chi)
    g_dot = 1.0 - chi * chi / r * c
    return x, y, f_dot * x0 + g_dot * vx0, f_dot * y0 + g_dot * vy0


def _solve_kepler(mean_anomaly, eccentricity):
    """Eccentric anomaly from Kepler's equation M = E - e sin E by Newton's method ([2]_ Ch. 3)."""
    anomaly = np.where(eccentricity < 0.8, mean_anomaly, np.pi)
    for _ in range(_KEPLER_STEPS):
        step = (anomaly - eccentricity * np.sin(anomaly) - mean_anomaly) / (1.0 - eccentricity * np.cos(anomaly))
        anomaly = anomaly - step
        if np.all(np.abs(step) < 1e-14):
            break
    return anomaly


def _coast_to_ignition(state, gm, burn_radius, lead):
    """
    Coast along the (elliptic) orbit to ``lead`` seconds before the apsis nearest ``burn_radius``
    (after it, for a negative ``lead``); where that moment has passed, ignite at once.

    Returns the state at ignition, the coast time, the unit velocity direction at that apsis
    (for inertially fixed steering) and whether the coast passes the periapsis. Near-circular
    orbits (e < 1e-9) ignite at once.
    """
    x, y, vx, vy = state
    r = np.sqrt(x * x + y * y)
    v2 = vx * vx + vy * vy
    radial = x * vx + y * vy
    a = 1.0 / (2.0 / r - v2 / gm)
    ex = ((v2 - gm / r) * x - radial * vx) / gm
    ey = ((v2 - gm / r) * y - radial * vy) / gm
    e = np.sqrt(ex * ex + ey * ey)
    circular = e < 1e-9
    omega = np.arctan2(ey, ex)
    true_anomaly = np.arctan2(y, x) - omega
    root = np.sqrt(np.maximum(1.0 - e * e, 0.0))
    eccentric = np.arctan2(root * np.sin(true_anomaly), e + np.cos(true_anomaly))
    mean_now = eccentric - e * np.sin(eccentric)
    motion = np.sqrt(gm / a**3)
    at_apoapsis = np.abs(a * (1 + e) - burn_radius) < np.abs(a * (1 - e) - burn_radius)
    mean_apsis = np.where(at_apoapsis, np.pi, 0.0)
    to_apsis = np.mod(mean_apsis - mean_now, 2.0 * np.pi) / motion
    coast = np.where(circular, 0.0, np.maximum(to_apsis - lead, 0.0))
    passed = ~circular & (np.mod(mean_now, 2.0 * np.pi) + motion * coast >= 2.0 * np.pi)
    eccentric = _solve_kepler(mean_now + motion * coast, e)
    cos_e, sin_e = np.cos(eccentric), np.sin(eccentric)
    px, py = a * (cos_e - e), a * root * sin_e
    radius = a * (1.0 - e * cos_e)
    speed_scale = np.sqrt(gm * a) / radius
    qx, qy = -speed_scale * sin_e, speed_scale * root * cos_e
    cw, sw = np.cos(omega), np.sin(omega)
    new = (cw * px - sw * py, sw * px + cw * py, cw * qx - sw * qy, sw * qx + cw * qy)
    new = tuple(np.where(circular, s, n) for s, n in zip(state, new, strict=True))
    apsis_angle = omega + np.where(at_apoapsis, np.pi, 0.0)
    direction = (-np.sin(apsis_angle), np.cos(apsis_angle))
    return new, coast, direction, passed


def _burn(state, p: _Engine, target_energy, expected_time, limits, refinement=1.0):
    """
    Integrate one burn for every point until its energy reaches ``target_energy``.

    Returns the final state (the state where it stopped, for a failed point), the burn
    duration, an outcome code and the lowest radius passed per point: the smallest radius at
    the step ends and, where the radial velocity turns from inward to outward within a step,
    the osculating periapsis at that step's start. The points still burning are kept in
    compact working arrays, trimmed only on steps where some finish.
    """
    x, y, vx, vy = (np.array(s, dtype=float) for s in state)
    compiled = _compiled()
    if compiled is not None:
        n = x.size
        fixed, turning = p.ux is not None, p.rate is not None
        duration, outcome, lowest = compiled.burn(
            x, y, vx, vy, *(np.ascontiguousarray(np.broadcast_to(np.asarray(v, dtype=float), (n,))) for v in (
                p.gm, p.thrust, p.mass, p.mass_flow, p.sign, p.ux if fixed else 0.0, p.uy if fixed else 0.0,
                p.rate if turning else 0.0, p.middle if turning else 0.0)),
            fixed, turning, *(np.ascontiguousarray(np.broadcast_to(np.asarray(v, dtype=float), (n,))) for v in (
                target_energy, expected_time, limits["soi"], limits["body_radius"], limits["max_time"])),
            float(refinement), _COMPILED_CONSTANTS,
            np.array([OUTCOMES.index(k) for k in ("engine_cannot_capture", "propellant_exhausted", "surface_impact")],
                     dtype=np.int8))
        return (x, y, vx, vy), duration, outcome, lowest
    duration = np.zeros(x.size)
    outcome = np.zeros(x.size, dtype=np.int8)
    lowest = np.sqrt(x * x + y * y)
    ids = np.flatnonzero(np.abs(target_energy - _energy(x, y, vx, vy, p.gm)) > 1e-12 * np.abs(target_energy))
    burn_step = np.maximum(expected_time, 1e-3) / STEPS_PER_BURN
    q = p.take(ids)
    work = (x[ids], y[ids], vx[ids], vy[ids])
    tau, goal, burn_step, low = np.zeros(ids.size), target_energy[ids], burn_step[ids], lowest[ids]
    soi, surface, max_time = (limits[key][ids] for key in ("soi", "body_radius", "max_time"))
    ending = []  # points whose last step crossed the target energy, with that step
    for _ in range(_MAX_STEPS):
        if ids.size == 0:
            break
        dt = _step_size(burn_step, work[0], work[1], q.gm, q.mass - q.mass_flow * tau, q.mass_flow, refinement)
        dt = np.minimum(dt, np.maximum(max_time - tau, 0.0) + 1e-9)  # never step past the tanks
        new = _rk4(work, tau, dt, q)
        new_energy = _energy(*new, q.gm)
        crossed = q.sign * (new_energy - goal) >= 0.0
        nx, ny, nvx, nvy = new
        r = np.sqrt(nx * nx + ny * ny)
        turned = (work[0] * work[2] + work[1] * work[3] < 0.0) & (nx * nvx + ny * nvy >= 0.0)
        low = np.where(crossed, low, np.minimum(low, r))  # a crossing step is cut short: its end counts
        if turned.any():
            low[turned] = np.minimum(low[turned], _apsides(*(s[turned] for s in work), q.gm[turned])[0])
        escaped = ~crossed & (r > soi) & (nx * nvx + ny * nvy > 0)
        exhausted = ~crossed & ~escaped & (tau + dt >= max_time)
        impact = ~crossed & ~escaped & ~exhausted & (r < surface)
        done = crossed | escaped | exhausted | impact
        if done.any():
            if crossed.any():
                # Finished after the loop, all together: one partial-step solve instead of one per step.
                c = np.flatnonzero(crossed)
                ending.append((ids[c], tuple(s[c] for s in work), tau[c], dt[c], goal[c], new_energy[c], q.take(c),
                               low[c]))
            failed = np.flatnonzero(done & ~crossed)
            for target, values in zip((x, y, vx, vy), new, strict=True):
                target[ids[failed]] = values[failed]
            for name, mask in (("engine_cannot_capture", escaped), ("propellant_exhausted", exhausted),
                               ("surface_impact", impact)):
                outcome[ids[mask]] = OUTCOMES.index(name)
                duration[ids[mask]] = tau[mask] + dt[mask]
            lowest[ids[done]] = low[done]
            keep = ~done
            ids, q, tau, dt, goal, burn_step = ids[keep], q.take(keep), tau[keep], dt[keep], goal[keep], burn_step[keep]
            soi, surface, max_time, low = soi[keep], surface[keep], max_time[keep], low[keep]
            new = tuple(s[keep] for s in new)
        work = new
        tau = tau + dt
    outcome[ids] = OUTCOMES.index("propellant_exhausted")  # still burning at the step cap
    lowest[ids] = low
    if ending:
        which, start, tau, dt, goal, end_energy, engine, low = (
            np.concatenate(parts) if isinstance(parts[0], np.ndarray) else parts
            for parts in zip(*ending, strict=True))
        start = tuple(np.concatenate(parts) for parts in zip(*start, strict=True))
        end, step = _finish(start, tau, dt, goal, end_energy, _Engine.join(list(engine)))
        for target, values in zip((x, y, vx, vy), end, strict=True):
            target[which] = values
        duration[which] = tau + step
        lowest[which] = np.minimum(low, np.hypot(end[0], end[1]))
    return (x, y, vx, vy), duration, outcome, lowest


_COMPILED_CONSTANTS = np.array([STEPS_PER_BURN, STEPS_PER_ORBIT, MASS_STEP, _NEWTON_STEPS, _MAX_STEPS, _LEAST_SPEED,
                                _MAX_TURN], dtype=float)


def _compiled():
    """
    The numba-compiled burn integrator (``finite_burn_compiled``), or None for this numpy one:
    None when ``CAPSWEEP_KERNEL=numpy`` or numba does not import. Imported on first use.
    """
    if os.environ.get("CAPSWEEP_KERNEL", "").strip().lower() == "numpy":
        return None
    try:
        from sweep.physics import finite_burn_compiled
    except ImportError:
        return None
    return finite_burn_compiled


def _finish(start, tau, dt, goal, end_energy, q: _Engine):
    """The partial step, within (0, dt], that ends on the target energy (secant, then Newton)."""
    start_energy = _energy(*start, q.gm)
    step = dt * (goal - start_energy) / (end_energy - start_energy)
    for _ in range(_NEWTON_STEPS):
        trial = _rk4(start, tau, step, q)
        step = np.clip(step + (goal - _energy(*trial, q.gm)) / _energy_rate(trial, tau + step, q), 0.0, dt)
    return _rk4(start, tau, step, q), step


def _energy_rate(state, tau, p: _Engine):
    """d(energy)/dt = (T/m) u . v: the thrust's power per unit mass (gravity does no net work)."""
    x, y, vx, vy = state
    acceleration, cos, sin = _thrust(tau, p)
    if p.ux is None:
        along = np.sqrt(vx * vx + vy * vy)
        return acceleration * (along if cos is None else along * cos)
    ux, uy = (p.ux, p.uy) if cos is None else (p.ux * cos - p.uy * sin, p.ux * sin + p.uy * cos)
    return acceleration * (ux * vx + uy * vy)


def _eccentricity_vector(x, y, vx, vy, gm):
    """The eccentricity vector ([2]_ Ch. 4) resolved along and across the position: (along, across)."""
    r = np.sqrt(x * x + y * y)
    v2 = vx * vx + vy * vy
    radial = x * vx + y * vy
    ex = ((v2 - gm / r) * x - radial * vx) / gm
    ey = ((v2 - gm / r) * y - radial * vy) / gm
    return (ex * x + ey * y) / r, (ey * x - ex * y) / r


class _Points(NamedTuple):
    """Per-point constants of a batch (arrays of equal length), SI."""

    gm: np.ndarray
    body_radius: np.ndarray
    soi: np.ndarray
    thrust: np.ndarray
    exhaust_speed: np.ndarray
    reserve: np.ndarray  # kg of the arrival mass that cannot be burned

    def take(self, index) -> _Points:
        return _Points(*(value[index] for value in self))


_STATE = ("x", "y", "vx", "vy")


def _leg(flight, index, p: _Points, radius, energy, impulse, offset, rate, first, steering, refinement):
    """
    Coast to ignition and fly one burn, for entries ``index`` of ``flight`` (a dict of per-entry
    arrays: state, clock, mass, lowest radius, outcome; updated in place). When ``first``, the
    state is the approach periapsis and the clock zero. Ignition comes half the
    impulsive-equivalent burn time before the apsis, moved later by ``offset`` [s]; the thrust
    turns from the steering law at ``rate`` [rad/s] (None: it does not), through the law at
    mid-burn. Returns delta-v, duration and ignition time of the burn for those entries.
    """
    state = tuple(flight[k][index] for k in _STATE)
    mass, lowest = flight["mass"][index], flight["lowest"][index]
    expected = impulsive_burn_time(impulse, mass, p.thrust, p.exhaust_speed)
    lead = 0.5 * expected - offset
    if first:
        start = _coast_back(state, lead, p.gm)
        ignition = -lead
        # Ignited after the approach periapsis: the approach passed it first.
        lowest = np.where(ignition > 0.0, np.minimum(lowest, np.hypot(state[0], state[1])), lowest)
        direction = (np.zeros(index.size), np.ones(index.size))  # velocity direction at the approach periapsis
    else:
        moved, coast, direction, passed = _coast_to_ignition(state, p.gm, radius, lead)
        needed = np.abs(energy - _energy(*state, p.gm)) > 1e-12 * np.abs(energy)
        start = tuple(np.where(needed, m, s) for m, s in zip(moved, state, strict=True))  # no burn: no wait
        ignition = flight["clock"][index] + np.where(needed, coast, 0.0)
        lowest = np.where(needed & passed, np.minimum(lowest, _apsides(*state, p.gm)[0]), lowest)
    sign = np.where(energy >= _energy(*start, p.gm), 1.0, -1.0)
    flow = p.thrust / p.exhaust_speed
    engine = _Engine(p.gm, p.thrust, mass, flow, sign)
    if steering == "inertial":
        engine = engine._replace(ux=sign * direction[0], uy=sign * direction[1])
    if rate is not None:
        engine = engine._replace(rate=rate, middle=0.5 * expected)
    limits = {"soi": p.soi, "body_radius": p.body_radius, "max_time": (mass - p.reserve) / flow}
    end, duration, outcome, low = _burn(start, engine, energy, expected, limits, refinement)
    after = mass - flow * duration
    for key, value in zip(_STATE, end, strict=True):
        flight[key][index] = value
    flight["clock"][index] = ignition + duration
    flight["mass"][index] = after
    flight["lowest"][index] = np.minimum(lowest, low)
    flight["outcome"][index] = outcome
    with np.errstate(invalid="ignore", divide="ignore"):
        delta_v = p.exhaust_speed * np.log(mass / after)
    return delta_v, duration, ignition


def _miss(flight, gm, periapsis, apoapsis, at_periapsis, at_apsis=None):
    """
    How far the orbit reached misses the intended one, in metres: (along, across), shape (n, 2).

    An ellipse is met when the apsis on the burn's side has its intended radius (``along``;
    ``across`` is then zero: the apse line may lie anywhere). A near-circle (eccentricity below
    ``_ROUND``, 0.1), and an ellipse aimed to end at its apsis (``at_apsis``, True where so; default:
    the circles), needs the burn to end on it at that apsis, horizontal: ``along`` is minus the
    semi-major axis times the eccentricity vector's component along the position less the
    intended eccentricity (signed: positive along for a periapsis), which is positive when the
    burn ended high; ``across`` the semi-major axis times the component across it. A surface
    impact gives its osculating periapsis minus the intended one (negative), so an aim that sank
    too low climbs back; other failures give NaN.
    """
    outcome = flight["outcome"]
    state = tuple(flight[k] for k in _STATE)
    reached_periapsis, reached_apoapsis = _apsides(*state, gm)
    target_e = (apoapsis - periapsis) / (apoapsis + periapsis)
    axis = 0.5 * (periapsis + apoapsis)
    along_e, across_e = _eccentricity_vector(*state, gm)
    round_ = target_e < _ROUND if at_apsis is None else at_apsis
    sign = np.where(at_periapsis, 1.0, -1.0)
    along = np.where(round_, -axis * (along_e - sign * target_e),
                     np.where(at_periapsis, reached_periapsis - periapsis, reached_apoapsis - apoapsis))
    across = np.where(round_, axis * across_e, 0.0)
    impact = outcome == OUTCOMES.index("surface_impact")
    ok = outcome == 0
    along = np.where(ok, along, np.where(impact, reached_periapsis - periapsis, np.nan))
    across = np.where(ok | impact, np.where(ok, across, 0.0), np.nan)
    return np.stack([along, across], axis=1)


def _better(new_miss, new_outcome, old_miss, old_outcome):
    """Where a flight beats the best so far: flown beats failed, then the smaller miss."""
    new_ok, old_ok = new_outcome == 0, old_outcome == 0
    smaller = np.nan_to_num(np.abs(new_miss), nan=np.inf).max(axis=1) < \
        np.nan_to_num(np.abs(old_miss), nan=np.inf).max(axis=1)
    return (new_ok & ~old_ok) | ((new_ok == old_ok) & smaller)


def _aim(fly, start, free, measure, first_step, limit, bounds, most_restarts=_RESTARTS):
    """
    Aim by Broyden's method, all points in lockstep ([4]_): find ``x`` (n, 2) whose flight
    ``fly(x, index) -> (flight dict, misses (m, 2))`` misses by at most ``AIM_TOLERANCE`` in
    each coordinate a point may move (``free``, (n, 2) bool). The first Jacobian is the
    identity but for the columns ``measure`` (2 bools), measured by a difference of
    ``first_step`` (n, 2) where that coordinate is free. Steps are clipped to ``limit`` (n, 2),
    or twice the miss for an unmeasured coordinate (its miss is in its own units, one for one);
    ``x`` stays within ``bounds`` (lower, upper), each (n, 2). A step whose flight fails (NaN
    miss) or misses by more (2-norm) is not taken, and the next step may reach only half as
    far as it did; a taken step doubles the reach again, up to the limit. A point whose best
    miss has not shrunk by a tenth in ``_STALL`` iterations, or that spent ``_AIM_STEPS``, starts
    afresh from its best flight with every free column measured there, at most
    ``most_restarts`` times (per point, or one for all), each start reaching half as far as the
    last; then it is left as it is: its burn cannot reach the orbit this way (a split may).
    Returns the best flight found (flown beats failed, then the smaller miss), its ``x``.
    """
    lower, upper = bounds
    n = start.shape[0]
    x = start.copy()
    best, miss = fly(x, np.arange(n))
    best_x, best_miss = x.copy(), miss.copy()
    jacobian = np.zeros((n, 2, 2))
    jacobian[:, 0, 0] = jacobian[:, 1, 1] = 1.0

    def open_(index):
        return ~np.isnan(miss[index]).any(axis=1) & (np.where(free[index], np.abs(miss[index]), 0.0)
                                                     > AIM_TOLERANCE).any(axis=1)

    def differences(points, columns):
        """Measure the Jacobian's ``columns`` at ``x`` of ``points`` by differences, flown together in one call."""
        shots = [(column, points[free[points, column]]) for column in (0, 1) if columns[column]]
        shots = [(column, index) for column, index in shots if index.size]
        if not shots:
            return
        trials = []
        for column, index in shots:
            trial = x[index].copy()
            trial[:, column] += first_step[index, column]
            trials.append(trial)
        _, shifted = fly(np.concatenate(trials), np.concatenate([index for _, index in shots]))
        start = 0
        for column, index in shots:
            slope = (shifted[start:start + index.size] - miss[index]) / first_step[index, column, None]
            start += index.size
            usable = np.isfinite(slope).all(axis=1) & (np.abs(slope[:, column]) > 1e-9)
            jacobian[index[usable], :, column] = slope[usable]

    differences(np.flatnonzero(open_(np.arange(n))), measure)
    active = np.flatnonzero(open_(np.arange(n)))
    factor = np.ones(n)  # the share of its reach a step may take (halved after a step not taken)
    stalled = np.zeros(n, dtype=int)
    restarts = np.zeros(n, dtype=int)
    steps = np.zeros(n, dtype=int)
    most_restarts = np.broadcast_to(most_restarts, (n,))
    for _ in range(_AIM_STEPS * (1 + int(most_restarts.max(initial=0)))):
        if active.size == 0:
            break
        steps[active] += 1
        free_a = free[active]
        j = np.where(free_a[:, :, None] & free_a[:, None, :], jacobian[active], 0.0)
        j[:, 0, 0] = np.where(free_a[:, 0], j[:, 0, 0], 1.0)
        j[:, 1, 1] = np.where(free_a[:, 1], j[:, 1, 1], 1.0)
        f = np.where(free_a, miss[active], 0.0)
        det = j[:, 0, 0] * j[:, 1, 1] - j[:, 0, 1] * j[:, 1, 0]
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = -np.stack([j[:, 1, 1] * f[:, 0] - j[:, 0, 1] * f[:, 1],
                                j[:, 0, 0] * f[:, 1] - j[:, 1, 0] * f[:, 0]], axis=1) / det[:, None]
        base = np.where(measure, limit[active], np.maximum(limit[active], 2.0 * np.abs(miss[active])))
        reach = base * factor[active, None]
        step = np.where(free_a & np.isfinite(newton), np.clip(newton, -reach, reach), 0.0)
        trial = np.clip(x[active] + step, lower[active], upper[active])
        step = trial - x[active]
        flight, new = fly(trial, active)
        failed = np.isnan(new).any(axis=1)
        with np.errstate(invalid="ignore"):
            worse = ~failed & (np.hypot(*np.where(free_a, new, 0.0).T)
                               > np.hypot(*np.where(free_a, miss[active], 0.0).T))
        # A step that fails or misses by more (2-norm) is not taken; the next may reach half as far.
        relative = np.where(free_a, np.abs(step) / base, 0.0).max(axis=1)
        factor[active] = np.where(failed | worse, 0.5 * relative, np.minimum(2.0 * factor[active], 1.0))
        ok = np.flatnonzero(~failed)
        index = active[ok]
        if index.size:
            moved, change = step[ok], np.where(free[index], new[ok] - miss[index], 0.0)
            size = np.einsum("ij,ij->i", moved, moved)
            predicted = np.einsum("ijk,ik->ij", jacobian[index], moved)
            correction = (change - predicted) / np.where(size > 0, size, np.inf)[:, None]
            jacobian[index] += correction[:, :, None] * moved[:, None, :]
            taken = ok[~worse[ok]]
            x[active[taken]], miss[active[taken]] = trial[taken], new[taken]
            better = _better(new[ok], flight["outcome"][ok], best_miss[index], best["outcome"][index])
            size_new = np.where(free[index], np.abs(new[ok]), 0.0).max(axis=1)
            size_best = np.where(free[index], np.abs(best_miss[index]), 0.0).max(axis=1)
            stalled[index] = np.where(size_new < 0.9 * size_best, 0, stalled[index] + 1)
            for key, value in flight.items():
                best[key][..., index[better]] = value[..., ok[better]]
            best_x[index[better]], best_miss[index[better]] = trial[ok[better]], new[ok[better]]
        stalled[active[failed]] += 1
        going = failed | open_(active)
        # A stalled (or spent) aim starts afresh from its best flight, every free column measured there.
        spent = (stalled[active] >= _STALL) | (steps[active] >= _AIM_STEPS * (1 + restarts[active]))
        stuck = active[going & spent & (restarts[active] < most_restarts[active])
                       & np.isfinite(best_miss[active]).all(axis=1)]
        if stuck.size:
            restarts[stuck] += 1
            stalled[stuck] = 0
            factor[stuck] = 0.5 ** (restarts[stuck] - 1)  # each restart more cautious than the last
            x[stuck], miss[stuck] = best_x[stuck], best_miss[stuck]
            differences(stuck, (True, True))
        active = active[going & (stalled[active] < _STALL) & (steps[active] < _AIM_STEPS * (1 + restarts[active]))]
    return best, best_x


def _aim_at_apsis(fly, leg, x, round_, start, measure, first_step, limit, bounds, intended):
    """
    Aim again, to end at the apsis, the ellipses whose aim by one control left a miss.

    One control (the approach periapsis, or the turn) cannot always place the apsis: for an
    intended orbit of small eccentricity the reached eccentricity may have a floor above the
    intended one. Ending on the intended orbit at its apsis, horizontal, is one way to meet it
    that the ignition shift (the second control) can reach: the points of ``leg`` that flew but
    missed by more than ``AIM_TOLERANCE`` (or hit the surface) are aimed again so, from
    ``start``, with both controls. Each keeps the better flight by the ellipse's own miss
    (flown beats failed, then the smaller miss). Returns the flights and controls of all points.
    """
    gm, periapsis, apoapsis, at_periapsis = intended
    miss = _miss(leg, gm, periapsis, apoapsis, at_periapsis)
    flown = leg["outcome"] == 0
    retry = np.flatnonzero(~round_ & ((flown & (np.abs(miss[:, 0]) > AIM_TOLERANCE))
                                      | (leg["outcome"] == OUTCOMES.index("surface_impact"))))
    if retry.size == 0:
        return leg, x

    def fly_apsis(x_, index):
        return fly(x_, retry[index], at_apsis=np.ones(round_.size, dtype=bool))

    again, x_again = _aim(fly_apsis, start[retry], np.ones((retry.size, 2), dtype=bool), measure, first_step[retry],
                          limit[retry], tuple(b[retry] for b in bounds))
    new_miss = _miss(again, gm[retry], periapsis[retry], apoapsis[retry], at_periapsis[retry])
    better = retry[_better(new_miss, again["outcome"], miss[retry], leg["outcome"][retry])]
    chosen = _better(new_miss, again["outcome"], miss[retry], leg["outcome"][retry])
    for key, value in again.items():
        leg[key][..., better] = value[..., chosen]
    x[better] = x_again[chosen]
    return leg, x


def _trim(gm, periapsis, apoapsis, target_periapsis, target_apoapsis):
    r"""
    The impulsive trim from the orbit reached to the target orbit (coplanar, any orientation):
    the cheaper of the two-burn orders of apsis changes, each costed with vis-viva
    :math:`v^2 = \mu (2/r - 1/a)` ([2]_ Ch. 2): move the far apsis at the reached periapsis,
    then the other at the new apsis; or move the periapsis at the reached apoapsis first.

    Returns the delta-v [m/s] and the lowest periapsis of the orbits flown on the way [m].
    """
    first = (np.abs(_speed_on(gm, periapsis, periapsis, target_apoapsis)
                    - _speed_on(gm, periapsis, periapsis, apoapsis))
             + np.abs(_speed_on(gm, target_apoapsis, target_periapsis, target_apoapsis)
                      - _speed_on(gm, target_apoapsis, periapsis, target_apoapsis)))
    second = (np.abs(_speed_on(gm, apoapsis, target_periapsis, apoapsis)
                     - _speed_on(gm, apoapsis, periapsis, apoapsis))
              + np.abs(_speed_on(gm, target_periapsis, target_periapsis, target_apoapsis)
                       - _speed_on(gm, target_periapsis, target_periapsis, apoapsis)))
    lowest = np.where(first <= second, np.minimum(periapsis, target_apoapsis), np.minimum(target_periapsis, apoapsis))
    return np.minimum(first, second), np.minimum(lowest, target_periapsis)


def _speed_on(gm, radius, periapsis, apoapsis):
    """Vis-viva speed at ``radius`` on the orbit of those apsides ([2]_ Ch. 2)."""
    return np.sqrt(np.maximum(gm * (2.0 / radius - 2.0 / (periapsis + apoapsis)), 0.0))


class _Plan(NamedTuple):
    """Where and how far each burn goes, per point, and over how many passes (SI)."""

    radius: list  # burn radius per burn
    orbits: list  # (periapsis, apoapsis) intended after each burn
    before: list  # speed at the burn radius before each burn (the approach's, for the capture)
    after: list  # speed there on the intended orbit
    split: np.ndarray  # speed at the capture periapsis on the long ellipse a split capture enters first
    counts: np.ndarray  # (burns, n) int: passes of each burn

    def pass_target(self, k, j, points, gm):
        """
        Pass ``j`` of burn ``k`` for ``points``: its energy [J/kg], impulsive delta-v [m/s], the
        apsides of the orbit it aims for [m] and whether the burn is made at its periapsis. A
        pass keeps the burn's apsis and takes its share of the speed change there (vis-viva);
        the last pass aims for the burn's own orbit.
        """
        count = self.counts[k][points]
        before, after, radius = self.before[k][points], self.after[k][points], self.radius[k][points]

        def end(j_):
            shares = before + (after - before) * (j_ + 1) / count
            if k > 0:
                return shares
            # The capture's first pass enters the long ellipse at least; the rest share what remains.
            first = np.minimum(before + (after - before) / count, self.split[points])
            rest = first + (after - first) * j_ / np.maximum(count - 1, 1)
            return np.where(count == 1, after, np.where(j_ == 0, first, rest))

        speed = end(j)
        start = before if j == 0 else end(j - 1)
        last = j == count - 1
        periapsis, apoapsis = self.orbits[k][0][points], self.orbits[k][1][points]
        energy = np.where(last, -gm / (periapsis + apoapsis), 0.5 * speed * speed - gm / radius)
        other = np.where(last, periapsis + apoapsis - radius, -gm / energy - radius)
        low, high = np.minimum(radius, other), np.maximum(radius, other)
        at_periapsis = np.where(last, np.abs(radius - periapsis) <= np.abs(radius - apoapsis), radius <= other)
        return energy, np.abs(start - speed), (np.where(last, periapsis, low), np.where(last, apoapsis, high)), \
            at_periapsis


_RECORD = ("delta_v", "duration", "ignition", "rate", "centre", "energy")


def _fly_plan(p: _Points, v_inf, approach, plan: _Plan, mass, steering, refinement, safe_radius, aim):
    """The whole sequence of ``plan`` for every point of ``p``: aimed, trimmed, checked (see :func:`fly_capture`)."""
    n = v_inf.size
    burns = len(plan.radius)
    most = int(plan.counts.max())
    flight = {"x": approach.copy(), "y": np.zeros(n), "vx": np.zeros(n),
              "vy": hyperbolic_periapsis_speed(v_inf, p.gm, approach), "clock": np.zeros(n), "mass": mass.copy(),
              "lowest": np.full(n, np.inf), "outcome": np.zeros(n, dtype=np.int8)}
    out = {key: np.full((burns, most, n), np.nan) for key in _RECORD}  # per pass
    out["approach"] = approach.copy()
    out["reached"] = np.full((2, burns, n), np.nan)
    failed_at = np.full(n, burns)  # the burn a failed sequence failed in (burns: the checks after the last)
    for k in range(burns):
        for j in range(int(plan.counts[k].max())):
            points = np.flatnonzero((flight["outcome"] == 0) & (plan.counts[k] > j))
            if points.size == 0:
                continue
            q = p.take(points)
            energy, impulse, (periapsis, apoapsis), at_periapsis = plan.pass_target(k, j, points, q.gm)
            round_ = (apoapsis - periapsis) / (apoapsis + periapsis) < _ROUND
            before = {key: value[points] for key, value in flight.items()}
            expected = impulsive_burn_time(impulse, before["mass"], q.thrust, q.exhaust_speed)
            first = k == 0 and j == 0
            if first:
                speed = hyperbolic_periapsis_speed(v_inf[points], q.gm, approach[points])
            else:
                speed = np.maximum(_speed_on(q.gm, plan.radius[k][points], *_apsides(
                    *(before[s] for s in _STATE), q.gm)), 1.0)
            arc = speed * expected  # m along the track: the scale of the ignition shift

            def fly(x, index, first=first, before=before, q=q, energy=energy, impulse=impulse, expected=expected,
                    speed=speed, periapsis=periapsis, apoapsis=apoapsis, at_periapsis=at_periapsis, k=k, j=j,
                    points=points, at_apsis=round_):
                leg = {key: value[index].copy() for key, value in before.items()}
                sub = q.take(index)
                if first:  # x: approach periapsis radius, ignition shift along the track
                    leg["x"] = x[:, 0].copy()  # the leg moves the state on in place; x is the aim's
                    leg["vy"] = hyperbolic_periapsis_speed(v_inf[points][index], sub.gm, x[:, 0])
                    rate, offset = None, x[:, 1] / leg["vy"]
                else:  # x: turn angle at the burn's ends (rad), ignition shift along the track
                    rate, offset = x[:, 0] / np.maximum(0.5 * expected[index], 1e-9), x[:, 1] / speed[index]
                values = _leg(leg, np.arange(index.size), sub, plan.radius[k][points][index], energy[index],
                              impulse[index], offset, rate, first, steering, refinement)
                for key, value in zip(_RECORD, (*values, np.zeros(index.size) if rate is None else rate,
                                                values[2] + 0.5 * expected[index], energy[index]), strict=True):
                    leg[key] = value
                return leg, _miss(leg, sub.gm, periapsis[index], apoapsis[index], at_periapsis[index],
                                  at_apsis[index])

            free = np.stack([np.full(points.size, aim), aim & round_], axis=1)
            if first:
                start = np.stack([approach[points], np.zeros(points.size)], axis=1)
                # A long braking arc may need the approach several times higher: a step may double the altitude.
                limit = np.stack([approach[points] - q.body_radius + 1e4, arc + 1e3], axis=1)
                bounds = (np.stack([q.body_radius + 1.0, np.full(points.size, -np.inf)], axis=1),
                          np.full((points.size, 2), np.inf))
                step = np.stack([np.ones(points.size), 0.05 * arc + 1.0], axis=1)
                measure = (False, True)  # the reached periapsis follows the approach's about one for one
            else:
                start = np.zeros((points.size, 2))
                limit = np.stack([np.full(points.size, _MAX_TURN), arc + 1e3], axis=1)
                # The turn is held at its limit past +-_MAX_TURN: twice that at the ends is as far as it acts.
                bounds = (np.stack([np.full(points.size, -2 * _MAX_TURN), np.full(points.size, -np.inf)], axis=1),
                          np.stack([np.full(points.size, 2 * _MAX_TURN), np.full(points.size, np.inf)], axis=1))
                step = np.stack([np.full(points.size, 0.01), 0.05 * arc + 1.0], axis=1)
                measure = (True, True)
            # A first burn aimed to end at its apsis starts from an earlier ignition (_FIRST_SHIFT).
            at_apsis_start = start.copy()
            if first and aim:
                at_apsis_start[:, 1] = _FIRST_SHIFT * arc
            # An ellipse that one control cannot meet is aimed again at its apsis below: no restarts here.
            leg, x = _aim(fly, np.where(round_[:, None], at_apsis_start, start), free, measure, step, limit, bounds,
                          np.where(round_, _RESTARTS, 0))
            if aim:
                leg, x = _aim_at_apsis(fly, leg, x, round_, at_apsis_start, measure, step, limit, bounds,
                                       (q.gm, periapsis, apoapsis, at_periapsis))
            failed_at[points[leg["outcome"] != 0]] = k
            for key in flight:
                flight[key][points] = leg[key]
            for key in _RECORD:
                out[key][k, j, points] = leg[key]
            if first:
                out["approach"][points] = x[:, 0]
        alive = np.flatnonzero(flight["outcome"] == 0)
        out["reached"][:, k, alive] = _apsides(*(flight[s][alive] for s in _STATE), p.gm[alive])
    outcome = flight["outcome"]
    ok = outcome == 0
    periapsis, apoapsis = out["reached"][:, -1]
    trim, trim_lowest = _trim(p.gm, periapsis, apoapsis, *plan.orbits[-1])
    lowest = np.minimum(flight["lowest"], np.where(ok, np.minimum(periapsis, trim_lowest), np.inf))
    outcome[ok & (periapsis < p.body_radius)] = OUTCOMES.index("surface_impact")
    outcome[(outcome == 0) & (lowest < safe_radius - SAFE_TOLERANCE)] = OUTCOMES.index("below_safe_altitude")
    # The trim is costed as an impulse: it must be a short burn itself, sweeping at most SPLIT_ARC of
    # the target orbit at its periapsis speed; a longer one means the aim did not meet the orbit.
    target_periapsis, target_apoapsis = plan.orbits[-1]
    with np.errstate(invalid="ignore"):
        trim_time = impulsive_burn_time(trim, flight["mass"], p.thrust, p.exhaust_speed)
        trim_arc = _speed_on(p.gm, target_periapsis, target_periapsis, target_apoapsis) / target_periapsis * trim_time
    outcome[(outcome == 0) & (trim_arc > SPLIT_ARC)] = OUTCOMES.index("aim_not_met")
    # ... and it is paid from the same tanks: past the reserve, the propellant is exhausted.
    with np.errstate(invalid="ignore"):
        left = flight["mass"] * np.exp(-trim / p.exhaust_speed)
    outcome[(outcome == 0) & (left < p.reserve)] = OUTCOMES.index("propellant_exhausted")
    failed = outcome != 0  # its passes stay as flown up to the failure: the engine reports none of them
    out.update(time=np.where(failed, np.nan, flight["clock"]), outcome=outcome, trim=np.where(failed, np.nan, trim),
               lowest=lowest, passes=plan.counts.astype(np.int8), failed_at=failed_at)
    return out


def fly_capture(
    gm: ArrayLike,
    body_radius: ArrayLike,
    soi_radius: ArrayLike,
    v_inf: ArrayLike,
    periapsis_radius: ArrayLike,
    burn_radii: list[ArrayLike],
    orbits: list[tuple[ArrayLike, ArrayLike]],
    impulsive_delta_v: list[ArrayLike],
    thrust: ArrayLike,
    exhaust_speed: ArrayLike,
    initial_mass: ArrayLike,
    steering: str = "tangential",
    refinement: float = 1.0,
    *,
    safe_radius: ArrayLike | None = None,
    split_apoapsis: ArrayLike | None = None,
    passes: int | str | ArrayLike = "auto",
    max_passes: int = MAX_PASSES,
    aim: bool = True,
) -> FiniteCapture:
    r"""
    Fly a capture sequence with a finite-thrust engine, aimed at its orbits, for a batch of points.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    body_radius : numeric
        Radius below which the trajectory hits the body. [m]
    soi_radius : numeric
        Sphere-of-influence radius: leaving it outbound before the energy target is met
        means the engine cannot capture. [m]
    v_inf : numeric
        Arrival (hyperbolic excess) speed. [m/s]
    periapsis_radius : numeric
        Periapsis radius of the impulsive approach hyperbola: where the aim starts. [m]
    burn_radii : list of numeric
        For each burn, the radius where the impulsive burn would be made. [m]
    orbits : list of (numeric, numeric)
        For each burn, the periapsis and apoapsis radius of the intended orbit after it (the
        last one is the target orbit). The first burn is made at its orbit's periapsis. [m]
    impulsive_delta_v : list of numeric
        For each burn, its impulsive delta-v (sets the centring of the ignition). [m/s]
    thrust : numeric
        Engine thrust. [N]
    exhaust_speed : numeric
        Effective exhaust speed, specific impulse times g0. [m/s]
    initial_mass : numeric
        Mass on arrival. [kg]
    steering : {"tangential", "inertial"}
        Thrust along (or against) the velocity, or fixed in inertial space.
    refinement : float
        Divides every RK4 step (1: the sweep's setting, accurate to a few mm/s; larger values
        resolve losses far below that, for convergence studies).
    safe_radius : numeric, optional
        Lowest safe periapsis radius: a sequence passing below it (by more than
        ``SAFE_TOLERANCE``) is ``below_safe_altitude``. Default: ``body_radius``. [m]
    split_apoapsis : numeric, optional
        Apoapsis radius of the long ellipse a capture split over several periapsis passes
        first enters. Without it the capture is never split. [m]
    passes : int, "auto" or array of int
        Periapsis passes the capture burn is split over (where ``split_apoapsis`` allows);
        ``"auto"``: chosen per point (see the module notes); an array broadcasting to
        (burns, \*shape): the passes of every burn, as given.
    max_passes : int
        The most passes ``"auto"`` tries.
    aim : bool
        Aim the burns (default). False flies every burn centred on its impulsive point from
        the impulsive approach periapsis, as the model did before aiming; kept for studies of
        the integrator alone.

    Returns
    -------
    FiniteCapture
        Per burn: delta-v :math:`v_e \ln(m_0/m_1)` [m/s], duration [s], ignition time from the
        aimed approach periapsis passage [s] (the first pass's for a split capture), periapsis
        and apoapsis radius of the orbit reached [m]; per sequence: time from the approach
        periapsis passage to the end of the last burn [s], an outcome code (``OUTCOMES``), the
        impulsive trim to the exact target orbit [m/s], the lowest radius reached [m], the
        aimed approach periapsis radius [m] and the passes of the capture. Burns and trim of a
        failed sequence are NaN; its lowest radius and approach are those of the flight that
        failed.

    Notes
    -----
    See the module notes for the model, the aim, the trim and the split captures.
    """
    if steering not in ("tangential", "inertial"):
        raise ValueError(f"steering must be 'tangential' or 'inertial', got {steering!r}")
    auto = isinstance(passes, str) and passes == "auto"
    given = not isinstance(passes, str | int)
    if given:
        if np.any(np.asarray(passes) < 1):
            raise ValueError("passes must be positive")
    elif not auto and (isinstance(passes, bool) or not isinstance(passes, int) or passes < 1):
        raise ValueError(f"passes must be a positive integer or 'auto', got {passes!r}")
    arrays = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (gm, body_radius, soi_radius, v_inf, periapsis_radius,
                                                thrust, exhaust_speed, initial_mass,
                                                np.nan if safe_radius is None else safe_radius,
                                                np.nan if split_apoapsis is None else split_apoapsis))
    )
    shape = arrays[0].shape
    gm, body_radius, soi_radius, v_inf, approach, thrust, exhaust_speed, mass, safe, split = (
        np.ravel(a).copy() for a in arrays)
    n, burns = gm.size, len(burn_radii)

    def flat(value):
        return np.ravel(np.broadcast_to(np.asarray(value, dtype=float), shape)).copy()

    radii = [flat(r) for r in burn_radii]
    orbit_list = [(flat(a), flat(b)) for a, b in orbits]
    safe = body_radius.copy() if safe_radius is None else safe
    periapsis, apoapsis = orbit_list[0]
    splittable = np.ones((burns, n), dtype=bool)
    splittable[0] = split > apoapsis * (1.0 + 1e-9)  # a capture splits only into a longer ellipse than its own
    before = [hyperbolic_periapsis_speed(v_inf, gm, periapsis)] + [
        _speed_on(gm, radii[k], *orbit_list[k - 1]) for k in range(1, burns)]
    after = [_speed_on(gm, radii[k], *orbit_list[k]) for k in range(burns)]
    counts = np.ones((burns, n), dtype=np.int64)
    if given:
        counts[...] = np.broadcast_to(np.asarray(passes), (burns, *shape)).reshape(burns, n)
        counts[0] = np.where(splittable[0], counts[0], 1)
    elif not auto:
        counts[0] = np.where(splittable[0], passes, 1)
    plan = _Plan(radii, orbit_list, before, after, np.where(splittable[0], _speed_on(gm, periapsis, periapsis, split),
                                                           np.inf), counts)
    points = _Points(gm, body_radius, soi_radius, thrust, exhaust_speed, _RESERVE * mass)
    # The arc each burn sweeps (its impulsive-equivalent time at the angular rate of its apsis):
    # "auto" splits the burn sweeping the widest arc per pass first.
    arc = np.stack([after[k] / radii[k] * impulsive_burn_time(impulsive_delta_v[k], mass, thrust, exhaust_speed)
                    for k in range(burns)]) if burns else np.zeros((0, n))
    most = max(max_passes, 1) if auto else int(counts.max())
    out = {key: np.full((burns, most, n), np.nan) for key in _RECORD}
    out.update(reached=np.full((2, burns, n), np.nan), time=np.full(n, np.nan), outcome=np.zeros(n, dtype=np.int8),
               trim=np.full(n, np.nan), lowest=np.full(n, np.nan), approach=approach.copy(),
               passes=np.ones((burns, n), dtype=np.int8), failed_at=np.full(n, burns))
    tier = np.full(n, 3)
    todo = np.arange(n)
    while todo.size:
        sub = _Plan([r[todo] for r in radii], [(a[todo], b[todo]) for a, b in orbit_list],
                    [b[todo] for b in before], [a[todo] for a in after], plan.split[todo], counts[:, todo])
        flown = _fly_plan(points.take(todo), v_inf[todo], approach[todo], sub, mass[todo], steering, refinement,
                          safe[todo], aim)
        ok = flown["outcome"] == 0
        new_tier = np.where(ok, np.where(flown["trim"] <= TRIM_SPLIT, 0, 1), 2)
        total = np.nansum(flown["delta_v"], axis=(0, 1)) + flown["trim"]
        old_total = np.nansum(out["delta_v"][:, :, todo], axis=(0, 1)) + out["trim"][todo]
        take = (new_tier < tier[todo]) | ((new_tier == tier[todo]) & ((new_tier == 2) | (total < old_total)))
        where, source = todo[take], np.flatnonzero(take)
        for key, value in flown.items():
            if key in _RECORD:
                out[key][:, :, where] = np.nan
                out[key][:, :value.shape[1], where] = value[:, :, source]
            else:
                out[key][..., where] = value[..., source]
        tier[where] = new_tier[source]
        if not auto:
            break
        # Split further where the sequence failed for a reason shorter burns may cure, or needed a large trim.
        # Only a burn up to the one that failed can cure it.
        retry = np.isin(flown["outcome"], _SPLIT_FIXES) | (new_tier == 1)
        reach = np.arange(burns)[:, None] <= flown["failed_at"][retry]
        retry = todo[retry]
        width = np.where(reach & splittable[:, retry] & (counts[:, retry] < max_passes),
                         arc[:, retry] / counts[:, retry], 0.0)
        widest = np.argmax(width, axis=0)
        can = width[widest, np.arange(retry.size)] > SPLIT_ARC
        retry, widest = retry[can], widest[can]
        counts[widest, retry] = np.minimum(2 * counts[widest, retry], max_passes)
        todo = retry
    failed = out["outcome"] != 0
    per_burn = {"delta_v": np.where(failed, np.nan, np.nansum(out["delta_v"], axis=1)),
                "duration": np.where(failed, np.nan, np.nansum(out["duration"], axis=1)),
                "ignition": out["ignition"][:, 0], "rate": out["rate"][:, 0]}
    return FiniteCapture(
        per_burn["delta_v"].reshape((burns, *shape)), per_burn["duration"].reshape((burns, *shape)),
        *(value.reshape((burns, *shape)) for value in out["reached"]),
        out["time"].reshape(shape), out["outcome"].reshape(shape), per_burn["ignition"].reshape((burns, *shape)),
        per_burn["rate"].reshape((burns, *shape)), out["trim"].reshape(shape), out["lowest"].reshape(shape),
        out["approach"].reshape(shape), out["passes"].reshape((burns, *shape)),
        *(out[key].reshape((burns, most, *shape)) for key in ("ignition", "rate", "centre", "energy", "delta_v")),
    )
