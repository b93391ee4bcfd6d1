"""Evaluate every strategy with a finite-thrust engine over the grid plus its thrust axis.

Finite burns are compute-bound (each point integrates its burns), so chunks run in worker
processes and return their arrays; the parent places them. Chunks depend on the grid alone,
so the cube is bit-identical for any number of workers. The arrival speed at which a
low-periapsis strategy and ``direct`` cost the same is then found per (body, target,
periapsis, thrust) by bracketing on the grid and refining with the Illinois variant of
regula falsi on the finite-burn model itself.
"""

from __future__ import annotations

import logging
import math
import os
import re
import shutil
import socket
import stat
import tempfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from joblib import Parallel, delayed

from sweep.config import SweepConfig, fingerprint
from sweep.engine.checkpoint import chunk_file, load_chunk, run_key, save_chunk
from sweep.engine.grid import chunks
from sweep.engine.layout import Arrays, layout
from sweep.engine.processes import alive
from sweep.engine.progress import track
from sweep.errors import SweepError
from sweep.model.statuses import status_code
from sweep.model.strategies import DIRECT, STRATEGIES, Geometry, challengers, pick_best
from sweep.model.variables import cube_variables, shape_of
from sweep.physics.finite_burn import OUTCOMES, fly_capture
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.safefs import make_folder

__all__ = ["FINITE_STAGES", "evaluate_finite", "finite_chunks", "finite_layout"]

logger = logging.getLogger(__name__)

_KM = 1.0e3  # m per km
# The checkpointed (per-chunk) finite variables and their dimensions: the same for every strategy set.
_FINITE_DIMS = {v.name: v.dims for v in cube_variables(()) if v.checkpointed}
_OUTCOME_CODE = np.array([0] + [status_code(name) for name in OUTCOMES[1:]], dtype=np.int8)
FINITE_STAGES = ("finite", "finite_crossover")
# Illinois iterations at most: each flies both strategies at every open bracket, a dear flight with
# aimed, possibly split burns; what is still open after them takes the regula falsi estimate of
# its last bracket (the grid bracket narrowed by each step).
_ROOT_STEPS = 4
# Stop once the cost difference is within the finite model's stated agreement with an independent
# integration (0.05 m/s; the aim's own tolerance moves the cost by about 0.01 m/s), or the bracket
# is narrower than 1 m/s of arrival speed (1e-3 km/s, the precision a crossover is read at).
_ROOT_COST = 0.05  # m/s
_ROOT_WIDTH = 1.0  # m/s
_BRACKETS_PER_TASK = 128  # crossover brackets solved per worker task (small: the dear ones spread over workers)
_SHM_HEADROOM = 16 << 20  # bytes of /dev/shm left to others (and to joblib's own memmaps) at the least
_MIN_CHUNKS = 16  # finite-burn chunks per sweep at least, where the grid has that many arrival speeds


def finite_layout(config: SweepConfig) -> dict[str, tuple[tuple[int, ...], np.dtype]]:
    """Shape and dtype of every finite-burn output array (empty for an impulsive sweep)."""
    return layout(config, FINITE_STAGES)


@dataclass(frozen=True)
class _BodyInputs:
    """What a worker needs of one body: constants (SI) and the impulsive plan's geometry."""

    gm: float
    radius: float
    soi: float
    periapsis_radius: np.ndarray  # (1, P)
    target_radius: np.ndarray  # (T, 1)
    apoapsis_radius: np.ndarray  # (T, P)
    status: np.ndarray  # (S, T, P)
    target_apoapsis: np.ndarray | None = None  # (T, 1): an elliptical target's apoapsis
    safe_radius: float = 0.0  # lowest safe periapsis radius
    bound: float = np.nan  # apoapsis bound: the long ellipse a split capture enters first


@dataclass(frozen=True)
class _Engine:
    """The spacecraft, how its burns are flown, how strategies are ranked (the same for every chunk of a run)."""

    exhaust_speed: float  # m/s
    mass: float  # kg on arrival
    steering: str
    passes: int | str
    max_passes: int
    tie_tolerance: float = 0.0  # m/s

    @classmethod
    def of(cls, config: SweepConfig) -> _Engine:
        return cls(config.specific_impulse * STANDARD_GRAVITY, config.arrival_mass, config.steering,
                   config.finite_passes, config.finite_max_passes, config.tie_tolerance)


def _fly(strategy, body: _BodyInputs, geometry: Geometry, speed, thrust, engine: _Engine, approach=None,
         passes=None):
    """
    Fly one strategy for flat arrays of points; geometry arrays are flat too. The aim starts from
    ``approach`` (approach periapsis radius) where given, else from the impulsive one; ``passes``
    (burns, points) fixes every burn's passes, else the engine's rule decides.
    """
    maneuver = strategy.kernel(speed, geometry)
    approach = strategy.first_burn_radius(geometry) if approach is None else approach
    return fly_capture(
        body.gm, body.radius, body.soi, speed, approach, strategy.burn_radii(geometry),
        strategy.orbits(geometry), list(maneuver.burns), thrust, engine.exhaust_speed, engine.mass, engine.steering,
        safe_radius=body.safe_radius, split_apoapsis=body.bound, passes=engine.passes if passes is None else passes,
        max_passes=engine.max_passes,
    ), maneuver


def _chunk_layout(strategies, speeds: int, targets: int, periapses: int, thrusts: int
                  ) -> dict[str, tuple[np.dtype, tuple[int, ...]]]:
    """Dtype and shape of one chunk's finite-stage arrays (a body axis of length 1)."""
    sizes = {"strategy": len(strategies), "burn": max(s.burns for s in strategies), "body": 1, "v_inf": speeds,
             "target_altitude": targets, "periapsis_altitude": periapses, "thrust": thrusts}
    return {v.name: (np.dtype(v.dtype), shape_of(v, sizes)) for v in cube_variables(strategies) if v.checkpointed}


def _chunk_arrays(strategies, speeds: int, targets: int, periapses: int, thrusts: int) -> dict[str, np.ndarray]:
    """One chunk's finite-stage arrays (a body axis of length 1), NaN or 0 until computed."""
    return {name: np.full(shape, 0 if dtype.kind == "i" else np.nan, dtype=dtype)
            for name, (dtype, shape) in _chunk_layout(strategies, speeds, targets, periapses, thrusts).items()}


def _without_body(arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Views of one chunk's arrays without their body axis (length 1)."""
    return {name: values[(slice(None),) * _axis(name, "body") + (0,)] for name, values in arrays.items()}


def _axis(name: str, dim: str) -> int:
    """Position of dimension ``dim`` in finite variable ``name``."""
    return _FINITE_DIMS[name].index(dim)


def _run_chunk(body: _BodyInputs, speeds_km, thrust, engine: _Engine, strategies) -> Arrays:
    """
    All ``strategies`` (the registry's entries, passed along so that worker processes fly the
    same ones) for one body, a run of arrival speeds, every target, periapsis and thrust.
    """
    shape = (speeds_km.size, body.target_radius.shape[0], body.periapsis_radius.shape[1], thrust.size)
    arrays = _chunk_arrays(strategies, *shape)
    out = _without_body(arrays)
    grids = np.meshgrid(speeds_km * _KM, np.arange(shape[1]), np.arange(shape[2]), thrust, indexing="ij")
    speed, target_index, periapsis_index, thrusts = (g.ravel() for g in grids)
    exhaust_speed, mass = engine.exhaust_speed, engine.mass
    for s, strategy in enumerate(strategies):
        code = body.status[s][target_index, periapsis_index]
        out["finite_status"][s].ravel()[:] = code
        ok = np.flatnonzero(code == 0)
        t, p = target_index[ok], periapsis_index[ok]
        geometry = Geometry(body.gm, body.periapsis_radius[0, p], body.target_radius[t, 0],
                            body.apoapsis_radius[t, p],
                            None if body.target_apoapsis is None else body.target_apoapsis[t, 0])
        result, maneuver = _fly(strategy, body, geometry, speed[ok], thrusts[ok], engine)
        flown = result.outcome == 0
        out["finite_status"][s].ravel()[ok] = _OUTCOME_CODE[result.outcome]
        remaining = np.full(ok.size, float(mass))
        for k in range(out["finite_burn_delta_v"].shape[1]):
            values = dict.fromkeys(("finite_burn_delta_v", "gravity_loss", "burn_duration", "burn_propellant_mass"),
                                   np.zeros(ok.size))
            values["burn_passes"] = np.zeros(ok.size, dtype=np.int8)
            if k < strategy.burns:
                burn = result.delta_v[k]
                spent = remaining * -np.expm1(-burn / exhaust_speed)
                remaining = remaining - spent
                values = {
                    "finite_burn_delta_v": burn,
                    "gravity_loss": burn - maneuver.burns[k],
                    "burn_duration": result.duration[k],
                    "burn_propellant_mass": spent,
                    "reached_periapsis_altitude": (result.periapsis_radius[k] - body.radius) / _KM,
                    "reached_apoapsis_altitude": (result.apoapsis_radius[k] - body.radius) / _KM,
                    "ignition_time": result.ignition[k],
                    "pitch_rate": np.degrees(result.pitch_rate[k]),
                    "burn_passes": result.passes[k],
                }
            for name, value in values.items():
                out[name][s, k].ravel()[ok] = np.where(flown, value, 0 if name == "burn_passes" else np.nan)
        total = np.where(flown, result.delta_v.sum(axis=0) + result.trim_delta_v, np.nan)
        out["finite_delta_v"][s].ravel()[ok] = total
        out["trim_delta_v"][s].ravel()[ok] = np.where(flown, result.trim_delta_v, np.nan)
        # Where it went and how it was aimed: for failed sequences too (how low the failed flight went).
        out["lowest_altitude"][s].ravel()[ok] = (result.lowest_radius - body.radius) / _KM
        out["aimed_periapsis_altitude"][s].ravel()[ok] = (result.approach_periapsis - body.radius) / _KM
        out["finite_propellant_mass"][s].ravel()[ok] = mass * -np.expm1(-total / exhaust_speed)
        out["finite_time_to_orbit"][s].ravel()[ok] = np.where(flown, result.time, np.nan)
    best, saving, _ = pick_best(out["finite_delta_v"], out["finite_propellant_mass"],
                                tie_tolerance=engine.tie_tolerance)
    out["finite_best_strategy"][...], out["finite_saving_over_direct"][...] = best, saving
    return arrays


def _crossovers(config: SweepConfig, bodies: list[_BodyInputs], arrays: Arrays, runner) -> None:
    """
    Equal-cost arrival speeds per (body, target, periapsis, thrust), in place, km/s.

    The brackets go to ``runner`` in fixed groups of ``_BRACKETS_PER_TASK`` (independent of the
    worker count, so the answer is too).
    """
    engine = _Engine.of(config)
    v_grid = config.v_inf * _KM
    reference = STRATEGIES[DIRECT]
    for challenger, strategy in challengers():
        crossover = arrays[strategy.finite_crossover_variable]
        crossover[...] = np.nan
        gap = arrays["finite_delta_v"][challenger] - arrays["finite_delta_v"][DIRECT]  # (B, V, T, P, F)
        flips = (np.sign(gap[:, :-1]) * np.sign(gap[:, 1:]) < 0)
        first = np.argmax(flips, axis=1)  # (B, T, P, F)
        b, t, p, f = np.nonzero(flips.any(axis=1))
        if b.size == 0:
            continue
        i = first[b, t, p, f]
        brackets = {
            "low": v_grid[i], "high": v_grid[i + 1], "gap_low": gap[b, i, t, p, f], "gap_high": gap[b, i + 1, t, p, f],
            "gm": np.array([bodies[k].gm for k in b]), "radius": np.array([bodies[k].radius for k in b]),
            "soi": np.array([bodies[k].soi for k in b]),
            "safe": np.array([bodies[k].safe_radius for k in b]), "bound": np.array([bodies[k].bound for k in b]),
            "periapsis": np.array([bodies[k].periapsis_radius[0, q] for k, q in zip(b, p, strict=True)]),
            "target": np.array([bodies[k].target_radius[q, 0] for k, q in zip(b, t, strict=True)]),
            "apoapsis": np.array([bodies[k].apoapsis_radius[u, q] for k, u, q in zip(b, t, p, strict=True)]),
            "target_apoapsis": np.array([(bodies[k].target_radius if bodies[k].target_apoapsis is None
                                          else bodies[k].target_apoapsis)[q, 0] for k, q in zip(b, t, strict=True)]),
            "thrust": config.thrust[f],
        }
        # Each strategy's aimed approach periapsis at both ends: the aim inside starts between them;
        # and its passes per burn, kept inside where both ends agree ("auto" decides elsewhere).
        for name, index in (("challenger", challenger), ("reference", DIRECT)):
            ends = (arrays["burn_passes"][index][:, b, i, t, p, f], arrays["burn_passes"][index][:, b, i + 1, t, p, f])
            brackets[f"{name}_passes"] = np.where((ends[0] == ends[1]).all(axis=0), ends[0], 0).T  # (brackets, burn)
            aimed = arrays["aimed_periapsis_altitude"][index]
            radius = brackets["radius"]
            brackets[f"{name}_low"] = aimed[b, i, t, p, f] * _KM + radius
            brackets[f"{name}_high"] = aimed[b, i + 1, t, p, f] * _KM + radius
        groups = [slice(start, start + _BRACKETS_PER_TASK) for start in range(0, b.size, _BRACKETS_PER_TASK)]
        tasks = (delayed(_solve_brackets)({k: v[g] for k, v in brackets.items()}, (strategy, reference), engine)
                 for g in groups)
        root = np.concatenate(list(runner(tasks)))
        crossover[b, t, p, f] = root / _KM


def _solve_brackets(brackets, pair, engine: _Engine) -> np.ndarray:
    """Illinois iterations for one group of brackets (run in a worker); ``pair``: (challenger, reference)."""

    def cost(strategy, name, speed, index):
        """Finite total of ``strategy`` at ``speed`` for brackets ``index``, aimed from between its ends."""
        share = (speed - brackets["low"][index]) / (brackets["high"][index] - brackets["low"][index])
        low, high = brackets[f"{name}_low"][index], brackets[f"{name}_high"][index]
        approach = low + share * (high - low)
        passes = brackets[f"{name}_passes"][index, :strategy.burns]
        total = np.full(index.size, np.nan)
        for agreed, given in ((passes[:, 0] > 0, True), (passes[:, 0] == 0, False)):
            if agreed.any():
                points = index[agreed]
                body = _BodyInputs(brackets["gm"][points], brackets["radius"][points], brackets["soi"][points],
                                   None, None, None, None, safe_radius=brackets["safe"][points],
                                   bound=brackets["bound"][points])
                # A circular target is passed as an ellipse with equal apsides here: the same orbit.
                geometry = Geometry(*(brackets[key][points] for key in
                                      ("gm", "periapsis", "target", "apoapsis", "target_apoapsis")))
                result, _ = _fly(strategy, body, geometry, speed[agreed], brackets["thrust"][points], engine,
                                 approach[agreed], passes[agreed].T if given else None)
                total[agreed] = np.where(result.outcome == 0, result.delta_v.sum(axis=0) + result.trim_delta_v,
                                         np.nan)
        return total

    def gap(speed, index):
        return cost(pair[0], "challenger", speed, index) - cost(pair[1], "reference", speed, index)

    return _illinois(gap, brackets["low"], brackets["high"], brackets["gap_low"], brackets["gap_high"])


def _illinois(function, low, high, f_low, f_high):
    """
    Vectorized regula falsi, Illinois variant (an end kept twice running has its value halved).

    ``function(x, index)`` evaluates brackets ``index`` at ``x``. Returns the roots: the linear
    estimate in the last bracket where the iterations run out; NaN where the model fails inside.
    """
    low, high, f_low, f_high = (np.array(a, dtype=float) for a in (low, high, f_low, f_high))
    root = np.full(low.shape, np.nan)
    kept = np.zeros(low.shape, dtype=np.int8)  # +1: low end moved last time, -1: high end
    active = np.arange(low.size)
    for _ in range(_ROOT_STEPS):
        if active.size == 0:
            break
        a, b, fa, fb = low[active], high[active], f_low[active], f_high[active]
        guess = b - fb * (b - a) / (fb - fa)
        value = function(guess, active)
        failed = np.isnan(value)
        done = ~failed & ((np.abs(value) < _ROOT_COST) | (np.abs(b - a) < _ROOT_WIDTH))
        root[active[done]] = guess[done]
        move_low = np.sign(value) == np.sign(fa)
        last = kept[active]
        low[active] = np.where(move_low, guess, a)
        high[active] = np.where(move_low, b, guess)
        f_low[active] = np.where(move_low, value, np.where(last == -1, 0.5 * fa, fa))
        f_high[active] = np.where(move_low, np.where(last == 1, 0.5 * fb, fb), value)
        kept[active] = np.where(move_low, 1, -1)
        active = active[~(done | failed)]
    a, b, fa, fb = low[active], high[active], f_low[active], f_high[active]
    root[active] = b - fb * (b - a) / (fb - fa)
    return root


def _where(name: str, chunk) -> tuple:
    """Index of one chunk's block in the full array of finite variable ``name``."""
    where = [slice(None)] * len(_FINITE_DIMS[name])
    where[_axis(name, "body")] = slice(chunk.body, chunk.body + 1)
    where[_axis(name, "v_inf")] = slice(chunk.v_inf_start, chunk.v_inf_stop)
    return tuple(where)


def _place(out: Arrays, chunk, result: dict[str, np.ndarray]) -> None:
    """Write one chunk's arrays into the full output (in memory or a shared memory map)."""
    for name, values in result.items():
        out[name][_where(name, chunk)] = values


def _run_and_place(out: Arrays, chunk, parent: int, *args) -> None:
    """
    A task of run ``parent`` (its pid), in that process or a worker of it; skipped once the run
    is gone (killed: its orphaned workers drain the queue without computing).
    """
    if parent in (os.getpid(), os.getppid()):
        _place(out, chunk, _run_chunk(*args))


def _take(out: Arrays, chunk) -> dict[str, np.ndarray]:
    """One chunk's checkpointed arrays, read back from the full output (the inverse of :func:`_place`)."""
    return {name: np.array(out[name][_where(name, chunk)]) for name in _FINITE_DIMS}


def finite_chunks(config: SweepConfig, points_per_chunk: int = 1 << 14) -> list:
    """
    The finite-burn chunks: about ``points_per_chunk`` finite-burn points each (every thrust
    level of a grid point goes in the same chunk), and at least ``_MIN_CHUNKS`` where the grid
    allows, so that a small sweep still spreads over the workers and checkpoints often. They
    depend on the grid alone, never on the worker count.

    They are listed in van der Corput order (index by bit-reversed fraction), not grid order:
    a chunk's cost grows with the arrival speed and differs by body, so grid order would leave
    the dearest chunks for last; spread, the share of chunks done tracks the share of work
    done, and so do the progress lines' time left and a resumed run's savings.
    """
    grid_points = int(np.prod(config.shape))
    per_chunk = min(points_per_chunk // config.thrust.size, -(-grid_points // _MIN_CHUNKS))
    work = chunks(config.shape, max(per_chunk, 1))
    return [work[i] for i in sorted(range(len(work)), key=_radical_inverse)]


def _radical_inverse(index: int) -> float:
    """The van der Corput sequence in base 2: the bits of ``index`` mirrored about the point."""
    value, scale = 0.0, 0.5
    while index:
        value += scale * (index & 1)
        index >>= 1
        scale *= 0.5
    return value


def _bytes(shapes: dict[str, tuple[tuple[int, ...], np.dtype]]) -> int:
    return sum(math.prod(shape) * np.dtype(dtype).itemsize for shape, dtype in shapes.values())


def _maps_folder(needed: int, checkpoint: Path | None) -> str:
    """
    A new private folder for the workers' shared output maps: in memory (/dev/shm) where it has
    room for ``needed`` bytes, else on disk beside the checkpoints (or in the temporary folder),
    said in a log line. Containers often give /dev/shm 64 MB; a map past its end kills the
    worker writing it (SIGBUS), so the room is checked first.
    """
    shared = _shared_folder()
    if shared is not None and shutil.disk_usage(shared).free >= needed + _SHM_HEADROOM:
        return tempfile.mkdtemp(prefix=f"capsweep-{os.getpid()}-", dir=shared)
    fallback = checkpoint.parent if checkpoint is not None else Path(tempfile.gettempdir())
    free = shutil.disk_usage(shared).free if shared is not None else 0
    logger.info("finite-burn arrays (%.1f MiB) do not fit in %s (%.1f MiB free): mapping them from files in %s",
                needed / 2**20, shared or "a memory-backed folder", free / 2**20, fallback)
    return tempfile.mkdtemp(prefix=f".capsweep-{os.getpid()}-maps-", dir=fallback)


def _shared_folder() -> str | None:
    """
    A memory-backed folder for the workers' shared output, where the system has one: /dev/shm
    if it is a real folder (not a link) of root's or ours that we may write, and that others may
    write only with the sticky bit (so none can rename our folder in it).
    """
    try:
        info = os.lstat("/dev/shm")
    except OSError:
        return None
    safe = (stat.S_ISDIR(info.st_mode) and info.st_uid in (0, os.geteuid())
            and (not info.st_mode & 0o022 or info.st_mode & stat.S_ISVTX))
    return "/dev/shm" if safe and os.access("/dev/shm", os.W_OK) else None


_SHARED_NAME = re.compile(r"capsweep-([0-9]+)-[a-z0-9_]{8}")
"""How :func:`evaluate_finite` names its shared-output folders: mkdtemp's prefix and 8 random characters."""


def _remove_stale_shared(parent: str | None) -> None:
    """
    Remove shared-output folders left by runs that were killed: in a memory-backed folder they
    would hold their size in RAM until reboot. Only ours: named exactly as we name them
    (``capsweep-<pid>-<8 characters>``, nothing more, no newline), a folder (not a link) owned by
    the current user, whose pid is gone. Anything else is left alone, with a DEBUG line at most.
    """
    try:
        with os.scandir(parent or tempfile.gettempdir()) as scan:
            entries = [entry for entry in scan if entry.name.startswith("capsweep-")]
    except OSError:
        return
    for entry in entries:
        match = _SHARED_NAME.fullmatch(entry.name)
        try:
            info = entry.stat(follow_symlinks=False)
        except OSError:
            continue
        if match is None or not stat.S_ISDIR(info.st_mode) or info.st_uid != os.geteuid():
            logger.debug("leaving %r alone: not a shared-output folder of this user", entry.path)
        elif not alive(int(match[1])):
            logger.info("removing %s, left by a killed run (pid %s)", entry.path, match[1])
            shutil.rmtree(entry.path, ignore_errors=True)  # rmtree follows no link inside


def evaluate_finite(config: SweepConfig, plans, workers: int, progress: bool = False,
                    points_per_chunk: int = 1 << 14, scheduler: str | None = None,
                    checkpoint: Path | None = None) -> Arrays:
    """
    Run every strategy with the finite-burn model; ``plans`` are the impulsive per-body plans.

    With several local workers the processes write straight into memory-mapped output arrays
    (files in a memory-backed folder where there is one, removed as soon as the workers finish).
    With ``scheduler`` (a Dask distributed address) the chunks run on that cluster through
    joblib's dask backend and return their arrays, placed here; chunks are the same either way,
    so the cube is too.

    With ``checkpoint`` (a folder) every finished chunk is saved there as it completes, and
    chunks already saved there (by a run that was killed) are loaded instead of recomputed: the
    result is the same array for array. The folder is the caller's to remove once the cube lands.
    """
    shapes = finite_layout(config)
    strategies = tuple(STRATEGIES)
    bodies = [
        _BodyInputs(body.gm, body.radius, body.sphere_of_influence, plan.geometry.periapsis_radius,
                    plan.geometry.target_radius, np.asarray(plan.geometry.apoapsis_radius), plan.status,
                    plan.geometry.target_apoapsis, body.safe_periapsis_radius, plan.apoapsis_bound)
        for body, plan in zip(config.bodies, plans, strict=True)
    ]
    engine = _Engine.of(config)
    work = finite_chunks(config, points_per_chunk)
    points = int(np.prod(config.finite_shape))

    def arguments(c):
        return bodies[c.body], config.v_inf[c.v_inf_start:c.v_inf_stop], config.thrust, engine, strategies

    if scheduler is not None:
        return _evaluate_on_cluster(config, bodies, shapes, work, arguments, scheduler, progress)
    key = run_key(fingerprint(config), [s.name for s in strategies])
    _, _, ntarget, nperiapsis, nthrust = config.finite_shape

    def expected(i: int) -> dict[str, tuple[np.dtype, tuple[int, ...]]]:
        return _chunk_layout(strategies, work[i].v_inf_stop - work[i].v_inf_start, ntarget, nperiapsis, nthrust)

    done = set()
    if checkpoint is not None:
        make_folder(checkpoint, mode=0o700)  # ours alone: nobody else may add or swap a chunk
        done = {i for i in range(len(work)) if chunk_file(checkpoint, i).is_file()}
        if done:
            logger.info("resuming: %d of %d finite-burn chunks already done in %s", len(done), len(work), checkpoint)
    todo = [i for i in range(len(work)) if i not in done]
    processes = max(1, min(workers, len(todo)))
    logger.info("finite burns: %d points in %d chunks on %d processes", points, len(work), processes)
    _remove_stale_shared(_shared_folder())
    folder = _maps_folder(_bytes(shapes), checkpoint) if processes > 1 else None
    runner = Parallel(n_jobs=processes, backend="loky" if processes > 1 else "sequential", return_as="generator")
    # Saved chunks are read on a thread while the workers compute the rest (reading back half of
    # a large run takes seconds); they touch disjoint parts of the output.
    loader = ThreadPoolExecutor(max_workers=1, thread_name_prefix="capsweep-resume")
    try:
        # With several processes the workers write into memory maps; once they are done the files
        # are removed and the maps, still open here, are the result: nothing is pickled back.
        out = {name: np.empty(shape, dtype) if folder is None else np.lib.format.open_memmap(
            os.path.join(folder, f"{name}.npy"), mode="w+", dtype=dtype, shape=shape)
            for name, (shape, dtype) in shapes.items()}

        def load_done() -> list[int]:
            """Place every saved chunk that passes verification; return the others' indices."""
            rejected = []
            for i in sorted(done):
                arrays = load_chunk(checkpoint, i, key, expected(i))
                if arrays is None:
                    rejected.append(i)
                else:
                    _place(out, work[i], arrays)
            return rejected

        def compute(indices: list[int], label: str) -> None:
            tasks = (delayed(_run_and_place)(out, work[i], os.getpid(), *arguments(work[i])) for i in indices)
            for i, _ in zip(indices, track(runner(tasks), len(indices), points * len(indices) // max(len(work), 1),
                                           label, progress), strict=True):
                if checkpoint is not None:
                    save_chunk(checkpoint, i, _take(out, work[i]), key)

        loading = loader.submit(load_done)
        compute(todo, "finite burns")
        rejected = loading.result()  # raises only what is not a checkpoint's fault
        if rejected:
            logger.warning("recomputing %d finite-burn chunks whose checkpoints failed verification", len(rejected))
            compute(rejected, "finite burns, recomputed")
    finally:
        loader.shutdown(wait=True, cancel_futures=True)  # never remove the maps under a running loader
        if folder is not None:
            shutil.rmtree(folder, ignore_errors=True)
    _crossovers(config, bodies, out, runner)
    return out


def _reachable(address: str) -> None:
    """Fail fast (OSError) when nothing listens at a tcp:// scheduler address."""
    if address.startswith("tcp://"):
        host, _, port = address[len("tcp://"):].rpartition(":")
        socket.create_connection((host.strip("[]"), int(port)), timeout=5).close()


def _evaluate_on_cluster(config, bodies, shapes, work, arguments, scheduler: str, progress: bool) -> Arrays:
    """The finite sweep on a Dask distributed cluster: chunks return their arrays to this process."""
    try:
        from distributed import Client
        from joblib import parallel_config
    except ImportError as err:
        raise SweepError("--scheduler needs dask.distributed: pip install 'capsweep[cluster]'") from err
    try:
        _reachable(scheduler)
        client = Client(scheduler, timeout=30)
    except (OSError, TimeoutError, ValueError) as err:
        raise SweepError(f"--scheduler {scheduler!r}: cannot reach the Dask scheduler ({err})") from err
    out = {name: np.empty(shape, dtype) for name, (shape, dtype) in shapes.items()}
    logger.info("finite burns: %d points in %d chunks on the Dask cluster at %s",
                int(np.prod(config.finite_shape)), len(work), scheduler)
    try:
        with parallel_config(backend="dask"):
            runner = Parallel(n_jobs=-1, return_as="generator")
            results = runner(delayed(_run_chunk)(*arguments(c)) for c in work)
            for chunk, result in track(zip(work, results, strict=True), len(work),
                                       int(np.prod(config.finite_shape)), "finite burns", progress):
                _place(out, chunk, result)
            _crossovers(config, bodies, out, runner)
    finally:
        client.close()
    return out
