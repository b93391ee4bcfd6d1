"""The compiled burn integrator against the numpy one it was written from.

``sweep.physics.finite_burn`` flies its burns with ``finite_burn_compiled`` (numba) when numba
imports and with its own numpy integrator when ``CAPSWEEP_KERNEL=numpy``. The numpy one is the
reference that ``test_finite_aim.py`` and ``test_finite_burn.py`` check against independent
solve_ivp propagation and published results; the suite runs with the compiled one, the
default. Here the two fly the same seeded spread (five strategies of burn, tangential and
inertial steering, turned thrust, split captures, weak engines that fail in each way) and must
give the same outcome everywhere and the same numbers to round-off: both perform the same
floating-point operations in the same order, and only the cosine and sine of the thrust turn
may come from different libraries.

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
def test_compiled_matches_numpy(monkeypatch, steering, passes):
    assert finite_burn._compiled() is not None or pytest.fail("numba is a dependency: the compiled kernel must load")
    compiled = _fly_all("compiled", monkeypatch, steering, passes)
    numpy = _fly_all("numpy", monkeypatch, steering, passes)
    seen = set()
    for a, b in zip(compiled, numpy, strict=True):
        np.testing.assert_array_equal(a.outcome, b.outcome)
        np.testing.assert_array_equal(a.passes, b.passes)
        for name in ("delta_v", "duration", "time", "trim_delta_v", "lowest_radius", "approach_periapsis",
                     "periapsis_radius", "apoapsis_radius"):
            np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=1e-9, atol=1e-6, err_msg=name)
        seen.update(OUTCOMES[code] for code in np.unique(a.outcome))
    # The spread exercises flown sequences and failures of the integrator itself.
    assert {"ok", "surface_impact", "propellant_exhausted"} <= seen, seen
