"""The summary reads the cube only and says where each strategy wins."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from sweep.model.strategies import lookup, register, unregister
from sweep.report.summary import answers, render_summary, summary_tables


def test_summary_reports_what_the_cube_says(small_cube):
    # Edit the cube: a summary that recomputed the physics would not show the edited values.
    _, cube = small_cube
    edited = cube.copy(deep=True)
    edited["crossover_v_inf"][0, 1, 1] = 4.321
    edited["saving_over_direct"][0, -1, 1, 1] = 9876.0
    text = render_summary(edited)
    assert "`two_burn` beats direct above 4.32 km/s" in text
    assert "the largest saving over direct is 9876 m/s" in text
    assert "4.32 km/s" not in render_summary(cube)


def test_win_runs_cover_every_arrival_speed_once(small_cube):
    config, cube = small_cube
    wins = summary_tables(cube)["wins"]
    for _, group in wins.groupby(["body", "target_altitude_km", "periapsis_altitude_km"]):
        starts = group.v_inf_from_km_s.to_numpy()
        stops = group.v_inf_to_km_s.to_numpy()
        assert starts[0] == config.v_inf[0] and stops[-1] == config.v_inf[-1]
        # each run starts at the grid speed after the previous run's last one
        following = [config.v_inf[list(config.v_inf).index(s) + 1] for s in stops[:-1]]
        np.testing.assert_array_equal(starts[1:], following)


def test_shares_add_up_and_match_the_cube(small_cube):
    _, cube = small_cube
    shares = summary_tables(cube)["shares"]
    for (body, target), group in shares.groupby(["body", "target_altitude_km"]):
        block = cube.best_strategy.sel(target_altitude=target).isel(body=list(cube.body_name.values).index(body))
        feasible = int((block >= 0).sum())
        assert group.points_won.sum() == feasible
        if feasible:
            assert group.share_of_feasible.sum() == pytest.approx(1.0)
    best = shares.dropna(subset=["max_saving_m_s"])
    assert best.max_saving_m_s.max() == pytest.approx(float(cube.saving_over_direct.max()))


def test_summary_text_carries_answers_crossovers_and_cautions(small_cube):
    _, cube = small_cube
    text = render_summary(cube)
    assert text.count("verify with higher-fidelity propagation") == 0  # capitalised form below
    assert text.count("Verify with higher-fidelity propagation") == 2  # top and bottom
    mars = answers(cube)["mars"]
    assert len(mars) == cube.sizes["target_altitude"]
    crossing = float(cube.crossover_v_inf.sel(target_altitude=5000.0, periapsis_altitude=250.0).isel(body=0))
    assert f"`two_burn` beats direct above {crossing:.2f} km/s" in mars[1]
    assert "no strategy is feasible" in answers(cube)["enceladus"][0]
    assert "sphere_of_influence_too_small 100%" in text


# ---- a cube with a strategy the summary was not written for ------------------------------------

def _with_toy(cube):
    """``cube`` with a fourth strategy "toy": a copy of three_burn whose crossovers are 0.25 km/s higher."""
    toy = cube.isel(strategy=[list(cube.strategy_name.values).index("three_burn")])
    toy = toy.assign_coords(strategy_name=("strategy", ["toy"]))
    ranked = [name for name in cube.data_vars if "strategy" in cube[name].dims]
    four = xr.concat([cube[ranked], toy[ranked]], dim="strategy")
    out = cube.drop_vars([*ranked, "strategy_name"]).assign(four).assign_coords(
        strategy_name=("strategy", [*cube.strategy_name.values, "toy"]))
    out["toy_crossover_v_inf"] = cube["three_burn_crossover_v_inf"] + 0.25
    if "finite_three_burn_crossover_v_inf" in cube:
        out["finite_toy_crossover_v_inf"] = cube["finite_three_burn_crossover_v_inf"] + 0.25
    return out


def test_a_fourth_strategy_gets_its_own_columns_and_headers(small_cube):
    _, cube = small_cube
    four = _with_toy(cube)
    tables = summary_tables(four)
    assert list(tables["crossover"].columns[3:]) == ["two_burn_crossover_v_inf_km_s",
                                                     "three_burn_crossover_v_inf_km_s", "toy_crossover_v_inf_km_s"]
    np.testing.assert_array_equal(tables["crossover"]["toy_crossover_v_inf_km_s"].to_numpy(),
                                  four.toy_crossover_v_inf.values.ravel())  # rows: body, target, periapsis
    # the three strategies of before read as before; toy (a tie with three_burn, listed later) wins nowhere
    before = summary_tables(cube)
    pd.testing.assert_frame_equal(tables["wins"], before["wins"])
    pd.testing.assert_frame_equal(tables["crossover"].drop(columns="toy_crossover_v_inf_km_s"), before["crossover"])
    shares = tables["shares"]
    assert (shares[shares.strategy == "toy"].points_won == 0).all()
    pd.testing.assert_frame_equal(shares[shares.strategy != "toy"].reset_index(drop=True), before["shares"])
    text = render_summary(four, tables)
    header = ("| periapsis | winner along v_inf (km/s) | two_burn = direct at | three_burn = direct at | "
              "toy = direct at |")
    assert text.count(header) == four.sizes["body"] * four.sizes["target_altitude"]
    assert "|---:|---|---:|---:|---:|" in text
    # Mars, 5,000 km target, lowest feasible periapsis below it (250 km): toy's crossover is three_burn's + 0.25
    mars = answers(four, tables)["mars"][1]
    three = float(cube.three_burn_crossover_v_inf.isel(body=0).sel(target_altitude=5000.0, periapsis_altitude=250.0))
    assert f"`three_burn` beats direct above {three:.2f} km/s, `toy` beats direct above {three + 0.25:.2f} km/s" in mars


def test_a_fourth_strategy_in_the_finite_and_plane_change_sections():
    from sweep import parse_config, run
    from tests.test_evaluate_finite import FINITE_CONFIG
    from tests.test_plane_change import PLANE

    finite = _with_toy(run(parse_config(FINITE_CONFIG, "finite.toml"), workers=1))
    tables = summary_tables(finite)
    assert list(tables["finite_crossover"].columns[5:]) == ["two_burn_crossover_v_inf_km_s",
                                                            "three_burn_crossover_v_inf_km_s",
                                                            "toy_crossover_v_inf_km_s"]
    np.testing.assert_array_equal(tables["finite_crossover"]["toy_crossover_v_inf_km_s"].to_numpy(),
                                  finite.finite_toy_crossover_v_inf.transpose("body", "target_altitude", "thrust",
                                                                              "periapsis_altitude").values.ravel())
    text = render_summary(finite, tables)
    assert "points won of those any strategy flies: direct / two_burn / three_burn / toy |" in text
    assert "`two_burn` with periapsis 250 km" in text  # the short answer still follows the low dive

    plane = _with_toy(run(parse_config(PLANE, "plane.toml"), workers=1))
    tables = summary_tables(plane)
    assert "share_won_toy" in tables["plane_change"]
    text = render_summary(plane, tables)
    assert ("With a plane change (direct turns with its burn, two_burn splits the turn, three_burn turns at "
            "apoapsis, toy turns with the apoapsis burn):") not in text  # toy is not registered: no entry to ask
    assert ("three_burn splits the turn over its burns, with an apoapsis chosen for it, toy: turn not described by "
            "this version's registry):") in text
    # registered, toy says how it turns from its registry entry
    register(replace(lookup("three_burn"), name="toy"))
    try:
        text = render_summary(plane, tables)
    finally:
        unregister("toy")
    assert f"with an apoapsis chosen for it, toy turns {lookup('three_burn').turn_how}):" in text
    assert "| plane change | points won: direct / two_burn / three_burn / toy | median cost of the turn |" in text


def test_a_registered_section_follows_each_target_in_the_summary(small_cube):
    # The section registry is the extension point: one entry, no other file touched.
    from sweep.report.summary import SECTIONS, Section

    _, dataset = small_cube

    def render(cube, tables, t):
        best = cube["delta_v"].isel(target_altitude=t).min().item()
        return [f"Toy section: least delta-v anywhere here {best:.1f} m/s.", ""]

    SECTIONS.append(Section("toy", lambda cube, tables: True, render))
    try:
        text = render_summary(dataset)
    finally:
        SECTIONS.pop()
    lines = [line for line in text.splitlines() if line.startswith("Toy section:")]
    # 3 bodies x 2 targets, each with the cube's own least delta-v (Enceladus has none feasible: nan)
    assert len(lines) == 6
    least = float(dataset["delta_v"].isel(body=0, target_altitude=0).min())
    assert lines[0] == f"Toy section: least delta-v anywhere here {least:.1f} m/s."
    assert "Toy section" not in render_summary(dataset)  # unregistered again


def test_markdown_specials_in_config_text_are_escaped_and_keep_the_tables_intact(small_config_text, tmp_path):
    import re

    from sweep import parse_config, run
    from sweep.report.summary import render_summary

    name = "a|b*_c"
    text = small_config_text.replace('"enceladus"]', f'"{name}"]').replace(
        'description = "test sweep"', 'description = "a *bold* [link](x) | pipe"') + (
        f'\n[bodies."{name}"]\ngm = 17.29\nmean_radius = 262.7\nsafe_periapsis_altitude = 30.0\n'
        'parent = "sun"\nsemi_major_axis = 353.3e6\n')  # test inputs, roughly Vesta-like (from memory)
    summary = render_summary(run(parse_config(text, "odd.toml"), workers=1))
    assert "## A\\|b\\*\\_c" in summary and "### A\\|b\\*\\_c, 300 km circular orbit" in summary
    assert "a \\*bold\\* \\[link\\]\\(x\\) \\| pipe" in summary
    unescaped = re.compile(r"(?<!\\)[|*_]")
    for line in summary.splitlines():
        if "A\\|b" in line or "bold" in line:  # the lines carrying the names: every special character escaped
            assert not unescaped.search(line.replace("**Caution.**", "")), line
    # every table row has as many cells as its header: no row split by a name
    blocks = re.findall(r"(?m)^(\|.*\|\n\|[-:|]+\|\n(?:\|.*\|\n)*)", summary)
    assert blocks
    for block in blocks:
        rows = block.splitlines()
        assert len({len(re.findall(r"(?<!\\)\|", row)) for row in rows}) == 1, block  # cell borders per row
