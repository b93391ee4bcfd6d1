"""The command line end to end: files written, round trip, CF compliance, errors."""

from __future__ import annotations

import re

import numpy as np
import pytest
import xarray as xr

from sweep import __version__, open_cube, parse_config, run
from sweep.cli import main


def test_run_writes_cube_and_summary_that_round_trip(config_file, tmp_path, capsys):
    path = config_file()
    out = tmp_path / "out"
    assert main(["run", str(path), "--out", str(out), "--workers", "2"]) == 0
    printed = capsys.readouterr().out
    cube = out / "small-test.nc"
    assert f"cube: {cube}" in printed and "mars:" in printed and "verify with higher-fidelity" in printed
    for name in ("summary.md", "wins.csv", "crossover.csv", "shares.csv"):
        assert (out / name).stat().st_size > 0
    expected = run(parse_config(path.read_text(), str(path)), workers=1)
    with xr.open_dataset(cube) as back:
        # history carries the time of writing; everything else must survive the file exactly
        back.attrs.pop("history")
        expected.attrs.pop("history")
        xr.testing.assert_identical(expected, back)
        assert back.attrs["config_toml"] == path.read_text()
    assert not list(out.glob(".*.part"))  # the temporary file was renamed, not left behind


def test_cube_passes_cf_checker(config_file, tmp_path):
    # Independent: the IOOS compliance-checker (PyPI compliance-checker), CF-1.11 suite.
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    CheckSuite.load_all_available_checkers()
    report = tmp_path / "cf.txt"
    passed, errors = ComplianceChecker.run_checker(
        str(out / "small-test.nc"), ["cf:1.11"], 0, "normal", output_filename=str(report), output_format="text"
    )
    text = report.read_text()
    assert passed and not errors, text
    assert "All tests passed!" in text, text


def test_open_cube_indexes_by_name(config_file, tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    with open_cube(out / "small-test.nc") as cube:
        value = cube.delta_v.sel(body="mars", strategy="direct", v_inf=0.5, target_altitude=300.0)
        assert value.dims == ("periapsis_altitude",) and np.isfinite(value).all()


def test_check_prints_shape_and_size(config_file, capsys):
    assert main(["check", str(config_file())]) == 0
    printed = capsys.readouterr().out
    assert "(3, 12, 2, 4)" in printed and "points: 288" in printed and "KiB" in printed


def test_bodies_lists_sources(capsys):
    assert main(["bodies"]) == 0
    printed = capsys.readouterr().out
    assert "ganymede" in printed and "JPL" in printed and "sphere of influence" in printed


def test_summarize_rebuilds_from_the_cube_alone(config_file, tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    again = tmp_path / "again"
    assert main(["summarize", str(out / "small-test.nc"), "--out", str(again)]) == 0
    assert (again / "summary.md").read_text() == (out / "summary.md").read_text()
    assert (again / "wins.csv").read_text() == (out / "wins.csv").read_text()


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["run", "missing.toml"], r"capsweep: error: missing\.toml: config file not found"),
        (["check", "{bad}"],
         r"capsweep: error: .*bad\.toml: grid\.v_inf\.num: Input should be greater than 0 \(got 0\)"),
        (["summarize", "nowhere.nc"], r"capsweep: error: nowhere\.nc: cube not found"),
        (["summarize", "{notcube}"], r"capsweep: error: .*notcube\.nc: not a readable netCDF cube"),
    ],
)
def test_errors_exit_2_with_one_line(argv, message, config_file, small_config_text, tmp_path, capsys):
    bad = config_file(small_config_text.replace("num = 12 }", "num = 0 }"), "bad.toml")
    notcube = tmp_path / "notcube.nc"
    notcube.write_text("plain text")
    argv = [a.replace("{bad}", str(bad)).replace("{notcube}", str(notcube)) for a in argv]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert re.search(message, err), err


def test_failed_write_keeps_the_previous_cube(config_file, tmp_path, monkeypatch):
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    before = (out / "small-test.nc").read_bytes()

    def broken(self, *args, **kwargs):
        raise OSError(28, "No space left on device", str(args[0]) if args else None)

    monkeypatch.setattr(xr.Dataset, "to_netcdf", broken)
    assert main(["run", str(config_file()), "--out", str(out), "-q", "--force"]) == 2
    assert (out / "small-test.nc").read_bytes() == before
    assert not list(out.glob(".*.part"))


def test_version(capsys):
    with pytest.raises(SystemExit, match="0"):
        main(["--version"])
    assert __version__ in capsys.readouterr().out


def test_compressed_cube_reads_back_identical_and_smaller(small_config_text, tmp_path):
    import netCDF4

    from sweep import write_dataset

    # a cube large enough that compression beats the chunk bookkeeping (a 288-point cube does not)
    cube = run(parse_config(small_config_text.replace("num = 12", "num = 400")), workers=1)
    plain = write_dataset(cube, tmp_path / "plain.nc")
    packed = write_dataset(cube, tmp_path / "packed.nc", compression=1)
    assert packed.stat().st_size < plain.stat().st_size
    with xr.open_dataset(plain) as a, xr.open_dataset(packed) as b:
        xr.testing.assert_identical(a, b)
    with netCDF4.Dataset(packed) as raw:
        variable = raw["delta_v"]
        assert variable.filters()["zlib"] and variable.chunking()[variable.dimensions.index("body")] == 1
    with pytest.raises(ValueError, match="compression must be a zlib level 0-9, got 12"):
        write_dataset(cube, tmp_path / "bad.nc", compression=12)
