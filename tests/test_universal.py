"""The universal regime map: body cubes collapse onto it; its crossovers are the derived ones."""

from __future__ import annotations

import numpy as np
import pytest

from sweep.universal import universal_costs, universal_dataset


def test_body_cubes_collapse_onto_the_universal_map(small_cube):
    # Scaling identity of vis-viva (v^2 ~ mu / r): delta-v / v_c(r_t) of every strategy at every
    # feasible point of a body cube equals the universal cost at that point's three ratios.
    config, cube = small_cube
    checked = 0
    for b, body in enumerate(config.bodies):
        r_t = (body.radius + config.target_altitude * 1e3)[None, :, None]
        r_p = (body.radius + config.periapsis_altitude * 1e3)[None, None, :]
        r_a = body.radius + cube.intermediate_apoapsis_altitude.isel(body=b).values * 1e3  # (v, t, p)
        v_c = np.sqrt(body.gm / r_t)
        speed = (config.v_inf * 1e3)[:, None, None] / v_c
        universal = universal_costs(speed, r_p / r_t, np.where(np.isfinite(r_a), r_a, r_t) / r_t)
        body_costs = cube.delta_v.isel(body=b).values / v_c
        ok = np.isfinite(body_costs)
        # apoapsis stored in km and re-added to the radius: 1e-9 relative covers that rounding
        np.testing.assert_allclose(body_costs[ok], universal[ok], rtol=1e-9)
        checked += int(ok.sum())
    assert checked > 100


def test_universal_crossovers_match_the_map():
    # Hand derivation (README): with r_p < r_t, two_burn = direct at v_inf / v_c = sqrt(2);
    # three_burn = direct at sqrt(2 r_t / r_a).
    speed = np.linspace(0.0, 3.0, 3001)
    cube = universal_dataset(speed, [0.3, 0.9], [1.0, 10.0, 100.0])
    gap = cube.delta_v_ratio.isel(strategy=1) - cube.delta_v_ratio.isel(strategy=0)
    flip = speed[np.argmax(np.diff(np.sign(gap.isel(apoapsis_ratio=0, periapsis_ratio=0).values)) != 0)]
    assert flip == pytest.approx(np.sqrt(2.0), abs=1e-3)  # grid step 1e-3
    three = cube.delta_v_ratio.isel(strategy=2) - cube.delta_v_ratio.isel(strategy=0)
    for a, ratio in enumerate([10.0, 100.0]):
        row = three.isel(apoapsis_ratio=a + 1, periapsis_ratio=1).values
        flip = speed[np.argmax(np.diff(np.sign(row)) != 0)]
        assert flip == pytest.approx(np.sqrt(2.0 / ratio), abs=1e-3)
    assert float(cube.two_burn_crossover_speed_ratio) == pytest.approx(np.sqrt(2.0), rel=1e-15)


def test_universal_winner_regions():
    cube = universal_dataset(np.array([0.5, 2.0]), np.array([0.5, 2.0]), np.array([1.0, 100.0]))
    best = cube.best_strategy.values
    # slow arrival, periapsis below target, apoapsis at the target: direct is cheapest (below sqrt 2)
    assert best[0, 0, 0] == 0
    # fast arrival with a deep periapsis and a high apoapsis: three_burn
    assert best[1, 0, 1] == 2
    assert (cube.saving_ratio.values >= 0).all()


@pytest.mark.slow  # about 6 s: the universal cube and map through the command line
def test_universal_command_writes_cf_cube_and_map(tmp_path, capsys):
    import matplotlib.image as mpimg
    import xarray as xr
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    from sweep.cli import main

    out = tmp_path / "universal"
    assert main(["universal", "--out", str(out), "--speed-ratio-max", "2.5"]) == 0
    assert "sqrt(2)" in capsys.readouterr().out
    with xr.open_dataset(out / "universal.nc") as cube:
        assert float(cube.speed_ratio.max()) == pytest.approx(2.5)
    CheckSuite.load_all_available_checkers()  # independent: IOOS compliance-checker, CF-1.11
    passed, errors = ComplianceChecker.run_checker(str(out / "universal.nc"), ["cf:1.11"], 0, "normal",
                                                   output_filename=str(tmp_path / "cf.txt"), output_format="text")
    assert passed and not errors, (tmp_path / "cf.txt").read_text()
    image = mpimg.imread(out / "universal_map.png")
    # not blank: a blank page has one colour and zero spread (same yardstick as tests/test_plots.py)
    assert len(np.unique(image.reshape(-1, image.shape[-1]), axis=0)) > 100 and image.std() > 0.08
    assert main(["universal", "--out", str(out), "--speed-ratio-max", "0"]) == 2
    assert "--speed-ratio-max must be in (0, 100], got 0.0" in capsys.readouterr().err
