"""Plane change as a sweep axis: coplanar limit, optimal split in the cube, config, CF cube, summary."""

from __future__ import annotations

import numpy as np
import pytest

from sweep import parse_config, run
from sweep.cli import main
from sweep.errors import ConfigError
from sweep.physics.capture import two_burn_capture
from tests.conftest import SMALL_CONFIG

PLANE = SMALL_CONFIG.replace("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
                             "periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]\nplane_change = [0.0, 5.0, 20.0]")


@pytest.fixture(scope="module")
def plane_cube():
    config = parse_config(PLANE, "plane.toml")
    return config, run(config, workers=1)


def test_no_plane_change_is_the_coplanar_cube(plane_cube):
    _, cube = plane_cube
    np.testing.assert_array_equal(cube.plane_change_delta_v.isel(plane_change=0).values, cube.delta_v.values)
    assert (cube.plane_change_best_strategy.isel(plane_change=0) == cube.best_strategy).all()


def test_turning_costs_more_the_larger_the_turn(plane_cube):
    _, cube = plane_cube
    totals = cube.plane_change_delta_v.values
    finite = np.isfinite(totals[..., 0])
    assert (np.diff(totals, axis=-1)[finite] > 0).all()


def test_cube_split_is_the_cheapest_on_a_fine_scan(plane_cube):
    # Independent: brute force over 4,001 splits at a few grid points of the cube.
    config, cube = plane_cube
    mars = config.bodies[0]
    for v, t, p in ((2, 1, 1), (8, 0, 2), (11, 1, 2)):
        r_t = mars.radius + config.target_altitude[t] * 1e3
        r_p = mars.radius + config.periapsis_altitude[p] * 1e3
        speed = config.v_inf[v] * 1e3
        plane = np.radians(20.0)
        share = np.radians(float(cube.two_burn_first_plane_change.isel(body=0, v_inf=v, target_altitude=t,
                                                                        periapsis_altitude=p, plane_change=2)))
        stored = float(cube.plane_change_delta_v.isel(strategy=1, body=0, v_inf=v, target_altitude=t,
                                                     periapsis_altitude=p, plane_change=2))
        assert stored == pytest.approx(float(sum(two_burn_capture(speed, mars.gm, r_p, r_t, plane, share).burns)),
                                       rel=1e-12)  # the split comes back through degrees
        scan = np.linspace(0.0, plane, 4001)
        assert stored <= float(np.min(sum(two_burn_capture(speed, mars.gm, r_p, r_t, plane, scan).burns))) + 1e-6


@pytest.mark.parametrize(
    ("new", "message"),
    [
        ("plane_change = [0.0, 190.0]",
         r"p\.toml: grid\.plane_change: angles must be in \[0, 180\) degrees \(got 190\.0\)"),
        ("plane_change = [-1.0]", r"grid\.plane_change: angles must be in \[0, 180\) degrees \(got -1\.0\)"),
        ("plane_change = [5.0]\nthrust = [1000.0]",
         r"grid\.plane_change: the finite-burn model is planar, so plane_change cannot be swept together with "
         r"grid\.thrust"),
    ],
)
def test_plane_change_config_errors(new, message):
    with pytest.raises(ConfigError, match=message):
        parse_config(PLANE.replace("plane_change = [0.0, 5.0, 20.0]", new), "p.toml")


@pytest.mark.slow  # about 5 s: a run with the CF checker
def test_cli_run_with_plane_change_writes_cf_cube_and_summary_section(config_file, tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(config_file(PLANE)), "--out", str(out), "-q", "--workers", "1"]) == 0
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    CheckSuite.load_all_available_checkers()  # independent: IOOS compliance-checker, CF-1.11
    report = tmp_path / "cf.txt"
    passed, errors = ComplianceChecker.run_checker(
        str(out / "small-test.nc"), ["cf:1.11"], 0, "normal", output_filename=str(report), output_format="text")
    assert passed and not errors, report.read_text()
    assert "With a plane change" in (out / "summary.md").read_text()
    assert (out / "plane_change.csv").stat().st_size > 0


def test_size_estimate_counts_the_plane_change_arrays():
    from sweep.engine.impulsive import estimate_bytes, evaluate

    config = parse_config(PLANE)
    arrays = evaluate(config, workers=1)
    assert "plane_change_delta_v" in arrays and "two_burn_first_plane_change" in arrays
    held = sum(values.nbytes for values in arrays.values())
    assert estimate_bytes(config) == held


# The independent review's case (issue 12, item 1): Mars, v_inf 3 km/s, target and periapsis both
# at 400 km. The coplanar three-burn total does not depend on the apoapsis there, the plan took the
# lowest, and the whole turn was made at that low, fast point: 7,014 m/s at 90 degrees and 4,000 m/s
# at 30 (as reported, and as this code gave before the fix) against about 2,350 and 2,290 m/s a metre
# of periapsis away. GM and radius: the packaged catalog, through the config.
MARS_TURN = """
name = "mars-turn"
[grid]
bodies = ["mars"]
v_inf = [3.0]
target_altitude = [400.0]
periapsis_altitude = [399.0, 399.999, 400.0, 400.001, 401.0]
plane_change = [30.0, 90.0]
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
"""


def test_three_burn_turn_is_continuous_where_the_periapsis_is_the_target():
    cube = run(parse_config(MARS_TURN, "mars-turn.toml"), workers=1)
    turned = cube.plane_change_delta_v.sel(strategy=2).isel(body=0, v_inf=0, target_altitude=0).values  # (P, angle)
    near = turned[1:4]  # periapsis 400 km and 1 m either side
    assert np.ptp(near, axis=0).max() < 1.0  # the requirement: within 1 m/s over +-1 m
    for index, reported in ((0, 4000.0), (1, 7014.0)):
        assert (near[:, index] < reported - 1000.0).all()  # far from the reported wrong values
        # near the neighbours a kilometre away: the cost moves by about 0.1 m/s per km of periapsis here
        # (measured: 2291.68 and 2291.89 m/s at 30 degrees), so 5 m/s is loose
        assert (np.abs(near[:, index] - turned[[0, 4], index].mean()) < 5.0).all()
    assert (cube.plane_change_best_strategy.isel(body=0, v_inf=0, target_altitude=0).values == 2).all()
