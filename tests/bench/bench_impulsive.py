"""Benchmark of the impulsive sweep: vectorized evaluation, end to end, per-point loop, bare write.

Not collected by pytest (``norecursedirs`` in pyproject.toml). Run it directly:

    python tests/bench/bench_impulsive.py                 # 10 million points
    python tests/bench/bench_impulsive.py --points 1e6    # a quick run

In one run it times

* ``evaluate`` alone on 1 and on 2 worker threads (best of ``--repeat``);
* a plain per-point Python loop (``math`` module) over a seeded random sample of the same
  grid points, checked against the vectorized arrays before its speed is reported;
* end to end: ``evaluate`` + ``build_dataset`` + ``write_dataset`` to a netCDF4 file;
* a bare netCDF4 write (``netCDF4.Dataset``, no xarray, no compression) of the same arrays;

and prints points per second, the ratios and PASS/FAIL against the targets: evaluation at
least 100x the loop, end to end at least half the speed of the bare write. Files go to a
temporary folder that is deleted at the end. The exit status is 0 only if the loop agrees with
the vectorized arrays and both targets are met (evaluation on 1 worker against the
single-threaded loop).
"""

from __future__ import annotations

import argparse
import gc
import math
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

import netCDF4
import numpy as np

from sweep.config import parse_config
from sweep.cube.conventions import build_dataset
from sweep.cube.netcdf import write_dataset
from sweep.engine.impulsive import evaluate, plan_body
from sweep.model.strategies import NO_STRATEGY
from sweep.physics.rocket import STANDARD_GRAVITY

BODIES = ("mars", "venus", "moon", "jupiter")
TARGETS = 50
PERIAPSES = 100
EVAL_TARGET = 100.0  # evaluation at least this many times the loop's points per second
E2E_TARGET = 0.5  # end to end at least this fraction of the bare write's points per second

CONFIG = """\
name = "bench"
[grid]
bodies = [{bodies}]
v_inf = {{ start = 0.2, stop = 9.0, num = {speeds} }}
target_altitude = {{ start = 200, stop = 20000, num = {targets}, spacing = "log" }}
periapsis_altitude = {{ start = 50, stop = 5000, num = {periapses}, spacing = "log" }}
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
"""


# --------------------------------------------------------------------------------------
# The per-point loop: plain Python floats and the math module, one grid point per call.
# --------------------------------------------------------------------------------------

def capture_point(gm, speed, target_radius, periapsis_radius, apoapsis_radius, feasible,
                  exhaust_speed, arrival_mass):
    """
    Everything the vectorized kernel produces for one grid point (SI): the burns of the
    three strategies, their totals and propellant, the best feasible strategy and the
    delta-v and propellant saved over direct.

    ``apoapsis_radius`` is the three-burn intermediate apoapsis chosen for this
    (body, target, periapsis): for fairness the loop receives it precomputed, as the
    vectorized code computes it once per (body, target, periapsis) and never per arrival
    speed, instead of re-optimizing it at every point. ``feasible`` likewise holds the
    precomputed per-(strategy, body, target, periapsis) status == ok flags.
    """
    sqrt = math.sqrt
    v2 = speed * speed
    # direct: one burn at the target radius, hyperbola to circle
    d1 = sqrt(v2 + 2.0 * gm / target_radius) - sqrt(gm / target_radius)
    # two_burn: capture at periapsis into the ellipse (r_p, r_t), circularize at r_t
    t1 = sqrt(v2 + 2.0 * gm / periapsis_radius) - sqrt(
        2.0 * gm * target_radius / (periapsis_radius * (periapsis_radius + target_radius)))
    t2 = abs(sqrt(gm / target_radius) - sqrt(
        2.0 * gm * periapsis_radius / (target_radius * (target_radius + periapsis_radius))))
    # three_burn: capture into (r_p, r_a), raise periapsis to r_t at r_a, lower r_a to r_t
    h1 = sqrt(v2 + 2.0 * gm / periapsis_radius) - sqrt(
        2.0 * gm * apoapsis_radius / (periapsis_radius * (periapsis_radius + apoapsis_radius)))
    h2 = abs(sqrt(2.0 * gm * target_radius / (apoapsis_radius * (apoapsis_radius + target_radius)))
             - sqrt(2.0 * gm * periapsis_radius / (apoapsis_radius * (apoapsis_radius + periapsis_radius))))
    h3 = abs(sqrt(2.0 * gm * apoapsis_radius / (target_radius * (target_radius + apoapsis_radius)))
             - sqrt(gm / target_radius))
    nan = math.nan
    burns = ((d1,), (t1, t2), (h1, h2, h3))
    totals = [d1, t1 + t2, h1 + h2 + h3]
    propellant = [0.0, 0.0, 0.0]
    best, best_total, best_propellant = NO_STRATEGY, math.inf, nan
    for index in range(3):
        if feasible[index]:
            mass = -arrival_mass * math.expm1(totals[index] / -exhaust_speed)
            propellant[index] = mass
            if totals[index] < best_total:
                best, best_total, best_propellant = index, totals[index], mass
        else:
            totals[index] = nan
            propellant[index] = nan
    if best == NO_STRATEGY:
        best_total = nan
    return burns, totals, propellant, best, totals[0] - best_total, propellant[0] - best_propellant


def loop_inputs(config, sample):
    """Per-point argument tuples (plain floats) for the sampled flat indices of the grid."""
    shape = config.shape
    b_idx, v_idx, t_idx, p_idx = np.unravel_index(sample, shape)
    exhaust_speed = config.specific_impulse * STANDARD_GRAVITY
    per_body = []
    for body in config.bodies:
        plan = plan_body(body, config)
        per_body.append((
            body.gm,
            np.broadcast_to(plan.geometry.target_radius, plan.status.shape[1:]).tolist(),
            np.broadcast_to(plan.geometry.periapsis_radius, plan.status.shape[1:]).tolist(),
            plan.geometry.apoapsis_radius.tolist(),
            (plan.status == 0).transpose(1, 2, 0).tolist(),
        ))
    speeds = (config.v_inf * 1.0e3).tolist()
    args = []
    for b, v, t, p in zip(b_idx.tolist(), v_idx.tolist(), t_idx.tolist(), p_idx.tolist(), strict=True):
        gm, target, periapsis, apoapsis, feasible = per_body[b]
        args.append((gm, speeds[v], target[t][p], periapsis[t][p], apoapsis[t][p], feasible[t][p],
                     exhaust_speed, config.arrival_mass))
    return args


def run_loop(args):
    results = []
    append = results.append
    for a in args:
        append(capture_point(*a))
    return results


def check_loop(results, arrays, config, sample):
    """Largest differences between the loop's and the vectorized values on the sample."""
    index = np.unravel_index(sample, config.shape)
    totals = np.array([r[1] for r in results]).T  # (strategy, point)
    propellant = np.array([r[2] for r in results]).T
    best = np.array([r[3] for r in results])
    saving = np.array([r[4] for r in results])
    reference = {
        "delta_v": (totals, arrays["delta_v"][(slice(None), *index)]),
        "propellant_mass": (propellant, arrays["propellant_mass"][(slice(None), *index)]),
        "saving_over_direct": (saving, arrays["saving_over_direct"][index]),
    }
    report = {}
    for name, (loop, vector) in reference.items():
        same_nan = bool(np.array_equal(np.isnan(loop), np.isnan(vector)))
        both = ~np.isnan(loop) & ~np.isnan(vector)
        diff = float(np.max(np.abs(loop[both] - vector[both]), initial=0.0))
        report[name] = (same_nan, diff, int(both.sum()))
    burn_vector = arrays["burn_delta_v"][(slice(None), slice(None), *index)]
    burn_diff = 0.0
    for s in range(3):
        for k in range(s + 1):
            loop = np.array([r[0][s][k] for r in results])
            vector = burn_vector[s, k]
            ok = arrays["status"][(s, *index)] == 0
            burn_diff = max(burn_diff, float(np.max(np.abs(loop[ok] - vector[ok]), initial=0.0)))
    report["burn_delta_v"] = (True, burn_diff, None)
    best_match = int((best == arrays["best_strategy"][index]).sum())
    return report, best_match


# --------------------------------------------------------------------------------------
# The bare netCDF4 write baseline.
# --------------------------------------------------------------------------------------

def bare_write(dataset, path):
    """Write the Dataset's numeric arrays with netCDF4 alone: no attributes, no compression."""
    with netCDF4.Dataset(path, "w", format="NETCDF4") as nc:
        for dim, size in dataset.sizes.items():
            nc.createDimension(dim, size)
        for name, variable in {**dataset.coords, **dataset.data_vars}.items():
            if variable.dtype.kind not in "fiu":
                continue  # the two small string label variables
            target = nc.createVariable(name, variable.dtype, variable.dims)
            target[...] = variable.values


def bare_bytes(dataset):
    return sum(v.nbytes for v in {**dataset.coords, **dataset.data_vars}.values() if v.dtype.kind in "fiu")


# --------------------------------------------------------------------------------------

def best_of(repeat, func):
    times = []
    result = None
    for _ in range(repeat):
        result = None
        gc.collect()
        start = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - start)
    return min(times), times, result


def config_text(points: float, targets: int = TARGETS, periapses: int = PERIAPSES) -> tuple[str, int]:
    """The benchmark grid with at least ``points`` points (whole arrival speeds): TOML text, speed count."""
    speeds = max(1, math.ceil(points / (len(BODIES) * targets * periapses)))
    return CONFIG.format(bodies=", ".join(f'"{b}"' for b in BODIES), speeds=speeds, targets=targets,
                         periapses=periapses), speeds


def verdict(ok):
    return "PASS" if ok else "FAIL"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=float, default=10e6,
                        help="grid points, at least (default 1e7); rounded up to whole arrival speeds")
    parser.add_argument("--sample", type=int, default=200_000, help="points through the Python loop")
    parser.add_argument("--repeat", type=int, default=3, help="repeats of evaluate (best is reported)")
    parser.add_argument("--repeat-write", type=int, default=3, help="repeats of end to end and bare write")
    parser.add_argument("--seed", type=int, default=20240611)
    parser.add_argument("--tmp", default=None, help="folder to create the temporary folder in")
    options = parser.parse_args(argv)

    text, _ = config_text(options.points)
    config = parse_config(text, "<bench>")
    points = int(np.prod(config.shape))
    print(f"capsweep impulsive benchmark: python {sys.version.split()[0]}, numpy {np.__version__}, "
          f"netCDF4 {netCDF4.__version__} (lib {netCDF4.__netcdf4libversion__}), {os.cpu_count()} cpus")
    print(f"grid {config.shape} (body, v_inf, target, periapsis) = {points:,} points")

    # ---- evaluation alone, 1 and 2 threads, interleaved so drift hits both alike --------
    evaluate(config, workers=1)  # warm-up: imports, page-faulting code, first allocations
    gc.collect()
    eval_times = {1: [], 2: []}
    arrays = None
    for _ in range(options.repeat):
        for workers in (1, 2):
            arrays = None
            gc.collect()
            start = time.perf_counter()
            arrays = evaluate(config, workers=workers)
            eval_times[workers].append(time.perf_counter() - start)
    eval_best = {w: min(t) for w, t in eval_times.items()}
    # the serial per-body part of evaluate (geometry, chosen apoapsis, status), for context
    plan_time, _, _ = best_of(options.repeat, lambda: [plan_body(body, config) for body in config.bodies])
    rate = {w: points / t for w, t in eval_best.items()}
    array_bytes = sum(v.nbytes for v in arrays.values())

    # ---- the per-point loop on a seeded random sample ----------------------------------
    rng = np.random.default_rng(options.seed)
    sample_size = min(options.sample, points)
    sample = np.sort(rng.choice(points, size=sample_size, replace=False))
    args = loop_inputs(config, sample)
    loop_time, loop_times, results = best_of(options.repeat, lambda: run_loop(args))
    loop_rate = sample_size / loop_time
    report, best_match = check_loop(results, arrays, config, sample)
    del results
    loop_ok = all(same for same, _, _ in report.values()) and report["delta_v"][1] < 1e-6 \
        and best_match == sample_size

    # ---- end to end and bare write, interleaved ----------------------------------------
    parent = options.tmp or tempfile.gettempdir()
    folder = Path(tempfile.mkdtemp(prefix="capsweep-bench-", dir=parent))
    e2e_parts = []  # (evaluate, build, write, total) per repeat
    bare_times = []
    try:
        dataset = build_dataset(config, arrays)
        cube_bytes = bare_bytes(dataset)
        for _ in range(options.repeat_write):
            # end to end: evaluate (default workers) + build + write
            arrays = dataset = None
            gc.collect()
            (folder / "cube.nc").unlink(missing_ok=True)
            start = time.perf_counter()
            arrays = evaluate(config)
            middle = time.perf_counter()
            dataset = build_dataset(config, arrays)
            built = time.perf_counter()
            write_dataset(dataset, folder / "cube.nc")
            end = time.perf_counter()
            e2e_parts.append((middle - start, built - middle, end - built, end - start))
            # bare netCDF4 write of the same arrays
            gc.collect()
            (folder / "bare.nc").unlink(missing_ok=True)
            start = time.perf_counter()
            bare_write(dataset, folder / "bare.nc")
            bare_times.append(time.perf_counter() - start)
        file_sizes = {name: (folder / name).stat().st_size for name in ("cube.nc", "bare.nc")}
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    e2e = min(e2e_parts, key=lambda p: p[3])
    e2e_rate = points / e2e[3]
    bare_time = min(bare_times)
    bare_rate = points / bare_time

    # ---- report ------------------------------------------------------------------------
    def times(values):
        return ", ".join(f"{v:.3f}" for v in values)

    print(f"output arrays {array_bytes / 1e9:.3f} GB; cube.nc {file_sizes['cube.nc'] / 1e9:.3f} GB, "
          f"bare.nc {file_sizes['bare.nc'] / 1e9:.3f} GB (numeric arrays {cube_bytes / 1e9:.3f} GB)")
    print()
    print("evaluation alone (evaluate), best of", options.repeat)
    for w in (1, 2):
        print(f"  {w} worker{'s' if w > 1 else ' '}: {eval_best[w]:8.3f} s  {rate[w] / 1e6:8.2f} M points/s"
              f"   (runs: {times(eval_times[w])} s)")
    print(f"  speedup 2 workers / 1 worker: {eval_best[1] / eval_best[2]:.2f}x")
    print(f"  (of which plan_body for all {len(config.bodies)} bodies, run before the threaded chunks: "
          f"{plan_time:.3f} s)")
    print()
    print(f"per-point Python loop, {sample_size:,} random points (seed {options.seed}), "
          "chosen apoapsis precomputed per (body, target, periapsis)")
    print(f"  {loop_time:8.3f} s  {loop_rate / 1e3:8.1f} k points/s  "
          f"({loop_time / sample_size * 1e6:.2f} us/point; full grid would take {points / loop_rate:.0f} s; "
          f"best of {options.repeat}, runs: {times(loop_times)} s)")
    for name, (same_nan, diff, count) in report.items():
        nan_note = "" if name == "burn_delta_v" else f", NaN pattern {'identical' if same_nan else 'DIFFERS'}"
        count_note = "" if count is None else f" over {count:,} finite values"
        print(f"  agreement {name:<18}: max |loop - vectorized| = {diff:.3e}{count_note}{nan_note}")
    print(f"  agreement best_strategy     : {best_match:,} / {sample_size:,} equal")
    print(f"  loop check: {verdict(loop_ok)} (delta_v within 1e-6 m/s, NaN patterns and best strategy equal)")
    print()
    ratio1, ratio2 = rate[1] / loop_rate, rate[2] / loop_rate
    print(f"ratio evaluation / loop: {ratio1:,.0f}x (1 worker), {ratio2:,.0f}x (2 workers)  "
          f"target >= {EVAL_TARGET:.0f}x: {verdict(ratio1 >= EVAL_TARGET and loop_ok)} (1 worker), "
          f"{verdict(ratio2 >= EVAL_TARGET and loop_ok)} (2 workers)")
    print()
    print(f"end to end (evaluate on {os.cpu_count()} workers + build_dataset + write_dataset), "
          f"best of {options.repeat_write}")
    print(f"  {e2e[3]:8.3f} s  {e2e_rate / 1e6:8.2f} M points/s   "
          f"(evaluate {e2e[0]:.3f} s, build {e2e[1]:.3f} s, write {e2e[2]:.3f} s; "
          f"totals of runs: {times(p[3] for p in e2e_parts)} s)")
    print(f"bare netCDF4 write of the same arrays (netCDF4.Dataset, no compression), best of {options.repeat_write}")
    print(f"  {bare_time:8.3f} s  {bare_rate / 1e6:8.2f} M points/s   "
          f"{cube_bytes / bare_time / 1e9:.2f} GB/s   (runs: {times(bare_times)} s)")
    e2e_ratio = e2e_rate / bare_rate
    print(f"ratio end to end / bare write: {e2e_ratio:.2f}  target >= {E2E_TARGET}: "
          f"{verdict(e2e_ratio >= E2E_TARGET)}")
    print(f"  (write_dataset alone / bare write: {e2e[2] / bare_time:.2f}x the time)")
    return 0 if (loop_ok and ratio1 >= EVAL_TARGET and e2e_ratio >= E2E_TARGET) else 1


if __name__ == "__main__":
    sys.exit(main())
