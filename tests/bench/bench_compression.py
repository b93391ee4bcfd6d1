"""Benchmark of cube compression: write time and file size for zlib levels, side by side.

Not collected by pytest. Run: python tests/bench/bench_compression.py [--speeds N]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sweep import parse_config, run, write_dataset  # noqa: E402

CONFIG = """
name = "bench-compression"
[grid]
bodies = ["mars", "venus", "moon", "ganymede"]
v_inf = {{ start = 0.5, stop = 8.0, num = {speeds} }}
target_altitude = {{ start = 200.0, stop = 20000.0, num = 20, spacing = "log" }}
periapsis_altitude = {{ start = 50.0, stop = 5000.0, num = 50, spacing = "log" }}
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
[three_burn]
max_time_to_orbit = 20.0
"""


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--speeds", type=int, default=1250, help="arrival speeds (4 x 20 x 50 points each)")
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args(argv)
    config = parse_config(CONFIG.format(speeds=args.speeds), "bench.toml")
    points = 4 * args.speeds * 20 * 50
    dataset = run(config, workers=2)
    print(f"cube of {points:,} points; best of {args.repeat} writes per level, levels interleaved")
    folder = tempfile.mkdtemp()
    times = {level: float("inf") for level in (0, 1, 4)}
    sizes = {}
    for _ in range(args.repeat):
        for level in times:
            path = os.path.join(folder, f"level{level}.nc")
            started = time.perf_counter()
            write_dataset(dataset, path, level)
            times[level] = min(times[level], time.perf_counter() - started)
            sizes[level] = os.path.getsize(path)
            os.remove(path)
    for level in times:
        print(f"zlib level {level}: {times[level]:.2f} s ({times[level] / times[0]:.1f}x none), "
              f"{sizes[level] / 1e6:,.0f} MB ({sizes[0] / sizes[level]:.1f}x smaller than none)")
    os.rmdir(folder)
    return 0


if __name__ == "__main__":
    sys.exit(main())
