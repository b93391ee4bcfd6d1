"""Evaluation over the grid: invariance, feasibility codes, winners and crossovers."""

from __future__ import annotations

import numpy as np
import pytest

from sweep import parse_config
from sweep.engine.impulsive import evaluate
from sweep.model.statuses import STATUSES
from sweep.model.strategies import NO_STRATEGY, strategy_names
from sweep.physics.capture import direct_capture, three_burn_capture, two_burn_capture

CODE = {status.name: code for code, status in enumerate(STATUSES)}
DIRECT, TWO, THREE = (strategy_names().index(n) for n in ("direct", "two_burn", "three_burn"))


def test_cube_is_bit_identical_for_any_worker_count_and_chunking(small_config_text):
    config = parse_config(small_config_text)
    reference = evaluate(config, workers=1)
    for workers, chunk in ((2, 1 << 20), (4, 8), (3, 1)):
        other = evaluate(config, workers=workers, points_per_chunk=chunk)
        assert_same_arrays(reference, other)


def assert_same_arrays(first, second):
    """Two results (output variable name -> array) with the same variables, equal byte for byte."""
    assert list(first) == list(second)
    for name, values in first.items():
        assert values.tobytes() == second[name].tobytes(), name


def test_values_match_kernels_at_a_grid_point(small_cube):
    config, cube = small_cube
    mars = config.bodies[0]
    point = cube.isel(body=0, v_inf=5, target_altitude=1, periapsis_altitude=1)
    v, r_t = config.v_inf[5] * 1e3, mars.radius + config.target_altitude[1] * 1e3
    r_p = mars.radius + config.periapsis_altitude[1] * 1e3
    r_a = mars.radius + float(point.intermediate_apoapsis_altitude) * 1e3
    expected = [sum(direct_capture(v, mars.gm, r_t).burns), sum(two_burn_capture(v, mars.gm, r_p, r_t).burns),
                sum(three_burn_capture(v, mars.gm, r_p, r_t, r_a).burns)]
    np.testing.assert_allclose(point.delta_v.values, expected, rtol=1e-9)  # apoapsis stored in km, re-added
    assert int(point.best_strategy) == int(np.argmin(expected))
    assert float(point.saving_over_direct) == pytest.approx(expected[0] - min(expected), rel=1e-9)
    np.testing.assert_allclose(point.delta_v.values, point.burn_delta_v.sum("burn").values, rtol=1e-14)


def test_status_codes_follow_the_geometry(small_cube):
    config, cube = small_cube
    status = cube.status.values
    # Mars safe periapsis is 200 km in the catalog: a 20 km periapsis is flagged for the
    # strategies that use it, never for direct.
    p20 = list(config.periapsis_altitude).index(20.0)
    assert (status[TWO, 0, :, :, p20] == CODE["periapsis_below_safe_altitude"]).all()
    assert (status[THREE, 0, :, :, p20] == CODE["periapsis_below_safe_altitude"]).all()
    assert (status[DIRECT, 0] == CODE["ok"]).all()
    assert np.isnan(cube.delta_v.values[TWO, 0, :, :, p20]).all()
    # Enceladus: half of its sphere of influence does not reach above its surface.
    assert (status[:, 2] == CODE["sphere_of_influence_too_small"]).all()
    assert (cube.best_strategy.values[2] == NO_STRATEGY).all()


def test_time_limit_bounds_three_burn(small_cube):
    config, cube = small_cube
    limit = config.max_time_to_orbit
    times = cube.time_to_orbit.values[THREE]
    assert np.nanmax(times) <= limit * (1 + 1e-12)
    # for Mars the 20-day limit, not the sphere of influence, sets the apoapsis
    assert float(cube.intermediate_apoapsis_altitude.isel(body=0).max()) < float(cube.apoapsis_bound[0])


def test_best_strategy_is_the_simplest_within_the_tie_tolerance_of_the_cheapest(small_cube):
    # Rule of [ranking] tie_tolerance (default 1 m/s): the winner costs at most the tolerance
    # more than the cheapest, is cheaper than every simpler strategy (earlier in the registry),
    # and saves more than the tolerance over direct where it is not direct.
    config, cube = small_cube
    delta_v = cube.delta_v.values
    best = cube.best_strategy.values
    feasible = ~np.isnan(delta_v).all(axis=0)
    cheapest = np.fmin.reduce(delta_v, axis=0)
    chosen = np.take_along_axis(delta_v, np.where(best < 0, 0, best)[None], axis=0)[0]
    assert (chosen[feasible] <= cheapest[feasible] + config.tie_tolerance).all()
    for simpler in range(delta_v.shape[0]):
        before = feasible & (best > simpler) & np.isfinite(delta_v[simpler])
        assert (chosen[before] < delta_v[simpler][before]).all()
    saving = cube.saving_over_direct.values
    assert (saving[feasible & (best > 0) & np.isfinite(saving)] > config.tie_tolerance).all()
    assert (saving[feasible] >= 0).all()


def test_crossover_brackets_the_sign_change_on_the_grid(small_cube):
    # The closed-form crossover must sit between the grid speeds where two_burn - direct
    # changes sign.
    config, cube = small_cube
    gap = cube.delta_v.values[TWO] - cube.delta_v.values[DIRECT]
    crossover = cube.crossover_v_inf.values
    checked = 0
    for b, t, p in np.ndindex(crossover.shape):
        row = gap[b, :, t, p]
        if np.isnan(row).any():
            continue
        flips = np.flatnonzero(np.diff(np.sign(row)) != 0)
        if flips.size:
            i = flips[0]
            assert config.v_inf[i] <= crossover[b, t, p] <= config.v_inf[i + 1]
            checked += 1
    assert checked > 0


def test_crossovers_equal_escape_speed_at_target_and_at_apoapsis(small_cube):
    # Hand calculation (vis-viva), for r_p < r_t. With A = 2mu/r_p, B = 2mu/r_t, C = 2mu/r_a,
    # the two apsis speeds of an ellipse (r1, r2) add to sqrt(2mu/r1 + 2mu/r2). So
    #   two_burn - direct   = sqrt(v^2 + A) - sqrt(v^2 + B) - (sqrt(A + B) - sqrt(2B)),
    #   three_burn - direct = sqrt(v^2 + A) - sqrt(v^2 + B) - (sqrt(A + C) - sqrt(B + C)),
    # which vanish at v^2 = B and v^2 = C: the dive pays exactly above the escape speed at the
    # target radius, and the three-burn sequence above the escape speed at its apoapsis,
    # whatever the periapsis.
    config, cube = small_cube
    gm = cube.body_gm.values[:, None, None]
    radius = cube.body_radius.values[:, None, None]
    r_t = (radius + cube.target_altitude.values[None, :, None]) * 1e3
    below = cube.periapsis_altitude.values[None, None, :] < cube.target_altitude.values[None, :, None]
    two = cube.crossover_v_inf.values
    finite = np.isfinite(two) & below
    assert finite.sum() >= 3
    np.testing.assert_allclose(  # closed form against closed form: float rounding only
        two[finite], np.sqrt(2 * gm / r_t).repeat(two.shape[2], 2)[finite] / 1e3, rtol=1e-12
    )
    three = cube.three_burn_crossover_v_inf.values
    r_a = (radius + cube.intermediate_apoapsis_altitude.isel(v_inf=0).values) * 1e3
    finite = np.isfinite(three) & below
    assert finite.sum() >= 3
    # r_a comes back through a km altitude added to a km radius: 1e-9 covers that rounding
    np.testing.assert_allclose(three[finite], np.sqrt(2 * gm / r_a)[finite] / 1e3, rtol=1e-9)


def test_free_periapsis_orbit_is_the_cheapest_circle(small_cube):
    # Curtis, Ch. 8 (optimal periapsis, e = 0): the circle at r = 2 mu / v_inf^2 costs v_inf / sqrt(2);
    # checked against the cube's own direct capture at neighbouring radii (vis-viva kernels).
    config, cube = small_cube
    mars = config.bodies[0]
    altitude = cube.free_periapsis_altitude.isel(body=0, target_altitude=0).values  # circular targets: e = 0
    burn = cube.free_periapsis_delta_v.isel(body=0, target_altitude=0).values
    usable = np.isfinite(altitude)
    assert usable.sum() >= 3
    speeds = config.v_inf[usable] * 1e3
    np.testing.assert_allclose(burn[usable], speeds / np.sqrt(2.0), rtol=1e-14)
    radius = mars.radius + altitude[usable] * 1e3
    for factor in (0.8, 1.25):
        assert (direct_capture(speeds, mars.gm, factor * radius).burns[0] > burn[usable]).all()
