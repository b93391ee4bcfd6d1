"""Benchmark of a streamed sweep at scale: points per second, peak memory, against a bare netCDF write.

Not collected by pytest. Run it directly:

    python tests/bench/bench_stream.py                  # 100 million points (a 17 GB cube)
    python tests/bench/bench_stream.py --points 1e7     # a quick run

Each repeat, in fresh child processes so that neither inherits the other's memory:

* the sweep: ``run_to_file`` (per-body plans, then every chunk evaluated on 2 threads and
  written by the one writer) of an impulsive grid, timed around the call; its peak resident
  set (``ru_maxrss``) is read at the end;
* a bare netCDF4 write of the same file: the same variables, dimensions and dtypes, created
  the same way and written in the same chunk slices from one preallocated buffer, with no
  evaluation at all: the I/O floor.

Sweep and bare write alternate, best of ``--repeat`` each, and the cube is deleted after each
step. Targets: peak resident memory under 1 GB, the sweep within 2x the bare write's time.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from bench_impulsive import BODIES, config_text  # the same grid template, with other axis sizes

ROOT = Path(__file__).resolve().parents[2]
TARGETS, PERIAPSES = 50, 500
RSS_TARGET = 1e9  # bytes
RATIO_TARGET = 2.0  # sweep time / bare write time, at most


# Child programs: read the config text on stdin, print one JSON line.
SWEEP = """
import json, resource, sys, time
from sweep import parse_config, run_to_file
config = parse_config(sys.stdin.read(), "<bench>")
started = time.perf_counter()
run_to_file(config, sys.argv[1], workers=2)
elapsed = time.perf_counter() - started
print(json.dumps({"seconds": elapsed, "maxrss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024}))
"""

BARE = """
import json, resource, sys, time
import netCDF4, numpy as np
from sweep import build_dataset, parse_config
from sweep.engine.impulsive import STREAM_CHUNK_POINTS, add_placeholders, prepare
from sweep.model.strategies import STRATEGIES
from sweep.model.variables import cube_variables
from sweep.engine.grid import chunks
config = parse_config(sys.stdin.read(), "<bench>")
dataset = build_dataset(config, add_placeholders(config, prepare(config, workers=2)[1]))
work = chunks(config.shape, STREAM_CHUNK_POINTS)
STREAMED = [v.name for v in cube_variables(STRATEGIES, config=config) if v.streamed]
streamed = set(STREAMED)
# one buffer per variable, the size of the largest chunk (body axis dropped)
step = work[0].v_inf_stop - work[0].v_inf_start
buffers = {}
for name in STREAMED:
    variable = dataset[name]
    shape = [step if dim == "v_inf" else size for dim, size in variable.sizes.items() if dim != "body"]
    buffers[name] = np.full(shape, 1.5 if variable.dtype.kind == "f" else 1, dtype=variable.dtype)
started = time.perf_counter()
with netCDF4.Dataset(sys.argv[1], "w", format="NETCDF4") as file:
    file.set_fill_off()
    for dim, size in dataset.sizes.items():
        file.createDimension(dim, size)
    created = {}
    for name, variable in dataset.variables.items():
        if variable.dtype == object:
            target = file.createVariable(name, str, variable.dims)
            target[:] = variable.values.astype(str)
            continue
        target = file.createVariable(name, variable.dtype, variable.dims, contiguous=True)
        target.set_auto_maskandscale(False)
        if name in streamed:
            created[name] = (target, variable.dims.index("body"))
        else:
            target[...] = variable.values
    for chunk in work:
        count = chunk.v_inf_stop - chunk.v_inf_start
        for name, (target, axis) in created.items():
            where = [slice(None)] * (len(target.dimensions))
            where[axis], where[axis + 1] = chunk.body, slice(chunk.v_inf_start, chunk.v_inf_stop)
            source = buffers[name][(slice(None),) * axis + (slice(0, count),)]
            target[tuple(where)] = source
elapsed = time.perf_counter() - started
print(json.dumps({"seconds": elapsed, "maxrss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024}))
"""


def child(program: str, text: str, path: Path) -> dict:
    done = subprocess.run([sys.executable, "-c", program, str(path)], input=text, capture_output=True, text=True,
                          cwd=ROOT, check=False)
    if done.returncode:
        raise SystemExit(f"child failed:\n{done.stderr}")
    result = json.loads(done.stdout.strip().splitlines()[-1])
    result["bytes"] = path.stat().st_size
    path.unlink()
    return result


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=float, default=1e8, help="grid points, at least (default 1e8)")
    parser.add_argument("--repeat", type=int, default=2, help="alternating repeats (best is reported)")
    parser.add_argument("--tmp", default=None, help="folder to create the temporary folder in (needs disk)")
    options = parser.parse_args(argv)
    text, speeds = config_text(options.points, TARGETS, PERIAPSES)
    points = speeds * len(BODIES) * TARGETS * PERIAPSES
    folder = Path(tempfile.mkdtemp(prefix="capsweep-bench-", dir=options.tmp))
    print(f"capsweep streamed-sweep benchmark: {points:,} points (4 bodies x {speeds} v_inf x {TARGETS} targets x "
          f"{PERIAPSES} periapses), {os.cpu_count()} cpus, files in {folder}")
    best = {"sweep": None, "bare": None}
    try:
        for repeat in range(options.repeat):
            for label, program in (("bare", BARE), ("sweep", SWEEP)):
                result = child(program, text, folder / f"{label}.nc")
                print(f"  repeat {repeat + 1} {label}: {result['seconds']:.1f} s, peak RSS "
                      f"{result['maxrss'] / 1e6:,.0f} MB, file {result['bytes'] / 1e9:.2f} GB", flush=True)
                if best[label] is None or result["seconds"] < best[label]["seconds"]:
                    best[label] = result
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    sweep, bare = best["sweep"], best["bare"]
    ratio = sweep["seconds"] / bare["seconds"]
    rss_ok, ratio_ok = sweep["maxrss"] < RSS_TARGET, ratio <= RATIO_TARGET
    print(f"sweep end to end (best of {options.repeat}): {sweep['seconds']:.1f} s, "
          f"{points / sweep['seconds'] / 1e6:.2f} M points/s, "
          f"{sweep['bytes'] / sweep['seconds'] / 1e6:,.0f} MB/s written")
    print(f"peak resident memory of the sweep: {sweep['maxrss'] / 1e6:,.0f} MB (target < {RSS_TARGET / 1e6:,.0f} MB): "
          f"{'PASS' if rss_ok else 'FAIL'}")
    print(f"bare netCDF4 write of the same file (best of {options.repeat}): {bare['seconds']:.1f} s, "
          f"{bare['bytes'] / bare['seconds'] / 1e6:,.0f} MB/s")
    print(f"sweep / bare write: {ratio:.2f}x (target <= {RATIO_TARGET}x): {'PASS' if ratio_ok else 'FAIL'}")
    return 0 if rss_ok and ratio_ok else 1


if __name__ == "__main__":
    sys.exit(main())
