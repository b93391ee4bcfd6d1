"""Benchmark of command-line start-up: ``--help`` and ``--version`` against a bare interpreter.

Not collected by pytest. Run: python tests/bench/bench_startup.py [--repeat N]

Each repetition runs ``python -c pass``, ``python -m sweep --help`` and ``python -m sweep
--version`` one after the other (the order rotating), so the three share the machine's noise;
the medians and their ratios to the bare interpreter are printed. Target: each ratio <= 3.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
TARGET = 3.0
COMMANDS = {
    "python -c pass": ["-c", "pass"],
    "python -m sweep --help": ["-m", "sweep", "--help"],
    "python -m sweep --version": ["-m", "sweep", "--version"],
}


def _time(arguments: list[str], environment: dict[str, str]) -> float:
    started = time.perf_counter()
    subprocess.run([sys.executable, *arguments], env=environment, check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - started


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=21, help="repetitions of each command (default 21)")
    args = parser.parse_args(argv)
    # This checkout's sweep, whatever is installed.
    environment = {**os.environ, "PYTHONPATH": os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")]))}
    names = list(COMMANDS)
    for name in names:  # warm the page cache and the bytecode caches; not counted
        _time(COMMANDS[name], environment)
    times: dict[str, list[float]] = {name: [] for name in names}
    for repetition in range(args.repeat):
        shift = repetition % len(names)
        for name in names[shift:] + names[:shift]:
            times[name].append(_time(COMMANDS[name], environment))
    bare = statistics.median(times[names[0]])
    print(f"{sys.executable}, {args.repeat} repetitions each, alternating")
    print(f"{'command':<28} {'median ms':>10} {'min ms':>8} {'ratio':>6}")
    worst = 0.0
    for name in names:
        median = statistics.median(times[name])
        worst = max(worst, median / bare)
        print(f"{name:<28} {median * 1e3:>10.1f} {min(times[name]) * 1e3:>8.1f} {median / bare:>6.2f}")
    verdict = "met" if worst <= TARGET else "NOT met"
    print(f"target: --help and --version within {TARGET:g}x a bare interpreter (median ratio); {verdict} "
          f"(worst {worst:.2f}x)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
