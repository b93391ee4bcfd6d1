"""Disk, memory and address space are checked for every phase of a run before any work, and a killed
run's stale checkpoints are reclaimed (ours only)."""

from __future__ import annotations

import os
import re
import resource
import shutil
import subprocess
import sys

import numpy as np
import pytest

from sweep import parse_config
from sweep.cli import main
from sweep.pipeline import BASELINE_ADDRESS_SPACE, checkpoint_folder, estimate_needs, stale_checkpoints
from tests.test_evaluate_finite import FINITE_CONFIG


def _error(capsys) -> str:
    lines = capsys.readouterr().err.strip().splitlines()
    assert len(lines) == 1, lines
    return lines[0]


@pytest.fixture
def finite_file(tmp_path):
    path = tmp_path / "finite.toml"
    path.write_text(FINITE_CONFIG, encoding="utf-8")
    return path


def test_the_estimate_has_every_phase(finite_file):
    config = parse_config(FINITE_CONFIG, str(finite_file))
    needs = estimate_needs(config, workers=2)
    # finite arrays: (3 strategies x (3 burns x 6 per-burn arrays + 4) + 2 per-point) float64 or int8 per point
    points = int(np.prod(config.finite_shape))
    assert needs.checkpoints > 60 * points  # at least 8 bytes per per-burn value
    assert needs.maps >= needs.checkpoints  # the crossovers are mapped too, not checkpointed
    assert needs.cube > needs.maps  # the cube holds the finite arrays and the impulsive ones
    assert needs.memory == max(needs.evaluation, needs.report) and needs.report > 0


def test_checkpoints_count_in_the_disk_check(finite_file, tmp_path, capsys, monkeypatch):
    config = parse_config(FINITE_CONFIG, str(finite_file))
    needs = estimate_needs(config)
    real = shutil.disk_usage
    # room for the cube alone, not for the cube and the checkpoints
    monkeypatch.setattr(shutil, "disk_usage", lambda p: real(p)._replace(free=needs.cube + needs.checkpoints // 2))
    out = tmp_path / "out"
    assert main(["run", str(finite_file), "--out", str(out)]) == 2
    message = _error(capsys)
    assert re.search(r"grid: the outputs would take about [\d.]+ KiB \(the cube [\d.]+ KiB uncompressed, finite-burn "
                     r"checkpoints [\d.]+ KiB", message), message
    assert not out.exists()


@pytest.mark.slow  # about 5 s: a finite run
def test_a_killed_runs_stale_checkpoints_are_reclaimed_and_foreign_folders_kept(finite_file, tmp_path, capsys):
    config = parse_config(FINITE_CONFIG, str(finite_file))
    out = tmp_path / "out"
    out.mkdir()
    stale = out / f".{config.name}.0123456789abcdef.chunks"  # a killed run of other inputs
    stale.mkdir()
    (stale / "chunk-000000.npz").write_bytes(b"\0" * 4096)
    lookalike = out / f".{config.name}.not-a-key.chunks"  # not a name we give
    lookalike.mkdir()
    other_config = out / ".another-sweep.0123456789abcdef.chunks"  # another config's, in a shared folder
    other_config.mkdir()
    foreign = out / f".{config.name}.fedcba9876543210.chunks"  # same pattern, another user's
    foreign.mkdir()
    os.chown(foreign, 65534, 65534)
    link = out / f".{config.name}.aaaaaaaaaaaaaaaa.chunks"  # a link, never followed
    target = tmp_path / "victim"
    target.mkdir()
    (target / "keep").write_text("mine", encoding="utf-8")
    link.symlink_to(target)
    assert stale_checkpoints(config, out) == [stale]
    assert main(["run", str(finite_file), "--out", str(out), "-q", "--workers", "1"]) == 0
    assert not stale.exists()
    assert lookalike.is_dir() and other_config.is_dir() and foreign.is_dir() and link.is_symlink()
    assert (target / "keep").read_text(encoding="utf-8") == "mine"
    assert not checkpoint_folder(config, out).exists()  # this run's own went once its cube landed
    log = (out / "capsweep.log").read_text(encoding="utf-8")
    assert f"removing {stale} (4.0 KiB), checkpoints of a killed run" in log


def test_stale_checkpoints_count_as_free_space(finite_file, tmp_path, capsys, monkeypatch):
    config = parse_config(FINITE_CONFIG, str(finite_file))
    needs = estimate_needs(config)
    out = tmp_path / "out"
    stale = out / f".{config.name}.0123456789abcdef.chunks"
    stale.mkdir(parents=True)
    half = needs.checkpoints // 2
    (stale / "chunk-000000.npz").write_bytes(b"\0" * half)
    real = shutil.disk_usage
    monkeypatch.setattr(shutil, "disk_usage", lambda p: real(p)._replace(free=needs.cube + 1024))
    assert main(["run", str(finite_file), "--out", str(out)]) == 2  # short, even with the stale chunks
    assert "of stale checkpoints a run removes" in _error(capsys)
    # with room once the stale chunks go (the maps fit in /dev/shm here), the run goes ahead and removes them
    monkeypatch.setattr(shutil, "disk_usage", lambda p: real(p)._replace(free=needs.cube + 1024 + half + needs.maps))
    assert main(["run", str(finite_file), "--out", str(out), "-q", "--workers", "1"]) == 0
    assert not stale.exists()


def test_a_low_address_space_limit_is_refused_at_once(finite_file, tmp_path):
    # Under ulimit -v a few hundred MB, imports failed (exit 3) or spun at 100 % CPU for minutes.
    limit = 700 << 20
    out = tmp_path / "out"

    def limited():
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))

    done = subprocess.run([sys.executable, "-m", "sweep", "run", str(finite_file), "--out", str(out)],
                          preexec_fn=limited, capture_output=True, text=True, timeout=120,
                          env={**os.environ, "PYTHONPATH": os.getcwd()})
    assert done.returncode == 2, done.stderr
    assert re.fullmatch(rf"capsweep: error: {re.escape(str(finite_file))}: the address-space limit \(ulimit -v\) is "
                        r"700\.0 MiB, below the 1\.\d GiB this run needs \(1\.0 GiB for Python and its libraries plus "
                        r"[\d.]+ KiB of results\); raise the limit, shrink the grid, or pass --force to run anyway\n",
                        done.stderr), done.stderr
    assert not out.exists()
    assert BASELINE_ADDRESS_SPACE == 1 << 30


def _summary_peak(targets: int, folder) -> tuple[int, int]:
    """tracemalloc's peak while summarizing a one-body cube of ``targets`` target altitudes read from a file,
    and the bytes of its per-point variables."""
    import textwrap
    import tracemalloc

    import xarray as xr

    from sweep import run_to_file
    from sweep.report.summary import render_summary, summary_tables

    config = parse_config(textwrap.dedent(f"""
        # Test input of our own: one body, many targets, a fine periapsis axis.
        name = "report-memory-{targets}"
        [grid]
        bodies = ["mars"]
        v_inf = {{ start = 0.5, stop = 8.0, num = 400 }}
        target_altitude = {{ start = 300.0, stop = 20000.0, num = {targets} }}
        periapsis_altitude = {{ start = 200.0, stop = 20000.0, num = 200 }}
        [spacecraft]
        specific_impulse = 320.0
        arrival_mass = 1000.0
        """), "memory.toml")
    path = run_to_file(config, folder / f"memory-{targets}.nc", workers=1)
    with xr.open_dataset(path) as cube:
        per_point = sum(v.nbytes for v in cube.data_vars.values()
                        if "v_inf" in v.dims and "periapsis_altitude" in v.dims)
        tracemalloc.start()
        try:
            render_summary(cube, summary_tables(cube))
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
    return peak, per_point


@pytest.mark.slow  # about 10 s: two cubes of 40 and 160 MB written and summarized
def test_the_summary_reads_one_target_at_a_time(tmp_path, monkeypatch):
    # 5 and 20 targets (about 40 and 160 MB of per-point variables): the summary's peak follows one
    # target's slice (v_inf x periapsis) and the blocks of its reductions, not the cube; read whole,
    # it would grow fourfold. Blocks of 1 MB here, so that they apply at this size (64 MB in use).
    import sweep.report.selection

    monkeypatch.setattr(sweep.report.selection, "BLOCK_BYTES", 1 << 20)
    small, small_cube = _summary_peak(5, tmp_path)
    large, large_cube = _summary_peak(20, tmp_path)
    assert large_cube > 3.9 * small_cube
    assert large < 2 * small, f"peak {small / 1e6:.1f} MB, then {large / 1e6:.1f} MB"
    assert large < 0.25 * large_cube, f"peak {large / 1e6:.1f} MB of {large_cube / 1e6:.0f} MB"
