"""Physics at the edges of legal input: finite values or a status with a reason, never a warning.

pyproject.toml turns every warning raised from sweep's modules (numpy's floating-point
warnings included) into an error, so each test here also proves the console stays quiet.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from sweep import parse_config, run
from sweep.model.statuses import STATUSES

CODE = {status.name: code for code, status in enumerate(STATUSES)}


def _sweep(grid: str, extra: str = "") -> tuple:
    config = parse_config(f"""
# Test input of our own: extreme but legal values.
name = "edge-test"
[grid]
{grid}
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
{extra}
""", "edge.toml")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any warning at all, from any module, fails the test
        return config, run(config, workers=1)


def _explained(values: np.ndarray, status: np.ndarray) -> None:
    """Every value is finite, or NaN with a status that says why (common practice: no silent NaN)."""
    assert (np.isfinite(values) | (status != 0)).all()
    assert not (np.isnan(values) & (status == 0)).any()


def test_arrival_speed_zero_and_tens_of_km_s():
    # v_inf = 0 (a parabolic approach) and 70 km/s (above any solar-system arrival at Mars)
    config, cube = _sweep("""bodies = ["mars", "jupiter"]
v_inf = [0.0, 1e-9, 20.0, 70.0]
target_altitude = [400.0, 5000.0]
periapsis_altitude = [200.0, 300.0, 4000.0]""")
    _explained(cube.delta_v.values, cube.status.values)
    assert np.isfinite(cube.delta_v.sel(v_inf=0.0).values[cube.status.sel(v_inf=0.0).values == 0]).all()
    # at v_inf = 0 direct capture into a circle costs escape minus circular speed: (sqrt(2) - 1) v_c
    # (vis-viva, Curtis 2014 Ch. 2; common practice)
    mars = config.bodies[0]
    r = mars.radius + 400e3
    expected = (np.sqrt(2.0) - 1.0) * np.sqrt(mars.gm / r)
    direct = cube.delta_v.isel(strategy=0, body=0, target_altitude=0, periapsis_altitude=0).sel(v_inf=0.0)
    assert float(direct) == pytest.approx(expected, rel=1e-12)
    assert np.isfinite(cube.saving_over_direct.values[cube.best_strategy.values >= 0]).all()


def test_periapsis_exactly_at_the_lowest_safe_altitude_is_feasible():
    config, cube = _sweep("""bodies = ["mars"]
v_inf = [3.0]
target_altitude = [400.0]
periapsis_altitude = [206.689999, 206.69]""")
    # the catalog's Mars clearance, 200 km above the equatorial radius 3396.19 km, from the mean radius 3389.5 km
    assert config.bodies[0].safe_periapsis_altitude == 206.69e3
    two_burn = cube.status.isel(strategy=1, body=0, v_inf=0, target_altitude=0).values
    assert list(two_burn) == [CODE["periapsis_below_safe_altitude"], CODE["ok"]]
    assert np.isfinite(cube.delta_v.isel(strategy=1, body=0, v_inf=0, target_altitude=0, periapsis_altitude=1))


def test_target_at_the_edge_of_the_sphere_of_influence():
    # the largest altitude the config accepts for the Moon (its sphere of influence), and just inside
    moon = parse_config('name = "m"\n[grid]\nbodies = ["moon"]\nv_inf = [1.0]\ntarget_altitude = [100.0]\n'
                        'periapsis_altitude = [100.0]\n[spacecraft]\nspecific_impulse = 320.0\n'
                        'arrival_mass = 1000.0\n', "m.toml").bodies[0]
    edge = (moon.sphere_of_influence - moon.radius) / 1e3
    _, cube = _sweep(f"""bodies = ["moon"]
v_inf = [0.5, 3.0]
target_altitude = [100.0, {edge * 0.999!r}, {edge!r}]
periapsis_altitude = [100.0]""")
    _explained(cube.delta_v.values, cube.status.values)
    # beyond the apoapsis bound (half the sphere): a status with its reason, not a number
    far = cube.status.isel(target_altitude=-1).values
    assert (far == CODE["target_outside_bound"]).all()


def test_very_small_moons_give_statuses_not_nan():
    # Phobos: its sphere of influence lies inside the body (catalog values: JPL, from the catalog file)
    _, cube = _sweep("""bodies = ["phobos", "enceladus"]
v_inf = [0.0, 0.01, 2.0]
target_altitude = [5.0, 50.0]
periapsis_altitude = [5.0, 20.0]""")
    _explained(cube.delta_v.values, cube.status.values)
    phobos = cube.status.isel(body=0).values
    assert (phobos == CODE["sphere_of_influence_too_small"]).all()
    assert (cube.best_strategy.isel(body=0).values == -1).all()


def test_finite_burns_at_the_extremes():
    # a very weak and a very strong engine, at v_inf 0 and 40 km/s
    _, cube = _sweep("""bodies = ["mars", "moon"]
v_inf = [0.0, 40.0]
target_altitude = [400.0]
periapsis_altitude = [250.0, 2000.0]
thrust_to_weight = [0.005, 5000.0]""")
    _explained(cube.finite_delta_v.values, cube.finite_status.values)
    _explained(cube.gravity_loss.values, np.broadcast_to(cube.finite_status.values[:, None],
                                                         cube.gravity_loss.shape))


def test_plane_change_at_the_extremes():
    _, cube = _sweep("""bodies = ["mars"]
v_inf = [0.0, 30.0]
target_altitude = [400.0, 20000.0]
periapsis_altitude = [200.0]
plane_change = [0.0, 1e-9, 179.999]""")
    status = np.broadcast_to(cube.status.values[..., None], cube.plane_change_delta_v.shape)
    _explained(cube.plane_change_delta_v.values, status)
