"""Evaluate every strategy over the grid: per-body geometry once, then chunks of arrival speeds.

The impulsive kernels are cheap and memory-bound, so chunks run on threads that write into
shared, preallocated output arrays (numpy releases the GIL inside its loops); processes
would spend more time shipping results back than computing them. Chunks depend on the grid
alone, so the cube is bit-identical for any number of workers.
"""

from __future__ import annotations

import logging
import math
from collections import deque
from collections.abc import Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from joblib import Parallel, delayed

from sweep.config import SweepConfig
from sweep.engine.finite import evaluate_finite
from sweep.engine.grid import Chunk, chunks, speeds_per_chunk
from sweep.engine.layout import HELD, STREAMED, Arrays, allocate, layout, variables
from sweep.engine.processes import worker_count
from sweep.engine.progress import track
from sweep.model.statuses import status_code
from sweep.model.strategies import DIRECT, STRATEGIES, Geometry, challengers, pick_best
from sweep.physics.capture import (
    best_intermediate_apoapsis,
    equal_cost_sensitivity,
    equal_cost_v_inf,
    free_periapsis_capture,
    free_periapsis_capture_at_period,
    time_limited_apoapsis,
)
from sweep.physics.conics import hyperbolic_periapsis_speed, semi_major_axis_from_period
from sweep.physics.rocket import STANDARD_GRAVITY

__all__ = ["STREAM_CHUNK_POINTS", "BodyPlan", "add_placeholders", "estimate_bytes", "estimate_memory", "evaluate",
           "plan_body", "prepare", "sweep_chunks"]

logger = logging.getLogger(__name__)

_KM = 1.0e3  # m per km
STREAM_CHUNK_POINTS = 1 << 19  # grid points per streamed chunk: about 90 MB of results each
# Relative tolerance of the time cap: times are sums of half periods of radii that root finders
# return, exact to ~1e-15 relative; a time equal to the cap to rounding must not flip the status
# (1e-9 of a 3-day cap is 0.26 ms, far below any clock a mission plans by).
_TIME_RTOL = 1.0e-9


@dataclass(frozen=True)
class BodyPlan:
    """Everything about one body's grid that does not depend on the arrival speed (SI)."""

    geometry: Geometry
    status: np.ndarray  # int8 (strategy, target, periapsis)
    times: np.ndarray  # s (strategy, target, periapsis), NaN where infeasible
    apoapsis_bound: float  # m
    # m/s (target, periapsis) by challenger crossover variable; and by its "_sensitivity", m/s per m/s
    crossover: dict[str, np.ndarray]


def _status_codes(strategy, body, target_altitude, periapsis_altitude, target_radius,
                  periapsis_radius, bound, time_exceeded) -> np.ndarray:
    """Feasibility code per (target, periapsis): the first reason that applies, else 0."""
    safe = body.safe_periapsis_altitude
    conditions = [
        np.broadcast_to(bound <= body.radius + safe, time_exceeded.shape),
        target_altitude < safe,
        target_radius > bound,
    ]
    codes = ["sphere_of_influence_too_small", "target_below_safe_altitude", "target_outside_bound"]
    if strategy.uses_periapsis:
        conditions += [periapsis_altitude < safe, periapsis_radius > bound]
        codes += ["periapsis_below_safe_altitude", "periapsis_outside_bound"]
    conditions.append(time_exceeded)
    codes.append("time_limit_exceeded")
    conditions = [np.broadcast_to(c, time_exceeded.shape) for c in conditions]
    return np.select(conditions, [status_code(c) for c in codes], default=status_code("ok")).astype(np.int8)


def target_apoapsis_radius(body, config: SweepConfig, target_radius: np.ndarray) -> np.ndarray | None:
    """An elliptical target's apoapsis radius per target periapsis (m); None for circular targets."""
    if config.target_apoapsis_altitude is not None:
        return np.full_like(target_radius, body.radius + config.target_apoapsis_altitude * _KM)
    if config.target_period is not None:
        semi_major_axis = semi_major_axis_from_period(body.gm, config.target_period)
        return 2.0 * semi_major_axis - target_radius
    return None


def plan_body(body, config: SweepConfig) -> BodyPlan:
    """Geometry, feasibility, times, chosen apoapsis and crossover speeds for one body."""
    target_altitude = config.target_altitude[:, None] * _KM
    periapsis_altitude = config.periapsis_altitude[None, :] * _KM
    target_radius = body.radius + target_altitude
    periapsis_radius = body.radius + periapsis_altitude
    target_apoapsis = target_apoapsis_radius(body, config, target_radius)
    far = target_radius if target_apoapsis is None else target_apoapsis
    bound = config.apoapsis_fraction * body.bound_radius(config.apoapsis_bound_of)
    upper = np.full(np.broadcast_shapes(target_radius.shape, periapsis_radius.shape), bound)
    if config.max_time_to_orbit is not None:
        # NaN where even the smallest apoapsis is too slow: fmin keeps the bound, and the
        # time check below flags the point.
        limit = time_limited_apoapsis(body.gm, periapsis_radius, target_radius, config.max_time_to_orbit,
                                      target_apoapsis)
        upper = np.fmin(upper, limit)
    apoapsis = best_intermediate_apoapsis(body.gm, periapsis_radius, target_radius, upper, target_apoapsis)
    geometry = Geometry(body.gm, periapsis_radius, target_radius, apoapsis, target_apoapsis, upper)

    status, times, constants = [], [], []
    for strategy in STRATEGIES:
        maneuver = strategy.kernel(0.0, geometry)
        time = np.broadcast_to(maneuver.time, upper.shape)
        cap = np.inf if config.max_time_to_orbit is None else config.max_time_to_orbit
        exceeded = time > cap * (1.0 + _TIME_RTOL)
        code = _status_codes(strategy, body, target_altitude, periapsis_altitude, far,
                             periapsis_radius, bound, exceeded)
        status.append(code)
        times.append(np.where(code == 0, time, np.nan))
        # Cost = sqrt(v_inf^2 + 2 mu / r_1) + G: G is the total at v_inf = 0 minus escape speed.
        escape = hyperbolic_periapsis_speed(0.0, body.gm, strategy.first_burn_radius(geometry))
        constants.append(np.broadcast_to(sum(maneuver.burns) - escape, upper.shape))
    status = np.stack(status)
    low, high = (speed * _KM for speed in config.crossover_range)
    crossover = {}
    for index, strategy in challengers():
        speed = equal_cost_v_inf(body.gm, strategy.first_burn_radius(geometry), target_radius,
                                 constants[DIRECT] - constants[index])
        usable = (status[DIRECT] == 0) & (status[index] == 0) & (speed >= low) & (speed <= high)
        crossover[strategy.crossover_variable] = np.where(usable, speed, np.nan)
        sensitivity = equal_cost_sensitivity(body.gm, strategy.first_burn_radius(geometry), target_radius, speed)
        crossover[f"{strategy.crossover_variable}_sensitivity"] = np.where(usable, sensitivity, np.nan)
    return BodyPlan(geometry, status, np.stack(times), bound, crossover)


def _bytes(layout) -> int:
    return sum(math.prod(shape) * np.dtype(dtype).itemsize for shape, dtype in layout)  # Python ints: no overflow


def estimate_bytes(config: SweepConfig) -> int:
    """Bytes of all output arrays: the cube's size uncompressed and the memory of an in-memory run."""
    return _bytes(layout(config).values())


def estimate_memory(config: SweepConfig, workers: int | None = None,
                    points_per_chunk: int = STREAM_CHUNK_POINTS) -> int:
    """
    Bytes of output arrays a streamed run (``capsweep run``) holds at once: the arrays that are
    not streamed (per-body values, crossovers, finite burns) plus ``workers + 2`` chunks (those
    computed ahead, the one being written, one being made). Kernel temporaries come on top,
    a few chunks' worth.
    """
    workers = worker_count(workers)
    speeds = min(speeds_per_chunk(config.shape, points_per_chunk), config.shape[1])
    chunk = layout(config, STREAMED, 1, speeds).values()
    return _bytes(layout(config, HELD).values()) + (workers + 2) * _bytes(chunk)


def add_placeholders(config: SweepConfig, arrays: Arrays) -> Arrays:
    """
    Add to :func:`prepare`'s arrays the streamed ones as zero-stride views of the right shape
    and dtype (one element of memory each): enough to label the cube whose per-point values
    then arrive chunk by chunk from :func:`sweep_chunks`.
    """
    for name, (shape, dtype) in layout(config, STREAMED).items():
        arrays[name] = np.broadcast_to(np.zeros((), dtype), shape)
    return arrays


def _run_chunk(chunk: Chunk, plan: BodyPlan, config: SweepConfig, out: Arrays, b: int, speeds: slice) -> None:
    """
    Evaluate one chunk into ``out`` at body index ``b`` and arrival speeds ``speeds``: the grid's
    own place for an in-memory run, (0, all) for a chunk's own arrays.
    """
    speed = config.v_inf[chunk.v_inf_start:chunk.v_inf_stop, None, None] * _KM
    exhaust_speed = config.specific_impulse * STANDARD_GRAVITY
    body_radius = config.bodies[chunk.body].radius
    for index, strategy in enumerate(STRATEGIES):
        maneuver = strategy.kernel(speed, plan.geometry)
        infeasible = plan.status[index] != 0
        any_infeasible = bool(infeasible.any())
        total = out["delta_v"][index, b, speeds]
        total[...] = maneuver.burns[0]
        for burn in range(out["burn_delta_v"].shape[1]):
            target = out["burn_delta_v"][index, burn, b, speeds]
            if burn < len(maneuver.burns):
                target[...] = maneuver.burns[burn]
                if burn:
                    total += maneuver.burns[burn]
            else:
                target[...] = 0.0
            if any_infeasible:
                np.copyto(target, np.nan, where=infeasible)
        if any_infeasible:
            np.copyto(total, np.nan, where=infeasible)
        propellant = out["propellant_mass"][index, b, speeds]
        np.divide(total, -exhaust_speed, out=propellant)
        np.expm1(propellant, out=propellant)
        propellant *= -config.arrival_mass
        out["time_to_orbit"][index, b, speeds] = plan.times[index]
        out["status"][index, b, speeds] = plan.status[index]
        for name, values in strategy.outputs(plan.geometry, body_radius).items():
            out[name][b, speeds] = np.where(infeasible, np.nan, values)
    best, saving, propellant_saving = pick_best(out["delta_v"][:, b, speeds], out["propellant_mass"][:, b, speeds],
                                                tie_tolerance=config.tie_tolerance)
    out["best_strategy"][b, speeds] = best
    out["saving_over_direct"][b, speeds] = saving
    out["propellant_saving"][b, speeds] = propellant_saving
    if config.plane_change is not None:
        _plane_change_chunk(speed[..., None], plan, config, out, b, speeds)


def _plane_change_chunk(speed, plan: BodyPlan, config: SweepConfig, out: Arrays, b: int, speeds: slice) -> None:
    """
    Every strategy with a plane change, for one chunk, each turning as its registry entry says
    (:attr:`sweep.model.strategies.Strategy.turn`): from the coplanar plan's geometry (three_burn
    chooses its apoapsis anew for the turn, up to the plan's limit), with the coplanar
    feasibility. ``speed``: m/s, shape (V, 1, 1, 1).
    """
    angles = np.radians(config.plane_change)[None, None, None, :]
    g = plan.geometry
    geometry = Geometry(g.gm, g.periapsis_radius[..., None], g.target_radius[..., None],
                        np.asarray(g.apoapsis_radius)[..., None],
                        None if g.target_apoapsis is None else g.target_apoapsis[..., None],
                        np.asarray(g.apoapsis_limit)[..., None])
    delta_v = out["plane_change_delta_v"][:, b, speeds]
    for index, strategy in enumerate(STRATEGIES):
        turn = strategy.turn(speed, geometry, angles)
        feasible = (plan.status[index] == 0)[None, :, :, None]
        total = np.broadcast_to(sum(turn.maneuver.burns), delta_v.shape[1:])
        delta_v[index] = np.where(feasible, total, np.nan)
        for name, values in turn.extras.items():
            out[name][b, speeds] = np.where(feasible, values, np.nan)
    best, saving, _ = pick_best(delta_v, delta_v, tie_tolerance=config.tie_tolerance)
    out["plane_change_best_strategy"][b, speeds] = best
    out["plane_change_saving_over_direct"][b, speeds] = saving


def prepare(config: SweepConfig, workers: int | None = None, progress: bool = False, scheduler: str | None = None,
            checkpoint=None) -> tuple[list[BodyPlan], Arrays]:
    """
    Everything but the streamed per-point arrays: per-body plans and constants, crossover
    speeds, the free-periapsis reference and, with a thrust axis, the finite burns.
    """
    workers = worker_count(workers)
    out = allocate(config, ("body", "crossover"))
    threads = Parallel(n_jobs=min(workers, max(len(config.bodies), 1)), backend="threading")
    plans = threads(delayed(plan_body)(body, config) for body in config.bodies)
    for index, (body, plan) in enumerate(zip(config.bodies, plans, strict=True)):
        for name, speed in plan.crossover.items():
            out[name][index] = speed / _KM  # sensitivities: to km/s per m/s
        out["body_gm"][index] = body.gm
        out["body_radius"][index] = body.radius / _KM
        out["body_safe_periapsis_altitude"][index] = body.safe_periapsis_altitude / _KM
        out["body_equatorial_radius"][index] = body.equatorial_radius / _KM
        out["body_safe_periapsis_clearance"][index] = body.safe_periapsis_clearance / _KM
        out["apoapsis_bound"][index] = plan.apoapsis_bound / _KM
        out["sphere_of_influence_radius"][index] = body.sphere_of_influence / _KM
        out["hill_radius"][index] = body.hill_radius / _KM
        if "target_apoapsis_altitude" in out:
            out["target_apoapsis_altitude"][index] = (plan.geometry.target_far[:, 0] - body.radius) / _KM
        # the target's shape (eccentricity), with the periapsis left free: (v_inf, target)
        near, far = plan.geometry.target_radius[:, 0], plan.geometry.target_far[:, 0]
        eccentricity = (far - near) / (far + near)
        radius, burn = free_periapsis_capture((config.v_inf * _KM)[:, None], body.gm, eccentricity[None, :])
        apoapsis = radius * (1 + eccentricity) / (1 - eccentricity)
        usable = (radius >= body.radius + body.safe_periapsis_altitude) & (apoapsis <= plan.apoapsis_bound)
        out["free_periapsis_altitude"][index] = np.where(usable, (radius - body.radius) / _KM, np.nan)
        out["free_periapsis_delta_v"][index] = np.where(usable, burn, np.nan)
        if "free_periapsis_period_delta_v" in out:  # the same, at the target's period instead of its shape
            lowest = body.radius + body.safe_periapsis_altitude
            axis = semi_major_axis_from_period(body.gm, config.target_period)
            burn = free_periapsis_capture_at_period(config.v_inf * _KM, body.gm, axis, lowest)
            usable = 2.0 * axis - lowest <= plan.apoapsis_bound
            out["free_periapsis_period_delta_v"][index] = np.where(usable, burn, np.nan)
    if config.thrust is not None:
        out.update(evaluate_finite(config, plans, workers, progress, scheduler=scheduler, checkpoint=checkpoint))
    return plans, out


def evaluate(config: SweepConfig, workers: int | None = None, progress: bool = False,
             points_per_chunk: int = 1 << 20, scheduler: str | None = None,
             checkpoint=None) -> Arrays:
    """
    Evaluate every strategy at every grid point, all arrays in memory.

    Parameters
    ----------
    config : SweepConfig
        The validated sweep.
    workers : int, optional
        Threads to run chunks on; ``None`` or 0 uses every core this process may use.
    progress : bool
        Show a progress bar (for terminals).
    points_per_chunk : int
        Target size of one chunk; the result does not depend on it or on ``workers``.
    scheduler : str, optional
        Address of a Dask distributed scheduler for the finite burns (the compute-heavy part; the
        impulsive sweep is memory-bound and stays on local threads).
    checkpoint : Path, optional
        Folder where finished finite-burn chunks are saved and from which a killed run resumes
        (the impulsive sweep is cheaper to recompute than to read back).

    Returns
    -------
    dict of ndarray
        Every output variable of the registry that a cube of ``config`` has, by name.

    See Also
    --------
    sweep_chunks : the same per-point arrays one chunk at a time, for grids larger than memory.
    """
    workers = worker_count(workers)
    plans, out = prepare(config, workers, progress, scheduler, checkpoint)
    out.update(allocate(config, STREAMED))
    work = chunks(config.shape, points_per_chunk)
    logger.info("evaluating %d points in %d chunks on %d threads", int(np.prod(config.shape)), len(work), workers)
    tasks = (delayed(_run_chunk)(chunk, plans[chunk.body], config, out, chunk.body,
                                 slice(chunk.v_inf_start, chunk.v_inf_stop)) for chunk in work)
    runner = Parallel(n_jobs=min(workers, len(work)), backend="threading", return_as="generator")
    for _ in track(runner(tasks), len(work), int(np.prod(config.shape)), "sweep", progress):
        pass
    return {v.name: out[v.name] for v in variables(config)}  # in cube order


def sweep_chunks(config: SweepConfig, plans: list[BodyPlan], workers: int | None = None, progress: bool = False,
                 points_per_chunk: int = STREAM_CHUNK_POINTS) -> Iterator[tuple[Chunk, Arrays]]:
    """
    Yield every chunk's streamed arrays (the "impulsive" and "plane" stages of the variable
    registry), in grid order, each with a body axis of length 1.

    Chunks run on ``workers`` threads, at most ``workers + 1`` of them computed ahead of the
    consumer: memory stays a few chunks whatever the grid, and a slow consumer (the file
    writer) holds the threads back rather than letting results pile up. The values are those of
    :func:`evaluate`, bit for bit.
    """
    workers = worker_count(workers)
    work = chunks(config.shape, points_per_chunk)
    logger.info("evaluating %d points in %d chunks on %d threads, streamed", int(np.prod(config.shape)), len(work),
                workers)

    def compute(chunk: Chunk) -> tuple[Chunk, Arrays]:
        count = chunk.v_inf_stop - chunk.v_inf_start
        local = allocate(config, STREAMED, bodies=1, speeds=count)
        _run_chunk(chunk, plans[chunk.body], config, local, 0, slice(0, count))
        return chunk, local

    def in_order() -> Iterator[tuple[Chunk, Arrays]]:
        with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="capsweep-chunk") as pool:
            pending: deque[Future] = deque()
            try:
                for chunk in work:
                    pending.append(pool.submit(compute, chunk))
                    if len(pending) > workers:
                        yield pending.popleft().result()
                while pending:
                    yield pending.popleft().result()
            finally:
                for future in pending:
                    future.cancel()

    yield from track(in_order(), len(work), int(np.prod(config.shape)), "sweep", progress)
