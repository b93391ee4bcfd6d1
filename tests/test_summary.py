"""The summary reads the cube only and says where each strategy wins."""

from __future__ import annotations

import numpy as np
import pytest

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
