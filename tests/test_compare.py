"""capsweep compare: drift between two cubes for nightly regression checks."""

from __future__ import annotations

import numpy as np
import pytest

from sweep import parse_config, run, write_dataset
from sweep.cli import main
from sweep.report.compare import compare_cubes, render_drift
from tests.conftest import SMALL_CONFIG


def test_identical_runs_show_no_drift(config_file, tmp_path, capsys):
    for name in ("a", "b"):
        assert main(["run", str(config_file()), "--out", str(tmp_path / name), "-q"]) == 0
    capsys.readouterr()
    assert main(["compare", str(tmp_path / "a" / "small-test.nc"), str(tmp_path / "b" / "small-test.nc")]) == 0
    assert "no drift beyond tolerance" in capsys.readouterr().out


def test_a_changed_engine_moves_propellant_not_delta_v(tmp_path, capsys):
    old = run(parse_config(SMALL_CONFIG), workers=1)
    new = run(parse_config(SMALL_CONFIG.replace("specific_impulse = 320.0", "specific_impulse = 330.0")), workers=1)
    drift = compare_cubes(old, new)
    assert drift.largest["delta_v"] == (0.0, 0.0)
    absolute, relative = drift.largest["propellant_mass"]
    # rocket equation: a higher Isp burns less; the change is a few percent, not zero
    assert 0.001 < relative < 0.1 and absolute > 0
    write_dataset(old, tmp_path / "old.nc")
    write_dataset(new, tmp_path / "new.nc")
    assert main(["compare", str(tmp_path / "old.nc"), str(tmp_path / "new.nc"), "--tolerance", "1e-6"]) == 1
    out = capsys.readouterr().out
    assert "propellant_mass: largest change" in out and "EXCEEDS" in out and "drift beyond tolerance" in out
    # a tolerance above the change accepts it
    assert main(["compare", str(tmp_path / "old.nc"), str(tmp_path / "new.nc"), "--tolerance", "0.5"]) == 0


def test_winner_changes_and_added_variables_are_reported(small_cube):
    _, cube = small_cube
    edited = cube.copy(deep=True)
    best = edited["best_strategy"].values
    feasible = np.argwhere(best >= 0)[:5]
    for index in map(tuple, feasible):
        best[index] = (best[index] + 1) % 3
    edited["extra"] = edited["saving_over_direct"] * 2
    drift = compare_cubes(cube, edited)
    assert drift.winner_changes["best_strategy"] == 5
    assert drift.added == ["extra"]
    assert drift.exceeds(1.0)


def test_compare_errors_exit_2(tmp_path, capsys):
    assert main(["compare", str(tmp_path / "missing.nc"), str(tmp_path / "other.nc")]) == 2
    assert "missing.nc: cube not found" in capsys.readouterr().err


@pytest.mark.parametrize(("old", "new", "kind"), [
    (1.0, np.inf, "finite -> infinite"),
    (np.inf, 1.0, "infinite -> finite"),
    (np.nan, 1.0, "NaN -> number"),
    (1.0, np.nan, "number -> NaN"),
    (np.inf, -np.inf, "+inf <-> -inf"),
    (np.nan, np.inf, "NaN -> infinite"),
])
def test_changes_to_or_from_nan_or_infinity_exceed_any_tolerance(small_cube, old, new, kind):
    _, cube = small_cube
    before, after = cube.copy(deep=True), cube.copy(deep=True)
    before["delta_v"].values[0, 0, 0, 0, :2] = old  # two points of one variable
    after["delta_v"].values[0, 0, 0, 0, :2] = new
    drift = compare_cubes(before, after)
    assert drift.nonfinite["delta_v"] == {kind: 2} and drift.exceeds(1e300)
    assert f"delta_v: 2 points changed to or from NaN or infinity ({kind} 2)  EXCEEDS" in render_drift(drift, 1e300)
    assert compare_cubes(after, after.copy(deep=True)).nonfinite["delta_v"] == {}  # inf = inf, NaN = NaN: no change
