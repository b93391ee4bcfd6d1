"""The pipeline as a library: config -> engine -> cube -> report, for Python callers and the CLI.

:func:`run` and :func:`run_to_file` are the bare evaluations (in memory, or streamed to a file).
:func:`run_sweep` is what ``capsweep run`` does, for a Python caller too: skip an up-to-date cube,
check the room, hold the output folder's lock, log beside the outputs, resume from checkpoints,
then write the figures and the summary. :func:`summarize_cube`, :func:`plot_cube`,
:func:`compare_files`, :func:`universal_map`, :func:`check_text` and :func:`bodies_text` are the
other commands. Nothing here prints: the text is returned, and progress is logged.
"""

from __future__ import annotations

import glob
import hashlib
import logging
import math
import os
import re
import resource
import shutil
import stat
import time
import uuid
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import NamedTuple, TypeVar

import xarray as xr

from sweep.atomic import replacing
from sweep.catalog import catalog
from sweep.config import SweepConfig
from sweep.cube.conventions import build_dataset, fingerprint
from sweep.cube.netcdf import write_dataset
from sweep.engine.grid import speeds_per_chunk
from sweep.engine.impulsive import (
    STREAM_CHUNK_POINTS,
    add_placeholders,
    estimate_bytes,
    estimate_memory,
    evaluate,
    prepare,
    sweep_chunks,
)
from sweep.engine.layout import layout
from sweep.engine.processes import alive
from sweep.errors import SweepError, Terminated
from sweep.lock import output_lock
from sweep.manifest import Assessment, Manifest, assess, read_manifest, record, write_manifest
from sweep.model.strategies import STRATEGIES
from sweep.model.variables import cube_variables
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.report.selection import BLOCK_BYTES, MAX_PERIAPSIS_PANELS
from sweep.report.summary import answers, summary_tables, write_summary
from sweep.safefs import check_folder, make_folder, open_log, remove_stale_parts, temporary_beside

__all__ = [
    "DEFAULT_OUT",
    "CompareResult",
    "ReportFiles",
    "RunResult",
    "bodies_text",
    "check_text",
    "compare_files",
    "open_checked_cube",
    "plot_cube",
    "run",
    "run_sweep",
    "run_to_file",
    "short_answer",
    "summarize_cube",
    "universal_map",
]

DEFAULT_OUT = Path("outputs")
"""Where outputs go without an explicit folder: ``outputs/<config name>/``, ``outputs/universal/``."""

CUBE_VARIABLES = ("best_strategy", "saving_over_direct", "status", "crossover_v_inf")
"""Variables every capsweep cube has; a netCDF file lacking one is not a capsweep cube."""

LOG_NAME = "capsweep.log"
_CHECKPOINT_NAME = re.compile(r"[0-9a-f]{16}\.chunks")  # after ".<config name>.": the key and the suffix
# Virtual memory a run maps besides its results: the interpreter, numpy, xarray, netCDF/HDF5,
# matplotlib, thread stacks and worker pools. Measured here as VmPeak 650 MB (impulsive) to 800
# MB (finite, two workers) for small grids; under a lower ``ulimit -v`` imports failed or spun.
BASELINE_ADDRESS_SPACE = 1 << 30
_CAUTION = ("Preliminary patched-conic estimates (impulsive burns; simple finite burns where a thrust axis is given): "
           "verify with higher-fidelity propagation.")

logger = logging.getLogger(__name__)
_T = TypeVar("_T")


def run(config, workers: int | None = None, progress: bool = False, scheduler: str | None = None, checkpoint=None):
    """Evaluate ``config`` and return the labelled cube as an ``xarray.Dataset``."""
    arrays = evaluate(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
    return build_dataset(config, arrays)


def run_to_file(config, path, workers: int | None = None, progress: bool = False, scheduler: str | None = None,
                checkpoint=None, compression: int = 0, points_per_chunk: int = STREAM_CHUNK_POINTS):
    """
    Evaluate ``config`` straight into the netCDF cube at ``path`` and return the path.

    The per-point arrays are streamed: each chunk is written as it is computed, so memory is a
    few chunks (``points_per_chunk`` grid points each) plus the per-body and finite-burn arrays,
    whatever the grid's size. The file equals ``write_dataset(run(config), path)`` value for
    value; it appears at ``path`` only once complete.
    """
    plans, arrays = prepare(config, workers=workers, progress=progress, scheduler=scheduler, checkpoint=checkpoint)
    dataset = build_dataset(config, add_placeholders(config, arrays))
    stream = sweep_chunks(config, plans, workers=workers, progress=progress, points_per_chunk=points_per_chunk)
    return write_dataset(dataset, path, compression, stream=stream,
                         speeds_per_chunk=speeds_per_chunk(config.shape, points_per_chunk))


@dataclass(frozen=True)
class ReportFiles:
    """The report files written from a cube.

    Attributes
    ----------
    summary : list of Path
        ``summary.md`` first, then the CSV tables; empty when no summary was written.
    figures : list of Path
        The PNG figures; empty when none were drawn.
    tables : dict of DataFrame, optional
        The summary's tables (:func:`sweep.report.summary.summary_tables`), for answers drawn
        from them without computing them again; None when no summary was written.
    """

    summary: list[Path] = field(default_factory=list)
    figures: list[Path] = field(default_factory=list)
    tables: dict | None = field(default=None, repr=False, compare=False)


@dataclass(frozen=True)
class RunResult:
    """What :func:`run_sweep` did.

    Attributes
    ----------
    cube : Path
        The netCDF cube (written by this call, or the up-to-date one found).
    folder : Path
        The output folder.
    summary, figures : list of Path
        As in :class:`ReportFiles`; empty when ``skipped``.
    elapsed : float
        Seconds spent evaluating and writing the cube; 0 when ``skipped``.
    points : int
        Grid points (body x v_inf x target_altitude x periapsis_altitude).
    strategies : int
        Strategies evaluated at each point.
    skipped : bool
        True when the cube was already up to date and nothing was written.
    answer : str
        The plain-language answer (:func:`short_answer`); "" when ``skipped``.
    action : str
        What the call did: ``"skipped"`` (every file matched the manifest), ``"report"`` (the
        cube matched, the summary, tables and figures were redone) or ``"computed"``.
    reason : str
        Why, from :func:`up_to_date` (e.g. which report files were missing or changed).
    removed : list of Path
        Files of the previous run's manifest that this run did not write, now removed.
    """

    cube: Path
    folder: Path
    summary: list[Path]
    figures: list[Path]
    elapsed: float
    points: int
    strategies: int
    skipped: bool
    answer: str = ""
    action: str = "computed"
    reason: str = ""
    removed: list[Path] = field(default_factory=list)


@dataclass(frozen=True)
class CompareResult:
    """A drift report between two cubes: its text, and whether it exceeds the tolerance."""

    text: str
    exceeds: bool


def run_sweep(config: SweepConfig, folder: str | Path | None = None, *, workers: int | None = None,
              force: bool = False, compression: int = 0, scheduler: str | None = None, progress: bool = False,
              figures: bool = True) -> RunResult:
    """
    Evaluate ``config`` into ``folder`` as ``capsweep run`` does: cube, figures, summary.

    Parameters
    ----------
    config : SweepConfig
        From :func:`sweep.config.load_config` or :func:`sweep.config.parse_config`.
    folder : str or Path, optional
        Output folder; default ``outputs/<config name>/``.
    workers : int, optional
        Bound on threads and processes for every stage, figures included; default every core.
    force : bool
        Recompute even when the cube is up to date, and run even when the size estimate
        exceeds the free disk or memory.
    compression : int
        zlib level 1-9 for the cube, 0 for none.
    scheduler : str, optional
        Address of a Dask distributed scheduler for the finite burns (no checkpoints then).
    progress : bool
        Show a progress bar (else progress is logged).
    figures : bool
        Draw the PNG figures (the summary links those present).

    Returns
    -------
    RunResult

    Raises
    ------
    SweepError
        The folder cannot be written, the grid would not fit (without ``force``), or any
        write fails; :class:`sweep.lock.LockError` when another live process holds the folder.

    Notes
    -----
    The run is one transaction, recorded in the folder's manifest (:mod:`sweep.manifest`), written
    once when the cube lands and last of all when the report is done. When :func:`up_to_date`
    finds every file as the manifest records it for this config, nothing is written and the
    result has ``skipped=True``; when only the report is missing or changed, the report alone is
    redone (``action="report"``); otherwise the cube is computed. Files of the previous manifest
    this run did not write are removed (cubes are kept). One writer per folder: the
    lock is held from the first write to the last. Finished finite-burn chunks are kept in a
    checkpoint folder named by the inputs, so a killed run resumes; it goes once the cube lands.
    """
    folder = Path(folder) if folder is not None else DEFAULT_OUT / config.name
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise SweepError(f"workers must be None (all cores) or a positive count, got {workers!r}")
    cube_path = folder / f"{config.name}.nc"
    checkpoint = checkpoint_folder(config, folder)
    points = math.prod(config.shape)
    check_folder(folder)  # before anything is read or removed: a folder others could tamper with is refused
    state = Assessment("cube", "--force", None) if force else up_to_date(cube_path, config, figures)
    if state.redo == "nothing":
        shutil.rmtree(checkpoint, ignore_errors=True)  # left by a run killed after its cube landed
        logger.info("up to date: %s", cube_path)
        return RunResult(cube_path, folder, [], [], 0.0, points, 0, True, action="skipped", reason=state.reason)
    if state.redo == "cube" and not force:
        check_room(config, folder, workers)
    check_writable(folder)
    # Checkpoints are kept even with force: they are keyed by the same config, catalog and
    # version, so loading them gives the same cube, and a forced run that is killed resumes.
    with _write_errors(folder), output_lock(folder), _log_file(folder / LOG_NAME), _logging_stop():
        logger.info("run of %s into %s", config.path, folder)
        remove_stale_checkpoints(config, folder)
        _remove_leftovers(folder, checkpoint)
        previous = read_manifest(folder)  # its files the new run does not write are removed before the new manifest
        started = time.perf_counter()
        if state.redo == "cube":
            # Evaluated and written chunk by chunk: memory is a few chunks, not the cube.
            _writing(folder, lambda: run_to_file(
                config, cube_path, workers=workers, progress=progress, scheduler=scheduler,
                checkpoint=None if scheduler else checkpoint, compression=compression))
        else:
            logger.info("cube %s matches the manifest; redoing the report only (%s)", cube_path, state.reason)
        elapsed = time.perf_counter() - started
        shutil.rmtree(checkpoint, ignore_errors=True)  # the cube has landed
        stale = (previous.names() if previous else set()) - {cube_path.name}
        cube_entry = ({cube_path.name: state.manifest.files[cube_path.name]} if state.redo == "report"
                      else _writing(folder, lambda: record([cube_path])))  # hashed once: read back after the write
        manifest = Manifest(fingerprint(config), cube_path.name, cube_entry, False, figures, tuple(sorted(stale)))
        if state.redo == "cube":  # the cube is known whole from here on: a kill now costs the report only
            _writing(folder, lambda: write_manifest(folder, manifest))
        with open_checked_cube(cube_path) as dataset:
            report = _write_report(dataset, folder, workers, figures=figures)
            written = [*report.summary, *report.figures]
            removed = _writing(folder, lambda: _remove_stale(folder, stale - {p.name for p in written}))
            _writing(folder, lambda: write_manifest(folder, replace(
                manifest, files={**manifest.files, **record(written)}, complete=True, leftover=())))
            action = "computed" if state.redo == "cube" else "report"
            logger.info("%s: %s; %d report files written, %d stale files removed", cube_path,
                        "cube computed" if action == "computed" else "report redone", len(written), len(removed))
            return RunResult(cube_path, folder, report.summary, report.figures, elapsed,
                             int(dataset["best_strategy"].size), int(dataset.sizes["strategy"]), False,
                             short_answer(dataset, report.tables), action=action, reason=state.reason,
                             removed=removed)


def summarize_cube(path: str | Path, folder: str | Path | None = None, workers: int | None = None) -> ReportFiles:
    """
    Rebuild the summary and figures of an existing cube into ``folder`` (default: the cube's).

    Everything is rendered first, into a hidden folder beside the outputs, and moved into place
    only when all of it succeeded: an unreadable, damaged or inconsistent cube raises
    :class:`SweepError` naming it and leaves ``folder`` as it was.
    """
    path = Path(path)
    folder = Path(folder) if folder is not None else path.parent
    with open_checked_cube(path) as dataset, _reading(path):
        return _write_report(dataset, folder, workers)


def plot_cube(path: str | Path, folder: str | Path | None = None, workers: int | None = None) -> list[Path]:
    """Draw the PNG figures of an existing cube into ``folder`` (default: the cube's), all or none; return them."""
    path = Path(path)
    folder = Path(folder) if folder is not None else path.parent
    with open_checked_cube(path) as dataset, _reading(path):
        return _write_report(dataset, folder, workers, summary=False).figures


def compare_files(old: str | Path, new: str | Path, tolerance: float) -> CompareResult:
    """The drift report between two cube files, and whether a relative change exceeds ``tolerance``."""
    from sweep.report.compare import compare_cubes, render_drift

    with open_checked_cube(old) as before, open_checked_cube(new) as after, _reading(f"{old} or {new}"):
        drift = compare_cubes(before, after)
    return CompareResult(render_drift(drift, tolerance), bool(drift.exceeds(tolerance)))


def universal_map(folder: str | Path | None = None, speed_ratio_max: float = 3.0,
                  periapsis_ratio_min: float = 0.05) -> tuple[Path, Path]:
    """
    Write the dimensionless regime map's cube and figure into ``folder`` (default ``outputs/universal/``).

    The sweep covers v_inf / v_circular(target) from 0 to ``speed_ratio_max`` (301 values) and
    r_periapsis / r_target from ``periapsis_ratio_min`` to 3 (121 values, geometric).

    Returns
    -------
    tuple of Path
        The cube ``universal.nc`` and the figure ``universal_map.png``.
    """
    import numpy as np

    from sweep.report.figures import DPI, draw_universal_map
    from sweep.universal import universal_dataset

    folder = Path(folder) if folder is not None else DEFAULT_OUT / "universal"
    dataset = universal_dataset(np.linspace(0.0, speed_ratio_max, 301), np.geomspace(periapsis_ratio_min, 3.0, 121))
    cube = _writing(folder, lambda: write_dataset(dataset, folder / "universal.nc"))
    figure = folder / "universal_map.png"

    def draw() -> None:
        with replacing(figure) as temporary:
            draw_universal_map(dataset).savefig(temporary, format="png", dpi=DPI, facecolor="white",
                                                metadata={"Software": None})

    _writing(folder, draw)
    return Path(cube), figure


def check_text(config: SweepConfig) -> str:
    """What ``capsweep check`` reports: the config's grid, its points and the cube's size, one fact a line."""
    shape = config.shape
    points = math.prod(shape)
    lines = [f"{config.path}: valid", f"  name: {config.name}", f"  bodies: {', '.join(b.name for b in config.bodies)}"]
    for label, values, unit in (("v_inf", config.v_inf, "km/s"), ("target_altitude", config.target_altitude, "km"),
                                ("periapsis_altitude", config.periapsis_altitude, "km")):
        lines.append(f"  {label}: {values.size} values, {values[0]:g} to {values[-1]:g} {unit}")
    lines.append(f"  grid shape (body, v_inf, target_altitude, periapsis_altitude): {shape}")
    lines.append(f"  points: {points:,} (x {len(STRATEGIES)} strategies)")
    if config.thrust is not None:
        ratio = config.thrust / (config.arrival_mass * STANDARD_GRAVITY)
        lines.append(f"  thrust: {config.thrust.size} values, {config.thrust[0]:,.6g} to {config.thrust[-1]:,.6g} N "
                     f"(thrust-to-weight {ratio[0]:.3g} to {ratio[-1]:.3g}), {config.steering} steering")
        lines.append(f"  finite-burn points: {points * config.thrust.size:,} (x {len(STRATEGIES)} strategies, each "
                     "burn integrated)")
    needs = estimate_needs(config)
    lines.append(f"  cube size, uncompressed: about {size_text(needs.cube)}")
    if config.thrust is not None:
        lines.append(f"  finite-burn checkpoints on disk while running: about {size_text(needs.checkpoints)}; arrays "
                     f"shared by the workers: {size_text(needs.maps)} (in /dev/shm, or on disk where it lacks room)")
    lines.append(f"  memory for the run's results (streamed to the cube chunk by chunk), on all cores: about "
                 f"{size_text(needs.evaluation)}")
    lines.append(f"  memory for the summary and figures (a body's target, or a figure's panels, at a time): about "
                 f"{size_text(needs.report)}")
    return "\n".join(lines)


def bodies_text() -> str:
    """The body catalog, one block per body, each value with its source."""
    lines = []
    for name, body in catalog().items():
        lines.append(f"{name}")
        lines.append(f"  gm {body.gm / 1e9:.10g} km3 s-2  [{body.sources.get('gm', '')}]")
        lines.append(f"  mean radius {body.radius / 1e3:g} km  [{body.sources.get('radius', '')}]")
        lines.append(f"  lowest safe periapsis altitude {body.safe_periapsis_altitude / 1e3:g} km  "
                     f"[{body.sources.get('safe_periapsis_altitude', '')}]")
        if body.parent:
            lines.append(f"  parent {body.parent}, semi-major axis {body.semi_major_axis / 1e3:.10g} km  "
                         f"[{body.sources.get('semi_major_axis', '')}]")
            lines.append(f"  sphere of influence {body.sphere_of_influence / 1e3:,.0f} km, Hill radius "
                         f"{body.hill_radius / 1e3:,.0f} km  [computed: a (m/M)^(2/5), a (m/3M)^(1/3)]")
    return "\n".join(lines)


def short_answer(dataset: xr.Dataset, tables: dict | None = None) -> str:
    """The summary's plain-language answers, one block per body, and the caution; from ``tables``
    (:func:`sweep.report.summary.summary_tables` of ``dataset``) where given, else computed."""
    out = []
    for body, sentences in answers(dataset, tables).items():
        out.append(f"{body}:")
        out += [f"  {sentence}" for sentence in sentences]
    out.append(_CAUTION)
    return "\n".join(out)


def open_checked_cube(path: str | Path) -> xr.Dataset:
    """Open a cube written by ``capsweep run``, or raise SweepError naming the file and what is wrong."""
    try:
        dataset = xr.open_dataset(path, engine="netcdf4")
    except FileNotFoundError as err:
        raise SweepError(f"{path}: cube not found") from err
    except _BAD_FILE as err:
        raise SweepError(f"{path}: not a readable netCDF cube ({_reason(err)})") from err
    missing = [name for name in CUBE_VARIABLES if name not in dataset]
    if missing:
        dataset.close()
        raise SweepError(f"{path}: not a capsweep cube (lacks {', '.join(missing)})")
    problem = _structure_issue(dataset)
    if problem:
        dataset.close()
        raise SweepError(f"{path}: damaged or not a capsweep cube ({problem})")
    return dataset


@contextmanager
def _reading(path: str | Path) -> Iterator[None]:
    """
    The errors netCDF4, HDF5 and xarray raise on a damaged file while its values are read
    (truncated, bit-flipped, a dimension or variable missing) become a SweepError naming it.
    """
    try:
        yield
    except SweepError:
        raise
    except _BAD_FILE as err:
        problem = _structure_problem(path) if isinstance(err, _BAD_STRUCTURE) else None
        if isinstance(err, _BAD_STRUCTURE) and problem is None:
            raise  # the file is as a cube should be: a defect of capsweep's, not a damaged input (exit 3)
        raise SweepError(f"{path}: damaged or not a capsweep cube ({problem or _reason(err)})") from err


# What opening or reading a bad netCDF file raises: OSError ("NetCDF: HDF error", "Unknown file format"),
# RuntimeError ("NetCDF: HDF error" reading a damaged chunk), ValueError (bad attributes or encodings),
# KeyError and IndexError (a dimension or coordinate missing). The last three are also what a defect
# in the report raises: they count as damage only where the file's structure is not a cube's.
_BAD_FILE = (OSError, RuntimeError, ValueError, KeyError, IndexError)
_BAD_STRUCTURE = (ValueError, KeyError, IndexError)


def _structure_problem(path: str | Path) -> str | None:
    """What in the file at ``path`` differs from a cube's structure (:func:`_structure_issue`), or why it
    cannot be read; None where it has a cube's structure."""
    try:
        with xr.open_dataset(path, engine="netcdf4") as dataset:
            return _structure_issue(dataset)
    except _BAD_FILE as err:
        return _reason(err)


def _structure_issue(dataset: xr.Dataset) -> str | None:
    """How ``dataset`` differs from a cube: a variable of the registry with other dimensions, a grid
    coordinate missing (without it, positions would pass for values); None if it does not."""
    for variable in cube_variables(STRATEGIES):
        if variable.name in dataset and dataset[variable.name].dims != variable.dims:
            return f"{variable.name} has dimensions {dataset[variable.name].dims}, not {variable.dims}"
    missing = {dim for name in CUBE_VARIABLES for dim in dataset[name].dims
               if dim not in dataset.variables and dim not in ("body", "strategy", "burn")}
    return f"coordinates missing: {', '.join(sorted(missing))}" if missing else None


def _reason(err: BaseException) -> str:
    return f"{type(err).__name__}: {str(err).splitlines()[0]}" if str(err).strip() else type(err).__name__


def checkpoint_folder(config: SweepConfig, folder: Path) -> Path:
    """The folder of finished finite-burn chunks: named by the inputs and version, so only a same run resumes."""
    key = hashlib.sha256("".join(fingerprint(config).values()).encode()).hexdigest()[:16]
    return folder / f".{config.name}.{key}.chunks"


def up_to_date(cube: Path, config: SweepConfig, figures: bool = True) -> Assessment:
    """
    What a run of ``config`` writing ``cube`` must redo, from the folder's manifest (:mod:`sweep.manifest`).

    ``redo`` is ``"nothing"`` only when the manifest is complete, records ``config``'s
    fingerprint and every file it lists (the cube, the summary, tables and figures) has its
    recorded size and SHA-256; ``"report"`` when the cube does but a report file does not, or
    the report was never finished; ``"cube"`` otherwise (a damaged cube included). The check
    reads every listed file once (about 0.75 s per GiB, see :mod:`sweep.manifest`).
    """
    return assess(cube.parent, cube.name, fingerprint(config), figures)


class Needs(NamedTuple):
    """What a run needs, bytes: on disk, and in memory at the peak of each phase."""

    cube: int  # the cube, uncompressed
    checkpoints: int  # finished finite-burn chunks, on disk until the cube lands
    maps: int  # the finite-burn arrays the workers share: in /dev/shm, or on disk where it lacks room
    evaluation: int  # results held while evaluating and writing the cube (the shared maps included)
    report: int  # what the summary and figures read at once: a body's target, or a figure's panels

    @property
    def memory(self) -> int:
        return max(self.evaluation, self.report)


def estimate_needs(config: SweepConfig, workers: int | None = None) -> Needs:
    """Disk and memory a run of ``config`` needs, phase by phase (see :class:`Needs`)."""
    nbody, _, ntarget, nperiapsis = config.shape
    per_body = _array_bytes(layout(config, ("impulsive", "plane", "finite"))) // max(nbody, 1)
    finite = _array_bytes(layout(config, ("finite", "finite_crossover")))
    # The summary reads one body's target at a time, the figures up to six periapses of a body, and
    # reductions go block by block (a block and a mask of it): twice the largest, for temporaries.
    drawn = per_body * min(MAX_PERIAPSIS_PANELS, nperiapsis) // max(nperiapsis, 1)
    report = 2 * max(per_body // max(ntarget, 1), drawn) + 2 * min(BLOCK_BYTES, per_body)
    return Needs(cube=estimate_bytes(config), checkpoints=_array_bytes(layout(config, ("finite",))), maps=finite,
                 evaluation=estimate_memory(config, workers), report=report)


def _array_bytes(shapes) -> int:
    return sum(math.prod(shape) * dtype.itemsize for shape, dtype in shapes.values())


def _saved_bytes(folder: Path) -> int:
    """Bytes of the regular files directly in ``folder`` (0 if it is not a folder of ours)."""
    try:
        return sum(entry.stat(follow_symlinks=False).st_size for entry in os.scandir(folder)
                   if entry.is_file(follow_symlinks=False))
    except OSError:
        return 0


def stale_checkpoints(config: SweepConfig, folder: Path) -> list[Path]:
    """
    Checkpoint folders of this output left by killed runs of other inputs or versions: named as
    ours for this config name, real folders (not links) owned by this user, not this run's.
    """
    current = checkpoint_folder(config, folder)
    found = []
    for path in folder.glob(f".{glob.escape(config.name)}.*.chunks"):
        try:
            status = path.lstat()
        except OSError:
            continue
        if path != current and stat.S_ISDIR(status.st_mode) and status.st_uid == os.geteuid() \
                and _CHECKPOINT_NAME.fullmatch(path.name[len(config.name) + 2:]):
            found.append(path)
    return found


def remove_stale_checkpoints(config: SweepConfig, folder: Path) -> None:
    """Remove :func:`stale_checkpoints` (call with the folder's lock held: a running run's are never stale)."""
    for path in stale_checkpoints(config, folder):
        logger.info("removing %s (%s), checkpoints of a killed run of other inputs or version", path,
                    size_text(_saved_bytes(path)))
        shutil.rmtree(path, ignore_errors=True)


def check_room(config: SweepConfig, folder: Path, workers: int | None) -> None:
    """
    Refuse a grid whose outputs would not fit on the disk (cube, checkpoints, and the finite-burn
    maps where /dev/shm lacks room for them), or whose results would not fit in memory at the
    peak of any phase, or under the address-space limit.
    """
    needs = estimate_needs(config, workers)
    existing = next(p for p in (folder, *folder.absolute().parents) if p.exists())
    hint = "shrink the grid, or pass --force to run anyway"
    saved = _saved_bytes(checkpoint_folder(config, folder))  # this run's chunks already on disk: reused
    stale = sum(_saved_bytes(p) for p in stale_checkpoints(config, folder)) if folder.is_dir() else 0
    shm = "/dev/shm" if os.path.isdir("/dev/shm") else None
    maps_on_disk = config.thrust is not None and (shm is None or shutil.disk_usage(shm).free < needs.maps)
    disk = needs.cube + max(needs.checkpoints - saved, 0) + (needs.maps if maps_on_disk else 0)
    free_disk = shutil.disk_usage(existing).free + stale
    if disk > free_disk:
        parts = [f"the cube {size_text(needs.cube)} uncompressed"]
        if config.thrust is not None:
            parts.append(f"finite-burn checkpoints {size_text(max(needs.checkpoints - saved, 0))}"
                         + (f" (besides {size_text(saved)} already saved, which this run reuses)" if saved else ""))
        if maps_on_disk:
            parts.append(f"finite-burn maps {size_text(needs.maps)} (/dev/shm lacks room)")
        freed = f", counting {size_text(stale)} of stale checkpoints a run removes" if stale else ""
        what = (f"the cube would take about {size_text(disk)} uncompressed" if disk == needs.cube
                else f"the outputs would take about {size_text(disk)} ({', '.join(parts)})")
        raise SweepError(f"{config.path}: grid: {what}, but {existing} has {size_text(free_disk)} free{freed}; {hint}")
    memory, free_memory = needs.memory, _available_memory()
    if free_memory is not None and memory > free_memory:
        phase = "evaluating" if needs.evaluation >= needs.report else "writing the summary and figures"
        raise SweepError(f"{config.path}: grid: the run would hold about {size_text(memory)} of results in memory, "
                         f"but {size_text(free_memory)} is available (the peak comes while {phase}); {hint}")
    limit = _address_space_limit()
    if limit is not None and limit < BASELINE_ADDRESS_SPACE + memory:
        need = BASELINE_ADDRESS_SPACE + memory
        raise SweepError(f"{config.path}: the address-space limit (ulimit -v) is {size_text(limit)}, below the "
                         f"{size_text(need)} this run needs ({size_text(BASELINE_ADDRESS_SPACE)} for Python and its "
                         f"libraries plus {size_text(memory)} of results); raise the limit, {hint}")


def check_writable(folder: Path) -> None:
    """Fail before any work if the output folder cannot be made or written to, or is one others could tamper
    with (:func:`sweep.safefs.check_folder`)."""
    try:
        make_folder(folder)
        descriptor, probe = temporary_beside(folder / "capsweep-write-test")  # a new file, no link followed
        os.close(descriptor)
        probe.unlink()
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: output folder cannot be written: "
                         f"{err.strerror or err} (choose another with --out)") from err


def size_text(count: float) -> str:
    """A byte count for people: ``512 B``, ``1.5 KiB`` ... ``2.0 TiB``."""
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if count < 1024 or unit == "TiB":
            return f"{count:.1f} {unit}" if unit != "B" else f"{int(count)} B"
        count /= 1024
    return ""


def _address_space_limit() -> int | None:
    """The soft limit on this process's virtual memory (``ulimit -v``), bytes; None where unlimited."""
    soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    return None if soft == resource.RLIM_INFINITY else soft


def _available_memory() -> int | None:
    """Memory available to a new process, bytes (Linux MemAvailable); None where unknown."""
    try:
        with open("/proc/meminfo", encoding="ascii") as info:
            for line in info:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return None


@contextmanager
def _log_file(path: Path) -> Iterator[None]:
    """Copy the run's log lines (INFO and up) to a file beside the outputs (appended to, never through a link)."""
    stream = open_log(path)
    handler = logging.StreamHandler(stream)
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    handler.setLevel(logging.INFO)
    library = logging.getLogger("sweep")
    previous = library.level
    library.addHandler(handler)
    library.setLevel(min(previous or logging.WARNING, logging.INFO))
    try:
        yield
    finally:
        library.removeHandler(handler)
        library.setLevel(previous)
        handler.close()
        stream.close()


def _remove_leftovers(folder: Path, checkpoint: Path) -> None:
    """Under the folder's lock: remove the temporaries that killed runs left in it and in the checkpoint folder."""
    removed = []
    for place in (folder, checkpoint):
        if os.path.lexists(place):
            check_folder(place)  # a checkpoint folder another user made or swapped is refused, not read
            removed += remove_stale_parts(place, alive)
    if removed:
        logger.info("removed %d partial file(s) left by killed runs: %s", len(removed),
                    ", ".join(str(path) for path in removed))


@contextmanager
def _logging_stop() -> Iterator[None]:
    """Log a run stopped by Ctrl-C or SIGTERM (:class:`sweep.errors.Terminated`) while its log file is open."""
    try:
        yield
    except KeyboardInterrupt as err:
        logger.warning("run stopped: %s; outputs are whole files of this run or the previous one, and the lock is "
                       "released", "terminated (SIGTERM)" if isinstance(err, Terminated) else "interrupted (Ctrl-C)")
        raise


def _write_report(dataset: xr.Dataset, folder: Path, workers: int | None, figures: bool = True,
                  summary: bool = True) -> ReportFiles:
    """
    Render the figures and the summary (which links them) into a hidden folder inside ``folder``,
    then move each into place: a failure while rendering leaves ``folder`` exactly as it was.
    """
    def stage() -> ReportFiles:
        folder.mkdir(parents=True, exist_ok=True)
        _remove_dead_stages(folder)
        staging = folder / f"{_STAGE_PREFIX}{os.getpid()}-{uuid.uuid4().hex[:12]}"
        staging.mkdir()
        try:
            drawn = _draw_figures(dataset, staging, workers) if figures else []
            tables = summary_tables(dataset) if summary else None  # once: the console answer reads them too
            written = write_summary(dataset, staging, figure_folder=None if figures else folder,
                                    tables=tables) if summary else []
            for path in [*drawn, *written]:  # figures first, so every figure summary.md links is there
                os.replace(path, folder / path.name)
        finally:
            shutil.rmtree(staging, ignore_errors=True)
        return ReportFiles([folder / p.name for p in written], [folder / p.name for p in drawn], tables)

    return _writing(folder, stage)


_STAGE_PREFIX = ".capsweep-report-"


def _remove_dead_stages(folder: Path) -> None:
    """Remove staging folders left by killed processes of ours (their pid is in the name; real folders we own)."""
    for stage in folder.glob(f"{_STAGE_PREFIX}*"):
        pid = stage.name[len(_STAGE_PREFIX):].split("-")[0]
        try:
            status = stage.lstat()
        except OSError:
            continue
        if (pid.isdigit() and int(pid) != os.getpid() and not alive(int(pid)) and stat.S_ISDIR(status.st_mode)
                and status.st_uid == os.geteuid()):
            shutil.rmtree(stage, ignore_errors=True)


def _remove_stale(folder: Path, names: set[str]) -> list[Path]:
    """Remove the files of an earlier run's manifest that this run did not write; cubes are kept."""
    removed = []
    for name in sorted(names):
        path = folder / name
        if path.suffix == ".nc":  # another config's cube: results that cost compute time, never deleted
            logger.info("kept %s: a cube of an earlier run, no longer described by the summary", path)
            continue
        if path.is_file() and not path.is_symlink():
            path.unlink()
            removed.append(path)
            logger.info("removed %s: written by an earlier run, not by this one", path)
    return removed


def _draw_figures(dataset: xr.Dataset, folder: Path, workers: int | None) -> list[Path]:
    from sweep.report.figures import write_figures  # here, not above: matplotlib loads only for calls that draw

    return write_figures(dataset, folder, workers=workers)


def _writing(folder: Path, action: Callable[[], _T]) -> _T:
    """Run ``action``; an OSError becomes a SweepError naming the file that could not be written."""
    with _write_errors(folder):
        return action()


@contextmanager
def _write_errors(folder: Path) -> Iterator[None]:
    """An OSError escaping the block (a write, the log file, a folder made read-only) becomes a SweepError."""
    try:
        yield
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: cannot write output: {err.strerror or err}") from err
