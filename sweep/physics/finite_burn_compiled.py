"""
The burn integrator of :mod:`sweep.physics.finite_burn`, compiled per point with numba.

The same model, step rule, stop conditions and end-of-burn solve as the numpy ``_burn`` (its
docstring and the module's give the physics and the sources: the classical Runge-Kutta method,
Hairer, Norsett and Wanner, *Solving Ordinary Differential Equations I*, 2nd ed., Sec. II.1),
written as one loop per point, so no array is trimmed or gathered as points finish. The
operations and their order are the numpy kernel's: results agree with it to the last bits
(the cosine and sine of the thrust turn may round differently in the last place; tested).

The numpy kernel stays the reference and the fallback: ``finite_burn`` uses this one only when
numba imports and ``CAPSWEEP_KERNEL`` is not ``numpy``. Compiled on first use (a few seconds)
and cached beside this file by numba (``cache=True``), so later runs and worker processes load
it. SI units throughout.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# Codes of finite_burn.OUTCOMES, passed in so this module needs nothing from it.


@njit(cache=True, inline="always")
def _thrust(tau, thrust, mass, flow, sign, fixed, rate, middle, turning, max_turn):
    acceleration = thrust / (mass - flow * tau)
    if not fixed:
        acceleration = acceleration * sign
    if not turning:
        return acceleration, 1.0, 0.0
    angle = min(max(rate * (tau - middle), -max_turn), max_turn)
    return acceleration, math.cos(angle), math.sin(angle)


@njit(cache=True, inline="always")
def _acceleration(x, y, vx, vy, gm, acceleration, cos, sin, fixed, ux, uy, turning, least_speed):
    r2 = x * x + y * y
    gravity = gm / (r2 * math.sqrt(r2))
    if not fixed:
        scale = acceleration / max(math.sqrt(vx * vx + vy * vy), least_speed)
        ax, ay = vx * scale, vy * scale
    else:
        ax, ay = ux * acceleration, uy * acceleration
    if turning:
        ax, ay = ax * cos - ay * sin, ax * sin + ay * cos
    return ax - gravity * x, ay - gravity * y


@njit(cache=True)
def _rk4(x, y, vx, vy, tau, dt, gm, thrust, mass, flow, sign, fixed, ux, uy, rate, middle, turning, max_turn,
         least_speed):
    half = 0.5 * dt
    a0, c0, s0 = _thrust(tau, thrust, mass, flow, sign, fixed, rate, middle, turning, max_turn)
    a1, c1, s1 = _thrust(tau + half, thrust, mass, flow, sign, fixed, rate, middle, turning, max_turn)
    a2, c2, s2 = _thrust(tau + dt, thrust, mass, flow, sign, fixed, rate, middle, turning, max_turn)
    ax1, ay1 = _acceleration(x, y, vx, vy, gm, a0, c0, s0, fixed, ux, uy, turning, least_speed)
    x2, y2, vx2, vy2 = x + half * vx, y + half * vy, vx + half * ax1, vy + half * ay1
    ax2, ay2 = _acceleration(x2, y2, vx2, vy2, gm, a1, c1, s1, fixed, ux, uy, turning, least_speed)
    x3, y3, vx3, vy3 = x + half * vx2, y + half * vy2, vx + half * ax2, vy + half * ay2
    ax3, ay3 = _acceleration(x3, y3, vx3, vy3, gm, a1, c1, s1, fixed, ux, uy, turning, least_speed)
    x4, y4, vx4, vy4 = x + dt * vx3, y + dt * vy3, vx + dt * ax3, vy + dt * ay3
    ax4, ay4 = _acceleration(x4, y4, vx4, vy4, gm, a2, c2, s2, fixed, ux, uy, turning, least_speed)
    sixth = dt / 6.0
    return (
        x + sixth * (vx + 2.0 * (vx2 + vx3) + vx4),
        y + sixth * (vy + 2.0 * (vy2 + vy3) + vy4),
        vx + sixth * (ax1 + 2.0 * (ax2 + ax3) + ax4),
        vy + sixth * (ay1 + 2.0 * (ay2 + ay3) + ay4),
    )


@njit(cache=True, inline="always")
def _energy(x, y, vx, vy, gm):
    return 0.5 * (vx * vx + vy * vy) - gm / math.sqrt(x * x + y * y)


@njit(cache=True)
def burn(x, y, vx, vy, gm, thrust, mass, flow, sign, ux, uy, rate, middle, fixed, turning, target_energy,
         expected_time, soi, surface, max_time, refinement, constants, codes):
    """
    Integrate one burn per point until its energy reaches ``target_energy``; see
    ``finite_burn._burn``. ``constants`` = (steps per burn, steps per orbit, mass step, Newton
    steps, step cap, least speed, largest turn); ``codes`` = outcome codes of (escaped,
    exhausted, impact). Returns the end state (in place in ``x, y, vx, vy``), the duration, the
    outcome code and the lowest radius per point.
    """
    steps_per_burn, steps_per_orbit, mass_step = constants[0], constants[1], constants[2]
    newton_steps, max_steps = int(constants[3]), int(constants[4])
    least_speed, max_turn = constants[5], constants[6]
    escaped_code, exhausted_code, impact_code = codes[0], codes[1], codes[2]
    n = x.size
    duration = np.zeros(n)
    outcome = np.zeros(n, dtype=np.int8)
    lowest = np.empty(n)
    for i in range(n):
        gm_, thrust_, mass_, flow_, sign_ = gm[i], thrust[i], mass[i], flow[i], sign[i]
        ux_, uy_, rate_, middle_ = ux[i], uy[i], rate[i], middle[i]
        goal = target_energy[i]
        px, py, pvx, pvy = x[i], y[i], vx[i], vy[i]
        low = math.sqrt(px * px + py * py)
        lowest[i] = low
        if not abs(goal - _energy(px, py, pvx, pvy, gm_)) > 1e-12 * abs(goal):
            continue
        burn_step = max(expected_time[i], 1e-3) / steps_per_burn
        tau = 0.0
        finished = False
        for _ in range(max_steps):
            r2 = px * px + py * py
            local_period = 2.0 * np.pi * math.sqrt(r2 * math.sqrt(r2) / gm_)
            mass_time = mass_step * (mass_ - flow_ * tau) / flow_ if flow_ != 0.0 else np.inf
            dt = min(min(burn_step, local_period / steps_per_orbit), mass_time) / refinement
            dt = min(dt, max(max_time[i] - tau, 0.0) + 1e-9)  # never step past the tanks
            nx, ny, nvx, nvy = _rk4(px, py, pvx, pvy, tau, dt, gm_, thrust_, mass_, flow_, sign_, fixed, ux_, uy_,
                                    rate_, middle_, turning, max_turn, least_speed)
            new_energy = _energy(nx, ny, nvx, nvy, gm_)
            crossed = sign_ * (new_energy - goal) >= 0.0
            r = math.sqrt(nx * nx + ny * ny)
            if not crossed:
                low = min(low, r)
            if (px * pvx + py * pvy < 0.0) and (nx * nvx + ny * nvy >= 0.0):
                # The osculating periapsis of the step's start (finite_burn._apsides).
                h = px * pvy - py * pvx
                energy = _energy(px, py, pvx, pvy, gm_)
                eccentricity = math.sqrt(max(1.0 + 2.0 * energy * h * h / (gm_ * gm_), 0.0))
                low = min(low, h * h / (gm_ * (1.0 + eccentricity)))
            if crossed:
                # The partial step within (0, dt] that ends on the target energy (finite_burn._finish).
                start_energy = _energy(px, py, pvx, pvy, gm_)
                step = dt * (goal - start_energy) / (new_energy - start_energy)
                for _k in range(newton_steps):
                    tx, ty, tvx, tvy = _rk4(px, py, pvx, pvy, tau, step, gm_, thrust_, mass_, flow_, sign_, fixed,
                                            ux_, uy_, rate_, middle_, turning, max_turn, least_speed)
                    a, c, s = _thrust(tau + step, thrust_, mass_, flow_, sign_, fixed, rate_, middle_, turning,
                                      max_turn)
                    if not fixed:
                        along = math.sqrt(tvx * tvx + tvy * tvy)
                        rate_of_energy = a * (along * c if turning else along)
                    else:
                        dx, dy = (ux_ * c - uy_ * s, ux_ * s + uy_ * c) if turning else (ux_, uy_)
                        rate_of_energy = a * (dx * tvx + dy * tvy)
                    step = min(max(step + (goal - _energy(tx, ty, tvx, tvy, gm_)) / rate_of_energy, 0.0), dt)
                ex, ey, evx, evy = _rk4(px, py, pvx, pvy, tau, step, gm_, thrust_, mass_, flow_, sign_, fixed, ux_,
                                        uy_, rate_, middle_, turning, max_turn, least_speed)
                x[i], y[i], vx[i], vy[i] = ex, ey, evx, evy
                duration[i] = tau + step
                lowest[i] = min(low, math.hypot(ex, ey))
                finished = True
                break
            code = 0
            if r > soi[i] and nx * nvx + ny * nvy > 0:
                code = escaped_code
            elif tau + dt >= max_time[i]:
                code = exhausted_code
            elif r < surface[i]:
                code = impact_code
            if code != 0:
                x[i], y[i], vx[i], vy[i] = nx, ny, nvx, nvy
                outcome[i] = code
                duration[i] = tau + dt
                lowest[i] = low
                finished = True
                break
            px, py, pvx, pvy = nx, ny, nvx, nvy
            tau = tau + dt
        if not finished:
            outcome[i] = exhausted_code  # still burning at the step cap (state and duration as at ignition)
            lowest[i] = low
    return duration, outcome, lowest


@njit(cache=True, inline="always")
def _stumpff(z):
    """Stumpff C(z), S(z): series near 0, else the trigonometric or hyperbolic branch (finite_burn._stumpff)."""
    if abs(z) < 1e-3:
        return (1 / 2 - z / 24 + z**2 / 720 - z**3 / 40320, 1 / 6 - z / 120 + z**2 / 5040 - z**3 / 362880)
    root = math.sqrt(abs(z))
    if z > 0:
        return (1.0 - math.cos(root)) / root**2, (root - math.sin(root)) / root**3
    return -1.0 * (1.0 - math.cosh(root)) / root**2, -1.0 * (root - math.sinh(root)) / root**3


@njit(cache=True, inline="always")
def _time_residual(chi, alpha, offset, r0, target):
    """The universal time equation's residual and slope in chi (finite_burn._coast_back)."""
    z = alpha * chi * chi
    c, s = _stumpff(z)
    residual = offset * chi * chi * c + (1.0 - alpha * r0) * chi**3 * s + r0 * chi - target
    if not math.isfinite(residual):
        residual = math.copysign(np.inf, chi) if chi != 0.0 else 0.0 * np.inf
    return residual, offset * chi * (1.0 - z * s) + (1.0 - alpha * r0) * chi * chi * c + r0


@njit(cache=True)
def coast_back(x0, y0, vx0, vy0, duration, gm, kepler_steps):
    """
    Coast every point back in time by ``duration`` from its state: ``finite_burn._coast_back``
    per point (universal variables, safeguarded Newton, Lagrange coefficients; its docstring
    names the source). Returns x, y, vx, vy.
    """
    n = x0.size
    out_x, out_y, out_vx, out_vy = np.empty(n), np.empty(n), np.empty(n), np.empty(n)
    for i in range(n):
        px, py, pvx, pvy, mu = x0[i], y0[i], vx0[i], vy0[i], gm[i]
        r0 = math.sqrt(px * px + py * py)
        radial = (px * pvx + py * pvy) / r0
        alpha = 2.0 / r0 - (pvx * pvx + pvy * pvy) / mu
        root_mu = math.sqrt(mu)
        dt = -duration[i]
        low, high = min(root_mu * dt / r0, 0.0), max(root_mu * dt / r0, 0.0)
        offset = r0 * radial / root_mu
        near = root_mu * dt / r0
        semi_major = 1.0 / (-alpha) if alpha < 0 else np.inf
        eccentricity = 1.0 - alpha * r0
        mean_anomaly = math.sqrt(mu / semi_major**3) * dt
        far = math.sqrt(semi_major) * math.asinh(mean_anomaly / eccentricity) if alpha < 0 else near
        target = root_mu * dt
        near_residual = _time_residual(near, alpha, offset, r0, target)[0]
        far_residual = _time_residual(far, alpha, offset, r0, target)[0]
        chi = far if abs(far_residual) < abs(near_residual) else near
        last_step = high - low
        for _ in range(kepler_steps):
            residual, slope = _time_residual(chi, alpha, offset, r0, target)
            lo = chi if residual < 0 else low
            hi = chi if residual > 0 else high
            newton = chi - residual / slope
            good = math.isfinite(newton) and lo <= newton <= hi and abs(2.0 * residual) <= abs(last_step * slope)
            update = newton if good else 0.5 * (lo + hi)
            low, high = lo, hi
            last_step = update - chi
            converged = abs(update - chi) <= 1e-11 * max(abs(chi), 1.0)
            chi = update
            if converged:
                break
        z = alpha * chi * chi
        c, s = _stumpff(z)
        f = 1.0 - chi * chi / r0 * c
        g = dt - chi**3 / root_mu * s
        x, y = f * px + g * pvx, f * py + g * pvy
        r = math.sqrt(x * x + y * y)
        f_dot = root_mu / (r * r0) * (alpha * chi**3 * s - chi)
        g_dot = 1.0 - chi * chi / r * c
        out_x[i], out_y[i] = x, y
        out_vx[i], out_vy[i] = f_dot * px + g_dot * pvx, f_dot * py + g_dot * pvy
    return out_x, out_y, out_vx, out_vy
