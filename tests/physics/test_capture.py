"""Capture kernels: published examples, consistency between strategies, optimizer checks."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from sweep.physics.capture import (
    best_intermediate_apoapsis,
    best_plane_change_split,
    combined_burn,
    direct_capture,
    equal_cost_v_inf,
    free_periapsis_capture,
    three_burn_capture,
    time_limited_apoapsis,
    two_burn_capture,
)
from sweep.physics.rocket import propellant_mass

MU_MARS = 4.2828e13  # m3/s2, test input (Mars-like)
R_MARS = 3389.5e3  # m, test input


def test_direct_capture_curtis_example_8_4():
    # Curtis, Orbital Mechanics for Engineering Students, Example 8.4 (from memory): hyperbolic
    # departure from a 300 km Earth orbit (r = 6678 km, mu = 398600 km3/s2) with
    # v_inf = 2.943 km/s needs dv = 3.590 km/s; with Isp = 300 s the propellant is 70.5 % of
    # the initial mass. Capture is the same burn reversed in time, so direct capture must match.
    maneuver = direct_capture(2943.0, 398600e9, 6678e3)
    assert maneuver.burns[0] == pytest.approx(3590.0, abs=1.0)  # printed to 1 m/s
    assert maneuver.time == 0.0
    assert propellant_mass(maneuver.burns[0], 300.0, 1.0) == pytest.approx(0.705, abs=5e-4)  # 3 digits


def test_two_burn_second_burn_is_vallado_example_6_1_hohmann_burn():
    # Vallado, 4th ed., Example 6-1 (from memory): second Hohmann burn 1.478187 km/s, transfer
    # 5.256713 h. two_burn from a periapsis at r1 to a target at r2 makes the same second burn.
    mu, r1, r2 = 398600.4418e9, (6378.137 + 191.34411) * 1e3, (6378.137 + 35781.34857) * 1e3
    maneuver = two_burn_capture(3000.0, mu, r1, r2)
    assert maneuver.burns[1] == pytest.approx(1478.187, abs=1e-3)
    assert maneuver.time / 3600.0 == pytest.approx(5.256713, abs=1e-6)


@pytest.mark.parametrize("v_inf", [0.0, 800.0, 3500.0, 12000.0])
def test_two_burn_equals_direct_when_periapsis_is_target(v_inf):
    # Property (common practice): the ellipse through r_p = r_t is the target circle itself.
    radius = R_MARS + 400e3
    two = two_burn_capture(v_inf, MU_MARS, radius, radius)
    one = direct_capture(v_inf, MU_MARS, radius)
    assert two.burns[0] == pytest.approx(one.burns[0], rel=1e-14)
    assert two.burns[1] == pytest.approx(0.0, abs=1e-9)
    assert two.time == 0.0


@pytest.mark.parametrize("periapsis_altitude", [150e3, 400e3])
def test_three_burn_with_apoapsis_at_target_equals_two_burn(periapsis_altitude):
    # Property: with r_a = r_t >= r_p the apoapsis burn circularizes and the third burn vanishes.
    r_p, r_t = R_MARS + periapsis_altitude, R_MARS + 2000e3
    speeds = np.array([0.3e3, 2.5e3, 7.0e3])
    three = three_burn_capture(speeds, MU_MARS, r_p, r_t, r_t)
    two = two_burn_capture(speeds, MU_MARS, r_p, r_t)
    np.testing.assert_allclose(sum(three.burns), sum(two.burns), rtol=1e-13)
    np.testing.assert_allclose(three.time, two.time, rtol=1e-13)


def test_two_burn_above_target_captures_high_then_lowers():
    r_p, r_t = R_MARS + 8000e3, R_MARS + 400e3
    maneuver = two_burn_capture(2000.0, MU_MARS, r_p, r_t)
    assert all(burn > 0 for burn in maneuver.burns)
    # the second burn is the second (retrograde) burn of a Hohmann descent: v_p(ellipse) - v_c(r_t)
    v_ellipse = np.sqrt(2 * MU_MARS * r_p / (r_t * (r_t + r_p)))
    assert maneuver.burns[1] == pytest.approx(v_ellipse - np.sqrt(MU_MARS / r_t), rel=1e-14)


def _three_burn_total(r_p, r_t, r_a):
    return float(sum(three_burn_capture(0.0, MU_MARS, r_p, r_t, r_a).burns))


@pytest.mark.parametrize(
    ("periapsis_altitude", "target_altitude", "upper"),
    [(200e3, 400e3, 3e8), (200e3, 20000e3, 1e8), (5000e3, 400e3, 2e8), (200e3, 400e3, 3.9e6)],
)
def test_best_intermediate_apoapsis_no_better_on_fine_scan(periapsis_altitude, target_altitude, upper):
    # Independent: a brute-force scan of 20,001 log-spaced apoapses over the same interval.
    r_p, r_t = R_MARS + periapsis_altitude, R_MARS + target_altitude
    chosen = float(best_intermediate_apoapsis(MU_MARS, r_p, r_t, upper))
    lower = max(r_p, r_t)
    assert lower <= chosen <= max(upper, lower)
    scan = np.geomspace(lower, max(upper, lower), 20001)
    scanned = float(np.min(sum(three_burn_capture(0.0, MU_MARS, r_p, r_t, scan).burns)))
    # the optimizer may only lose to the scan by float rounding of a sum of ~km/s terms
    assert _three_burn_total(r_p, r_t, chosen) <= scanned + 1e-9


def test_best_intermediate_apoapsis_is_independent_of_v_inf():
    # The first burn is v_hyp(v_inf) - v_ell: v_inf shifts every candidate's cost equally.
    r_p, r_t = R_MARS + 250e3, R_MARS + 1000e3
    chosen = float(best_intermediate_apoapsis(MU_MARS, r_p, r_t, 2e8))
    scan = np.geomspace(r_t, 2e8, 4001)
    for v_inf in (500.0, 6000.0):
        costs = sum(three_burn_capture(v_inf, MU_MARS, r_p, r_t, scan).burns)
        best = float(sum(three_burn_capture(v_inf, MU_MARS, r_p, r_t, chosen).burns))
        assert best <= costs.min() + 1e-9


def test_time_limited_apoapsis_meets_the_limit_exactly():
    r_p, r_t = R_MARS + 250e3, R_MARS + 1000e3
    limit = 5 * 86400.0
    apoapsis = time_limited_apoapsis(MU_MARS, r_p, r_t, limit)
    assert three_burn_capture(0.0, MU_MARS, r_p, r_t, apoapsis).time == pytest.approx(limit, rel=1e-12)
    # a limit shorter than the fastest sequence (apoapsis at the target) has no answer
    fastest = two_burn_capture(0.0, MU_MARS, r_p, r_t).time
    assert np.isnan(time_limited_apoapsis(MU_MARS, r_p, r_t, 0.5 * fastest))


def _cost_gap(v_inf, r_p, r_t, apoapsis=None):
    challenger = (
        two_burn_capture(v_inf, MU_MARS, r_p, r_t)
        if apoapsis is None
        else three_burn_capture(v_inf, MU_MARS, r_p, r_t, apoapsis)
    )
    return float(sum(challenger.burns) - direct_capture(v_inf, MU_MARS, r_t).burns[0])


@pytest.mark.parametrize(
    ("periapsis_altitude", "target_altitude", "apoapsis"),
    [(200e3, 400e3, None), (200e3, 10000e3, None), (300e3, 5000e3, 1e8), (250e3, 2000e3, 5e7)],
)
def test_equal_cost_v_inf_matches_brentq(periapsis_altitude, target_altitude, apoapsis):
    # Independent: scipy.optimize.brentq on the kernels' own cost difference, 0 to 30 km/s.
    r_p, r_t = R_MARS + periapsis_altitude, R_MARS + target_altitude
    expected = brentq(_cost_gap, 0.0, 30e3, args=(r_p, r_t, apoapsis), xtol=1e-10, rtol=1e-14)
    offset = (direct_capture(0.0, MU_MARS, r_t).burns[0] - np.sqrt(2 * MU_MARS / r_t)) - (
        _cost_gap(0.0, r_p, r_t, apoapsis) + direct_capture(0.0, MU_MARS, r_t).burns[0] - np.sqrt(2 * MU_MARS / r_p)
    )
    found = equal_cost_v_inf(MU_MARS, r_p, r_t, offset)
    assert found == pytest.approx(expected, abs=1e-6)  # brentq converged to 1e-10 m/s; closed form exact
    assert abs(_cost_gap(found, r_p, r_t, apoapsis)) < 1e-8


def test_equal_cost_v_inf_none_where_curves_never_cross():
    # Equal radii: identical costs, no isolated root. A periapsis above the target whose
    # two-burn cost exceeds direct at every speed: no root.
    assert np.isnan(equal_cost_v_inf(MU_MARS, 4e6, 4e6, 10.0))
    r_p, r_t = R_MARS + 8000e3, R_MARS + 400e3
    gaps = [_cost_gap(v, r_p, r_t) for v in np.linspace(0, 30e3, 61)]
    assert min(gaps) > 0  # two_burn never cheaper here
    offset = -np.sqrt(MU_MARS / r_t) + np.sqrt(2 * MU_MARS / r_t) - (
        sum(two_burn_capture(0.0, MU_MARS, r_p, r_t).burns) - np.sqrt(2 * MU_MARS / r_p)
    )
    assert np.isnan(equal_cost_v_inf(MU_MARS, r_p, r_t, offset))


def test_propellant_mass_rocket_equation_limits():
    # Tsiolkovsky: dv = Isp g0 ln(m0/mf). With dv = Isp g0 the final mass is m0/e.
    assert propellant_mass(320.0 * 9.80665, 320.0, 1000.0) == pytest.approx(1000.0 * (1 - np.exp(-1)), rel=1e-15)
    assert propellant_mass(0.0, 320.0, 1000.0) == 0.0
    assert np.isnan(propellant_mass(100.0, 0.0, 1000.0))


def test_combined_burn_is_the_vector_difference():
    # Independent: the two velocity vectors built explicitly, angle theta apart (numpy norm).
    rng = np.random.default_rng(7)
    before, after = rng.uniform(100.0, 9000.0, 200), rng.uniform(100.0, 9000.0, 200)
    angle = rng.uniform(0.0, np.pi, 200)
    difference = np.hypot(after * np.cos(angle) - before, after * np.sin(angle))
    np.testing.assert_allclose(combined_burn(before, after, angle), difference, rtol=1e-12)


def test_pure_plane_change_of_a_circular_orbit():
    # Curtis, Ch. 6, plane change at constant speed (from memory): dv = 2 v sin(delta / 2).
    v = 3000.0
    assert combined_burn(v, v, np.radians(30.0)) == pytest.approx(2 * v * np.sin(np.radians(15.0)), rel=1e-14)


@pytest.mark.parametrize("degrees", [2.0, 10.0, 30.0, 60.0])
@pytest.mark.parametrize("v_inf", [800.0, 3000.0, 7000.0])
def test_best_plane_change_split_no_better_on_fine_scan(degrees, v_inf):
    # Independent: brute force over 20,001 splits of the plane change between the two burns.
    r_p, r_t = R_MARS + 250e3, R_MARS + 5000e3
    plane = np.radians(degrees)
    share = float(best_plane_change_split(v_inf, MU_MARS, r_p, r_t, plane))
    assert 0.0 <= share <= plane
    scan = np.linspace(0.0, plane, 20001)
    totals = sum(two_burn_capture(v_inf, MU_MARS, r_p, r_t, plane, scan).burns)
    best = float(sum(two_burn_capture(v_inf, MU_MARS, r_p, r_t, plane, share).burns))
    assert best <= totals.min() + 1e-9  # float rounding of a sum of km/s terms


def test_plane_change_is_cheapest_at_a_high_apoapsis():
    # Curtis, Ch. 6 (common practice): turning the plane costs least where the speed is least.
    r_p, r_t, plane = R_MARS + 250e3, R_MARS + 400e3, np.radians(20.0)
    extra = [float(sum(three_burn_capture(2000.0, MU_MARS, r_p, r_t, r_a, plane).burns)
                   - sum(three_burn_capture(2000.0, MU_MARS, r_p, r_t, r_a).burns)) for r_a in (1e7, 1e8)]
    assert 0 < extra[1] < extra[0]


def test_free_periapsis_capture_curtis_example_8_5():
    # Curtis, Orbital Mechanics for Engineering Students, Example 8.5 (from memory): after a
    # Hohmann transfer from Earth, v_inf = 2.648 km/s at Mars (mu = 42,830 km3/s2); capture into
    # a 7-hour orbit with the periapsis chosen for the least delta-v. Printed answers (from
    # memory): e = 0.3833, r_p = 5448 km, delta-v = 1.470 km/s.
    mu, v_inf, period = 42830e9, 2648.0, 7 * 3600.0
    a = (period * np.sqrt(mu) / (2 * np.pi)) ** (2 / 3)  # Kepler's third law
    e = 2 * mu / (a * v_inf**2) - 1  # the optimal periapsis lies where a = 2 mu / (v_inf^2 (1 + e))
    radius, burn = free_periapsis_capture(v_inf, mu, e)
    assert e == pytest.approx(0.3833, abs=2e-4)  # printed to 4 digits
    assert radius / 1e3 == pytest.approx(5448.0, abs=2.0)
    assert burn == pytest.approx(1470.0, abs=1.0)
    # and it is the least single capture burn into that eccentricity: nearby periapses cost more
    for factor in (0.9, 1.1):
        r_p = factor * radius
        other = np.sqrt(v_inf**2 + 2 * mu / r_p) - np.sqrt(mu * (1 + e) / r_p)  # vis-viva at periapsis
        assert other > burn
