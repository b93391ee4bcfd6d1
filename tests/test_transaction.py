"""A run is one transaction: the manifest, report-only redo, stale files, all-or-nothing reports, SIGTERM, kill -9."""

from __future__ import annotations

import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from sweep import parse_config
from sweep.cli import main
from sweep.cube.conventions import fingerprint
from sweep.lock import LOCK_NAME
from sweep.manifest import MANIFEST_NAME, assess, file_digest, read_manifest
from sweep.pipeline import run_sweep
from tests.conftest import cube_contents
from tests.test_nightly import RESUME

REPO = Path(__file__).resolve().parents[1]


def _files(folder: Path) -> dict[str, str]:
    """Every file in ``folder`` (hidden ones too, the log aside) -> its SHA-256."""
    return {p.name: file_digest(p) for p in sorted(folder.iterdir()) if p.is_file() and p.name != "capsweep.log"}


def _consistent(folder: Path, config) -> bool:
    """Every file the folder's manifest lists is there as recorded, for this config."""
    return assess(folder, f"{config.name}.nc", fingerprint(config)).redo == "nothing"


def test_the_manifest_lists_every_output_and_a_rerun_skips(config_file, tmp_path):
    config = parse_config(config_file().read_text(), str(config_file()))
    out = tmp_path / "out"
    result = run_sweep(config, out, workers=1)
    assert result.action == "computed"
    manifest = read_manifest(out)
    written = {p.name for p in [result.cube, *result.summary, *result.figures]}
    assert manifest.complete and set(manifest.files) == written and len(written) == 1 + 4 + 6  # cube, md+3 csv, 6 png
    for name, (size, digest) in manifest.files.items():
        assert (out / name).stat().st_size == size and file_digest(out / name) == digest
    before = _files(out)
    again = run_sweep(config, out, workers=1)
    assert again.skipped and again.action == "skipped" and _files(out) == before


def test_a_missing_or_edited_report_file_is_redone_without_the_cube(config_file, tmp_path, capsys):
    path = config_file()
    out = tmp_path / "out"
    assert main(["run", str(path), "--out", str(out), "-q", "--workers", "1"]) == 0
    cube = out / "small-test.nc"
    stamp = cube.stat().st_mtime_ns
    reference = _files(out)
    (out / "summary.md").unlink()
    (out / "winner_moon.png").write_bytes(b"stale")
    capsys.readouterr()
    assert main(["run", str(path), "--out", str(out), "-q", "--workers", "1"]) == 0
    printed = capsys.readouterr().out
    assert "report redone: missing or changed: summary.md, winner_moon.png" in printed
    assert cube.stat().st_mtime_ns == stamp  # not recomputed
    assert _files(out) == reference  # the report is the same bytes again, manifest included
    assert "redoing the report only" in (out / "capsweep.log").read_text()


@pytest.mark.slow  # about 4-5 s each: a run, a damaged cube, a rerun
@pytest.mark.parametrize("damage", ["truncate", "flip"])
def test_a_damaged_cube_is_recomputed(config_file, tmp_path, damage):
    config = parse_config(config_file().read_text(), str(config_file()))
    out = tmp_path / "out"
    run_sweep(config, out, workers=1)
    cube = out / "small-test.nc"
    good = cube_contents(cube)
    data = bytearray(cube.read_bytes())
    if damage == "truncate":
        data = data[: len(data) // 2]
    else:
        data[len(data) // 2] ^= 0x01  # one bit in the data: the file still opens, the fingerprint still matches
    cube.write_bytes(bytes(data))
    result = run_sweep(config, out, workers=1)
    assert result.action == "computed" and "differs from the manifest" in result.reason
    assert cube_contents(cube) == good  # the same values again (the time stamp aside)


def test_a_new_config_removes_the_old_runs_files_only(config_file, small_config_text, tmp_path):
    out = tmp_path / "out"
    first = parse_config(small_config_text, "a.toml")
    run_sweep(first, out, workers=1)
    (out / "notes.txt").write_text("mine")  # not in any manifest: never touched
    fewer = small_config_text.replace('bodies = ["mars", "moon", "enceladus"]', 'bodies = ["mars", "moon"]')
    result = run_sweep(parse_config(fewer, "b.toml"), out, workers=1)
    assert {p.name for p in result.removed} == {"winner_enceladus.png", "saving_enceladus.png"}
    assert not list(out.glob("*enceladus*")) and (out / "notes.txt").read_text() == "mine"
    assert (out / "summary.md").is_file() and "Enceladus" not in (out / "summary.md").read_text()


def test_a_figure_that_cannot_be_written_leaves_the_folder_and_the_lock_as_they_were(small_config_text, tmp_path,
                                                                                      capsys):
    # A 300-character body name: its figure's file name is too long for the file system (255 bytes).
    name = "x" * 300
    text = small_config_text.replace('"enceladus"]', f'"{name}"]') + (
        f'\n[bodies.{name}]\ngm = 17.29\nmean_radius = 262.7\nsafe_periapsis_altitude = 30.0\n'
        'parent = "sun"\nsemi_major_axis = 353.3e6\n')  # test inputs, roughly Vesta-like (from memory)
    path = tmp_path / "long.toml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(path), "--out", str(out), "-q", "--workers", "1"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("capsweep: error: ") and "File name too long" in err and len(err.splitlines()) == 1
    # the cube landed (whole, recorded in the interim manifest); no figure, summary or table of this run
    assert sorted(p.name for p in out.iterdir()) == [MANIFEST_NAME, "capsweep.log", "small-test.nc"]
    assert not read_manifest(out).complete
    assert main(["run", str(path), "--out", str(out), "-q", "--workers", "1"]) == 2  # still not "up to date"
    assert not (out / LOCK_NAME).exists()


def test_a_write_error_mid_run_is_exit_2_and_releases_the_lock(config_file, tmp_path, monkeypatch, capsys):
    # As an output folder made read-only after the cube landed (root ignores modes: the error is injected).
    import sweep.pipeline

    def refuse(folder, manifest):
        raise PermissionError(13, "Permission denied", str(folder / MANIFEST_NAME))

    monkeypatch.setattr(sweep.pipeline, "write_manifest", refuse)
    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q", "--workers", "1"]) == 2
    assert f"{out / MANIFEST_NAME}: cannot write output: Permission denied" in capsys.readouterr().err
    assert not (out / LOCK_NAME).exists()


@pytest.mark.slow  # about 7 s: a run, then a failing summarize
def test_summarize_renders_everything_before_moving_anything(config_file, tmp_path, monkeypatch, capsys):
    import sweep.pipeline

    out = tmp_path / "out"
    assert main(["run", str(config_file()), "--out", str(out), "-q", "--workers", "1"]) == 0
    other = tmp_path / "other"
    other.mkdir()
    (other / "summary.md").write_text("earlier")

    def fail(*args, **kwargs):
        raise OSError(28, "No space left on device", str(other / "shares.csv"))

    monkeypatch.setattr(sweep.pipeline, "write_summary", fail)  # the figures are drawn, then the summary fails
    assert main(["summarize", str(out / "small-test.nc"), "--out", str(other)]) == 2
    assert "No space left on device" in capsys.readouterr().err
    assert sorted(p.name for p in other.iterdir()) == ["summary.md"] and (other / "summary.md").read_text() == "earlier"


@pytest.mark.parametrize("command", ["summarize", "plot", "compare"])
@pytest.mark.parametrize("damage", ["truncate", "header"])
def test_damaged_cubes_are_exit_2_naming_the_file(small_cube, tmp_path, capsys, command, damage):
    from sweep.cube.netcdf import write_dataset

    _, dataset = small_cube
    good = Path(write_dataset(dataset, tmp_path / "good.nc"))
    data = bytearray(good.read_bytes())
    bad = tmp_path / "bad.nc"
    if damage == "truncate":
        bad.write_bytes(bytes(data[: len(data) * 2 // 3]))
    else:
        data[8:40] = bytes(32)  # the HDF5 superblock's addresses
        bad.write_bytes(bytes(data))
    args = {"summarize": ["summarize", str(bad), "--out", str(tmp_path / "o")],
            "plot": ["plot", str(bad), "--out", str(tmp_path / "o")],
            "compare": ["compare", str(good), str(bad)]}[command]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"capsweep: error: {bad}") or f"or {bad}:" in err, err
    assert len(err.splitlines()) == 1
    assert not (tmp_path / "o").exists() or not any((tmp_path / "o").iterdir())


def _children(pid: int) -> set[int]:
    """Processes whose parent is ``pid``, read from /proc."""
    found = set()
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                found.add(int(entry.name))
    return found


def _running(pid: int) -> bool:
    try:
        return (Path("/proc") / str(pid) / "stat").read_text().rsplit(")", 1)[1].split()[0] not in "ZX"
    except OSError:
        return False


def _wait_for(condition, limit: float = 120.0) -> bool:
    """Poll ``condition`` until it holds; the limit only guards against a hang."""
    deadline = time.monotonic() + limit
    while not condition():
        if time.monotonic() > deadline:
            return False
        time.sleep(0.05)
    return True


@pytest.mark.slow  # about 11 s: a finite-burn run in a subprocess, stopped by SIGTERM
@pytest.mark.slow  # a finite sweep run twice (once to the end, once terminated)
def test_sigterm_is_handled_like_ctrl_c(tmp_path):
    config = tmp_path / "resume.toml"
    config.write_text(RESUME, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(config), "--out", str(out), "-q", "--workers", "2"]) == 0
    cube = out / "resume-test.nc"
    earlier = file_digest(cube)
    log = out / "capsweep.log"
    log.unlink()
    command = [sys.executable, "-m", "sweep", "run", str(config), "--out", str(out), "--force", "--workers", "2"]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=REPO,
                               env={**os.environ, "PYTHONPATH": str(REPO)})
    try:
        assert _wait_for(lambda: log.is_file() and "finite burns:" in log.read_text() and "%" in log.read_text())
        workers = _children(process.pid)
        process.send_signal(signal.SIGTERM)
        _, err = process.communicate(timeout=120)
    finally:
        process.kill()
    assert process.returncode == 143
    assert [line for line in err.splitlines() if line.startswith("capsweep: terminated (SIGTERM);")], err
    assert "Traceback" not in err
    assert "run stopped: terminated (SIGTERM)" in log.read_text()
    assert not (out / LOCK_NAME).exists()
    assert file_digest(cube) == earlier
    assert workers  # loky's worker processes were running
    assert _wait_for(lambda: not any(_running(pid) for pid in workers), limit=30), workers


@pytest.mark.slow  # about 6 s each: three runs killed at random moments after the cube landed, each run again
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_kill_9_after_the_cube_lands_then_rerun_completes_the_report(config_file, tmp_path, seed):
    path = config_file()
    config = parse_config(path.read_text(), str(path))
    out = tmp_path / "out"
    cube = out / "small-test.nc"
    command = [sys.executable, "-m", "sweep", "run", str(path), "--out", str(out), "-q", "--workers", "2"]
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=REPO,
                               env={**os.environ, "PYTHONPATH": str(REPO)})
    try:
        assert _wait_for(cube.is_file)
        time.sleep(random.Random(seed).uniform(0.0, 1.5))
    finally:
        process.kill()  # SIGKILL: no cleanup at all
        process.wait()
    assert main(["run", str(path), "--out", str(out), "-q", "--workers", "1"]) == 0
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    expected = {"summary.md", "wins.csv", "crossover.csv", "shares.csv", "winner_mars.png", "saving_enceladus.png",
                "small-test.nc"}
    assert manifest["complete"] and expected <= set(manifest["files"])
    assert _consistent(out, config)
    assert not list(out.glob(".capsweep-report-*"))  # a killed run's staging folder is removed by the next
    shutil.rmtree(out)


def test_a_log_file_that_cannot_be_opened_is_exit_2_and_releases_the_lock(config_file, tmp_path, monkeypatch, capsys):
    # The folder turned read-only between the write check and the log file (root ignores modes: injected).
    import sweep.pipeline

    out = tmp_path / "out"

    def refuse(path, *args, **kwargs):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(sweep.pipeline, "open_log", refuse)
    assert main(["run", str(config_file()), "--out", str(out), "-q", "--workers", "1"]) == 2
    err = capsys.readouterr().err
    assert err == f"capsweep: error: {out / 'capsweep.log'}: cannot write output: Permission denied\n"
    assert not (out / LOCK_NAME).exists() and not (out / "small-test.nc").exists()


def test_a_defect_in_the_report_is_not_called_a_damaged_cube(small_cube, tmp_path, capsys, monkeypatch):
    # A ValueError on a cube whose structure is a cube's is capsweep's fault: exit 3, not 2.
    import sweep.pipeline
    from sweep.cube.netcdf import write_dataset

    _, dataset = small_cube
    good = Path(write_dataset(dataset, tmp_path / "good.nc"))

    def defect(*args, **kwargs):
        raise ValueError("cannot specify both keyword and positional arguments to .isel")

    monkeypatch.setattr(sweep.pipeline, "write_summary", defect)
    assert main(["summarize", str(good), "--out", str(tmp_path / "o")]) == 3
    assert "internal error: ValueError" in capsys.readouterr().err


def test_a_cube_without_a_coordinate_is_damaged(small_cube, tmp_path, capsys):
    from sweep.cube.netcdf import write_dataset

    _, dataset = small_cube
    bad = Path(write_dataset(dataset.drop_vars("v_inf"), tmp_path / "bad.nc"))
    assert main(["summarize", str(bad), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"capsweep: error: {bad}: damaged or not a capsweep cube (coordinates missing: v_inf)"), err
