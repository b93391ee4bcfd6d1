"""Elliptical target orbits: published capture example, circular limit, sweep and config."""

from __future__ import annotations

import numpy as np
import pytest

from sweep import parse_config, run
from sweep.cli import main
from sweep.errors import ConfigError
from sweep.physics.capture import direct_capture, three_burn_capture, two_burn_capture
from tests.conftest import SMALL_CONFIG

MU_MARS, R_MARS = 4.2828e13, 3389.5e3  # test inputs (Mars-like)


def test_direct_capture_into_an_ellipse_curtis_example_8_5():
    # Curtis, Orbital Mechanics for Engineering Students, Example 8.5 (from memory): v_inf =
    # 2.648 km/s at Mars (mu = 42,830 km3/s2) into a 7-hour orbit with periapsis 5448 km (the
    # least-delta-v periapsis); printed delta-v 1.470 km/s.
    mu, period, r_p = 42830e9, 7 * 3600.0, 5448e3
    a = (period * np.sqrt(mu) / (2 * np.pi)) ** (2 / 3)  # Kepler's third law
    burn = direct_capture(2648.0, mu, r_p, target_apoapsis=2 * a - r_p).burns[0]
    assert burn == pytest.approx(1470.0, abs=1.5)  # printed to 1 m/s; r_p printed to 1 km


@pytest.mark.parametrize("kernel", ["direct", "two_burn", "three_burn"])
def test_an_ellipse_with_equal_apsides_is_the_circle(kernel):
    r_p, r_t, r_a, v = R_MARS + 250e3, R_MARS + 2000e3, 5e7, np.array([500.0, 3000.0])
    calls = {
        "direct": lambda ta: direct_capture(v, MU_MARS, r_t, target_apoapsis=ta),
        "two_burn": lambda ta: two_burn_capture(v, MU_MARS, r_p, r_t, target_apoapsis=ta),
        "three_burn": lambda ta: three_burn_capture(v, MU_MARS, r_p, r_t, r_a, target_apoapsis=ta),
    }[kernel]
    np.testing.assert_allclose(sum(calls(r_t).burns), sum(calls(None).burns), rtol=1e-13)  # vis-viva rounding


def test_two_burn_reaches_the_target_ellipse():
    # After the second burn at the target's apoapsis the orbit's own elements (from the state:
    # a from the energy, e from r v^2 / mu at an apsis) must be the target's.
    r_p, r_tp, r_ta = R_MARS + 250e3, R_MARS + 400e3, R_MARS + 20000e3
    maneuver = two_burn_capture(3000.0, MU_MARS, r_p, r_tp, target_apoapsis=r_ta)
    before = np.sqrt(2 * MU_MARS * r_p / (r_ta * (r_ta + r_p)))  # on the capture ellipse at r_ta
    after = before + maneuver.burns[1]  # prograde: raising the periapsis
    a = 1 / (2 / r_ta - after**2 / MU_MARS)
    e = abs(r_ta * after**2 / MU_MARS - 1)
    assert a * (1 - e) == pytest.approx(r_tp, rel=1e-12)
    assert a * (1 + e) == pytest.approx(r_ta, rel=1e-12)


ELLIPSE = SMALL_CONFIG.replace('bodies = ["mars", "moon", "enceladus"]', 'bodies = ["mars"]') + \
    "\n[target_orbit]\nperiod = 10.0\n"


def test_sweep_with_an_elliptical_target(config_file, tmp_path):
    config = parse_config(ELLIPSE, "e.toml")
    cube = run(config, workers=1)
    apoapsis = cube.target_apoapsis_altitude.isel(body=0).values
    mars = config.bodies[0]
    a = np.cbrt(mars.gm * (10 * 3600 / (2 * np.pi)) ** 2)  # Kepler's third law, 10-hour period
    np.testing.assert_allclose(apoapsis, (2 * a - (mars.radius + config.target_altitude * 1e3) - mars.radius) / 1e3,
                               rtol=1e-12)
    # direct into the ellipse costs less than into the circle at its periapsis
    circle = run(parse_config(SMALL_CONFIG.replace('bodies = ["mars", "moon", "enceladus"]', 'bodies = ["mars"]')),
                 workers=1)
    assert (cube.delta_v.isel(strategy=0).values < circle.delta_v.isel(strategy=0).values).all()
    out = tmp_path / "out"
    assert main(["run", str(config_file(ELLIPSE)), "--out", str(out), "-q", "--workers", "1"]) == 0
    heading = f"### Mars, 300 x {apoapsis[0]:,.0f} km orbit (periapsis x apoapsis altitude)"
    assert heading in (out / "summary.md").read_text()


@pytest.mark.parametrize(
    ("table", "message"),
    [
        ("apoapsis_altitude = 100.0", r"e\.toml: target_orbit\.apoapsis_altitude: must be at least every "
                                      r"grid\.target_altitude"),
        ("apoapsis_altitude = 9000.0\nperiod = 3.0",
         r"e\.toml: target_orbit: give apoapsis_altitude or period, not both"),
        ("period = 1.0", r"e\.toml: target_orbit\.period: 1\.0 h is shorter than a circular orbit"),
    ],
)
def test_target_orbit_errors(table, message):
    with pytest.raises(ConfigError, match=message):
        parse_config(ELLIPSE.replace("period = 10.0", table), "e.toml")


def test_free_periapsis_is_never_dearer_than_direct_into_the_target_ellipse():
    # The free periapsis minimises the single capture burn over every periapsis for the target's
    # eccentricity (Curtis, Ch. 8), so direct capture at the grid's periapsis cannot beat it.
    cube = run(parse_config(ELLIPSE), workers=1)
    free = cube.free_periapsis_delta_v.isel(body=0).values  # (v_inf, target)
    direct = cube.delta_v.isel(strategy=0, body=0, periapsis_altitude=0).values  # (v_inf, target)
    both = np.isfinite(free) & np.isfinite(direct)
    assert both.sum() >= 3
    assert (free[both] <= direct[both] + 1e-9).all()
