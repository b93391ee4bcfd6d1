"""Benchmark of resuming a killed run: a finite-burn sweep killed at half done, then run again.

Not collected by pytest. Run it directly:

    python tests/bench/bench_resume.py               # about two minutes per full run here
    python tests/bench/bench_resume.py --speeds 28800 # about three and a half
    python tests/bench/bench_resume.py --speeds 960  # a quick run (fixed costs dominate: figures, start-up)

What a resumed run repeats, whatever its length, is the work after the chunks (the crossover
search, writing the cube, summary and figures), so the ratio falls towards 0.5 as runs grow.

In one run, with ``capsweep run`` as a child process each time (as cron would start it):

1. a full, uninterrupted run, timed;
2. a second run into another folder, killed with SIGKILL as soon as half of its finite-burn
   chunks are checkpointed;
3. the same command again, which resumes from the checkpoints, timed.

It prints the resumed run's time over the full run's (target: at most 0.6) and checks that the
resumed cube's variables equal the uninterrupted cube's byte for byte.
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import netCDF4
import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from sweep import parse_config  # noqa: E402
from sweep.engine.finite import finite_chunks  # noqa: E402

TARGET = 0.6  # resumed run / full run, at most

CONFIG = """\
name = "bench-resume"
[grid]
bodies = ["mars", "venus", "moon"]
v_inf = {{ start = 0.5, stop = 7.0, num = {speeds} }}
target_altitude = [400.0, 2000.0, 10000.0]
periapsis_altitude = [250.0, 600.0, 1500.0, 4000.0]
thrust_to_weight = [0.02, 0.03, 0.05, 0.08, 0.12]  # weak engines: long burns, costly to fly
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
[three_burn]
max_time_to_orbit = 20.0
"""


def command(config: Path, out: Path) -> list[str]:
    return [sys.executable, "-m", "sweep", "run", str(config), "--out", str(out), "-q", "--workers", "2"]


def timed_run(config: Path, out: Path) -> float:
    started = time.perf_counter()
    subprocess.run(command(config, out), check=True, cwd=ROOT, stdout=subprocess.DEVNULL)
    return time.perf_counter() - started


def contents(path: Path) -> dict[str, bytes]:
    with netCDF4.Dataset(path) as file:
        file.set_auto_maskandscale(False)
        return {name: (str(v[...].tolist()) if v.dtype == str else np.ascontiguousarray(v[...]).tobytes())
                for name, v in file.variables.items()}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--speeds", type=int, default=14400, help="arrival speeds (3 x 3 x 4 x 5 points each)")
    parser.add_argument("--tmp", default=None)
    options = parser.parse_args(argv)
    text = CONFIG.format(speeds=options.speeds)
    config = parse_config(text, "<bench>")
    total = len(finite_chunks(config))
    points = int(np.prod(config.finite_shape))
    folder = Path(tempfile.mkdtemp(prefix="capsweep-resume-", dir=options.tmp))
    path = folder / "resume.toml"
    path.write_text(text, encoding="utf-8")
    print(f"capsweep resume benchmark: {points:,} finite-burn points x 3 strategies in {total} chunks, "
          f"{os.cpu_count()} cpus")
    try:
        full = timed_run(path, folder / "full")
        print(f"full run: {full:.1f} s", flush=True)
        out = folder / "killed"
        started = time.perf_counter()
        process = subprocess.Popen(command(path, out), cwd=ROOT, stdout=subprocess.DEVNULL)
        done = 0
        while process.poll() is None:
            done = len(list(out.glob(".bench-resume.*.chunks/chunk-*.npz")))
            if done >= total / 2:
                process.send_signal(signal.SIGKILL)
                break
            time.sleep(0.05)
        process.wait()
        killed_at = time.perf_counter() - started
        if done < total / 2:
            raise SystemExit("the run ended before half of its chunks were saved: nothing to resume")
        print(f"killed (SIGKILL) after {killed_at:.1f} s with {done} of {total} chunks saved", flush=True)
        resumed = timed_run(path, out)
        log = (out / "capsweep.log").read_text(encoding="utf-8")  # both runs' lines, with times
        print("log of the killed and the resumed run:\n  " + log.strip().replace("\n", "\n  "))
        same = contents(folder / "full" / "bench-resume.nc") == contents(out / "bench-resume.nc")
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    ratio = resumed / full
    print(f"resumed run: {resumed:.1f} s; resumed / full: {ratio:.2f} (target <= {TARGET}): "
          f"{'PASS' if ratio <= TARGET else 'FAIL'}")
    print(f"resumed cube equals the uninterrupted one, every variable byte for byte: {'PASS' if same else 'FAIL'}")
    return 0 if ratio <= TARGET and same else 1


if __name__ == "__main__":
    sys.exit(main())
