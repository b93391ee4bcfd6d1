"""Benchmark: what the up-to-date check costs, hashing an output against reading it, side by side.

Run on purpose (not collected by pytest):

    .venv/bin/python tests/bench/bench_manifest.py               # a 1 GiB file, best of 3
    .venv/bin/python tests/bench/bench_manifest.py --mib 256     # quick look

Writes a file of ``--mib`` MiB of seeded random bytes in a temporary folder, reads it once to
warm the page cache, then times, alternating, ``sweep.manifest.file_digest`` (SHA-256, the
manifest's check) and a bare read of the same file in 1 MiB blocks; prints GB/s of each and
their ratio. A cold cache (a cube just written by another process, or evicted) reads at disk
speed instead: the ratio then falls towards 1.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sweep.manifest import file_digest  # noqa: E402


def _bare_read(path: Path) -> int:
    total = 0
    with open(path, "rb") as stream:
        while block := stream.read(1 << 20):
            total += len(block)
    return total


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mib", type=int, default=1024, help="file size, MiB (default 1024)")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--tmp", default=None, help="folder to create the temporary folder in")
    args = parser.parse_args()
    rng = np.random.default_rng(20261203)
    with tempfile.TemporaryDirectory(dir=args.tmp) as folder:
        path = Path(folder) / "data.bin"
        with open(path, "wb") as stream:
            for _ in range(args.mib):
                stream.write(rng.bytes(1 << 20))
        size = path.stat().st_size
        _bare_read(path)  # warm the page cache
        times = {"sha256": [], "read": []}
        for _ in range(args.repeat):
            for name, action in (("sha256", lambda: file_digest(path)), ("read", lambda: _bare_read(path))):
                started = time.perf_counter()
                action()
                times[name].append(time.perf_counter() - started)
    best = {name: min(values) for name, values in times.items()}
    print(f"capsweep manifest benchmark: {size / 2**30:.2f} GiB file, page cache warm, best of {args.repeat}")
    for name in ("sha256", "read"):
        runs = ", ".join(f"{t:.2f}" for t in times[name])
        print(f"  {name:6s}: {best[name]:.2f} s, {size / best[name] / 1e9:.2f} GB/s (runs: {runs} s)")
    print(f"  sha256 / bare read: {best['sha256'] / best['read']:.1f}x the time")
    return 0


if __name__ == "__main__":
    sys.exit(main())
