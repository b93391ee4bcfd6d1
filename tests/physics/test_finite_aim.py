"""Aimed finite-thrust captures: ``sweep.physics.finite_burn.fly_capture`` with ``aim=True``.

a. Independent propagation: the kernel's flight plan of every flown point of a seeded spread
   (five bodies, three strategies, T/W 0.05 to 3, some captures split over several passes) is
   replayed by ``tests/finite_reference.replay_flight`` (scipy ``solve_ivp`` DOP853, written
   from the model description, not from the kernel): delta-v of every pass, the orbit reached
   after every burn, the final orbit against the target, the trim and the lowest radius.
b. As the thrust grows the finite total (trim included) tends to the impulsive delta-v.
c. The gravity loss of short burns falls as 1/T^2.
d. Named cases at Venus and Ganymede: on target, or failing for a physical reason.
e. The lowest-altitude check: below_safe_altitude where the flight dips below the safe
   radius, surface_impact kept for flights that hit the surface.
f. The aim matters: the same capture unaimed misses its target orbit by kilometres.

Bodies are test inputs written here with rounded textbook values (from memory), not read
from the package's catalog. Thrust-to-weight is referred to the arrival mass and standard
gravity: T = (T/W) m0 g0, g0 = 9.80665 m/s^2 exactly (3rd CGPM, 1901). Run with ``-s`` to see
the measured values printed by the named cases.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest

from sweep.physics.capture import best_intermediate_apoapsis, direct_capture, three_burn_capture, two_burn_capture
from sweep.physics.finite_burn import AIM_TOLERANCE, OUTCOMES, SAFE_TOLERANCE, fly_capture
from tests.finite_reference import fly_capture_reference, replay_flight, trim_cost

G0 = 9.80665  # m/s^2, exact by definition (3rd CGPM, 1901)
ISP = 321.0  # s, a storable bipropellant engine (catalog-like test input)
VE = ISP * G0  # m/s
MASS = 1200.0  # kg on arrival (test input)
OK = OUTCOMES.index("ok")
ON_TARGET = 100.0  # m: the stated tolerance on the final orbit's apsides (0.1 km)

# Gravitational parameters [m^3/s^2], mean radii [m], orbit semi-major axes [m] (from memory;
# JPL/IAU rounded values as found in textbook tables, e.g. Curtis 2014, App. A).
GM_SUN = 1.32712440018e20
GM_EARTH = 3.986004418e14
GM_JUPITER = 1.26686534e17


def _sphere_of_influence(a, gm, parent):
    """Laplace sphere of influence a (m/M)^(2/5) (Curtis 2014, Sec. 8.5; from memory)."""
    return a * (gm / parent) ** 0.4


def _hill_radius(a, gm, parent):
    """Hill radius a (m / 3M)^(1/3) (common practice; circular orbit about the parent)."""
    return a * (gm / (3.0 * parent)) ** (1.0 / 3.0)


def _body(gm, radius, a, parent):
    """(gm, radius, sphere of influence, Hill radius), SI."""
    return gm, radius, _sphere_of_influence(a, gm, parent), _hill_radius(a, gm, parent)


BODIES = {  # from memory: GM, mean radius, semi-major axis of its orbit, parent's GM
    "mars": _body(4.282837e13, 3389.5e3, 2.2794e11, GM_SUN),  # a = 1.5237 AU
    "venus": _body(3.24859e14, 6051.8e3, 1.0821e11, GM_SUN),  # a = 0.7233 AU
    "moon": _body(4.9028e12, 1737.4e3, 3.844e8, GM_EARTH),
    "ganymede": _body(9.8878e12, 2631.2e3, 1.0704e9, GM_JUPITER),  # GM 9887.8 km^3/s^2
    "jupiter": _body(GM_JUPITER, 69911e3, 7.7857e11, GM_SUN),  # a = 5.2044 AU
}


def _split_bound(body):
    """Apoapsis of the long ellipse a split capture enters first: half the smaller of the sphere
    of influence and the Hill radius (test choice, as a sweep would bound it)."""
    return 0.5 * min(body[2], body[3])


def _thrust(thrust_to_weight):
    return np.asarray(thrust_to_weight, dtype=float) * MASS * G0


def _plan(strategy, gm, v_inf, r_p, r_t, r_a=None):
    """Approach periapsis, burn radii, intended orbits and impulsive burns of one strategy
    (impulsive burns from ``sweep.physics.capture``)."""
    if strategy == "direct":
        return r_t, [r_t], [(r_t, r_t)], [float(b) for b in direct_capture(v_inf, gm, r_t).burns]
    if strategy == "two_burn":
        return (r_p, [r_p, r_t], [(r_p, r_t), (r_t, r_t)],
                [float(b) for b in two_burn_capture(v_inf, gm, r_p, r_t).burns])
    return (r_p, [r_p, r_a, r_t], [(r_p, r_a), (r_t, r_a), (r_t, r_t)],
            [float(b) for b in three_burn_capture(v_inf, gm, r_p, r_t, r_a).burns])


def _fly(body, v_inf, thrust, plan, **options):
    gm, radius, soi, _ = body
    first, radii, orbits, burns = plan
    return fly_capture(gm, radius, soi, v_inf, first, radii, orbits, burns, thrust, VE, MASS, **options)


def _column(result, i=None):
    """One point of a FiniteCapture as a dict of arrays (the last axis is the point axis)."""
    return {k: np.asarray(v) if i is None else np.asarray(v)[..., i] for k, v in result._asdict().items()}


def _flight_plan(point):
    """The kernel's flight plan of one point: passes in flight order, and the burn of each."""
    passes, burn_of = [], []
    ignition = point["pass_ignition"]
    for k in range(ignition.shape[0]):
        for j in range(ignition.shape[1]):
            if np.isfinite(ignition[k, j]):
                passes.append(tuple(float(point[key][k, j]) for key in
                                    ("pass_ignition", "pass_pitch_rate", "pass_turn_centre", "pass_energy")))
                burn_of.append(k)
    return passes, burn_of


def _replay(body, v_inf, thrust, point):
    gm, radius, _, _ = body
    passes, _ = _flight_plan(point)
    return replay_flight(gm, radius, float(v_inf), float(point["approach_periapsis"]), passes, float(thrust), VE,
                         MASS)


def _speed(gm, r, periapsis, apoapsis):
    """Vis-viva v^2 = mu (2/r - 1/a) (Curtis 2014, Eq. 2.71; common practice)."""
    return math.sqrt(gm * (2.0 / r - 2.0 / (periapsis + apoapsis)))


def _small_trim(gm, target_radius):
    """The trim of a circle missed by ON_TARGET at both apsides (a burn ending on the target
    energy but not horizontal keeps the semi-major axis: r_t -/+ miss): below this, the kernel
    claims to end within 0.1 km of its target."""
    return trim_cost(gm, target_radius - ON_TARGET, target_radius + ON_TARGET, target_radius, target_radius)


# =======================================================================================
# a. Independent propagation of the kernel's flight plans
# =======================================================================================
SEED = 20260601
POINTS_PER_CASE = 3  # per body and strategy: 5 x 3 x 3 = 45 points
STRATEGIES = ("direct", "two_burn", "three_burn")
# Weak engines (T/W 0.01-0.02) into low circles: long burns the "auto" rule splits over passes
# (at T/W 0.02 and above the aim brings most of them on target in one pass).
SPLIT_CASES = {"mars": 4, "venus": 4, "moon": 4}


@functools.cache
def _spread():
    """Seeded points: (body name, strategy, v_inf, T/W, plan)."""
    rng = np.random.default_rng(SEED)
    points = []
    for name, body in BODIES.items():
        gm, radius, soi, hill = body
        for strategy in STRATEGIES:
            for _ in range(POINTS_PER_CASE):
                v_inf = rng.uniform(500.0, 4000.0 if name in ("moon", "ganymede") else 6000.0)
                thrust_to_weight = math.exp(rng.uniform(math.log(0.05), math.log(3.0)))
                r_p = radius * (1.0 + rng.uniform(0.03, 0.3))
                r_t = radius * (1.0 + math.exp(rng.uniform(math.log(0.05), math.log(1.5))))
                r_a = min(max(r_p, r_t) * 10 ** rng.uniform(0.3, 1.0), 0.3 * min(soi, hill))
                points.append((name, strategy, v_inf, thrust_to_weight, _plan(strategy, gm, v_inf, r_p, r_t, r_a)))
    for name, count in SPLIT_CASES.items():
        gm, radius, _, _ = BODIES[name]
        for _ in range(count):
            v_inf = rng.uniform(1500.0, 4000.0)
            thrust_to_weight = rng.uniform(0.01, 0.02)
            r_t = radius * (1.0 + rng.uniform(0.03, 0.1))
            points.append((name, "direct", v_inf, thrust_to_weight, _plan("direct", gm, v_inf, None, r_t)))
    return points


@functools.cache
def _comparison():
    """Kernel (one vectorized call per strategy) and, for every flown point, the replay."""
    results = []
    points = _spread()
    for strategy in STRATEGIES:
        chosen = [p for p in points if p[1] == strategy]
        gm, radius, soi, hill = (np.array(c) for c in zip(*(BODIES[p[0]] for p in chosen), strict=True))
        v_inf = np.array([p[2] for p in chosen])
        thrust = _thrust([p[3] for p in chosen])
        plans = [p[4] for p in chosen]
        burns = len(plans[0][1])
        first = np.array([p[0] for p in plans])
        radii = [np.array([p[1][k] for p in plans]) for k in range(burns)]
        orbits = [tuple(np.array([p[2][k][side] for p in plans]) for side in (0, 1)) for k in range(burns)]
        impulses = [np.array([p[3][k] for p in plans]) for k in range(burns)]
        split = 0.5 * np.minimum(soi, hill)  # as _split_bound
        kernel = fly_capture(gm, radius, soi, v_inf, first, radii, orbits, impulses, thrust, VE, MASS,
                             split_apoapsis=split)
        for i, point in enumerate(chosen):
            column = _column(kernel, i)
            flown = int(column["outcome"]) == OK
            replay = _replay(BODIES[point[0]], point[2], thrust[i], column) if flown else None
            results.append((point, column, replay))
    return results


def _flown():
    return [(p, k, r) for p, k, r in _comparison() if int(k["outcome"]) == OK]


def _label(point):
    return f"{point[0]} {point[1]} v_inf={point[2]:.0f} T/W={point[3]:.3f}"


def test_spread_is_mostly_flown_and_includes_split_captures():
    # Guards the checks below against passing vacuously: most points fly, several are split.
    results = _comparison()
    assert len(results) == 45 + sum(SPLIT_CASES.values())
    flown = _flown()
    assert len(flown) >= 40  # measured 55 of 57 (two weak direct captures hit the surface)
    split = [p for p, k, _ in flown if (k["passes"] > 1).any()]
    assert len(split) >= 5, [_label(p) for p in split]  # measured 6, all weak direct (2026-12-03)


def test_replay_flies_every_flown_plan_without_hitting_the_surface():
    # independent integration: scipy solve_ivp DOP853 (tests/finite_reference.replay_flight)
    for point, kernel, replay in _flown():
        assert replay.outcome == "ok", _label(point)
        assert len(replay.delta_v) == int(kernel["passes"].sum()), _label(point)


def test_every_pass_delta_v_within_0_05_m_s_of_the_replay():
    # independent integration: scipy solve_ivp DOP853 at rtol 1e-11. Tolerance 0.05 m/s per
    # pass, as asked; the kernel's RK4 steps are documented as a few mm/s. Measured worst on
    # this spread (2026-12-03): 0.011 m/s (a split Moon capture at T/W 0.012).
    for point, kernel, replay in _flown():
        passes = kernel["pass_delta_v"][np.isfinite(kernel["pass_delta_v"])]
        np.testing.assert_allclose(passes, replay.delta_v, rtol=0, atol=0.05, err_msg=_label(point))
        # The per-burn delta-v is its passes summed (FiniteCapture contract).
        np.testing.assert_allclose(kernel["delta_v"], np.nansum(kernel["pass_delta_v"], axis=1), rtol=1e-12)


def test_orbit_after_every_burn_matches_the_replay():
    # independent integration: solve_ivp. The kernel reports the orbit reached after each burn's
    # last pass. A delta-v error dv moves an apsis by ~2 dv/v relative (vis-viva, common
    # practice); the kernel's RK4 is documented to a few mm/s, i.e. ~1e-6 relative at the
    # speeds here. Measured worst with the T/W 0.05-0.1 split cases: 1.4e-6 (9.2 m, a two-pass
    # Venus capture at T/W 0.068, whose pass delta-v is 6.9e-3 m/s off; it falls to 0.45 m with
    # refinement=4, so it is the kernel's step error, not the replay's). With the weaker T/W
    # 0.01-0.02 split cases (2026-12-03): 3.0e-5 (a Moon capture at T/W 0.011 over several
    # passes). Tolerance 5e-5 relative: the apsis shift of the 0.05 m/s delta-v
    # agreement at the slowest orbit here (2 x 0.05 / 1,600 m/s, the Moon).
    for point, kernel, replay in _flown():
        _, burn_of = _flight_plan(kernel)
        last = [max(i for i, b in enumerate(burn_of) if b == k) for k in range(len(kernel["delta_v"]))]
        np.testing.assert_allclose(kernel["periapsis_radius"], [replay.periapsis_radius[i] for i in last],
                                   rtol=5e-5, err_msg=_label(point))
        np.testing.assert_allclose(kernel["apoapsis_radius"], [replay.apoapsis_radius[i] for i in last],
                                   rtol=5e-5, err_msg=_label(point))


def test_final_orbit_within_0_1_km_of_target_where_the_trim_is_small():
    # independent integration: solve_ivp replay of the plan. "Trim small" = the kernel's trim is
    # at most what a 0.1 km miss of both apsides costs (vis-viva two-impulse, Curtis 2014 Ch. 6),
    # i.e. where the kernel claims to be on target; the replay must then end within 0.1 km.
    on_target = 0
    for point, kernel, replay in _flown():
        gm = BODIES[point[0]][0]
        target_periapsis, target_apoapsis = point[4][2][-1]
        if float(kernel["trim_delta_v"]) <= _small_trim(gm, target_periapsis):
            on_target += 1
            assert replay.periapsis_radius[-1] == pytest.approx(target_periapsis, abs=ON_TARGET), _label(point)
            assert replay.apoapsis_radius[-1] == pytest.approx(target_apoapsis, abs=ON_TARGET), _label(point)
    assert on_target >= 0.8 * len(_flown())  # measured: 53 of 55, worst replayed miss 66 m


def test_trim_is_the_two_impulse_cost_of_the_miss():
    # independent: vis-viva two-impulse trim (Curtis 2014 Ch. 6, written here), the cheaper
    # order of the two apsis changes. (1) From the kernel's own reported final orbit: the same
    # formula, so to rounding (1e-9 m/s). (2) From the replay's final orbit: the trim moves by
    # about v/(2r) per metre of apsis (vis-viva; ~1e-4 m/s per m at Mars), and the apsides agree
    # to 5e-5 relative (test above), so allow v/(2r) * 2 x 5e-5 r = 5e-5 v (measured worst
    # 0.023 m/s, a split Moon capture at T/W 0.011 with a 24 m/s trim, where 5e-5 v is
    # 0.08 m/s).
    for point, kernel, replay in _flown():
        gm = BODIES[point[0]][0]
        target = point[4][2][-1]
        reached = float(kernel["periapsis_radius"][-1]), float(kernel["apoapsis_radius"][-1])
        own = trim_cost(gm, *reached, *target)
        assert float(kernel["trim_delta_v"]) == pytest.approx(own, abs=1e-9), _label(point)
        replayed = trim_cost(gm, replay.periapsis_radius[-1], replay.apoapsis_radius[-1], *target)
        allowance = 5e-5 * _speed(gm, target[0], *target)
        assert float(kernel["trim_delta_v"]) == pytest.approx(replayed, abs=allowance), _label(point)


def test_lowest_radius_matches_the_replay():
    # independent integration: the replay finds the exact minima (rising r.v = 0 events) of the
    # integrated path. The kernel samples its RK4 step ends and the osculating periapsis where
    # the radial velocity turns within a step; under thrust the osculating periapsis is not
    # the path's minimum, so the kernel may sit above or below it when a burn acts through
    # the periapsis. Measured (2026-12-03): from 55 m below (a split Moon capture, T/W 0.011)
    # to 31 m above (Jupiter three_burn, T/W 0.24). Tolerance: SAFE_TOLERANCE (0.1 km) either
    # way, the margin the kernel itself allows before it reports below_safe_altitude; a larger
    # error could pass an unsafe flight.
    for point, kernel, replay in _flown():
        assert float(kernel["lowest_radius"]) == pytest.approx(replay.lowest_radius, abs=SAFE_TOLERANCE), \
            _label(point)


# =======================================================================================
# b. The impulsive limit
# =======================================================================================
LIMIT_CASES = [  # (body, strategy, v_inf, periapsis altitude, target altitude), test inputs
    ("mars", "direct", 2500.0, None, 400e3),
    ("venus", "two_burn", 4000.0, 250e3, 2000e3),
    ("moon", "three_burn", 1000.0, 100e3, 500e3),
    ("ganymede", "two_burn", 1500.0, 100e3, 1500e3),
    ("jupiter", "direct", 5500.0, None, 0.5 * 69911e3),
]


def _case_plan(name, strategy, v_inf, periapsis_altitude, target_altitude, bound=None):
    """Body and plan of a named case; three_burn's apoapsis is the impulsive optimum
    (sweep.physics.capture.best_intermediate_apoapsis) within ``bound`` (default: the split bound)."""
    body = BODIES[name]
    gm, radius = body[0], body[1]
    r_p = None if periapsis_altitude is None else radius + periapsis_altitude
    r_t = radius + target_altitude
    r_a = None
    if strategy == "three_burn":
        r_a = float(best_intermediate_apoapsis(gm, r_p, r_t, _split_bound(body) if bound is None else bound))
    return body, _plan(strategy, gm, v_inf, r_p, r_t, r_a)


@pytest.mark.parametrize("case", LIMIT_CASES, ids=[f"{c[0]}-{c[1]}" for c in LIMIT_CASES])
def test_finite_total_tends_to_impulsive_as_thrust_grows(case):
    # Common practice (Robbins 1966, AIAA J. 4(8):1417; from memory): the impulsive burn is the
    # limit of infinite thrust. Impulsive delta-v from sweep.physics.capture. Tolerance 0.1 m/s
    # at T/W 100, as asked; measured at most 5.2e-3 m/s (Moon three_burn: there the aim's
    # residual trim dominates, larger than the loss at T/W 10, so no finer ordering is asserted).
    body, plan = _case_plan(*case)
    ratios = np.array([1.0, 10.0, 100.0])
    result = _fly(body, case[2], _thrust(ratios), plan)
    assert (result.outcome == OK).all()
    loss = result.delta_v.sum(axis=0) + result.trim_delta_v - sum(plan[3])
    assert abs(loss[2]) < 0.1
    assert loss[0] > 0.0 and loss[0] > abs(loss[2])  # a weaker engine pays more (measured 0.03-9.1 m/s at T/W 1)


# =======================================================================================
# c. Gravity loss ~ 1/T^2 for short burns
# =======================================================================================
LOSS_CASES = {"direct": (400e3, [0.7, 1.4, 2.8]), "two_burn": (2000e3, [1.0, 2.0, 4.0])}  # target altitude, T/W


@pytest.mark.parametrize("strategy", list(LOSS_CASES))
def test_gravity_loss_falls_as_inverse_square_of_thrust(strategy):
    # Small-arc analysis (Robbins 1966, from memory; common practice): loss ~ k t_b^2 with
    # t_b ~ 1/T, so doubling the thrust divides the loss by 4. Mars, v_inf 5 km/s (a large
    # burn, so the losses stand well above the aim's residual): direct into 400 km at T/W 0.7,
    # 1.4, 2.8, two_burn (200 km x 2000 km) at T/W 1, 2, 4: arcs n t_b from ~0.28 to ~0.05 rad,
    # losses from ~9 to ~0.3 m/s. Where the law holds: arcs of a few tenths of a radian and
    # below, and losses well above the aim's trim (~0.03 m/s), so not beyond T/W ~4 here.
    # Tolerance per pair, derived: the next term of the expansion, O((n t_b)^2) relative to
    # each loss, enters the ratio as ~4 (n t_b)^2; and each loss carries the trim of an aim
    # miss of up to AIM_TOLERANCE on each eccentricity component (sqrt(2) x 20 m on the
    # apsides), so the ratio moves by at most (trim + 4 trim) / loss_2T. Tolerances 0.37, 0.34
    # (direct), 0.20, 0.20 (two_burn); measured ratios 3.91, 3.98 and 4.03, 4.00. A 1/T law
    # (ratio 2) or 1/T^3 (ratio 8) fails.
    body = BODIES["mars"]
    gm, radius = body[0], body[1]
    altitude, thrust_to_weight = LOSS_CASES[strategy]
    v_inf, r_t = 5000.0, radius + altitude
    plan = _plan(strategy, gm, v_inf, radius + 200e3, r_t)
    ratios = np.array(thrust_to_weight)
    result = _fly(body, v_inf, _thrust(ratios), plan)
    assert (result.outcome == OK).all()
    loss = result.delta_v.sum(axis=0) + result.trim_delta_v - sum(plan[3])
    # n t_b of the capture burn at its periapsis radius (the longest arc of the sequence)
    burn_radius = plan[1][0]
    mean_motion = math.sqrt(gm / burn_radius**3)
    burn_time = MASS * VE / _thrust(ratios) * -math.expm1(-plan[3][0] / VE)
    miss = math.sqrt(2.0) * AIM_TOLERANCE
    noise = trim_cost(gm, r_t - miss, r_t + miss, r_t, r_t)
    for i in range(2):
        tolerance = 4.0 * (mean_motion * burn_time[i]) ** 2 + 5.0 * noise / loss[i + 1]
        assert tolerance < 0.5  # the check still tells 4 from 2 or 8
        assert loss[i] / loss[i + 1] == pytest.approx(4.0, abs=tolerance), (i, loss, tolerance)


# =======================================================================================
# d. Named cases
# =======================================================================================
VENUS_SAFE_ALTITUDE = 200e3  # m: test input (upper atmosphere, common practice)
GANYMEDE_SAFE_ALTITUDE = 100e3  # m: test input, as asked
# Ganymede's split bound: half its Hill radius, a (m / 3M)^(1/3) with a = 1.0704e9 m and
# Jupiter's GM 1.26686534e17 (from memory): ~31,700 km, so ~15,860 km.
GANYMEDE_SPLIT = 0.5 * BODIES["ganymede"][3]
PHYSICAL_FAILURES = ("engine_cannot_capture", "propellant_exhausted", "surface_impact", "below_safe_altitude")


def _assert_on_target_or_physical(name, strategy, v_inf, thrust, plan, safe_radius, split=None):
    """
    Fly one named case and check it: ok and on target above the safe radius (confirmed by the
    replay), or a failure the independent integrations confirm is the engine's, not the aim's.
    Returns the outcome and the kernel's lowest radius.
    """
    body = BODIES[name]
    gm, radius = body[0], body[1]
    result = _fly(body, v_inf, thrust, plan, safe_radius=safe_radius, split_apoapsis=split)
    point = _column(result)
    outcome = OUTCOMES[int(point["outcome"])]
    target_periapsis, target_apoapsis = plan[2][-1]
    lowest_km, approach_km = ((float(point[key]) - radius) / 1e3 for key in ("lowest_radius", "approach_periapsis"))
    print(f"{name} {strategy} {thrust:.0f} N v_inf {v_inf:.0f}: {outcome}, passes {point['passes'].tolist()}, "
          f"trim {float(point['trim_delta_v']):.4f} m/s, lowest altitude {lowest_km:.3f} km, "
          f"approach altitude {approach_km:.1f} km")
    if outcome == "ok":
        # The kernel's claim: trim small, apsides on target, never below the safe radius (less
        # its SAFE_TOLERANCE margin) ...
        assert float(point["trim_delta_v"]) <= _small_trim(gm, target_periapsis)
        assert abs(float(point["periapsis_radius"][-1]) - target_periapsis) <= ON_TARGET
        assert abs(float(point["apoapsis_radius"][-1]) - target_apoapsis) <= ON_TARGET
        assert float(point["lowest_radius"]) >= safe_radius - SAFE_TOLERANCE
        # ... confirmed by the independent replay (solve_ivp DOP853): same bounds; the lowest
        # radius with the 1 m integration allowance of test_lowest_radius_matches_the_replay.
        replay = _replay(body, v_inf, thrust, point)
        assert replay.outcome == "ok"
        assert abs(replay.periapsis_radius[-1] - target_periapsis) <= ON_TARGET
        assert abs(replay.apoapsis_radius[-1] - target_apoapsis) <= ON_TARGET
        assert replay.lowest_radius >= safe_radius - SAFE_TOLERANCE - 1.0
    elif outcome == "below_safe_altitude":
        # The same flight (same passes) with the surface as the only limit flies; its replay
        # (solve_ivp) dips below the safe radius by more than the kernel's margin: the dip is
        # real, not an artefact of the kernel's sampling (the replay's lowest radius includes
        # the periapsis of the orbit reached, which the trim starts from).
        again = _column(_fly(body, v_inf, thrust, plan, split_apoapsis=split, passes=point["passes"]))
        # It flies through every burn: ok, or aim_not_met where its trim would be a long burn
        # (that check comes after the safe-altitude one; the passes are kept as flown).
        assert OUTCOMES[int(again["outcome"])] in ("ok", "aim_not_met")
        replay = _replay(body, v_inf, thrust, again)
        assert replay.lowest_radius < safe_radius - SAFE_TOLERANCE, (replay.lowest_radius - radius)
    elif outcome == "surface_impact":
        # Not caused by the aim: the aim did not lower the approach below the plan's periapsis,
        # and the plan flown centred and unaimed by the independent reference (solve_ivp) hits
        # the surface as well.
        assert float(point["approach_periapsis"]) >= plan[0]
        reference = fly_capture_reference(gm, radius, body[2], v_inf, plan[0], plan[1],
                                          [-gm / (a + b) for a, b in plan[2]], plan[3], thrust, VE, MASS)
        assert reference.outcome == "surface_impact"
    else:
        assert outcome in PHYSICAL_FAILURES
    return outcome, float(point["lowest_radius"])


def test_venus_400_km_circle_with_4000_n_direct():
    # Venus (GM 3.24859e5 km^3/s^2, radius 6051.8 km, from memory); 1200 kg, Isp 321 s, 4 kN
    # (T/W 0.34), v_inf 3 km/s, 400 km circular target, safe altitude 200 km (test inputs).
    gm, radius = BODIES["venus"][0], BODIES["venus"][1]
    plan = _plan("direct", gm, 3000.0, None, radius + 400e3)
    outcome, lowest = _assert_on_target_or_physical("venus", "direct", 3000.0, 4000.0, plan,
                                                    radius + VENUS_SAFE_ALTITUDE)
    assert outcome == "ok"  # a 4 kN engine at T/W 0.34 is ample here (measured trim 0.008 m/s)
    assert lowest >= radius + VENUS_SAFE_ALTITUDE  # never below the safe radius, no margin used (measured 399.985 km)


GANYMEDE_LOW = [(thrust, strategy) for thrust in (90.0, 220.0) for strategy in ("direct", "two_burn")]


@pytest.mark.parametrize("thrust, strategy", GANYMEDE_LOW)
def test_ganymede_120_km_circle_with_a_small_engine(thrust, strategy):
    # Ganymede (GM 9887.8 km^3/s^2, radius 2631.2 km, from memory), v_inf 0.4 km/s, 120 km
    # circular target, capture periapsis (two_burn) at the 100 km safe altitude; 90 N and
    # 220 N (T/W 0.0076 and 0.019): long burns, split over passes of the long ellipse bounded
    # at half the Hill radius. Measured (2026-12-03): all four ok in one pass per burn; the aim
    # raises the approach periapsis to 2,648 km (direct) and 2,668 km (two_burn) at 90 N, to
    # about 630 km at 220 N, and the long braking arc sinks onto the intended periapsis.
    gm, radius = BODIES["ganymede"][0], BODIES["ganymede"][1]
    plan = _plan(strategy, gm, 400.0, radius + GANYMEDE_SAFE_ALTITUDE, radius + 120e3)
    _assert_on_target_or_physical("ganymede", strategy, 400.0, thrust, plan, radius + GANYMEDE_SAFE_ALTITUDE,
                                  GANYMEDE_SPLIT)


@pytest.mark.parametrize("strategy", STRATEGIES)
def test_ganymede_1500_km_circle_at_3_km_s_with_220_n(strategy):
    # Ganymede, v_inf 3 km/s, 1500 km circular target, 220 N; capture periapsis at the 100 km
    # safe altitude, three_burn's apoapsis the impulsive optimum within the split bound.
    # Measured (2026-12-03): direct and two_burn ok in one pass per burn (approach raised to
    # 2,422 and 1,317 km); three_burn below_safe_altitude: its final burn, split over 8
    # passes, dips to 99.78 km, 0.22 km under the 100 km floor.
    body = BODIES["ganymede"]
    _, plan = _case_plan("ganymede", strategy, 3000.0, GANYMEDE_SAFE_ALTITUDE, 1500e3, GANYMEDE_SPLIT)
    _assert_on_target_or_physical("ganymede", strategy, 3000.0, 220.0, plan, body[1] + GANYMEDE_SAFE_ALTITUDE,
                                  GANYMEDE_SPLIT)


# =======================================================================================
# e. Lowest altitude: below_safe_altitude and surface_impact
# =======================================================================================
def test_dip_below_the_safe_radius_is_below_safe_altitude():
    # Mars direct capture into a 300 km circle at v_inf 4 km/s with T/W 0.05 (test input),
    # split over two passes of a long ellipse (given: "auto" now flies it in one pass that
    # stays above 299.99 km): the long capture pass dips below the target circle (measured
    # lowest altitude 281 km), though the impulsive plan never goes below 300 km.
    # The replay (solve_ivp) gives the lowest radius L. A safe radius 5 km above L (still below
    # the target) must give below_safe_altitude, one 5 km below it ok (5 km: far outside the
    # kernel's 0.1 km margin and its sampling error).
    body = BODIES["mars"]
    gm, radius = body[0], body[1]
    v_inf, thrust, r_t = 4000.0, float(_thrust(0.05)), radius + 300e3
    plan = _plan("direct", gm, v_inf, None, r_t)
    free = _column(_fly(body, v_inf, thrust, plan, split_apoapsis=_split_bound(body), passes=np.array([2])))
    assert int(free["outcome"]) == OK and int(free["passes"][0]) == 2
    replay = _replay(body, v_inf, thrust, free)
    lowest = replay.lowest_radius
    assert lowest < r_t - 10e3  # the dip is real: well below every orbit of the impulsive plan
    safe = [lowest + 5e3, lowest - 5e3]
    # (the batch shape comes from the eight leading arguments: v_inf carries the two points)
    result = _fly(body, np.full(2, v_inf), thrust, plan, safe_radius=safe, split_apoapsis=_split_bound(body),
                  passes=free["passes"][:, None])
    assert [OUTCOMES[o] for o in result.outcome] == ["below_safe_altitude", "ok"]
    assert np.isnan(result.delta_v[:, 0]).all() and np.isfinite(result.delta_v[:, 1]).all()
    # With "auto" passes the kernel may split further to cure the dip; whatever it returns
    # must then respect the safe radius or say why not.
    auto = _column(_fly(body, v_inf, thrust, plan, safe_radius=lowest + 5e3, split_apoapsis=_split_bound(body)))
    if int(auto["outcome"]) == OK:
        assert float(auto["lowest_radius"]) >= lowest + 5e3 - SAFE_TOLERANCE
        assert _replay(body, v_inf, thrust, auto).lowest_radius >= lowest + 5e3 - 2 * SAFE_TOLERANCE
    else:
        assert OUTCOMES[int(auto["outcome"])] in PHYSICAL_FAILURES


def test_hitting_the_surface_stays_surface_impact_with_a_safe_radius():
    # Ganymede two_burn at v_inf 3 km/s into 1,500 km with 90 N (the weaker engine of d; at
    # 220 N the aim and a split now bring it on target): the capture burn hits the surface
    # however it is aimed or split (kernel lowest radius below the body radius); with a safe
    # radius given, the outcome stays surface_impact, not below_safe_altitude. The
    # independent reference (centred, unaimed) hits the surface too.
    body = BODIES["ganymede"]
    gm, radius = body[0], body[1]
    _, plan = _case_plan("ganymede", "two_burn", 3000.0, GANYMEDE_SAFE_ALTITUDE, 1500e3, GANYMEDE_SPLIT)
    result = _fly(body, 3000.0, 90.0, plan, safe_radius=radius + GANYMEDE_SAFE_ALTITUDE,
                  split_apoapsis=GANYMEDE_SPLIT)
    assert OUTCOMES[int(result.outcome)] == "surface_impact"
    assert float(result.lowest_radius) < radius
    assert np.isnan(result.delta_v).all() and np.isnan(result.trim_delta_v)
    reference = fly_capture_reference(gm, radius, body[2], 3000.0, plan[0], plan[1],
                                      [-gm / (a + b) for a, b in plan[2]], plan[3], 90.0, VE, MASS)
    assert reference.outcome == "surface_impact"


# =======================================================================================
# f. The aim against the centred, unaimed burns
# =======================================================================================
def test_aimed_capture_ends_on_target_and_unaimed_does_not():
    # Mars direct capture into a 400 km circle, v_inf 2.5 km/s, T/W 0.3 (test input). Aimed:
    # ends within 0.1 km (measured 44 m). Unaimed (aim=False, one pass): the centred burn ends
    # on the target energy but not horizontal, missing by ~140 km (measured). Both checked by
    # the replay (solve_ivp) of each flight plan; the unaimed also against the centred
    # reference fly_capture_reference (same model, another code path).
    body = BODIES["mars"]
    gm, radius = body[0], body[1]
    r_t = radius + 400e3
    plan = _plan("direct", gm, 2500.0, None, r_t)
    thrust = float(_thrust(0.3))
    aimed = _column(_fly(body, 2500.0, thrust, plan))
    unaimed = _column(_fly(body, 2500.0, thrust, plan, aim=False, passes=1))
    assert int(aimed["outcome"]) == OK and int(unaimed["outcome"]) == OK
    aimed_replay, unaimed_replay = (_replay(body, 2500.0, thrust, p) for p in (aimed, unaimed))
    assert abs(aimed_replay.periapsis_radius[-1] - r_t) <= ON_TARGET
    assert abs(aimed_replay.apoapsis_radius[-1] - r_t) <= ON_TARGET
    assert abs(unaimed_replay.periapsis_radius[-1] - r_t) > 100 * ON_TARGET  # > 10 km: a real difference
    reference = fly_capture_reference(gm, radius, body[2], 2500.0, r_t, [r_t], [-gm / (2 * r_t)], plan[3], thrust,
                                      VE, MASS)
    assert unaimed_replay.periapsis_radius[-1] == pytest.approx(reference.periapsis_radius[0], rel=1e-6)
    # The aim also pays off: the unaimed total with its trim costs more (measured 62 m/s of trim).
    assert float(unaimed["delta_v"].sum() + unaimed["trim_delta_v"]) > float(aimed["delta_v"].sum()
                                                                             + aimed["trim_delta_v"])
    assert aimed["approach_periapsis"] != unaimed["approach_periapsis"]  # the aim moved the approach
