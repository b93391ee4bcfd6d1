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
from sweep.engine.finite import FiniteArrays, evaluate_finite, finite_layout
from sweep.engine.grid import Chunk, chunks, speeds_per_chunk
from sweep.engine.processes import worker_count
from sweep.engine.progress import track
from sweep.model.statuses import STATUSES
from sweep.model.strategies import DIRECT, STRATEGIES, Geometry, challengers, pick_best, strategy_names
from sweep.physics.capture import (
    best_intermediate_apoapsis,
    best_plane_change_split,
    direct_capture,
    equal_cost_v_inf,
    free_periapsis_capture,
    three_burn_capture,
    time_limited_apoapsis,
    two_burn_capture,
)
from sweep.physics.conics import hyperbolic_periapsis_speed, semi_major_axis_from_period
from sweep.physics.rocket import STANDARD_GRAVITY

__all__ = ["STREAMED", "STREAM_CHUNK_POINTS", "BodyPlan", "SweepArrays", "add_placeholders", "estimate_bytes",
           "estimate_memory", "evaluate", "plan_body", "prepare", "sweep_chunks"]

logger = logging.getLogger(__name__)

_KM = 1.0e3  # m per km
_CODE = {status.name: code for code, status in enumerate(STATUSES)}
# The per-point impulsive arrays (v_inf axis): a streamed run writes them chunk by chunk and never
# holds them whole. With a plane_change axis, ``SweepArrays.plane`` is streamed too.
STREAMED = ("delta_v", "burn_delta_v", "propellant_mass", "time_to_orbit", "status", "best_strategy",
            "saving_over_direct", "propellant_saving", "intermediate_apoapsis_altitude")
STREAM_CHUNK_POINTS = 1 << 19  # grid points per streamed chunk: about 90 MB of results each


@dataclass(frozen=True)
class BodyPlan:
    """Everything about one body's grid that does not depend on the arrival speed (SI)."""

    geometry: Geometry
    status: np.ndarray  # int8 (strategy, target, periapsis)
    times: np.ndarray  # s (strategy, target, periapsis), NaN where infeasible
    apoapsis_bound: float  # m
    crossover: np.ndarray  # m/s (challenger strategy, target, periapsis); [0] two_burn, [1] three_burn


@dataclass
class SweepArrays:
    """
    Plain arrays of a sweep, in cube dimension order; units as named in :mod:`sweep.cube.conventions`.
    One chunk's arrays (:func:`sweep_chunks`) hold only the :data:`STREAMED` fields and ``plane``.
    """

    delta_v: np.ndarray
    burn_delta_v: np.ndarray
    propellant_mass: np.ndarray
    time_to_orbit: np.ndarray
    status: np.ndarray
    best_strategy: np.ndarray
    saving_over_direct: np.ndarray
    propellant_saving: np.ndarray
    intermediate_apoapsis_altitude: np.ndarray
    crossover_v_inf: np.ndarray
    apoapsis_bound: np.ndarray
    sphere_of_influence: np.ndarray
    hill_radius: np.ndarray
    free_periapsis_altitude: np.ndarray
    free_periapsis_delta_v: np.ndarray
    target_apoapsis_altitude: np.ndarray  # km (body, target); equal to the target altitude for circles
    finite: FiniteArrays | None = None  # with a thrust axis only
    plane: PlaneChangeArrays | None = None  # with a plane_change axis only


@dataclass
class PlaneChangeArrays:
    """Impulsive results with a plane change, plane_change axis last (degrees in the cube)."""

    delta_v: np.ndarray  # m/s (strategy, body, v_inf, target, periapsis, plane_change)
    two_burn_first_share: np.ndarray  # degrees turned with two_burn's first burn (body, ..., plane_change)
    best_strategy: np.ndarray  # (body, v_inf, target, periapsis, plane_change)
    saving_over_direct: np.ndarray  # m/s


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
    return np.select(conditions, [_CODE[c] for c in codes], default=_CODE["ok"]).astype(np.int8)


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
    bound = config.apoapsis_fraction * min(body.sphere_of_influence, body.hill_radius)
    upper = np.full(np.broadcast_shapes(target_radius.shape, periapsis_radius.shape), bound)
    if config.max_time_to_orbit is not None:
        # NaN where even the smallest apoapsis is too slow: fmin keeps the bound, and the
        # time check below flags the point.
        limit = time_limited_apoapsis(body.gm, periapsis_radius, target_radius, config.max_time_to_orbit,
                                      target_apoapsis)
        upper = np.fmin(upper, limit)
    apoapsis = best_intermediate_apoapsis(body.gm, periapsis_radius, target_radius, upper, target_apoapsis)
    geometry = Geometry(body.gm, periapsis_radius, target_radius, apoapsis, target_apoapsis)

    status, times, constants = [], [], []
    for strategy in STRATEGIES:
        maneuver = strategy.kernel(0.0, geometry)
        time = np.broadcast_to(maneuver.time, upper.shape)
        cap = np.inf if config.max_time_to_orbit is None else config.max_time_to_orbit
        exceeded = time > cap
        code = _status_codes(strategy, body, target_altitude, periapsis_altitude, far,
                             periapsis_radius, bound, exceeded)
        status.append(code)
        times.append(np.where(code == 0, time, np.nan))
        # Cost = sqrt(v_inf^2 + 2 mu / r_1) + G: G is the total at v_inf = 0 minus escape speed.
        escape = hyperbolic_periapsis_speed(0.0, body.gm, strategy.first_burn_radius(geometry))
        constants.append(np.broadcast_to(sum(maneuver.burns) - escape, upper.shape))
    status = np.stack(status)
    low, high = (speed * _KM for speed in config.crossover_range)
    crossover = []
    for index, _ in challengers():
        speed = equal_cost_v_inf(
            body.gm, STRATEGIES[index].first_burn_radius(geometry), target_radius,
            constants[DIRECT] - constants[index],
        )
        usable = (status[DIRECT] == 0) & (status[index] == 0) & (speed >= low) & (speed <= high)
        crossover.append(np.where(usable, speed, np.nan))
    return BodyPlan(geometry, status, np.stack(times), bound, np.stack(crossover))


def _layout(config: SweepConfig, bodies: int | None = None, speeds: int | None = None
            ) -> dict[str, tuple[tuple[int, ...], type]]:
    """
    Shape and dtype of every output array; ``bodies`` and ``speeds`` override the grid's counts
    (one chunk's per-point arrays: one body, a run of arrival speeds).
    """
    nbody, nspeed, ntarget, nperiapsis = config.shape
    shape = (nbody if bodies is None else bodies, nspeed if speeds is None else speeds, ntarget, nperiapsis)
    count = len(STRATEGIES)
    per_strategy = ((count, *shape), np.float64)
    per_point = (shape, np.float64)
    return {
        "delta_v": per_strategy,
        "burn_delta_v": ((count, max(s.burns for s in STRATEGIES), *shape), np.float64),
        "propellant_mass": per_strategy,
        "time_to_orbit": per_strategy,
        "status": ((count, *shape), np.int8),
        "best_strategy": (shape, np.int8),
        "saving_over_direct": per_point,
        "propellant_saving": per_point,
        "intermediate_apoapsis_altitude": per_point,
        "crossover_v_inf": ((len(challengers()), nbody, ntarget, nperiapsis), np.float64),
        "apoapsis_bound": ((nbody,), np.float64),
        "sphere_of_influence": ((nbody,), np.float64),
        "hill_radius": ((nbody,), np.float64),
        "free_periapsis_altitude": ((nbody, nspeed, ntarget), np.float64),
        "free_periapsis_delta_v": ((nbody, nspeed, ntarget), np.float64),
        "target_apoapsis_altitude": ((nbody, ntarget), np.float64),
    }


def _plane_layout(config: SweepConfig, bodies: int | None = None, speeds: int | None = None
                  ) -> dict[str, tuple[tuple[int, ...], type]]:
    """Shape and dtype of the plane-change arrays (empty without a plane_change axis)."""
    if config.plane_change is None:
        return {}
    nbody, nspeed, ntarget, nperiapsis = config.shape
    shape = (nbody if bodies is None else bodies, nspeed if speeds is None else speeds, ntarget, nperiapsis,
             config.plane_change.size)
    return {
        "delta_v": ((len(STRATEGIES), *shape), np.float64),
        "two_burn_first_share": (shape, np.float64),
        "best_strategy": (shape, np.int8),
        "saving_over_direct": (shape, np.float64),
    }


def _bytes(layout) -> int:
    return sum(math.prod(shape) * np.dtype(dtype).itemsize for shape, dtype in layout)  # Python ints: no overflow


def estimate_bytes(config: SweepConfig) -> int:
    """Bytes of all output arrays: the cube's size uncompressed and the memory of an in-memory run."""
    return _bytes([*_layout(config).values(), *_plane_layout(config).values(), *finite_layout(config).values()])


def estimate_memory(config: SweepConfig, workers: int | None = None,
                    points_per_chunk: int = STREAM_CHUNK_POINTS) -> int:
    """
    Bytes of output arrays a streamed run (``capsweep run``) holds at once: the arrays that are
    not streamed (per-body values, crossovers, finite burns) plus ``workers + 2`` chunks (those
    computed ahead, the one being written, one being made). Kernel temporaries come on top,
    a few chunks' worth.
    """
    workers = worker_count(workers)
    held = {name: entry for name, entry in _layout(config).items() if name not in STREAMED}
    speeds = min(speeds_per_chunk(config.shape, points_per_chunk), config.shape[1])
    chunk = [*(entry for name, entry in _layout(config, 1, speeds).items() if name in STREAMED),
             *_plane_layout(config, 1, speeds).values()]
    return _bytes([*held.values(), *finite_layout(config).values()]) + (workers + 2) * _bytes(chunk)


def _allocate(config: SweepConfig, names, bodies: int | None = None, speeds: int | None = None,
              plane: bool = False) -> SweepArrays:
    """
    The arrays ``names`` allocated (for the grid, or one chunk), with the plane-change arrays if
    ``plane`` and the grid has that axis; the other fields are left None.
    """
    arrays = SweepArrays(**{name: np.empty(shape, dtype) if name in names else None
                            for name, (shape, dtype) in _layout(config, bodies, speeds).items()})
    if plane and config.plane_change is not None:
        arrays.plane = PlaneChangeArrays(**{name: np.empty(shape, dtype) for name, (shape, dtype)
                                            in _plane_layout(config, bodies, speeds).items()})
    return arrays


def add_placeholders(config: SweepConfig, arrays: SweepArrays) -> SweepArrays:
    """
    Fill the per-point fields of :func:`prepare`'s arrays with zero-stride views of the right
    shape and dtype (one element of memory each): enough to label the cube whose per-point
    values then arrive chunk by chunk from :func:`sweep_chunks`.
    """
    for name in STREAMED:
        shape, dtype = _layout(config)[name]
        setattr(arrays, name, np.broadcast_to(np.zeros((), dtype), shape))
    if config.plane_change is not None:
        arrays.plane = PlaneChangeArrays(**{name: np.broadcast_to(np.zeros((), dtype), shape)
                                            for name, (shape, dtype) in _plane_layout(config).items()})
    return arrays


def _run_chunk(chunk: Chunk, plan: BodyPlan, config: SweepConfig, out: SweepArrays, b: int, speeds: slice) -> None:
    """
    Evaluate one chunk into ``out`` at body index ``b`` and arrival speeds ``speeds``: the grid's
    own place for an in-memory run, (0, all) for a chunk's own arrays.
    """
    speed = config.v_inf[chunk.v_inf_start:chunk.v_inf_stop, None, None] * _KM
    exhaust_speed = config.specific_impulse * STANDARD_GRAVITY
    for index, strategy in enumerate(STRATEGIES):
        maneuver = strategy.kernel(speed, plan.geometry)
        infeasible = plan.status[index] != 0
        any_infeasible = bool(infeasible.any())
        total = out.delta_v[index, b, speeds]
        total[...] = maneuver.burns[0]
        for burn in range(out.burn_delta_v.shape[1]):
            target = out.burn_delta_v[index, burn, b, speeds]
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
        propellant = out.propellant_mass[index, b, speeds]
        np.divide(total, -exhaust_speed, out=propellant)
        np.expm1(propellant, out=propellant)
        propellant *= -config.arrival_mass
        out.time_to_orbit[index, b, speeds] = plan.times[index]
        out.status[index, b, speeds] = plan.status[index]
    best, saving, propellant_saving = pick_best(out.delta_v[:, b, speeds], out.propellant_mass[:, b, speeds], DIRECT)
    out.best_strategy[b, speeds] = best
    out.saving_over_direct[b, speeds] = saving
    out.propellant_saving[b, speeds] = propellant_saving
    three_burn_ok = plan.status[strategy_names().index("three_burn")] == 0
    out.intermediate_apoapsis_altitude[b, speeds] = np.where(
        three_burn_ok, (plan.geometry.apoapsis_radius - config.bodies[chunk.body].radius) / _KM, np.nan
    )
    if config.plane_change is not None:
        _plane_change_chunk(speed[..., None], plan, config, out.plane, b, speeds)


def _plane_change_chunk(speed, plan: BodyPlan, config: SweepConfig, out: PlaneChangeArrays, b: int,
                        speeds: slice) -> None:
    """
    Every strategy with a plane change, for one chunk: ``direct`` turns with its one burn,
    ``two_burn`` splits the turn between its burns as :func:`best_plane_change_split` finds
    cheapest, ``three_burn`` turns with the apoapsis burn (at the apoapsis of the coplanar plan:
    the coplanar total already falls with the apoapsis, and the turn is cheaper the higher it
    is). Feasibility is the coplanar one. ``speed``: m/s, shape (V, 1, 1, 1).
    """
    angles = np.radians(config.plane_change)[None, None, None, :]
    g = plan.geometry
    r_p, r_t = g.periapsis_radius[..., None], g.target_radius[..., None]
    r_a = np.asarray(g.apoapsis_radius)[..., None]
    r_ta = None if g.target_apoapsis is None else g.target_apoapsis[..., None]
    split = best_plane_change_split(speed, g.gm, r_p, r_t, angles, r_ta)
    with_turn = {
        "direct": direct_capture(speed, g.gm, r_t, angles, r_ta),
        "two_burn": two_burn_capture(speed, g.gm, r_p, r_t, angles, split, r_ta),
        "three_burn": three_burn_capture(speed, g.gm, r_p, r_t, r_a, angles, r_ta),
    }
    delta_v = out.delta_v[:, b, speeds]
    for index, strategy in enumerate(STRATEGIES):
        total = np.broadcast_to(sum(with_turn[strategy.name].burns), delta_v.shape[1:])
        delta_v[index] = np.where((plan.status[index] == 0)[None, :, :, None], total, np.nan)
    out.two_burn_first_share[b, speeds] = np.where((plan.status[strategy_names().index("two_burn")] == 0)[None, :, :, None],
                                                   np.degrees(split), np.nan)
    best, saving, _ = pick_best(delta_v, delta_v, DIRECT)
    out.best_strategy[b, speeds] = best
    out.saving_over_direct[b, speeds] = saving


def prepare(config: SweepConfig, workers: int | None = None, progress: bool = False, scheduler: str | None = None,
            checkpoint=None) -> tuple[list[BodyPlan], SweepArrays]:
    """
    Everything but the per-point impulsive arrays: per-body plans and constants, crossover
    speeds, the free-periapsis reference and, with a thrust axis, the finite burns. The
    returned arrays leave the :data:`STREAMED` fields and ``plane`` None.
    """
    workers = worker_count(workers)
    out = _allocate(config, set(_layout(config)) - set(STREAMED))
    threads = Parallel(n_jobs=min(workers, max(len(config.bodies), 1)), backend="threading")
    plans = threads(delayed(plan_body)(body, config) for body in config.bodies)
    for index, (body, plan) in enumerate(zip(config.bodies, plans, strict=True)):
        out.crossover_v_inf[:, index] = plan.crossover / _KM
        out.apoapsis_bound[index] = plan.apoapsis_bound / _KM
        out.sphere_of_influence[index] = body.sphere_of_influence / _KM
        out.hill_radius[index] = body.hill_radius / _KM
        out.target_apoapsis_altitude[index] = (plan.geometry.target_far[:, 0] - body.radius) / _KM
        # the target's shape (eccentricity), with the periapsis left free: (v_inf, target)
        near, far = plan.geometry.target_radius[:, 0], plan.geometry.target_far[:, 0]
        eccentricity = (far - near) / (far + near)
        radius, burn = free_periapsis_capture((config.v_inf * _KM)[:, None], body.gm, eccentricity[None, :])
        apoapsis = radius * (1 + eccentricity) / (1 - eccentricity)
        usable = (radius >= body.radius + body.safe_periapsis_altitude) & (apoapsis <= plan.apoapsis_bound)
        out.free_periapsis_altitude[index] = np.where(usable, (radius - body.radius) / _KM, np.nan)
        out.free_periapsis_delta_v[index] = np.where(usable, burn, np.nan)
    if config.thrust is not None:
        out.finite = evaluate_finite(config, plans, workers, progress, scheduler=scheduler, checkpoint=checkpoint)
    return plans, out


def evaluate(config: SweepConfig, workers: int | None = None, progress: bool = False,
             points_per_chunk: int = 1 << 20, scheduler: str | None = None,
             checkpoint=None) -> SweepArrays:
    """
    Evaluate every strategy at every grid point, all arrays in memory.

    Parameters
    ----------
    config : SweepConfig
        The validated sweep.
    workers : int, optional
        Threads to run chunks on; ``None`` or 0 uses every core.
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

    See Also
    --------
    sweep_chunks : the same per-point arrays one chunk at a time, for grids larger than memory.
    """
    workers = worker_count(workers)
    plans, out = prepare(config, workers, progress, scheduler, checkpoint)
    full = _allocate(config, STREAMED, plane=True)
    for name in STREAMED:
        setattr(out, name, getattr(full, name))
    out.plane = full.plane
    work = chunks(config.shape, points_per_chunk)
    logger.info("evaluating %d points in %d chunks on %d threads", int(np.prod(config.shape)), len(work), workers)
    tasks = (delayed(_run_chunk)(chunk, plans[chunk.body], config, out, chunk.body,
                                 slice(chunk.v_inf_start, chunk.v_inf_stop)) for chunk in work)
    runner = Parallel(n_jobs=min(workers, len(work)), backend="threading", return_as="generator")
    for _ in track(runner(tasks), len(work), int(np.prod(config.shape)), "sweep", progress):
        pass
    return out


def sweep_chunks(config: SweepConfig, plans: list[BodyPlan], workers: int | None = None, progress: bool = False,
                 points_per_chunk: int = STREAM_CHUNK_POINTS) -> Iterator[tuple[Chunk, SweepArrays]]:
    """
    Yield every chunk's per-point arrays, in grid order, as :class:`SweepArrays` with a body axis
    of length 1 (the :data:`STREAMED` fields and ``plane``; the rest None).

    Chunks run on ``workers`` threads, at most ``workers + 1`` of them computed ahead of the
    consumer: memory stays a few chunks whatever the grid, and a slow consumer (the file
    writer) holds the threads back rather than letting results pile up. The values are those of
    :func:`evaluate`, bit for bit.
    """
    workers = worker_count(workers)
    work = chunks(config.shape, points_per_chunk)
    logger.info("evaluating %d points in %d chunks on %d threads, streamed", int(np.prod(config.shape)), len(work),
                workers)

    def compute(chunk: Chunk) -> tuple[Chunk, SweepArrays]:
        count = chunk.v_inf_stop - chunk.v_inf_start
        local = _allocate(config, STREAMED, bodies=1, speeds=count, plane=True)
        _run_chunk(chunk, plans[chunk.body], config, local, 0, slice(0, count))
        return chunk, local

    def in_order() -> Iterator[tuple[Chunk, SweepArrays]]:
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
