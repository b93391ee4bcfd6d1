"""Finite-thrust capture kernel ``sweep.physics.finite_burn.fly_capture``.

a. Against an independent per-point scipy ``solve_ivp`` reference (``tests/finite_reference.py``)
   on a seeded spread of points, three bodies, three strategies, both steering laws.
   The reference models centred, unaimed burns: the kernel runs here with ``aim=False`` and
   one pass per burn (the model before aiming); the aimed model is checked in
   ``test_finite_aim.py`` against a replay of its flight plans.
b. Convergence to the impulsive answer as the thrust grows; gravity loss ~ (burn time)^2.
c. Robbins' small-arc gravity-loss estimate for an inertially fixed, centred burn.
d. Outcome codes for an engine that cannot capture and for a surface impact.
e. Argument checking.
f. Regressions: cases the kernel once got wrong against the reference (steps that ignored the
   falling mass or the passage through periapsis, an unconverged long approach coast).

All bodies, radii and engines below are test inputs chosen here (rounded textbook
magnitudes, not read from the package's catalog). Thrust-to-weight is referred to the
arrival mass and standard gravity: T = (T/W) m0 g0, g0 = 9.80665 m/s^2 exactly (3rd CGPM,
1901), as the sweep's configuration does.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest

from sweep.physics.capture import direct_capture, three_burn_capture, two_burn_capture
from sweep.physics.finite_burn import OUTCOMES, fly_capture
from tests.finite_reference import fly_capture_reference

# ---------------------------------------------------------------------------------------
# Test inputs (SI): gm, radius, sphere-of-influence radius.
# ---------------------------------------------------------------------------------------
MARS = (4.2828e13, 3389.5e3, 5.77e8)
MOON = (4.9028e12, 1737.4e3, 6.61e7)
JUPITER = (1.26687e17, 69911e3, 4.82e10)
ENCELADUS = (7.21e9, 252.1e3, 4.88e5)  # a sphere of influence barely twice the radius

G0 = 9.80665  # m/s^2, exact by definition
ISP = 320.0  # s
VE = ISP * G0  # m/s
MASS = 1000.0  # kg
OK = OUTCOMES.index("ok")


def _thrust(thrust_to_weight):
    return np.asarray(thrust_to_weight) * MASS * G0


def _plan(strategy, gm, v_inf, r_p, r_t, r_a=None):
    """Approach periapsis, burn radii, intended orbits and impulsive burns of one strategy.

    Orbits are the (periapsis, apoapsis) radii intended after each burn; impulsive burns come
    from the impulsive kernels in ``sweep.physics.capture``.
    """
    if strategy == "direct":
        return r_t, [r_t], [(r_t, r_t)], list(direct_capture(v_inf, gm, r_t).burns)
    if strategy == "two_burn":
        return (r_p, [r_p, r_t], [(r_p, r_t), (r_t, r_t)], list(two_burn_capture(v_inf, gm, r_p, r_t).burns))
    return (r_p, [r_p, r_a, r_t], [(r_p, r_a), (r_t, r_a), (r_t, r_t)],
            list(three_burn_capture(v_inf, gm, r_p, r_t, r_a).burns))


def _energies(gm, orbits):
    """Specific energy of each intended orbit (vis-viva: -mu / (r1 + r2)), what the reference stops on."""
    return [-gm / (a + b) for a, b in orbits]


# The reference models the centred, unaimed burns: the kernel is compared with aim=False and
# every burn in one pass (no split, no re-flight), which is the model as it was before aiming.
UNAIMED = {"aim": False, "passes": 1}


def _reference(body, v_inf, thrust_to_weight, plan, steering="tangential"):
    gm, radius, soi = body
    first, radii, orbits, burns = plan
    return fly_capture_reference(gm, radius, soi, float(v_inf), float(first), [float(r) for r in radii],
                                 [float(e) for e in _energies(gm, orbits)], [float(b) for b in burns],
                                 float(_thrust(thrust_to_weight)), VE, MASS, steering)


def _kernel(body, v_inf, thrust_to_weight, plan, steering="tangential"):
    gm, radius, soi = body
    first, radii, orbits, burns = plan
    return fly_capture(gm, radius, soi, v_inf, first, radii, orbits, burns, _thrust(thrust_to_weight),
                       VE, MASS, steering, **UNAIMED)


# =======================================================================================
# a. Vectorized kernel against the independent solve_ivp reference
# =======================================================================================
SEED = 20261202
POINTS_PER_CASE = 5  # per body and strategy: 3 x 3 x 5 = 45 points per steering law
# Spread (test inputs): periapsis and target altitudes, v_inf 0.5-7 km/s, T/W 0.05-5.
GEOMETRY = {  # body: (r_p range, r_t range) in m
    "mars": (MARS, (MARS[1] + 150e3, MARS[1] + 1500e3), (MARS[1] + 200e3, MARS[1] + 5000e3)),
    "moon": (MOON, (MOON[1] + 30e3, MOON[1] + 500e3), (MOON[1] + 50e3, MOON[1] + 2000e3)),
    "jupiter": (JUPITER, (1.1 * JUPITER[1], 3.0 * JUPITER[1]), (1.5 * JUPITER[1], 10.0 * JUPITER[1])),
}
# Plus direct captures into low circles (10-100 km) with T/W 0.05-1: half the burn before
# periapsis drags the orbit reached into the surface for most of them, so the spread
# also compares failure outcomes.
LOW_DIRECT = {"mars": (MARS[1] + 10e3, MARS[1] + 100e3), "moon": (MOON[1] + 10e3, MOON[1] + 100e3)}
LOW_POINTS = 3
# Points whose burns would spend more than 95 % of the arrival mass (total impulsive delta-v
# above v_e ln 20 = 9.4 km/s) are redrawn, to keep the spread on ordinary captures; the
# extreme mass ratios have their own regression test (test_high_mass_ratio_burn_within_1_m_s).
MAX_MASS_RATIO = 20.0


@functools.cache
def _spread():
    """Seeded points: list of (body name, strategy, v_inf, T/W, plan)."""
    rng = np.random.default_rng(SEED)
    points = []
    for name, (body, periapses, targets) in GEOMETRY.items():
        gm, _, soi = body
        for strategy in ("direct", "two_burn", "three_burn"):
            drawn = 0
            while drawn < POINTS_PER_CASE:
                v_inf = rng.uniform(500.0, 7000.0)
                thrust_to_weight = math.exp(rng.uniform(math.log(0.05), math.log(5.0)))
                r_p, r_t = rng.uniform(*periapses), rng.uniform(*targets)
                r_a = min(max(r_p, r_t) * 10 ** rng.uniform(0.3, 1.5), 0.3 * soi)
                if strategy != "direct" and abs(r_p / r_t - 1.0) < 0.1:
                    continue  # near-equal radii: a vanishing second burn and no distinct apsis to aim at
                plan = _plan(strategy, gm, v_inf, r_p, r_t, r_a)
                if sum(float(b) for b in plan[3]) > VE * math.log(MAX_MASS_RATIO):
                    continue
                points.append((name, strategy, v_inf, thrust_to_weight, plan))
                drawn += 1
    for name, targets in LOW_DIRECT.items():
        body = GEOMETRY[name][0]
        for _ in range(LOW_POINTS):
            v_inf = rng.uniform(500.0, 7000.0)
            thrust_to_weight = math.exp(rng.uniform(math.log(0.05), math.log(1.0)))
            plan = _plan("direct", body[0], v_inf, None, rng.uniform(*targets))
            points.append((name, "direct", v_inf, thrust_to_weight, plan))
    return points


@functools.cache
def _comparison(steering):
    """Kernel (one vectorized call per strategy) and reference (per point) on the spread."""
    points = _spread()
    results = []
    for strategy in ("direct", "two_burn", "three_burn"):
        chosen = [p for p in points if p[1] == strategy]
        bodies = [GEOMETRY[p[0]][0] for p in chosen]
        gm, radius, soi = (np.array(column) for column in zip(*bodies, strict=True))
        v_inf = np.array([p[2] for p in chosen])
        ratio = np.array([p[3] for p in chosen])
        plans = [p[4] for p in chosen]
        first = np.array([float(p[0]) for p in plans])
        radii, burns = ([np.array([float(p[part][k]) for p in plans]) for k in range(len(plans[0][1]))]
                        for part in (1, 3))
        orbits = [tuple(np.array([float(p[2][k][side]) for p in plans]) for side in (0, 1))
                  for k in range(len(plans[0][1]))]
        kernel = fly_capture(gm, radius, soi, v_inf, first, radii, orbits, burns, _thrust(ratio), VE, MASS,
                             steering, **UNAIMED)
        for i, point in enumerate(chosen):
            reference = _reference(GEOMETRY[point[0]][0], point[2], point[3], point[4], steering)
            results.append((point, reference, {field: value[..., i] for field, value in kernel._asdict().items()}))
    return results


def _flown(steering):
    return [(point, ref, vec) for point, ref, vec in _comparison(steering) if ref.outcome == "ok"]


STEERING = ["tangential", "inertial"]


@pytest.mark.parametrize("steering", STEERING)
def test_spread_outcomes_match_reference(steering):
    # independent: tests/finite_reference.py (scipy solve_ivp DOP853, rtol 1e-11, events)
    # A burn that runs the tanks down to the 0.1 % reserve (reference: propellant_exhausted)
    # ends in the last, mass-limited steps; there only "not captured" is asserted here, the
    # exact code in test_inertial_burn_run_to_exhaustion.
    results = _comparison(steering)
    assert len(results) == 51
    for point, ref, vec in results:
        if ref.outcome == "propellant_exhausted":
            assert int(vec["outcome"]) != OK, point[:4]
        else:
            assert OUTCOMES[int(vec["outcome"])] == ref.outcome, point[:4]
    outcomes = [ref.outcome for _, ref, _ in results]
    assert outcomes.count("ok") >= 40 and outcomes.count("surface_impact") >= 3  # measured 45-46 and 4-6


@pytest.mark.parametrize("steering", STEERING)
def test_spread_delta_v_within_1_m_s_of_reference(steering):
    # independent: solve_ivp reference. Tolerance 1 m/s per burn: the acceptance
    # figure. Measured max |difference| on this spread: 4.2e-4 m/s with either steering law
    # (9.7e-3 m/s before the step size followed the falling mass, on a Jupiter-like direct
    # capture burning 90 % of the mass).
    for point, ref, vec in _flown(steering):
        np.testing.assert_allclose(vec["delta_v"], ref.delta_v, rtol=0, atol=1.0, err_msg=str(point[:4]))


@pytest.mark.parametrize("steering", STEERING)
def test_spread_apsides_match_reference(steering):
    # independent: solve_ivp reference. Measured max relative difference of the reached
    # periapsis and apoapsis over every burn: 1.4e-6 and 6.0e-7 (tangential), 2.3e-7 and
    # 1.4e-7 (inertial). Tolerance 1e-5 relative, seven times the measured worst. (A delta-v
    # error dv moves the orbit by ~2 dv/v relative, so this corresponds to ~0.01 m/s at 2 km/s:
    # tighter than the 1 m/s acceptance, set from the measurement.)
    for point, ref, vec in _flown(steering):
        np.testing.assert_allclose(vec["periapsis_radius"], ref.periapsis_radius, rtol=1e-5, err_msg=str(point[:4]))
        np.testing.assert_allclose(vec["apoapsis_radius"], ref.apoapsis_radius, rtol=1e-5, err_msg=str(point[:4]))


@pytest.mark.parametrize("steering", STEERING)
def test_spread_total_time_matches_reference(steering):
    # independent: solve_ivp reference (coasts integrated, apsides found as r.v = 0 events).
    # Measured max |difference|: 1.8e-3 s (inertial), 7e-4 s (tangential), on times from 22 s
    # to 1.1e7 s. Tolerance 0.05 s: 25 times the measured worst; a burn ending 0.025 m/s late
    # at the weakest thrust acceleration here (0.5 m/s^2, T/W 0.05) lasts 0.05 s longer.
    for point, ref, vec in _flown(steering):
        assert float(vec["time"]) == pytest.approx(ref.time, rel=0, abs=0.05), point[:4]


def test_spread_failed_points_are_nan_in_the_kernel():
    # Contract (fly_capture docstring): burns of a failed sequence are NaN, and so is its time.
    for steering in STEERING:
        for _, ref, vec in _comparison(steering):
            if ref.outcome != "ok":
                assert np.isnan(vec["delta_v"]).all() and np.isnan(vec["time"])


# =======================================================================================
# b. Convergence to the impulsive limit
# =======================================================================================
# Mars-like direct capture into a 300 km circle at v_inf 2 km/s (test input).
CONVERGENCE = (MARS, 2000.0, MARS[1] + 300e3)


def _direct_losses(body, v_inf, r_t, thrust_to_weight, steering, refinement=1.0):
    """Gravity loss (finite minus impulsive delta-v), burn duration and impulsive delta-v."""
    gm = body[0]
    plan = _plan("direct", gm, v_inf, None, r_t)
    first, radii, orbits, burns = plan
    result = fly_capture(gm, body[1], body[2], v_inf, first, radii, orbits, burns,
                         _thrust(np.asarray(thrust_to_weight, dtype=float)), VE, MASS, steering, refinement, **UNAIMED)
    assert (result.outcome == OK).all()
    impulsive = float(plan[3][0])
    return result.delta_v[0] - impulsive, result.duration[0], impulsive


@pytest.mark.parametrize("steering", STEERING)
def test_finite_delta_v_tends_to_impulsive_as_thrust_grows(steering):
    # Common practice (Robbins 1966): the impulsive burn is the limit of infinite thrust.
    # Steps 8x finer than the sweep's (refinement=8, RK4 truncation ~4000x smaller): the losses
    # at T/W 100 and 1000 (1e-5 to 1e-7 m/s) are below the sweep setting's few-mm/s accuracy.
    loss, _, impulsive = _direct_losses(*CONVERGENCE, [1.0, 10.0, 100.0, 1000.0], steering, refinement=8.0)
    assert (loss[:3] > 0).all()  # a finite burn costs more (T/W 1 to 100)
    assert (np.diff(np.abs(loss)) < 0).all()  # and less the stronger the engine
    # T/W 1000: the 1/T^2 law from T/W 1 predicts 1.3e-6 m/s (inertial), 1.4e-7 (tangential);
    # measured with refinement 8: 1.30e-6 and 1.31e-7 (the solve_ivp reference gives 1.32e-6
    # and 1.45e-7). 1e-5 m/s bounds both with margin: 6e-9 of the burn.
    assert abs(loss[3]) < 1e-5
    assert abs(loss[0]) / impulsive < 1e-3  # measured 7.3e-4 (inertial), 7.7e-5 (tangential) at T/W 1


@pytest.mark.parametrize("steering", STEERING)
def test_gravity_loss_scales_with_square_of_burn_time(steering):
    # Small-arc analysis (Robbins 1966, common practice): loss ~ k t_b^2 with t_b ~ 1/T, so
    # doubling the thrust divides the loss by 4. Arcs n t_b (n the circular mean motion):
    # 0.13 rad at T/W 1 down to 0.03 at T/W 8. The next term of the expansion is O((n t_b)^2)
    # relative, <= 1.7e-2 here; measured deviation of the ratio from 4: <= 1.2e-3
    # (T/W 1 -> 2). Tolerance 1 % relative: within the expansion's bound, 8x the measured.
    ratios = np.array([1.0, 2.0, 4.0, 8.0])
    loss, duration, _ = _direct_losses(*CONVERGENCE, ratios, steering, refinement=8.0)  # as above
    np.testing.assert_allclose(loss[:-1] / loss[1:], 4.0, rtol=0.01)
    # t_b ~ 1/T; the burn outlasts t_b by about loss/dv (<= 7e-4 here), so the ratio departs
    # from 2 by about that much: measured 4.0e-4 relative (inertial, T/W 1 -> 2).
    np.testing.assert_allclose(duration[:-1] / duration[1:], 2.0, rtol=2e-3)


# =======================================================================================
# c. Robbins' small-arc gravity-loss estimate
# =======================================================================================
# H. M. Robbins, "An analytical study of the impulsive approximation", AIAA Journal
# 4(8):1417-1423, 1966, doi:10.2514/3.3687: for a burn centred on the burn point,
# loss ~ (1/24) (mu / r^3) t_b^2 dv. Value as summarised in the project's REFERENCES.md,
# not read in the paper. Here r = the burn (periapsis) radius, t_b = the burn duration,
# dv = the impulsive delta-v.
ROBBINS_CASES = [(MARS, v_inf, MARS[1] + 300e3) for v_inf in (500.0, 1000.0, 2000.0)]
ROBBINS_RATIOS = [2.0, 4.0, 10.0]  # T/W: arcs n t_b from 0.065 to 0.011 rad


def _robbins(gm, r, duration, impulsive):
    return gm / r**3 * duration**2 * impulsive / 24.0


@pytest.mark.parametrize("body, v_inf, r_t", ROBBINS_CASES)
def test_inertial_burn_loss_matches_robbins_estimate(body, v_inf, r_t):
    loss, duration, impulsive = _direct_losses(body, v_inf, r_t, ROBBINS_RATIOS, "inertial")
    estimate = _robbins(body[0], r_t, duration, impulsive)
    # Measured loss / estimate: 1.021 (v_inf 0.5 km/s), 1.024 (1 km/s), 1.036 (2 km/s),
    # flat in the arc. The estimate is leading order in the arc and treats the speed as
    # constant through the burn; the deviation grows with dv / v_periapsis (0.30 to 0.35
    # here; at v_inf 5 km/s, dv/v = 0.51, it reaches 1.19). Tolerance 10 %: 2.5x the
    # measured worst, and a loss computed with a wrong centring (a burn starting at the
    # apsis) or a wrong mean motion would be off by a factor, not by percent.
    np.testing.assert_allclose(loss / estimate, 1.0, rtol=0.10)


@pytest.mark.parametrize("body, v_inf, r_t", ROBBINS_CASES)
def test_tangential_steering_loses_several_times_less_than_inertial(body, v_inf, r_t):
    # Later work reports that Robbins' estimate tracks inertially fixed thrust and overstates
    # the loss of velocity-following steering several-fold (as summarised in the project's
    # REFERENCES.md). Measured tangential / inertial loss: 0.072 (v_inf 0.5 km/s), 0.079
    # (1 km/s), 0.106 (2 km/s), flat in the arc. Asserted: at most 1/3, "several times less".
    tangential, _, _ = _direct_losses(body, v_inf, r_t, ROBBINS_RATIOS, "tangential")
    inertial, _, _ = _direct_losses(body, v_inf, r_t, ROBBINS_RATIOS, "inertial")
    assert (tangential > 0).all()
    assert (tangential / inertial < 1.0 / 3.0).all()


# =======================================================================================
# d. Outcome codes
# =======================================================================================
def test_engine_that_cannot_capture_before_leaving_the_sphere_of_influence():
    # A small moon whose sphere of influence is barely twice its radius (as REFERENCES.md notes
    # for Enceladus): at v_inf 3 km/s the craft crosses it in a few hundred seconds, while an
    # engine of T/W 0.1 (1 m/s^2) needs t_b ~ 1900 s to remove the approach energy. It leaves the
    # sphere outbound with the energy target unmet: engine_cannot_capture, and no delta-v.
    # independent: the solve_ivp reference reaches the same outcome.
    v_inf, thrust_to_weight = 3000.0, 0.1
    plan = _plan("direct", ENCELADUS[0], v_inf, None, ENCELADUS[1] + 50e3)
    result = _kernel(ENCELADUS, v_inf, thrust_to_weight, plan)
    assert int(result.outcome) == OUTCOMES.index("engine_cannot_capture")
    assert np.isnan(result.delta_v).all() and np.isnan(result.duration).all() and np.isnan(result.time)
    assert _reference(ENCELADUS, v_inf, thrust_to_weight, plan).outcome == "engine_cannot_capture"


def test_centred_braking_that_drags_the_orbit_into_the_surface():
    # Direct capture into a 100 km Mars-like circle at v_inf 3 km/s with T/W 0.3: half the
    # ~550 s burn is spent before periapsis, which lowers the periapsis of the orbit reached
    # to ~93 km below the surface (reference run without a surface: 3296.6 km radius).
    # fly_capture reports surface_impact and no delta-v; with T/W 5 the same capture is ok.
    # independent: the solve_ivp reference reaches the same outcomes.
    v_inf, r_t = 3000.0, MARS[1] + 100e3
    plan = _plan("direct", MARS[0], v_inf, None, r_t)
    result = _kernel(MARS, v_inf, np.array([0.3, 5.0]), plan)
    assert result.outcome.tolist() == [OUTCOMES.index("surface_impact"), OK]
    assert np.isnan(result.delta_v[0, 0]) and np.isfinite(result.delta_v[0, 1])
    assert [_reference(MARS, v_inf, ratio, plan).outcome for ratio in (0.3, 5.0)] == ["surface_impact", "ok"]


# =======================================================================================
# e. Arguments
# =======================================================================================
def test_unknown_steering_is_rejected():
    plan = _plan("direct", MARS[0], 2000.0, None, MARS[1] + 300e3)
    with pytest.raises(ValueError, match="steering must be 'tangential' or 'inertial', got 'radial'"):
        _kernel(MARS, 2000.0, 1.0, plan, steering="radial")


# =======================================================================================
# Regressions: cases the kernel once got wrong against the reference
# =======================================================================================
# Regression (found against the reference, fixed by per-step step sizes and a safeguarded
# universal-variable coast):
# fixed RK4 step of t_b/48 does not resolve the 1/m(t) growth of the thrust acceleration when the
# burn spends most of the mass: here mass ratio 108, kernel 14652.4 m/s, reference 14704.4 m/s
# (-51.9 m/s); on a Jupiter-like direct capture with the Isp varied, -0.17 m/s at mass ratio 20,
# -4.0 at 50, -30 at 100
def test_high_mass_ratio_burn_within_1_m_s():
    # Jupiter-like direct capture into a 1.5 R circle at v_inf 5.5 km/s, T/W 3 (test input):
    # impulsive dv 14.7 km/s, so 99 % of the arrival mass is burned.
    v_inf, r_t = 5500.0, 1.5 * JUPITER[1]
    plan = _plan("direct", JUPITER[0], v_inf, None, r_t)
    ref = _reference(JUPITER, v_inf, 3.0, plan)
    vec = _kernel(JUPITER, v_inf, 3.0, plan)
    assert ref.outcome == "ok" and int(vec.outcome) == OK
    np.testing.assert_allclose(vec.delta_v, ref.delta_v, rtol=0, atol=1.0)  # the acceptance figure


# Regression (found against the reference, fixed by per-step step sizes and a safeguarded
# universal-variable coast):
# the burn's step is fixed at ignition (min of t_b/48 and 1/750 of the local period there); a
# long burn that ignites far out (8.0e7 m) steps over the periapsis passage (463.6 s steps, ~3900
# km each at 8.5 km/s, past a 3690 km periapsis) and misses the surface: kernel 'ok' (dv 5869.8 +
# 460.1 m/s, orbit after burn 1 reported with a 277 km periapsis radius, inside the planet),
# reference 'surface_impact'; with 10x the steps the kernel agrees
def test_long_low_thrust_burn_through_periapsis():
    # Mars-like two-burn capture, periapsis 300 km, target 0.3 of the SOI radius, v_inf 7 km/s,
    # T/W 0.01 (test input).
    gm, radius, soi = MARS
    v_inf = 7000.0
    plan = _plan("two_burn", gm, v_inf, radius + 300e3, 0.3 * soi)
    ref = _reference(MARS, v_inf, 0.01, plan)
    vec = _kernel(MARS, v_inf, 0.01, plan)
    assert OUTCOMES[int(vec.outcome)] == ref.outcome


# Regression (found against the reference, fixed by per-step step sizes and a safeguarded
# universal-variable coast):
# the universal-variable approach coast (_coast_back) stops its Newton iteration unconverged for
# long coasts on fast hyperbolas (beyond roughly 60 r_p / v_inf); here 24,000 s back from a 100
# km Moon-like periapsis at 5.5 km/s puts ignition ~1e10 m off: kernel 'engine_cannot_capture',
# reference 'surface_impact'
def test_long_approach_coast_before_a_weak_burn():
    # Moon-like direct capture into a 100 km circle at v_inf 5.5 km/s, T/W 0.005 (test input).
    v_inf = 5500.0
    plan = _plan("direct", MOON[0], v_inf, None, MOON[1] + 100e3)
    ref = _reference(MOON, v_inf, 0.005, plan)
    vec = _kernel(MOON, v_inf, 0.005, plan)
    assert OUTCOMES[int(vec.outcome)] == ref.outcome


# Regression (found against the reference, fixed by per-step step sizes and a safeguarded
# universal-variable coast):
# a burn run down to the 0.1 % reserve (mass ratio 1000) with t_b/48 steps: the final steps at
# thrust accelerations up to 550 m/s^2 fling the craft out of the sphere of influence; kernel
# 'engine_cannot_capture', reference 'propellant_exhausted'; with 4x the steps the kernel agrees
def test_inertial_burn_run_to_exhaustion():
    # From the seeded spread: Moon-like direct capture into a 27.6 km circle, v_inf 6181 m/s,
    # T/W 0.056, inertially fixed thrust. The fixed direction turns against the motion as the
    # craft swings past periapsis, the energy target is never met and the tanks run dry.
    v_inf, thrust_to_weight = 6181.182478830288, 0.05607825831769432
    plan = _plan("direct", MOON[0], v_inf, None, MOON[1] + 27615.250432700617)
    assert _reference(MOON, v_inf, thrust_to_weight, plan, "inertial").outcome == "propellant_exhausted"
    vec = _kernel(MOON, v_inf, thrust_to_weight, plan, "inertial")
    assert int(vec.outcome) == OUTCOMES.index("propellant_exhausted")


# Regression: the unconverged approach coast once overflowed to NaN (~71,000 s back at 7 km/s
# from a 352 km periapsis) and fly_capture raised, losing the whole batch instead of one
# point's outcome; the reference says engine_cannot_capture.
def test_very_weak_engine_returns_an_outcome():
    # Enceladus-like direct capture into a 100 km circle, v_inf 7 km/s, T/W 0.002 (test input).
    v_inf, thrust_to_weight = 7000.0, 0.002
    plan = _plan("direct", ENCELADUS[0], v_inf, None, ENCELADUS[1] + 100e3)
    assert _reference(ENCELADUS, v_inf, thrust_to_weight, plan).outcome == "engine_cannot_capture"
    result = _kernel(ENCELADUS, v_inf, thrust_to_weight, plan)
    assert int(result.outcome) == OUTCOMES.index("engine_cannot_capture")
