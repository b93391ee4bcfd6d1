"""The output folder's lock: an OS lock that leftovers cannot block and that exactly one racer wins."""

from __future__ import annotations

import json
import multiprocessing
import os
import queue
import socket
import threading
from pathlib import Path

import pytest

from sweep.cli import main
from sweep.errors import SweepError
from sweep.lock import LOCK_NAME, LockError, output_lock

TRIALS = 10
CONTENDERS = 4


@pytest.mark.parametrize("left_behind", [
    b"",  # an empty file: a run killed between creating and writing its note (old lock) or by hand
    b"\x00\xff garbage {not json",  # anything at all
    b'{"pid": "12", "host": 7}',  # JSON, but not a note
    json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "started": "2026-12-01T03:00:00"}).encode(),
], ids=["empty", "garbage", "wrong-types", "own-pid-after-a-container-restart"])
def test_a_lock_file_left_behind_does_not_block_a_run(config_file, tmp_path, capsys, left_behind):
    out = tmp_path / "out"
    out.mkdir()
    (out / LOCK_NAME).write_bytes(left_behind)
    assert main(["run", str(config_file()), "--out", str(out), "-q"]) == 0, capsys.readouterr().err
    assert (out / "small-test.nc").is_file()
    assert not (out / LOCK_NAME).exists()  # not left as an obstacle


def test_the_holder_writes_its_note_into_the_lock_file(tmp_path):
    (tmp_path / LOCK_NAME).write_text("x" * 10_000)  # longer than any note: truncated, not overlaid
    with output_lock(tmp_path) as lock:
        note = json.loads(lock.read_text())
        assert note["pid"] == os.getpid() and note["host"] == socket.gethostname() and note["started"]
    assert not lock.exists()


def test_a_lock_file_that_is_a_symbolic_link_is_refused_not_followed(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    out = tmp_path / "out"
    out.mkdir()
    (out / LOCK_NAME).symlink_to(victim)
    refused = r"\.capsweep\.lock: cannot take the output folder's lock file: a symbolic link, not followed"
    with pytest.raises(SweepError, match=refused):
        with output_lock(out):
            pass
    assert victim.read_text() == "precious"


def test_a_held_lock_refuses_with_the_holders_pid_and_host(tmp_path, lock_holder):
    holder = lock_holder(tmp_path)
    with pytest.raises(LockError, match=rf"in use by capsweep pid {holder.pid} on {socket.gethostname()} since "):
        with output_lock(tmp_path):
            pass
    assert json.loads((tmp_path / LOCK_NAME).read_text())["pid"] == holder.pid  # the holder's note untouched


def _contend(folder: str, start, done, results) -> None:
    """One racer: at each trial, try the trial's lock together with the others; hold it until all have tried."""
    from sweep.lock import LockError, output_lock

    for trial in range(TRIALS):
        start.wait()
        try:
            with output_lock(Path(folder) / str(trial)):
                results.put((trial, "won"))
                done.wait()
        except LockError:
            results.put((trial, "lost"))
            done.wait()


def _tally(results, count: int) -> dict[int, list[str]]:
    outcomes: dict[int, list[str]] = {trial: [] for trial in range(TRIALS)}
    for _ in range(count):
        trial, outcome = results.get(timeout=60)
        outcomes[trial].append(outcome)
    return outcomes


@pytest.mark.parametrize("kind", ["processes", "threads"])
def test_racers_for_a_free_lock_exactly_one_wins_each_trial(tmp_path, kind):
    # Processes: fresh interpreters (spawn), no state shared through fork. Threads: each
    # output_lock makes its own filelock instance (no per-path singleton), and flock conflicts
    # between open files even within one process, so threads race like processes.
    if kind == "processes":
        context = multiprocessing.get_context("spawn")
        barrier, results, racer = context.Barrier, context.Queue(), context.Process
    else:
        barrier, results, racer = threading.Barrier, queue.Queue(), threading.Thread
    start, done = barrier(CONTENDERS, timeout=60), barrier(CONTENDERS, timeout=60)
    racers = [racer(target=_contend, args=(str(tmp_path), start, done, results)) for _ in range(CONTENDERS)]
    for each in racers:
        each.start()
    try:
        outcomes = _tally(results, TRIALS * CONTENDERS)
    finally:
        for each in racers:
            each.join(timeout=60)
    assert not any(each.is_alive() for each in racers)
    assert all(getattr(each, "exitcode", 0) == 0 for each in racers)
    for trial, seen in outcomes.items():
        assert sorted(seen) == ["lost"] * (CONTENDERS - 1) + ["won"], (trial, seen)
        assert not (tmp_path / str(trial) / LOCK_NAME).exists()
