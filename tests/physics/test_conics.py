"""Conic kernels against published worked examples, constant tables and facts of the trade."""

from __future__ import annotations

import numpy as np
import pytest

from sweep.physics.conics import (
    apsis_speed,
    circular_speed,
    half_period,
    hill_radius,
    hohmann_excess_speeds,
    hyperbolic_periapsis_speed,
    sphere_of_influence_radius,
)

# Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., Example 6-1 (LEO to GEO
# Hohmann transfer; from memory): mu = 398600.4418 km3/s2, altitudes 191.34411 km and
# 35781.34857 km above 6378.137 km; printed dv_a = 2.457038 km/s, dv_b = 1.478187 km/s,
# total 3.935224 km/s, transfer time 5.256713 h.
VALLADO_MU = 398600.4418e9
VALLADO_R1 = (6378.137 + 191.34411) * 1e3
VALLADO_R2 = (6378.137 + 35781.34857) * 1e3


def test_apsis_speed_vallado_example_6_1_hohmann_burns():
    first = apsis_speed(VALLADO_MU, VALLADO_R1, VALLADO_R2) - circular_speed(VALLADO_MU, VALLADO_R1)
    second = circular_speed(VALLADO_MU, VALLADO_R2) - apsis_speed(VALLADO_MU, VALLADO_R2, VALLADO_R1)
    # printed to 1 mm/s (7 significant digits)
    assert first == pytest.approx(2457.038, abs=1e-3)
    assert second == pytest.approx(1478.187, abs=1e-3)
    assert first + second == pytest.approx(3935.224, abs=1e-3)


def test_half_period_vallado_example_6_1_transfer_time():
    # printed 5.256713 h, to 1e-6 h
    assert half_period(VALLADO_MU, VALLADO_R1, VALLADO_R2) / 3600.0 == pytest.approx(5.256713, abs=1e-6)


def test_hyperbolic_periapsis_speed_curtis_example_8_4():
    # Curtis, Orbital Mechanics for Engineering Students, Example 8.4 (departure to Mars from a
    # 300 km Earth orbit; from memory): v_inf = 2.943 km/s, r = 6678 km, mu = 398600 km3/s2;
    # printed v_p = 11.32 km/s and v_c = 7.726 km/s.
    v_p = hyperbolic_periapsis_speed(2943.0, 398600e9, 6678e3)
    assert v_p == pytest.approx(11320.0, abs=10.0)  # printed to 4 digits
    assert circular_speed(398600e9, 6678e3) == pytest.approx(7726.0, abs=1.0)  # printed to 1 m/s


@pytest.mark.parametrize("v_inf", [0.0, 850.0, 3100.0, 12000.0])  # m/s: test inputs of our own
@pytest.mark.parametrize(("gm", "radius"), [(4.282837e13, 3.7e6), (3.986004e14, 6.9e6)])  # m3/s2, m: test inputs
def test_periapsis_speed_keeps_the_energy_of_the_approach(v_inf, gm, radius):
    # Common practice (energy conservation on a Keplerian hyperbola): the specific orbital energy
    # at periapsis, v_p^2 / 2 - mu / r_p, equals the energy far away, v_inf^2 / 2, whatever the
    # body or the periapsis radius.
    v_p = hyperbolic_periapsis_speed(v_inf, gm, radius)
    energy = v_p**2 / 2.0 - gm / radius  # J/kg
    # round-off: the difference of two terms of order mu / r_p (about 1e7 J/kg) in doubles is good to
    # about 1e-9 J/kg; 1e-7 of mu / r_p leaves room and still catches any wrong factor
    assert energy == pytest.approx(v_inf**2 / 2.0, abs=1e-7 * gm / radius)


def test_kernels_broadcast_and_flag_bad_radii():
    radii = np.array([[7.0e6], [0.0], [-1.0]])
    speeds = np.array([0.0, 1000.0, 5000.0])
    result = hyperbolic_periapsis_speed(speeds, 3.986e14, radii)
    assert result.shape == (3, 3)
    assert np.isfinite(result[0]).all() and np.isnan(result[1:]).all()
    # zero excess speed: periapsis speed is the escape speed, sqrt(2) times circular (vis-viva)
    assert result[0, 0] == pytest.approx(np.sqrt(2.0) * circular_speed(3.986e14, 7.0e6), rel=1e-15)


@pytest.mark.parametrize(
    ("body", "table_km"),
    # Curtis, Orbital Mechanics for Engineering Students, Table A.2 (sphere-of-influence radii;
    # from memory), printed to 3 significant digits.
    [("mercury", 112e3), ("venus", 616e3), ("earth", 925e3), ("mars", 577e3), ("jupiter", 48.2e6),
     ("saturn", 54.8e6), ("uranus", 51.8e6), ("neptune", 86.6e6), ("moon", 66.2e3)],
)
def test_sphere_of_influence_curtis_table_a2(body, table_km):
    from sweep.catalog import catalog

    b = catalog()[body]
    # 3 printed digits, and the table's constants differ slightly from the JPL ones: 0.5 %
    assert sphere_of_influence_radius(b.semi_major_axis, b.gm, b.parent_gm) / 1e3 == pytest.approx(
        table_km, rel=5e-3
    )


def test_hill_radius_exceeds_sphere_of_influence_for_planets():
    # Bate, Mueller and White / Hamilton and Burns: for m/M << 1 the Laplace radius
    # a (m/M)^(2/5) is below the Hill radius a (m/3M)^(1/3) (ratio 3^(1/3) (m/M)^(1/15) < 1).
    a, gm, gm_sun = 2.2794e11, 4.2828e13, 1.32712440041e20  # test inputs (Mars)
    ratio = sphere_of_influence_radius(a, gm, gm_sun) / hill_radius(a, gm, gm_sun)
    assert ratio == pytest.approx(3 ** (1 / 3) * (gm / gm_sun) ** (1 / 15), rel=1e-12)
    assert ratio < 1


def test_hohmann_excess_speeds_curtis_examples_8_4_and_8_5():
    # Curtis, Orbital Mechanics for Engineering Students, Examples 8.4 and 8.5 (Earth to Mars
    # Hohmann transfer; from memory): mu_sun = 1.327e11 km3/s2, orbit radii 149.6e6 km and
    # 227.9e6 km; printed v_inf = 2.943 km/s leaving Earth and 2.648 km/s arriving at Mars.
    departure, arrival = hohmann_excess_speeds(1.327e20, 149.6e9, 227.9e9)
    assert departure == pytest.approx(2943.0, abs=1.0)  # printed to 1 m/s
    assert arrival == pytest.approx(2648.0, abs=1.0)
