"""The compiled kernels against the numpy ones they were written from.

``sweep.physics.finite_burn`` flies its burns and its approach coasts with
``finite_burn_compiled`` (numba) when numba imports, and with its own numpy code when
``CAPSWEEP_KERNEL=numpy``. The numpy code is the reference that ``test_finite_aim.py`` and
``test_finite_burn.py`` check against independent solve_ivp propagation and published results;
the suite runs with the compiled code, the default.

1. The two integrators fly the same burns (tangential and inertial steering, turned thrust,
   failures of each kind) to the same numbers to round-off: both perform the same
   floating-point operations in the same order; only library cosines, sines and powers may
   round differently in the last place. The same for the coast back along the approach.
2. Whole aimed sequences over a seeded spread (all strategies, split captures, weak engines)
   give the same outcome and passes everywhere, and totals within 0.025 m/s (half the issue's
   0.05 m/s agreement) for at least 99 % of them and within 0.25 m/s for all: a last-place
   difference changes the path of an aim, which may then stop at another point inside its
   20 m tolerance, and where one side's one-control aim converges and the other's falls back
   to ending at the apsis, the two fly different, equally valid solutions. Measured
   (2026-12-03): 2 of 3,600 sequences above 0.025 m/s, the largest 0.105 m/s (a two_burn
   sequence on target on both sides).

Bodies are test inputs with rounded textbook values (from memory, as in test_finite_aim.py).
"""

from __future__ import annotations

import numpy as np
import pytest

import sweep.physics.finite_burn as finite_burn
from sweep.physics.capture import best_intermediate_apoapsis, direct_capture, three_burn_capture, two_burn_capture
from sweep.physics.finite_burn import OUTCOMES, fly_capture

G0 = 9.80665  # m/s^2, exact by definition (3rd CGPM, 1901)
VE = 320.0 * G0
MASS = 1000.0
# (gm m^3/s^2, radius m, sphere of influence m), rounded (from memory): Mars, Venus, the Moon, Jupiter.
BODIES = np.array([(4.2828e13, 3.3895e6, 5.77e8), (3.24859e14, 6.0518e6, 6.16e8), (4.9028e12, 1.7374e6, 6.6e7),
                   (1.26687e17, 6.9911e7, 4.82e10)])


def _spread(n, seed):
    rng = np.random.default_rng(seed)
    gm, radius, soi = BODIES[rng.integers(0, len(BODIES), n)].T
    target = radius + np.exp(rng.uniform(np.log(150e3), np.log(20000e3), n))
    periapsis = radius + 100e3 + rng.uniform(0.0, 1.0, n) * (target - radius - 100e3)
    apoapsis = best_intermediate_apoapsis(gm, periapsis, target, 0.25 * soi)
    v_inf = rng.uniform(300.0, 7000.0, n)
    thrust = rng.choice([0.02, 0.1, 0.3, 1.0, 3.0], n) * MASS * G0
    return gm, radius, soi, target, periapsis, apoapsis, v_inf, thrust


def _fly_all(kernel, monkeypatch, steering, passes):
    monkeypatch.setenv("CAPSWEEP_KERNEL", kernel)
    gm, radius, soi, target, periapsis, apoapsis, v_inf, thrust = _spread(600, 20261203)
    out = []
    for first, radii, orbits, burns in (
        (target, [target], [(target, target)], direct_capture(v_inf, gm, target).burns),
        (periapsis, [periapsis, target], [(periapsis, target), (target, target)],
         two_burn_capture(v_inf, gm, periapsis, target).burns),
        (periapsis, [periapsis, apoapsis, target], [(periapsis, apoapsis), (target, apoapsis), (target, target)],
         three_burn_capture(v_inf, gm, periapsis, target, apoapsis).burns),
    ):
        out.append(fly_capture(gm, radius, soi, v_inf, first, radii, orbits, list(burns), thrust, VE, MASS,
                               steering, safe_radius=radius + 100e3, split_apoapsis=0.25 * soi, passes=passes))
    return out


@pytest.mark.parametrize(("steering", "passes"), [("tangential", "auto"), ("inertial", 1)])
def test_compiled_sequences_match_numpy(monkeypatch, steering, passes):
    assert finite_burn._compiled() is not None or pytest.fail("numba is a dependency: the compiled kernel must load")
    compiled = _fly_all("compiled", monkeypatch, steering, passes)
    numpy = _fly_all("numpy", monkeypatch, steering, passes)
    seen = set()
    for a, b in zip(compiled, numpy, strict=True):
        np.testing.assert_array_equal(a.outcome, b.outcome)
        np.testing.assert_array_equal(a.passes, b.passes)
        total_a, total_b = (r.delta_v.sum(axis=0) + r.trim_delta_v for r in (a, b))
        assert np.array_equal(np.isnan(total_a), np.isnan(total_b))
        difference = np.abs(total_a - total_b)[np.isfinite(total_a)]
        assert (difference <= 0.025).mean() >= 0.99, np.sort(difference)[-5:]
        assert difference.max() <= 0.25
        seen.update(OUTCOMES[code] for code in np.unique(a.outcome))
    # The spread exercises flown sequences and failures of the integrator itself.
    assert {"ok", "surface_impact", "propellant_exhausted"} <= seen, seen


def _burn_inputs(n, seed, fixed, turning):
    """Seeded burns from approach periapses: braking captures and some raising burns, strong to weak."""
    rng = np.random.default_rng(seed)
    gm, radius, soi = BODIES[rng.integers(0, len(BODIES), n)].T
    r = radius + rng.uniform(100e3, 3000e3, n)
    v = np.sqrt(rng.uniform(300.0, 7000.0, n) ** 2 + 2.0 * gm / r)
    state = (r, np.zeros(n), np.zeros(n), v)
    target = -gm / (r + r * rng.uniform(1.0, 20.0, n))  # bound ellipses with this periapsis
    sign = np.where(rng.uniform(size=n) < 0.1, 1.0, -1.0)
    target = np.where(sign > 0, 0.5 * v * v - gm / r + rng.uniform(10.0, 1e4, n), target)
    thrust = rng.choice([0.02, 0.1, 1.0, 3.0], n) * MASS * G0
    mass = np.full(n, MASS)
    engine = finite_burn._Engine(gm, thrust, mass, thrust / VE, sign)
    if fixed:
        engine = engine._replace(ux=np.zeros(n), uy=sign)
    if turning:
        engine = engine._replace(rate=rng.uniform(-1e-3, 1e-3, n), middle=rng.uniform(0.0, 500.0, n))
    expected = finite_burn.impulsive_burn_time(np.abs(v - np.sqrt(np.maximum(2 * (target + gm / r), 0))), mass,
                                               thrust, VE)
    limits = {"soi": soi, "body_radius": radius, "max_time": (mass - 1.0) / (thrust / VE)}
    return state, engine, target, expected, limits


@pytest.mark.parametrize(("fixed", "turning"), [(False, False), (False, True), (True, False), (True, True)])
def test_compiled_burns_match_numpy(monkeypatch, fixed, turning):
    inputs = _burn_inputs(400, 7, fixed, turning)
    results = []
    for kernel in ("compiled", "numpy"):
        monkeypatch.setenv("CAPSWEEP_KERNEL", kernel)
        results.append(finite_burn._burn(*inputs))
    (end_a, duration_a, outcome_a, low_a), (end_b, duration_b, outcome_b, low_b) = results
    np.testing.assert_array_equal(outcome_a, outcome_b)
    for a, b in zip((*end_a, duration_a, low_a), (*end_b, duration_b, low_b), strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-11, atol=1e-9)
    assert len(set(outcome_a.tolist())) >= 2  # flown and failed burns both exercised


def test_compiled_coast_back_matches_numpy(monkeypatch):
    rng = np.random.default_rng(11)
    n = 500
    gm, radius, _ = BODIES[rng.integers(0, len(BODIES), n)].T
    r = radius + rng.uniform(100e3, 3000e3, n)
    v = np.sqrt(rng.uniform(0.0, 7000.0, n) ** 2 + 2.0 * gm / r) * rng.choice([0.9, 1.0], n)  # ellipses too
    state = (r, np.zeros(n), np.zeros(n), v)
    duration = 10.0 ** rng.uniform(0.0, 5.0, n)
    results = []
    for kernel in ("compiled", "numpy"):
        monkeypatch.setenv("CAPSWEEP_KERNEL", kernel)
        results.append(finite_burn._coast_back(state, duration, gm))
    for a, b in zip(*results, strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-6)
