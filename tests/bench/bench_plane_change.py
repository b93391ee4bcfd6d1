"""Benchmark: the cost of choosing how a capture makes its plane change, side by side in one run.

Run on purpose (not collected by pytest):

    .venv/bin/python tests/bench/bench_plane_change.py                 # 100,000 points, best of 3
    .venv/bin/python tests/bench/bench_plane_change.py --points 20000  # quick look

On the same seeded points (Mars, Venus, the Moon; v_inf 0.5-8 km/s; periapsis and target
altitudes 200-20,000 km; turns 1-90 degrees; apoapsis limits from the periapsis to 50,000 km) it
times, alternating, best of ``--repeat``:

- ``three_burn`` with the whole turn at the given apoapsis (closed form, no search);
- ``two_burn``'s split of the turn (``best_plane_change_split``: a scan and golden section);
- ``three_burn``'s joint search of apoapsis and split (``best_three_burn_turn``);

and prints microseconds per point and the ratios of the searches to the closed form, with how
much the joint search saves over the whole turn at apoapsis on these points.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sweep.catalog import catalog  # noqa: E402
from sweep.physics.capture import (  # noqa: E402
    best_plane_change_split,
    best_three_burn_turn,
    three_burn_capture,
    two_burn_capture,
)


def _points(count: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    bodies = [catalog()[name] for name in ("mars", "venus", "moon")]
    which = rng.integers(0, len(bodies), count)
    gm = np.array([bodies[i].gm for i in which])
    radius = np.array([bodies[i].radius for i in which])
    periapsis = radius + rng.uniform(200e3, 20_000e3, count)
    target = radius + rng.uniform(200e3, 20_000e3, count)
    low = np.maximum(periapsis, target)
    return {"v_inf": rng.uniform(500.0, 8000.0, count), "gm": gm, "periapsis": periapsis, "target": target,
            "limit": low + rng.uniform(0.0, 50_000e3, count), "angle": np.radians(rng.uniform(1.0, 90.0, count))}


def _best_of(repeat: int, action) -> tuple[float, object]:
    times, result = [], None
    for _ in range(repeat):
        started = time.perf_counter()
        result = action()
        times.append(time.perf_counter() - started)
    return min(times), result


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--seed", type=int, default=20261203)
    args = parser.parse_args()
    p = _points(args.points, args.seed)

    def closed():
        return sum(three_burn_capture(p["v_inf"], p["gm"], p["periapsis"], p["target"], p["limit"], p["angle"]).burns)

    def two_burn():
        split = best_plane_change_split(p["v_inf"], p["gm"], p["periapsis"], p["target"], p["angle"])
        return sum(two_burn_capture(p["v_inf"], p["gm"], p["periapsis"], p["target"], p["angle"], split).burns)

    def joint():
        apoapsis, first, third = best_three_burn_turn(p["v_inf"], p["gm"], p["periapsis"], p["target"], p["limit"],
                                                      p["angle"], apoapsis_radius=p["limit"])
        return sum(three_burn_capture(p["v_inf"], p["gm"], p["periapsis"], p["target"], apoapsis, p["angle"],
                                      first_share=first, third_share=third).burns)

    timings = {name: [] for name in ("closed", "two_burn", "joint")}
    results = {}
    for _ in range(args.repeat):  # alternating, so that load on the machine falls on all three alike
        for name, action in (("closed", closed), ("two_burn", two_burn), ("joint", joint)):
            elapsed, results[name] = _best_of(1, action)
            timings[name].append(elapsed)
    best = {name: min(values) for name, values in timings.items()}
    per_point = {name: 1e6 * value / args.points for name, value in best.items()}
    print(f"capsweep plane-change benchmark: {args.points:,} seeded points (seed {args.seed}), best of {args.repeat}")
    print(f"  three_burn, whole turn at the given apoapsis (closed form): {per_point['closed']:8.2f} us/point")
    print(f"  two_burn split (scan + golden section):                      {per_point['two_burn']:8.2f} us/point "
          f"({best['two_burn'] / best['closed']:.0f}x the closed form)")
    print(f"  three_burn apoapsis and split, joint search:                 {per_point['joint']:8.2f} us/point "
          f"({best['joint'] / best['closed']:.0f}x the closed form, {best['joint'] / best['two_burn']:.1f}x two_burn)")
    saving = results["closed"] - results["joint"]
    print(f"  joint search vs whole turn at that apoapsis: never dearer by more than {max(-saving.min(), 0):.2e} m/s; "
          f"saves {np.median(saving):.2f} m/s median, {saving.max():.1f} m/s at most")
    return 0


if __name__ == "__main__":
    sys.exit(main())
