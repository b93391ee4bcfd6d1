"""Finite-burn evaluation over the grid: invariance, limits, crossovers, statuses, cube, summary."""

from __future__ import annotations

import numpy as np
import pytest

from sweep import parse_config, run
from sweep.cli import main
from sweep.engine.impulsive import evaluate
from sweep.model.statuses import STATUSES
from sweep.model.strategies import strategy_names
from tests.test_evaluate import assert_same_arrays

FINITE_CONFIG = """
# Test input of our own: two bodies, a coarse grid, three engines.
name = "finite-test"
[grid]
bodies = ["mars", "moon"]
v_inf = { start = 0.5, stop = 6.0, num = 8 }     # km/s
target_altitude = [400.0, 5000.0]                 # km
periapsis_altitude = [250.0, 1000.0]              # km
thrust_to_weight = [0.2, 1.0, 1000.0]
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
[three_burn]
max_time_to_orbit = 10.0
"""
CODE = {status.name: code for code, status in enumerate(STATUSES)}
DIRECT, TWO = strategy_names().index("direct"), strategy_names().index("two_burn")


@pytest.fixture(scope="module")
def finite_cube():
    config = parse_config(FINITE_CONFIG, "finite.toml")
    return config, run(config, workers=1)


def test_finite_arrays_identical_for_one_or_two_worker_processes():
    config = parse_config(FINITE_CONFIG)
    assert_same_arrays(evaluate(config, workers=1), evaluate(config, workers=2))


def test_thrust_to_weight_axis_becomes_newtons(finite_cube):
    config, cube = finite_cube
    # g0 = 9.80665 m/s2 exactly (3rd CGPM 1901): T = (T/W) m0 g0
    np.testing.assert_allclose(cube.thrust.values, np.array([0.2, 1.0, 1000.0]) * 1000.0 * 9.80665, rtol=1e-15)
    np.testing.assert_allclose(cube.thrust_to_weight.values, [0.2, 1.0, 1000.0], rtol=1e-15)


def test_very_high_thrust_recovers_the_impulsive_answer(finite_cube):
    # Common practice (Robbins 1966): the impulsive burn is the limit of infinite thrust.
    _, cube = finite_cube
    finite = cube.finite_delta_v.isel(thrust=-1).values
    impulsive = cube.delta_v.values
    both = np.isfinite(finite) & np.isfinite(impulsive)
    assert both.sum() > 50
    # T/W 1000: burns last well under a second and their losses are below a mm/s; the trim that
    # closes the aim's last <= 20 m (sweep.physics.finite_burn.AIM_TOLERANCE) costs up to a few cm/s
    np.testing.assert_allclose(finite[both], impulsive[both], atol=5e-2)
    crossing = cube.finite_crossover_v_inf.isel(thrust=-1).values
    reference = cube.crossover_v_inf.values
    valid = np.isfinite(crossing)
    assert valid.sum() >= 2
    np.testing.assert_allclose(crossing[valid], reference[valid], atol=1e-3)  # km/s: 1 m/s


def test_gravity_loss_grows_as_thrust_falls(finite_cube):
    _, cube = finite_cube
    loss = (cube.finite_delta_v - cube.delta_v).isel(strategy=DIRECT)
    strong, weak = loss.isel(thrust=1).values, loss.isel(thrust=0).values
    both = np.isfinite(strong) & np.isfinite(weak)
    assert both.sum() > 10 and (weak[both] > strong[both]).all()
    # The burns' losses and the impulsive trim make up the whole difference (the cube's own bookkeeping).
    flown = np.isfinite(cube.finite_delta_v.values)
    np.testing.assert_allclose((cube.gravity_loss.sum("burn") + cube.trim_delta_v).values[flown],
                               (cube.finite_delta_v - cube.delta_v).values[flown], atol=1e-9)


def test_finite_crossover_sits_in_the_grid_bracket(finite_cube):
    config, cube = finite_cube
    gap = (cube.finite_delta_v.isel(strategy=TWO) - cube.finite_delta_v.isel(strategy=DIRECT)).values
    crossing = cube.finite_crossover_v_inf.values  # (B, T, P, F)
    checked = 0
    for b, t, p, f in np.ndindex(crossing.shape):
        row = gap[b, :, t, p, f]
        flips = np.flatnonzero(np.sign(row[:-1]) * np.sign(row[1:]) < 0)
        if flips.size:
            i = flips[0]
            assert config.v_inf[i] <= crossing[b, t, p, f] <= config.v_inf[i + 1]
            checked += 1
        else:
            assert np.isnan(crossing[b, t, p, f])
    assert checked >= 3


WEAK_CONFIG = """
# Test input of our own: an engine far too weak to capture at Mars at these speeds (T/W 0.003).
name = "weak-test"
[grid]
bodies = ["mars"]
v_inf = [2.0, 6.0]                                # km/s
target_altitude = [400.0]                         # km
periapsis_altitude = [250.0, 1000.0]              # km
thrust_to_weight = [0.003, 1.0]
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
"""


def test_weak_engine_is_flagged_not_reported():
    cube = run(parse_config(WEAK_CONFIG, "weak.toml"), workers=1)
    status = cube.finite_status.isel(thrust=0).values
    engine = np.isin(status, [CODE["engine_cannot_capture"], CODE["propellant_exhausted"], CODE["surface_impact"],
                              CODE["below_safe_altitude"]])
    assert engine.any()
    for name in ("finite_delta_v", "trim_delta_v", "finite_time_to_orbit"):
        assert np.isnan(cube[name].isel(thrust=0).values[engine]).all()
    # an impulsive infeasibility is carried over unchanged
    impulsive = cube.status.values
    carried = cube.finite_status.isel(thrust=1).values
    assert (carried[impulsive != 0] == impulsive[impulsive != 0]).all()


@pytest.mark.slow  # about 6 s: a finite-burn run through the command line
def test_cli_run_with_thrust_axis_writes_cf_cube_and_gravity_loss_section(config_file, tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(config_file(FINITE_CONFIG)), "--out", str(out), "-q", "--workers", "1"]) == 0
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    CheckSuite.load_all_available_checkers()
    report = tmp_path / "cf.txt"
    passed, errors = ComplianceChecker.run_checker(
        str(out / "finite-test.nc"), ["cf:1.11"], 0, "normal", output_filename=str(report), output_format="text")
    assert passed and not errors, report.read_text()
    text = (out / "summary.md").read_text()
    assert "With finite burns" in text and "median (max) loss incl. trim" in text and "max trim" in text
    assert (out / "finite_crossover.csv").stat().st_size > 0 and (out / "finite_losses.csv").stat().st_size > 0


def test_finite_table_counts_wins_out_of_points_flown_and_the_largest_trim(finite_cube):
    # The summary's finite table against the cube it reads (its own bookkeeping, counted here independently).
    from sweep.report.summary import summary_tables

    _, cube = finite_cube
    table = summary_tables(cube)["finite_losses"]
    names = list(cube.strategy_name.values)
    for (body, target, thrust), group in table.groupby(["body", "target_altitude_km", "thrust_n"]):
        here = cube.isel(body=list(cube.body_name.values).index(body)).sel(target_altitude=target, thrust=thrust)
        decided = int((here.finite_best_strategy >= 0).sum())
        assert group.points_won.sum() == decided
        assert (group.points_any_flown == decided).all()
        for _, row in group.iterrows():
            s = names.index(row.strategy)
            assert row.points_flown == int(np.isfinite(here.finite_delta_v.isel(strategy=s)).sum())
            trim = here.trim_delta_v.isel(strategy=s).values
            if np.isfinite(trim).any():
                assert row.max_trim_m_s == pytest.approx(float(np.nanmax(trim)))
