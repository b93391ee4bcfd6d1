"""Bad input and faults at the command line: one line naming file, key and value; exit 2; nothing lost."""

from __future__ import annotations

import os
import shutil
import subprocess

import pytest

from sweep.cli import main
from tests.conftest import SMALL_CONFIG


def _rejected(capsys, argv, pattern: str) -> str:
    """Run the CLI, expect exit 2 and one error line (plus at most a hint) matching ``pattern``."""
    import re

    assert main(argv) == 2
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.startswith("capsweep: error:")]
    assert len(lines) == 1 and "Traceback" not in err, err
    assert re.search(pattern, lines[0]), lines[0]
    return lines[0]


@pytest.fixture
def earlier_run(config_file, tmp_path):
    """An output folder holding a finished run; returns (config path, folder, every file's bytes)."""
    out = tmp_path / "out"
    path = config_file()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    return path, out, _snapshot(out)


def _snapshot(folder):
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


def _edit(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert old in text, old
    path.write_text(text.replace(old, new), encoding="utf-8")


# Each bad input: (replace this, with this, the message must match this). The earlier run's
# files must come through untouched.
BAD_INPUTS = [
    ("[spacecraft]", "[spacecraft\n", r"sweep\.toml: not valid TOML: .*\(at line \d+, column \d+\)"),
    ("arrival_mass = 1000.0", 'arrival_mass = "heavy"', r"spacecraft\.arrival_mass: Input should be a valid number"),
    ("[grid]", "[grid]\nperiapsis = [3.0]", r"unknown key 'grid\.periapsis'; did you mean 'periapsis_altitude'\?"),
    ("target_altitude = [300.0, 5000.0]", "target_altitude = []", r"grid\.target_altitude: an axis needs at least"),
    ("num = 12 }", "num = -3 }", r"grid\.v_inf\.num: Input should be greater than 0 \(got -3\)"),
    ("num = 12 }", "num = 1.5 }", r"grid\.v_inf\.num: Input should be a valid integer \(got 1\.5\)"),
    ("num = 12 }", "num = 100000000000 }", r"grid\.v_inf\.num: Input should be less than or equal to 10000000"),
    ("v_inf = { start = 0.5,", 'v_inf = { spacing = "log", start = 0.0,',
     r"grid\.v_inf: log spacing needs positive start and stop \(got 0\.0, 6\.0\)"),
    ("target_altitude = [300.0, 5000.0]", "target_altitude = [300.0, nan]",
     r"grid\.target_altitude\.1: Input should be a finite number \(got nan\)"),
    ("specific_impulse = 320.0", "specific_impulse = inf", r"spacecraft\.specific_impulse: Input should be a finite"),
    ("[spacecraft]", "[ranking]\ntie_tolerance = -1.0\n[spacecraft]",
     r"ranking\.tie_tolerance: Input should be greater than or equal to 0"),
    ("[spacecraft]", "[finite_burn]\npasses = 0\n[spacecraft]",
     r'finite_burn\.passes: should be "auto" or a whole number of passes from 1 to 64 \(got 0\)'),
    ("v_inf = { start = 0.5,", "v_inf = { start = -0.5,", r"grid\.v_inf: arrival speeds must be >= 0 km/s"),
    ("v_inf = { start = 0.5, stop = 6.0,", "v_inf = { start = 0.5, stop = 6000.0,",
     r"grid\.v_inf: arrival speeds must be at most 1000 km/s, .* \(got 6000\.0\)"),
    ("target_altitude = [300.0, 5000.0]", "target_altitude = [-10.0, 300.0]",
     r"grid\.target_altitude: altitudes must be >= 0 km \(above the mean surface\) \(got -10\.0\)"),
    ("target_altitude = [300.0, 5000.0]", "target_altitude = [300.0, 9e6]",
     r"grid\.target_altitude: altitudes must lie inside every body's sphere of influence \(largest: mars "
     r"[\d,]+ km altitude\) \(got 9000000\.0\)"),
    ("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]", "periapsis_altitude = [20.0, 20.0]",
     r"grid\.periapsis_altitude: duplicate value 20\.0"),
    ('"enceladus"]', '"ganymed"]', r"grid\.bodies\.2: unknown body 'ganymed'; did you mean 'ganymede'\?"),
    # a catalog body overridden with impossible constants
    ("max_time_to_orbit = 20.0", "max_time_to_orbit = 20.0\n[bodies.enceladus]\ngm = 4e7",
     r"\[bodies\.enceladus\] gm: a body must be lighter than its parent 'saturn' \(3\.7931\d+e\+07 km3 s-2\)"),
    ("max_time_to_orbit = 20.0", "max_time_to_orbit = 20.0\n[bodies.enceladus]\nsemi_major_axis = 1000.0",
     r"\[bodies\.enceladus\] semi_major_axis: the orbit must clear its parent 'saturn'.*\(got 1000\.0\)"),
    ("max_time_to_orbit = 20.0", "max_time_to_orbit = 20.0\n[bodies.enceladus]\ngm = -1.0",
     r"bodies\.enceladus\.gm: Input should be greater than 0 \(got -1\.0\)"),
    ("max_time_to_orbit = 20.0", 'max_time_to_orbit = 20.0\napoapsis_bound_of = "roche"',
     r"three_burn\.apoapsis_bound_of: Input should be 'smaller', 'hill' or 'sphere_of_influence' \(got 'roche'\)"),
]


@pytest.mark.parametrize(("old", "new", "pattern"), BAD_INPUTS, ids=[case[2][:40] for case in BAD_INPUTS])
def test_each_bad_input_is_one_line_exit_2_and_nothing_touched(earlier_run, capsys, old, new, pattern):
    path, out, before = earlier_run
    _edit(path, old, new)
    capsys.readouterr()
    line = _rejected(capsys, ["run", str(path), "--out", str(out)], pattern)
    assert line.startswith(f"capsweep: error: {path}: ")  # the file first
    assert _snapshot(out) == before


def test_missing_and_unreadable_config_files(tmp_path, capsys):
    _rejected(capsys, ["run", str(tmp_path / "absent.toml")], r"absent\.toml: config file not found")
    _rejected(capsys, ["check", str(tmp_path)], rf"{tmp_path}: cannot read config file: Is a directory")
    (tmp_path / "latin1.toml").write_bytes("name = 'caf\xe9'".encode("latin-1"))
    _rejected(capsys, ["check", str(tmp_path / "latin1.toml")], r"latin1\.toml: config file is not UTF-8 text")
    if os.geteuid() != 0:  # root reads a file whatever its mode
        locked = tmp_path / "locked.toml"
        locked.write_text(SMALL_CONFIG)
        locked.chmod(0)
        _rejected(capsys, ["check", str(locked)], r"locked\.toml: cannot read config file: Permission denied")
    assert not (tmp_path / "outputs").exists()


def test_a_grid_too_big_for_the_disk_is_refused_with_the_estimate(earlier_run, capsys, monkeypatch):
    path, out, before = earlier_run
    _edit(path, "num = 12 }", "num = 13 }")  # a changed config: not up to date
    real = shutil.disk_usage

    def tiny(folder):
        return real(folder)._replace(free=10_000)

    monkeypatch.setattr(shutil, "disk_usage", tiny)
    capsys.readouterr()
    _rejected(capsys, ["run", str(path), "--out", str(out)],
              rf"{path}: grid: the cube would take about [\d.]+ KiB uncompressed, but .* has 9\.8 KiB free; "
              r"shrink the grid, or pass --force to run anyway")
    assert _snapshot(out) == before
    # --force runs anyway (here the disk really has room)
    assert main(["run", str(path), "--out", str(out), "-q", "--force"]) == 0


def test_a_grid_too_big_for_memory_is_refused_with_the_estimate(config_file, tmp_path, capsys, monkeypatch):
    import sweep.pipeline

    monkeypatch.setattr(sweep.pipeline, "_available_memory", lambda: 1_000)
    path = config_file()
    _rejected(capsys, ["run", str(path), "--out", str(tmp_path / "out")],
              r"grid: the run would hold about [\d.]+ KiB of results in memory, but 1000 B is available")
    assert not (tmp_path / "out").exists()


def test_an_output_folder_that_cannot_be_written(config_file, tmp_path, capsys):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    _rejected(capsys, ["run", str(config_file()), "--out", str(blocker / "out")],
              r"a-file/out: output folder cannot be written: Not a directory \(choose another with --out\)")
    if os.geteuid() != 0:  # root writes whatever the mode
        locked = tmp_path / "locked"
        locked.mkdir(mode=0o500)
        _rejected(capsys, ["run", str(config_file()), "--out", str(locked)], r"Permission denied")


def test_a_write_that_fails_mid_stream_leaves_the_previous_run_intact(earlier_run, capsys, monkeypatch):
    # netCDF-C reports a full disk as a RuntimeError ("NetCDF: HDF error"): patched in on the
    # second chunk, with the disk made to look full.
    import sweep.cube.netcdf

    path, out, before = earlier_run
    _edit(path, "num = 12 }", "num = 13 }")
    real_chunks, calls = sweep.cube.netcdf._chunk_variables, []

    def failing(arrays):
        calls.append(1)
        if len(calls) == 2:
            raise RuntimeError("NetCDF: HDF error")
        return real_chunks(arrays)

    real_usage = shutil.disk_usage
    monkeypatch.setattr(sweep.cube.netcdf, "_chunk_variables", failing)
    monkeypatch.setattr(sweep.cube.netcdf.shutil, "disk_usage", lambda p: real_usage(p)._replace(free=1 << 20))
    capsys.readouterr()
    _rejected(capsys, ["run", str(path), "--out", str(out), "--force"],
              r"small-test\.nc: cannot write output: No space left on device \(1\.0 MiB free; netCDF: NetCDF: HDF "
              r"error\)")
    after = _snapshot(out)
    assert after.pop("capsweep.log") != before.pop("capsweep.log")  # the log tells what happened
    assert after == before  # cube, summary, tables and figures as they were
    assert not list(out.glob(".*.part"))


@pytest.fixture
def small_disk(tmp_path):
    """A real 3 MiB tmpfs (needs mount rights: skipped where there are none)."""
    mount = tmp_path / "disk"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=3m", "tmpfs", str(mount)], capture_output=True,
                          check=False)
    if done.returncode:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.decode().strip()}")
    try:
        yield mount
    finally:
        if subprocess.run(["umount", str(mount)], check=False).returncode:
            subprocess.run(["umount", "-l", str(mount)], check=False)  # detach even if a file is still open


def test_a_disk_that_really_fills_during_the_write(small_disk, config_file, capsys):
    # The first run fits; a second, larger one fills the disk while writing (forced past the
    # size check): exit 2, one line, the first cube intact and readable, no partial file left.
    import xarray as xr

    out = small_disk / "out"
    path = config_file()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    before = (out / "small-test.nc").read_bytes()
    _edit(path, "num = 12 }", "num = 900 }")  # about 5 MB of cube
    capsys.readouterr()
    line = _rejected(capsys, ["run", str(path), "--out", str(out), "--force"], r"cannot write output")
    assert "No space left on device" in line
    assert (out / "small-test.nc").read_bytes() == before
    with xr.open_dataset(out / "small-test.nc") as cube:
        assert cube.sizes["v_inf"] == 12
    assert not list(out.glob(".*.part"))


def test_an_absurd_grid_is_refused_before_anything_is_allocated(config_file, tmp_path, capsys):
    # 1.2e15 points (about 200 PB of cube): the estimate is exact integer arithmetic, not int64
    path = config_file(SMALL_CONFIG.replace("num = 12 }", "num = 10000000 }").replace(
        "target_altitude = [300.0, 5000.0]", "target_altitude = { start = 300.0, stop = 5000.0, num = 10000000 }"))
    _rejected(capsys, ["run", str(path), "--out", str(tmp_path / "out")],
              r"grid: the cube would take about [\d,.]+ TiB uncompressed, but .* free; shrink the grid")
    assert not (tmp_path / "out").exists()


def test_a_first_run_that_fails_leaves_no_file_at_the_final_path(config_file, tmp_path, capsys, monkeypatch):
    import sweep.cube.netcdf

    def failing(arrays):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(sweep.cube.netcdf, "_chunk_variables", failing)
    out = tmp_path / "out"
    _rejected(capsys, ["run", str(config_file()), "--out", str(out)], r"cannot write output: Input/output error")
    assert not (out / "small-test.nc").exists() and not list(out.glob(".*.part"))
    assert not (out / "summary.md").exists()
