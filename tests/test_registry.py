"""The registries are the extension points: a strategy registered at run time goes through the
whole pipeline (engine, cube, summary, figures, compare, resume) with no other file touched."""

from __future__ import annotations

import textwrap

import netCDF4
import numpy as np
import pytest

from sweep import parse_config, run
from sweep.engine.impulsive import evaluate
from sweep.model.strategies import OKABE_ITO, STRATEGIES, Geometry, Strategy, Turn, register, unregister
from sweep.model.variables import DIMENSIONS, Variable, cube_variables
from sweep.physics.capture import Maneuver, two_burn_capture
from sweep.report.compare import compare_cubes


def _toy_kernel(v_inf, geometry: Geometry) -> Maneuver:
    """The two-burn sequence under another name: its numbers are known, so the plumbing can be checked."""
    return two_burn_capture(v_inf, geometry.gm, geometry.periapsis_radius, geometry.target_radius,
                            target_apoapsis=geometry.target_apoapsis)


TOY = Strategy(
    name="toy",
    description="test entry: the two-burn sequence under another name",
    burns=2,
    kernel=_toy_kernel,
    first_burn_radius=lambda g: g.periapsis_radius,
    uses_periapsis=True,
    burn_radii=lambda g: [g.periapsis_radius, g.target_far],
    orbits=lambda g: [(g.periapsis_radius, g.target_far), (g.target_radius, g.target_far)],
    # all of the turn with the first burn
    turn=lambda v, g, angle: Turn(two_burn_capture(v, g.gm, g.periapsis_radius, g.target_radius, angle, angle,
                                                   g.target_apoapsis), {}),
    turn_how="all with its first burn",
    colour=OKABE_ITO["vermillion"],
    # an output of its own: one registry entry plus its computation
    variables=(Variable("toy_dive_depth", DIMENSIONS, "km", "how far the toy's periapsis lies below the target",
                        "impulsive"),),
    outputs=lambda g, radius: {"toy_dive_depth": (g.target_radius - g.periapsis_radius) / 1e3},
)

# Test input of our own: one body, a coarse grid, a plane-change axis.
IMPULSIVE = textwrap.dedent(
    """
    name = "toy-impulsive"
    [grid]
    bodies = ["mars"]
    v_inf = { start = 0.5, stop = 6.0, num = 12 }
    target_altitude = [300.0, 5000.0]
    periapsis_altitude = [250.0, 1000.0]
    plane_change = [0.0, 20.0]
    [spacecraft]
    specific_impulse = 320.0
    arrival_mass = 1000.0
    """
)
# The same with a finite-burn axis instead (the finite model is planar).
FINITE = IMPULSIVE.replace('"toy-impulsive"', '"toy-finite"').replace(
    "plane_change = [0.0, 20.0]", "thrust_to_weight = [0.3]")


@pytest.fixture
def toy():
    register(TOY)
    try:
        yield TOY
    finally:
        unregister(TOY.name)
    assert "toy" not in [s.name for s in STRATEGIES]


def test_a_registered_strategy_is_evaluated_and_labelled(toy):
    dataset = run(parse_config(IMPULSIVE, "toy.toml"), workers=1)
    assert list(dataset["strategy_name"].values) == ["direct", "two_burn", "three_burn", "toy"]
    two, mine = (dataset["delta_v"].isel(strategy=i) for i in (1, 3))
    # the same sequence under another name: the same numbers, NaN where infeasible alike
    np.testing.assert_array_equal(two.values, mine.values)
    assert np.isfinite(mine.values).any()
    np.testing.assert_array_equal(dataset["toy_crossover_v_inf"].values, dataset["crossover_v_inf"].values)
    depth = dataset["toy_dive_depth"]
    assert depth.dims == ("body", "v_inf", "target_altitude", "periapsis_altitude") and depth.attrs["units"] == "km"
    # target 5000 km, periapsis 250 km: 4750 km deep at every arrival speed (where toy is feasible)
    np.testing.assert_allclose(depth.values[0, :, 1, 0], 4750.0, rtol=1e-12)  # subtraction of exact km values
    np.testing.assert_allclose(depth.values[0, :, 0, 1], -700.0, rtol=1e-12)  # periapsis above a 300 km target
    assert "toy: all with its first burn" in dataset["plane_change_delta_v"].attrs["comment"]
    assert dataset["best_strategy"].attrs["flag_meanings"].endswith("three_burn toy")
    assert "two_burn, three_burn and toy" in dataset["periapsis_altitude"].attrs["long_name"]
    # with the whole turn at the periapsis it is never cheaper than two_burn's best split
    turned = dataset["plane_change_delta_v"].isel(plane_change=1)
    both = np.isfinite(turned.isel(strategy=3).values)
    assert both.any()
    assert (turned.isel(strategy=3).values[both] >= turned.isel(strategy=1).values[both] - 1e-9).all()


def test_a_registered_strategy_goes_through_cli_report_figures_and_compare(toy, tmp_path):
    from sweep.cli import main

    path = tmp_path / "toy.toml"
    path.write_text(IMPULSIVE, encoding="utf-8")
    first, second = tmp_path / "first", tmp_path / "second"
    assert main(["run", str(path), "--out", str(first), "--workers", "1", "-q"]) == 0
    assert main(["run", str(path), "--out", str(second), "--workers", "1", "-q"]) == 0
    summary = (first / "summary.md").read_text(encoding="utf-8")
    assert "toy" in summary
    assert "toy_crossover_v_inf_km_s" in (first / "crossover.csv").read_text(encoding="utf-8")
    assert (first / "winner_mars.png").stat().st_size > 10_000
    with netCDF4.Dataset(first / "toy-impulsive.nc") as file:
        assert "toy_crossover_v_inf" in file.variables
    import xarray as xr

    with xr.open_dataset(first / "toy-impulsive.nc") as old, xr.open_dataset(second / "toy-impulsive.nc") as new:
        drift = compare_cubes(old, new)
    assert not drift.exceeds(0.0), drift


def test_a_registered_strategy_flies_finite_burns_and_resumes(toy, tmp_path):
    config = parse_config(FINITE, "toy-finite.toml")
    names = [v.name for v in cube_variables(STRATEGIES, config=config)]
    assert "finite_toy_crossover_v_inf" in names
    folder = tmp_path / "chunks"
    whole = evaluate(config, workers=1, checkpoint=folder)
    saved = sorted(folder.glob("chunk-*.npz"))
    assert len(saved) >= 2
    for lost in saved[::2]:  # as if killed before these were done
        lost.unlink()
    resumed = evaluate(config, workers=1, checkpoint=folder)
    for name, values in whole.items():
        assert values.tobytes() == resumed[name].tobytes(), name
    # the toy flies the two-burn sequence: the same finite costs and crossovers
    finite = whole["finite_delta_v"]
    np.testing.assert_array_equal(finite[3], finite[1])
    assert np.isfinite(finite[3]).any()
    np.testing.assert_array_equal(whole["finite_toy_crossover_v_inf"], whole["finite_crossover_v_inf"])
