"""Nightly operation: skip an up-to-date cube, --force, one writer per folder, a killed holder blocks nothing."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys

import pytest

from sweep.cli import main
from sweep.lock import LOCK_NAME, LockError, output_lock


def test_unchanged_inputs_skip_and_force_recomputes(config_file, small_config_text, tmp_path, capsys):
    out = tmp_path / "out"
    path = config_file()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    cube = out / "small-test.nc"
    first = cube.stat().st_mtime_ns
    capsys.readouterr()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    assert "up to date" in capsys.readouterr().out and cube.stat().st_mtime_ns == first
    assert main(["run", str(path), "--out", str(out), "-q", "--force"]) == 0
    assert cube.stat().st_mtime_ns != first
    # a changed config (even a comment: the hash is of the exact text) is not up to date
    path.write_text(small_config_text + "\n# edited\n", encoding="utf-8")
    capsys.readouterr()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    assert "up to date" not in capsys.readouterr().out
    assert not (out / LOCK_NAME).exists()  # released after the run


def test_a_live_holder_blocks_a_second_writer(config_file, tmp_path, capsys, lock_holder):
    out = tmp_path / "out"
    holder = lock_holder(out)  # another process holding the folder's lock
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 2
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.startswith("capsweep: error:")]
    assert len(lines) == 1 and "Traceback" not in err, err
    assert f"output folder is in use by capsweep pid {holder.pid} on {socket.gethostname()} since " in lines[0]
    assert f"(lock file {out / LOCK_NAME})" in lines[0]
    assert not (out / "small-test.nc").exists()
    holder.kill()  # the kernel drops a dead holder's lock: the next run goes ahead
    holder.wait()
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0
    assert (out / "small-test.nc").is_file() and not (out / LOCK_NAME).exists()


def test_a_lock_file_left_by_a_killed_holder_blocks_nothing(tmp_path, caplog, lock_holder):
    gone = lock_holder(tmp_path)
    gone.kill()  # SIGKILL: no cleanup, its lock file and note stay behind
    gone.wait()
    assert json.loads((tmp_path / LOCK_NAME).read_text())["pid"] == gone.pid
    with caplog.at_level("INFO", logger="sweep.lock"), output_lock(tmp_path) as lock:
        assert json.loads(lock.read_text())["pid"] == os.getpid()
    assert f"was left by pid {gone.pid} on {socket.gethostname()}" in caplog.text
    assert not (tmp_path / LOCK_NAME).exists()


def test_nested_lock_in_one_folder_is_refused(tmp_path):
    with output_lock(tmp_path):
        with pytest.raises(LockError, match=r"output folder is in use by capsweep pid \d+"):
            with output_lock(tmp_path):
                pass


def test_progress_lines_and_log_file_without_a_terminal(config_file, tmp_path, caplog):
    out = tmp_path / "out"
    with caplog.at_level("INFO", logger="sweep"):
        assert main(["run", str(config_file()), "--out", str(out)]) == 0
    assert any("sweep: 100% (" in r.getMessage() and "points/s" in r.getMessage() for r in caplog.records)
    log = (out / "capsweep.log").read_text()
    assert "sweep: 100% (" in log and "run of" in log


def test_ctrl_c_exits_cleanly_and_leaves_no_lock(config_file, tmp_path, capsys, monkeypatch):
    import sweep.cube.netcdf

    out = tmp_path / "out"
    path = config_file()
    assert main(["run", str(path), "--out", str(out), "-q"]) == 0
    earlier = (out / "small-test.nc").read_bytes()
    chunk_variables = sweep.cube.netcdf._chunk_variables
    written = []

    def interrupted_on_the_third_chunk(arrays):
        written.append(1)
        if len(written) == 3:
            raise KeyboardInterrupt
        return chunk_variables(arrays)

    monkeypatch.setattr(sweep.cube.netcdf, "_chunk_variables", interrupted_on_the_third_chunk)
    capsys.readouterr()
    assert main(["run", str(path), "--out", str(out), "--force"]) == 130
    assert "capsweep: interrupted; every output is whole, of this run or the one before" in capsys.readouterr().err
    assert len(written) == 3  # stopped mid-stream, with a partial temporary file open
    assert not (out / LOCK_NAME).exists() and not list(out.glob(".*.part"))
    assert (out / "small-test.nc").read_bytes() == earlier


def test_finite_burns_on_a_dask_cluster_equal_the_local_run():
    # Independent scheduler: a distributed.LocalCluster (threads, in this process).
    distributed = pytest.importorskip("distributed")
    from sweep import parse_config
    from sweep.engine.impulsive import evaluate
    from tests.test_evaluate import assert_same_arrays
    from tests.test_evaluate_finite import FINITE_CONFIG

    config = parse_config(FINITE_CONFIG)
    local = evaluate(config, workers=1)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        remote = evaluate(config, workers=1, scheduler=cluster.scheduler_address)
    assert_same_arrays(local, remote)


def test_unreachable_scheduler_is_a_clear_error(config_file, tmp_path, capsys):
    pytest.importorskip("distributed")
    from tests.test_evaluate_finite import FINITE_CONFIG

    code = main(["run", str(config_file(FINITE_CONFIG)), "--out", str(tmp_path / "o"), "-q",
                 "--scheduler", "tcp://127.0.0.1:9"])
    assert code == 2
    assert "cannot reach the Dask scheduler" in capsys.readouterr().err


RESUME = """
# Test input of our own: a finite sweep long enough (a few seconds) to kill in the middle.
name = "resume-test"
[grid]
bodies = ["mars", "moon"]
v_inf = { start = 0.5, stop = 6.0, num = 48 }
target_altitude = [400.0, 2000.0, 5000.0]
periapsis_altitude = [250.0, 1000.0, 3000.0]
thrust_to_weight = [0.1, 0.3, 1.0, 3.0]
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
"""


def test_resumed_chunks_give_the_same_arrays(tmp_path):
    # In process: a run that saved some chunks, then a run that loads them, equal a fresh run.
    import shutil

    from sweep import parse_config
    from sweep.engine.finite import evaluate_finite
    from sweep.engine.impulsive import plan_body
    from tests.test_evaluate import assert_same_arrays

    config = parse_config(RESUME)
    plans = [plan_body(body, config) for body in config.bodies]
    fresh = evaluate_finite(config, plans, 1, points_per_chunk=256)
    checkpoint = tmp_path / "chunks"
    evaluate_finite(config, plans, 1, points_per_chunk=256, checkpoint=checkpoint)
    saved = sorted(checkpoint.glob("chunk-*.npz"))
    assert len(saved) > 4
    for path in saved[::2]:  # pretend half of them never finished
        path.unlink()
    assert_same_arrays(fresh, evaluate_finite(config, plans, 2, points_per_chunk=256, checkpoint=checkpoint))
    shutil.rmtree(checkpoint)


@pytest.mark.slow  # about 9 s each: three full runs and three kills
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_kill_9_then_rerun_gives_the_uninterrupted_cube(tmp_path, seed):
    # Killed once a seeded random number of its finite-burn chunks are saved (so always mid-run),
    # then run again: the cube equals an uninterrupted run's bit for bit.
    import random
    import time

    from sweep import parse_config
    from sweep.engine.finite import finite_chunks
    from tests.conftest import cube_contents

    config = tmp_path / "resume.toml"
    config.write_text(RESUME, encoding="utf-8")
    parsed = parse_config(RESUME)
    total = len(finite_chunks(parsed))
    reference = tmp_path / "reference"
    assert main(["run", str(config), "--out", str(reference), "-q"]) == 0
    out = tmp_path / "killed"
    command = [sys.executable, "-m", "sweep", "run", str(config), "--out", str(out), "-q"]
    kill_after = random.Random(seed).randint(1, total - 1)
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    saved = 0
    while process.poll() is None and saved < kill_after:
        saved = len(list(out.glob(".resume-test.*.chunks/chunk-*.npz")))
        time.sleep(0.01)
    process.kill()  # SIGKILL: no cleanup at all
    process.wait()
    assert 0 < saved < total and not (out / "resume-test.nc").exists()  # killed mid-run
    assert main(["run", str(config), "--out", str(out), "-q"]) == 0  # the killed run's lock died with it; resumes
    assert cube_contents(reference / "resume-test.nc") == cube_contents(out / "resume-test.nc")
    assert not list(out.glob(".resume-test.*.chunks"))  # checkpoints go once the cube lands


def test_a_killed_runs_shared_memory_is_reclaimed_and_live_ones_kept(tmp_path):
    # kill -9 skips all cleanup: its memory-backed folder (capsweep-<pid>-*) would hold RAM until
    # reboot, so the next run removes the folders of processes that are gone.
    from sweep.engine.finite import _remove_stale_shared

    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()
    dead = tmp_path / f"capsweep-{gone.pid}-abc_0xyz"  # named as mkdtemp names them: 8 characters
    live = tmp_path / f"capsweep-{os.getpid()}-defghijk"
    other = tmp_path / "capsweep-notapid-ghi"
    for folder in (dead, live, other):
        folder.mkdir()
        (folder / "finite_delta_v.npy").write_bytes(b"0" * 100)
    _remove_stale_shared(str(tmp_path))
    assert not dead.exists() and live.exists() and other.exists()


def test_a_killed_runs_queued_chunks_are_skipped_by_its_workers():
    # A worker whose parent run was killed (it now has another parent) drains its queue without
    # computing; with its parent alive it computes.
    import numpy as np

    from sweep import parse_config
    from sweep.engine.finite import _BodyInputs, _Engine, _run_and_place, finite_chunks, finite_layout
    from sweep.engine.impulsive import plan_body
    from sweep.model.strategies import STRATEGIES
    from tests.test_evaluate_finite import FINITE_CONFIG

    config = parse_config(FINITE_CONFIG)
    plan = plan_body(config.bodies[0], config)
    body = _BodyInputs(config.bodies[0].gm, config.bodies[0].radius, config.bodies[0].sphere_of_influence,
                       plan.geometry.periapsis_radius, plan.geometry.target_radius,
                       np.asarray(plan.geometry.apoapsis_radius), plan.status)
    chunk = finite_chunks(config)[0]
    arguments = (body, config.v_inf[chunk.v_inf_start:chunk.v_inf_stop], config.thrust, _Engine.of(config),
                 tuple(STRATEGIES))

    def fresh():
        return {name: np.full(shape, -7.0).astype(dtype) for name, (shape, dtype) in finite_layout(config).items()}

    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()  # a run that no longer exists
    orphan, child = fresh(), fresh()
    _run_and_place(orphan, chunk, gone.pid, *arguments)
    assert (orphan["finite_status"] == -7).all()  # untouched
    _run_and_place(child, chunk, os.getppid(), *arguments)
    assert (child["finite_status"][:, 0, chunk.v_inf_start:chunk.v_inf_stop] != -7).all()
