"""Figures: drawn from the cube alone, valid PNGs of a sensible size, not blank, winners in the right colours."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.image import imread
from matplotlib.lines import Line2D

from sweep import parse_config, run
from sweep.cli import main
from sweep.report.figures import (
    DPI,
    FigureKind,
    draw_figure,
    figure_files,
    fill_colour,
    register_figure,
    unregister_figure,
    write_figures,
)
from sweep.report.summary import render_summary, write_summary
from tests.test_evaluate_finite import FINITE_CONFIG

# PNG specification (W3C / ISO/IEC 15948), section 5.2: the eight signature bytes of every PNG file.
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
# A colour counts as a map fill when every channel is within 1.5/255 of it: the PNG stores 8-bit
# channels, so a cell interior can differ from the float colour by rounding (half a step) only.
FILL_TOLERANCE = 1.5 / 255


@pytest.fixture(scope="module")
def finite_cube():
    config = parse_config(FINITE_CONFIG, "finite.toml")
    return config, run(config, workers=1)


def _draw_strictly(dataset, folder):
    # Matplotlib's warnings (no contour levels found, a layout that collapsed) would mean a broken figure.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        return write_figures(dataset, folder)


@pytest.fixture(scope="module")
def small_figures(small_cube, tmp_path_factory):
    _, cube = small_cube
    folder = tmp_path_factory.mktemp("figures")
    return cube, folder, _draw_strictly(cube, folder)


def _count(image: np.ndarray, colour) -> int:
    """Pixels of the image drawn in ``colour`` (RGB, 0-1)."""
    return int(np.all(np.abs(image[..., :3] - np.asarray(colour)) <= FILL_TOLERANCE, axis=-1).sum())


def _pixels(figure) -> np.ndarray:
    figure.canvas.draw()
    return np.asarray(figure.canvas.buffer_rgba(), dtype=float) / 255.0


def test_every_listed_figure_is_written_and_no_finite_ones_without_thrust(small_figures):
    cube, folder, paths = small_figures
    assert paths == [folder / name for _, name, _ in figure_files(cube)]
    assert {p.name for p in paths} == {f"{kind}_{body}.png" for kind in ("winner", "saving")
                                       for body in ("mars", "moon", "enceladus")}
    assert ("mars", "winner_mars.png", "Mars: cheapest capture strategy") in figure_files(cube)


@pytest.mark.slow  # about 6 s: every figure of a run drawn and read back
def test_figures_are_pngs_of_a_sensible_size_and_not_blank(small_figures):
    _, _, paths = small_figures
    for path in paths:
        assert path.read_bytes()[:8] == PNG_SIGNATURE, path.name
        image = imread(path)  # raises on a damaged file
        height, width = image.shape[:2]
        # readable on a screen or a page at the figures' DPI: 4 to 20 inches wide, 3 to 14 high
        assert 4 * DPI <= width <= 20 * DPI and 3 * DPI <= height <= 14 * DPI, (path.name, width, height)
        rgb = image[..., :3]
        # Not blank: a blank image has one colour and a standard deviation of 0. Text and axes alone
        # give a few dozen anti-aliased greys; these figures measured 256 to 1014 colours and a
        # standard deviation of 0.14 to 0.23 (of a 0-1 scale), so 100 and 0.08 leave a wide margin.
        colours = np.unique((rgb * 255).round().astype(np.uint8).reshape(-1, 3), axis=0)
        assert len(colours) > 100, (path.name, len(colours))
        assert rgb.std() > 0.08, (path.name, rgb.std())


def test_winner_maps_fill_the_cube_winners_in_their_colours(small_figures):
    cube, folder, _ = small_figures
    names = list(cube.strategy_name.values)
    mars = cube.best_strategy.isel(body=0).values
    assert set(np.unique(mars)) == {names.index("direct"), names.index("three_burn")}  # the cube says so
    image = imread(folder / "winner_mars.png")
    # A strategy that wins nowhere appears only as its legend patch: 2.6 x 0.7 em at 8 pt and 120 DPI,
    # about 35 x 9 pixels (measured: 264 to 306). One grid cell of a panel is larger than that, and
    # a winner fills many cells (measured: over 150,000 pixels each here).
    legend_patch, cells = 600, 10_000
    assert _count(image, fill_colour("direct", 0)) > cells
    assert _count(image, fill_colour("three_burn", 2)) > cells
    assert _count(image, fill_colour("two_burn", 1)) < legend_patch
    # Enceladus: nothing is feasible (sphere of influence too small), so the map is grey
    assert (cube.best_strategy.isel(body=2).values == -1).all()
    image = imread(folder / "winner_enceladus.png")
    assert _count(image, fill_colour(None)) > cells
    for index, name in enumerate(names):
        assert _count(image, fill_colour(name, index)) < legend_patch


def test_figures_draw_the_cube_not_recomputed_physics(small_cube):
    # Edit the cube: figures that recomputed physics would not show the edited values.
    _, cube = small_cube
    edited = cube.copy(deep=True)
    two_burn = list(cube.strategy_name.values).index("two_burn")
    edited["best_strategy"][0] = two_burn
    edited["crossover_v_inf"][0, :, 1] = 4.321
    figure = draw_figure(edited, "winner", "mars")
    assert _count(_pixels(figure), fill_colour("two_burn", two_burn)) > 100_000
    lines = [line for ax in figure.axes for line in ax.get_lines()]
    assert any(np.isclose(np.asarray(line.get_xdata(), dtype=float), 4.321).all() for line in lines)
    assert not any(np.isclose(np.asarray(line.get_xdata(), dtype=float), 4.321).any()
                   for ax in draw_figure(cube, "winner", "mars").axes for line in ax.get_lines())


def test_saving_curves_are_the_cube_savings(small_cube):
    _, cube = small_cube
    figure = draw_figure(cube, "saving", "mars")
    curves = [np.asarray(line.get_ydata(), dtype=float) for ax in figure.axes for line in ax.get_lines()
              if len(line.get_ydata()) == cube.sizes["v_inf"]]
    saving = cube.saving_over_direct.isel(body=0).values  # (v_inf, target, periapsis)
    columns = [saving[:, t, p] for t in range(saving.shape[1]) for p in range(saving.shape[2])]
    assert curves and all(any(np.array_equal(c, s, equal_nan=True) for s in columns) for c in curves)
    assert max(np.nanmax(c) for c in curves) == np.nanmax(saving)  # the lowest periapsis is always shown
    assert figure.axes[0].get_ylabel() == "saving over direct, m/s"
    assert "km/s" in figure.axes[0].get_xlabel()


def test_finite_figures_with_a_thrust_axis(finite_cube, tmp_path):
    _, cube = finite_cube
    paths = _draw_strictly(cube, tmp_path)
    names = {p.name for p in paths}
    assert {"finite_winner_mars.png", "finite_crossover_mars.png", "finite_winner_moon.png",
            "finite_crossover_moon.png"} <= names
    for path in paths:
        assert path.read_bytes()[:8] == PNG_SIGNATURE
        assert imread(path)[..., :3].std() > 0.08  # not blank, as above
    # The crossover figure plots the cube's finite crossovers at the lowest feasible periapsis below
    # each target (250 km here for both targets) against T/W, with the impulsive ones as lines.
    figure = draw_figure(cube, "finite_crossover", "mars")
    plotted = np.concatenate([np.asarray(line.get_ydata(), dtype=float) for ax in figure.axes
                              for line in ax.get_lines() if isinstance(line, Line2D)])
    mars = cube.isel(body=0).sel(periapsis_altitude=250.0)
    for name in ("finite_crossover_v_inf", "finite_three_burn_crossover_v_inf",
                 "crossover_v_inf", "three_burn_crossover_v_inf"):
        expected = mars[name].values.ravel()
        expected = expected[np.isfinite(expected)]
        assert expected.size and np.isin(expected, plotted).all(), name
    assert "thrust-to-weight" in figure.axes[0].get_xlabel() or any(
        "thrust-to-weight" in ax.get_xlabel() for ax in figure.axes)
    titles = [ax.get_title() for ax in draw_figure(cube, "finite_winner", "mars").axes]
    assert "1,961 N, T/W 0.2" in titles and "9,807 N, T/W 1" in titles  # T = (T/W) x 1000 kg x 9.80665 m/s2


def test_draw_figure_rejects_unknown_kinds_and_bodies(small_cube):
    _, cube = small_cube
    with pytest.raises(ValueError, match=r"unknown figure kind 'finite_winner' for this cube"):
        draw_figure(cube, "finite_winner", "mars")  # no thrust axis in the small cube
    with pytest.raises(ValueError, match=r"body 'venus' is not in the cube"):
        draw_figure(cube, "winner", "venus")


def test_summary_links_the_figures_it_finds(small_cube, tmp_path):
    _, cube = small_cube
    assert "![" not in render_summary(cube)  # in memory: no figures
    write_summary(cube, tmp_path / "bare")
    assert "![" not in (tmp_path / "bare" / "summary.md").read_text()
    folder = tmp_path / "drawn"
    write_figures(cube, folder)
    text = (write_summary(cube, folder)[0]).read_text()
    assert "![Mars: cheapest capture strategy](winner_mars.png)" in text
    assert text.count("![") == len(figure_files(cube))
    # each body's figures sit in its own section
    assert text.index("](winner_moon.png)") > text.index("## Moon") > text.index("](saving_mars.png)")


def test_run_and_plot_commands_write_the_same_figures(config_file, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    printed = capsys.readouterr().out
    assert f"figures: 6 PNG files in {out}" in printed
    cube = out / "small-test.nc"
    names = sorted(p.name for p in out.glob("*.png"))
    assert names == sorted(f"{kind}_{body}.png" for kind in ("winner", "saving")
                           for body in ("mars", "moon", "enceladus"))
    assert "![Moon: saving over direct capture](saving_moon.png)" in (out / "summary.md").read_text()
    again = tmp_path / "again"
    assert main(["plot", str(cube), "--out", str(again)]) == 0
    assert f"figures: 6 PNG files in {again}" in capsys.readouterr().out
    # Drawn from the file, the figures are the ones drawn from the run's Dataset, byte for byte.
    for name in names:
        assert (again / name).read_bytes() == (out / name).read_bytes(), name
    for path in out.glob("*.png"):
        path.unlink()
    assert main(["plot", str(cube)]) == 0  # default: beside the cube
    assert sorted(p.name for p in out.glob("*.png")) == names


def test_plot_errors_exit_2_with_one_line(config_file, tmp_path, capsys):
    assert main(["plot", str(tmp_path / "nowhere.nc")]) == 2
    err = capsys.readouterr().err
    assert err.strip().endswith("nowhere.nc: cube not found") and len(err.strip().splitlines()) == 1
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    assert main(["plot", str(out / "small-test.nc"), "--out", str(blocker / "sub")]) == 2
    assert "cannot write output" in capsys.readouterr().err


# ---- plane change ------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def plane_figures(tmp_path_factory):
    from tests.test_plane_change import PLANE

    cube = run(parse_config(PLANE, "plane.toml"), workers=1)
    folder = tmp_path_factory.mktemp("plane_figures")
    return cube, folder, _draw_strictly(cube, folder)


def test_plane_change_cube_gets_the_plane_change_figure(plane_figures):
    cube, folder, paths = plane_figures
    assert paths == [folder / name for _, name, _ in figure_files(cube)]
    assert {p.name for p in paths} == {f"{kind}_{body}.png" for kind in ("winner", "saving", "plane_change")
                                       for body in ("mars", "moon", "enceladus")}
    assert ("mars", "plane_change_mars.png", "Mars: cheapest capture strategy with a plane change") \
        in figure_files(cube)
    for body in ("mars", "moon", "enceladus"):
        path = folder / f"plane_change_{body}.png"
        assert path.read_bytes()[:8] == PNG_SIGNATURE, path.name
        image = imread(path)
        height, width = image.shape[:2]
        assert 4 * DPI <= width <= 20 * DPI and 3 * DPI <= height <= 14 * DPI, (path.name, width, height)
        rgb = image[..., :3]  # not blank, by the yardsticks of test_figures_are_pngs_of_a_sensible_size_and_not_blank
        colours = np.unique((rgb * 255).round().astype(np.uint8).reshape(-1, 3), axis=0)
        assert len(colours) > 100, (path.name, len(colours))
        assert rgb.std() > 0.08, (path.name, rgb.std())


def test_no_plane_change_figure_without_the_axis(small_figures):
    cube, folder, paths = small_figures
    assert "plane_change" not in cube.dims
    assert not any("plane_change" in name for _, name, _ in figure_files(cube))
    assert not list(folder.glob("plane_change_*.png"))
    with pytest.raises(ValueError, match=r"unknown figure kind 'plane_change' for this cube"):
        draw_figure(cube, "plane_change", "mars")


def test_plane_change_figure_panels_captions_and_winners(plane_figures):
    cube, folder, _ = plane_figures
    figure = draw_figure(cube, "plane_change", "mars")
    titles = [ax.get_title() for ax in figure.axes if ax.get_visible() and ax.get_title()]
    assert titles == ["plane change 0°", "plane change 5°", "plane change 20°"]  # the grid's 3 angles
    text = " ".join(t.get_text() for t in figure.texts)
    assert "preliminary patched-conic estimates" in text
    # Mars: periapsis 20 km is below the safe altitude, so 250 km is the lowest with three_burn feasible
    assert "periapsis 250 km, the lowest where two_burn or three_burn is feasible" in " ".join(text.split())
    contours = [c for ax in figure.axes for c in ax.collections if type(c).__name__ == "QuadContourSet"]
    assert contours  # labelled contours of the saving over direct
    # The cube's winners at that periapsis are direct and three_burn; the file shows both in their colours.
    names = list(cube.strategy_name.values)
    winners = cube.plane_change_best_strategy.isel(body=0).sel(periapsis_altitude=250.0).values
    assert set(np.unique(winners)) == {names.index("direct"), names.index("three_burn")}
    image = imread(folder / "plane_change_mars.png")
    assert _count(image, fill_colour("three_burn", 2)) > 10_000
    # direct wins one column of one panel (0.5 km/s at 0 deg): measured 10,982 pixels; three_burn 396,757
    assert _count(image, fill_colour("direct", 0)) > 2_000
    assert _count(image, fill_colour("two_burn", 1)) < 600  # legend patch only


def test_plane_change_figure_draws_the_cube(plane_figures):
    # Edit the cube's plane-change winners: a figure that recomputed physics would not show the edit.
    cube, _, _ = plane_figures
    edited = cube.copy(deep=True)
    two_burn = list(cube.strategy_name.values).index("two_burn")
    edited["plane_change_best_strategy"][0] = two_burn
    assert _count(_pixels(draw_figure(edited, "plane_change", "mars")), fill_colour("two_burn", two_burn)) > 100_000
    assert _count(_pixels(draw_figure(cube, "plane_change", "mars")), fill_colour("two_burn", two_burn)) < 600


def test_plane_change_figure_shows_at_most_four_angles(plane_figures):
    cube, _, _ = plane_figures
    wide = cube.isel(plane_change=[0, 0, 1, 1, 2, 2, 2]).assign_coords(
        plane_change=[0.0, 2.0, 5.0, 8.0, 20.0, 25.0, 30.0])  # relabelled copies: only the axis length matters
    figure = draw_figure(wide, "plane_change", "moon")
    titles = [ax.get_title() for ax in figure.axes if ax.get_visible() and ax.get_title()]
    assert titles == ["plane change 0°", "plane change 5°", "plane change 20°", "plane change 30°"]
    assert "4 of 7 plane-change angles" in " ".join(" ".join(t.get_text() for t in figure.texts).split())


def test_summary_links_the_plane_change_figure(plane_figures):
    cube, folder, _ = plane_figures
    text = write_summary(cube, folder)[0].read_text()
    assert "![Mars: cheapest capture strategy with a plane change](plane_change_mars.png)" in text
    assert text.count("![") == len(figure_files(cube))


def test_figures_are_the_same_bytes_on_one_or_two_worker_processes(small_cube, tmp_path):
    _, cube = small_cube
    one = write_figures(cube, tmp_path / "one", workers=1)
    two = write_figures(cube, tmp_path / "two", workers=2)
    assert [p.name for p in one] == [p.name for p in two] and len(one) >= 6
    assert all(a.read_bytes() == b.read_bytes() for a, b in zip(one, two, strict=True))
    assert not list((tmp_path / "two").glob(".*.part"))


# ---- the figure registry -----------------------------------------------------------------------

def _toy_draw(cube):
    # A one-body cube: the body is selected before anything is read, so no body axis is left.
    assert "body" not in cube["best_strategy"].dims
    figure = Figure(figsize=(4.0, 3.0), dpi=DPI)
    FigureCanvasAgg(figure)
    figure.subplots().imshow(cube["best_strategy"].isel(periapsis_altitude=0).values.T, aspect="auto")
    return figure


def test_a_figure_kind_registered_at_run_time_is_written_for_each_body(small_cube, tmp_path):
    _, cube = small_cube
    cube = cube.isel(body=[0, 1])  # mars and moon: enough to see one file per body
    before = figure_files(cube)
    toy = FigureKind("toy", "toy_{body}.png", "a toy figure", lambda dataset: "best_strategy" in dataset, _toy_draw)
    never = FigureKind("never", "never_{body}.png", "drawn for no cube", lambda dataset: False, _toy_draw)
    register_figure(toy)
    register_figure(never)
    try:
        with pytest.raises(ValueError, match=r"figure kind 'toy' is registered already"):
            register_figure(toy)
        paths = write_figures(cube, tmp_path, workers=1)
        listed = figure_files(cube)
        drawn = draw_figure(cube, "toy", "moon")
    finally:
        unregister_figure("toy")
        unregister_figure("never")
    # After each body's registered kinds, in registry order; the kind that applies to no cube is not drawn.
    assert listed == [("mars", "winner_mars.png", "Mars: cheapest capture strategy"),
                      ("mars", "saving_mars.png", "Mars: saving over direct capture"),
                      ("mars", "toy_mars.png", "Mars: a toy figure"),
                      ("moon", "winner_moon.png", "Moon: cheapest capture strategy"),
                      ("moon", "saving_moon.png", "Moon: saving over direct capture"),
                      ("moon", "toy_moon.png", "Moon: a toy figure")]
    assert paths == [tmp_path / name for _, name, _ in listed]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(name for _, name, _ in listed)  # nothing else
    for body in ("mars", "moon"):
        assert (tmp_path / f"toy_{body}.png").read_bytes()[:8] == PNG_SIGNATURE
    # the toy draws the named body's winners: the moon's, not the first body's
    image = drawn.axes[0].get_images()[0].get_array()
    assert np.array_equal(image, cube.best_strategy.isel(body=1, periapsis_altitude=0).values.T)
    # unregistered: gone from the listing and from draw_figure, the built-in kinds as before
    assert figure_files(cube) == before
    with pytest.raises(ValueError, match=r"unknown figure kind 'toy' for this cube"):
        draw_figure(cube, "toy", "mars")
    with pytest.raises(ValueError, match=r"no figure kind 'toy' is registered"):
        unregister_figure("toy")


def test_figures_draw_a_strategy_the_figures_were_not_written_for(small_cube, tmp_path):
    from tests.test_summary import _with_toy

    _, cube = small_cube
    four = _with_toy(cube.isel(body=[0]))  # mars, with a fourth strategy "toy" (three_burn's crossovers + 0.25)
    paths = _draw_strictly(four, tmp_path)
    assert [p.name for p in paths] == ["winner_mars.png", "saving_mars.png"]
    figure = draw_figure(four, "winner", "mars")
    labels = [text.get_text() for legend in figure.legends for text in legend.get_texts()]
    assert "toy" in labels and "toy = direct (crossover speed)" in labels
    toy = four.toy_crossover_v_inf.isel(body=0).values  # (target, periapsis)
    drawn = [np.asarray(line.get_xdata(), dtype=float) for ax in figure.axes for line in ax.get_lines()]
    assert any(np.array_equal(x, toy[:, p], equal_nan=True) for x in drawn for p in range(toy.shape[1])
               if np.isfinite(toy[:, p]).any())
