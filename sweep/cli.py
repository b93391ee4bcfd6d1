"""The ``capsweep`` command line: argv in, calls into the pipeline, an exit code out.

No science and no validation live here. Exit 0 on success, 2 on bad input or a failed write
(one line on stderr naming the file, the field and the value; ``--debug`` adds the traceback).
"""

from __future__ import annotations

import argparse
import hashlib
import logging
import os
import shutil
import sys
import time
from collections.abc import Sequence
from contextlib import contextmanager
from pathlib import Path

import xarray as xr

from sweep.atomic import replacing
from sweep.catalog import catalog
from sweep.config import load_config
from sweep.cube.conventions import fingerprint
from sweep.cube.netcdf import write_dataset
from sweep.engine.impulsive import estimate_bytes, estimate_memory
from sweep.errors import SweepError
from sweep.lock import output_lock
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.pipeline import run_to_file
from sweep.report.summary import answers, summary_tables, write_summary
from sweep.version import __version__

__all__ = ["main"]

_DEFAULT_OUT = Path("outputs")


def _build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="capsweep",
        description="Sweep capture strategies (direct, two-burn, three-burn) for spacecraft arriving on a "
        "hyperbolic approach; write a CF netCDF cube and a summary of where each strategy wins.",
    )
    parser.add_argument("--version", action="version", version=f"capsweep {__version__}")
    parser.add_argument("--debug", action="store_true", help="show a traceback on errors")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    run_parser = commands.add_parser("run", help="evaluate a sweep; write the cube and the summary")
    run_parser.add_argument("config", nargs="?", help="TOML config (default: the packaged demo)")
    run_parser.add_argument("--out", type=Path, help="output folder (default: outputs/<config name>/)")
    run_parser.add_argument("--workers", type=int, default=0, help="worker threads (default: all cores)")
    run_parser.add_argument("--scheduler", metavar="ADDRESS",
                            help="run the finite burns on a Dask distributed cluster, e.g. tcp://host:8786")
    run_parser.add_argument("--compression", type=int, default=0, choices=range(10), metavar="LEVEL",
                            help="zlib level 1-9 for the cube, 0 for none (default 0: see the README)")
    run_parser.add_argument("--force", action="store_true",
                            help="recompute even when the cube is up to date with the config, catalog and version, "
                            "and run even when the size estimate exceeds the free disk or memory")
    run_parser.add_argument("-q", "--quiet", action="store_true", help="print only where the files went")
    run_parser.add_argument("-v", "--verbose", action="count", default=0, help="log progress (-vv: debug)")

    check_parser = commands.add_parser("check", help="validate a config; print the grid and cube size")
    check_parser.add_argument("config", help="TOML config")

    commands.add_parser("bodies", help="list the body catalog with each value's source")

    summarize_parser = commands.add_parser("summarize", help="rebuild the summary and figures from an existing cube")
    summarize_parser.add_argument("cube", type=Path, help="netCDF cube written by capsweep run")
    summarize_parser.add_argument("--out", type=Path, help="output folder (default: the cube's folder)")

    plot_parser = commands.add_parser("plot", help="draw the PNG figures from an existing cube")
    plot_parser.add_argument("cube", type=Path, help="netCDF cube written by capsweep run")
    plot_parser.add_argument("--out", type=Path, help="output folder (default: the cube's folder)")

    compare_parser = commands.add_parser("compare", help="drift report between two cubes; exit 1 past tolerance")
    compare_parser.add_argument("old", type=Path, help="earlier cube")
    compare_parser.add_argument("new", type=Path, help="later cube")
    compare_parser.add_argument("--tolerance", type=float, default=1e-9,
                                help="largest relative change accepted (default 1e-9)")

    universal_parser = commands.add_parser(
        "universal", help="the dimensionless regime map for every body: cube and figure")
    universal_parser.add_argument("--out", type=Path, default=_DEFAULT_OUT / "universal",
                                  help="output folder (default: outputs/universal/)")
    universal_parser.add_argument("--speed-ratio-max", type=float, default=3.0,
                                  help="largest v_inf / v_circular(target) swept, from 0 (default 3)")
    universal_parser.add_argument("--periapsis-ratio-min", type=float, default=0.05,
                                  help="smallest r_periapsis / r_target swept, up to 3 (default 0.05)")
    return parser


def _size(count: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if count < 1024 or unit == "TiB":
            return f"{count:.1f} {unit}" if unit != "B" else f"{int(count)} B"
        count /= 1024
    return ""


def _run(args: argparse.Namespace) -> int:
    config = load_config(args.config)
    folder = args.out or _DEFAULT_OUT / config.name
    if args.workers < 0:
        raise SweepError(f"--workers must be 0 (all cores) or a positive count, got {args.workers}")
    cube_path = folder / f"{config.name}.nc"
    key = hashlib.sha256("".join(fingerprint(config).values()).encode()).hexdigest()[:16]
    checkpoint = folder / f".{config.name}.{key}.chunks"  # same inputs and version: same chunks
    if not args.force and _up_to_date(cube_path, config):
        shutil.rmtree(checkpoint, ignore_errors=True)  # left by a run killed after its cube landed
        print(f"up to date: {cube_path} (config, body catalog and capsweep version unchanged; --force recomputes)")
        return 0
    if not args.force:
        _check_room(config, folder, args.workers or None)
    _check_writable(folder)
    # Checkpoints are kept even with --force: they are keyed by the same config, catalog and
    # version, so loading them gives the same cube, and a forced run that is killed resumes.
    with output_lock(folder), _log_file(folder / "capsweep.log"):
        logging.getLogger("sweep").info("run of %s into %s", config.path, folder)
        started = time.perf_counter()
        # Evaluated and written chunk by chunk: memory is a few chunks, not the cube.
        cube = _write(lambda: run_to_file(
            config, cube_path, workers=args.workers or None, progress=sys.stderr.isatty() and not args.quiet,
            scheduler=args.scheduler, checkpoint=None if args.scheduler else checkpoint,
            compression=args.compression), folder)
        elapsed = time.perf_counter() - started
        shutil.rmtree(checkpoint, ignore_errors=True)  # the cube has landed
        with _open_cube(cube) as dataset:
            figures = _write(lambda: _write_figures(dataset, folder), folder)  # first: the summary links them
            files = _write(lambda: write_summary(dataset, folder), folder)
            print(f"cube: {cube}")
            print(f"summary: {files[0]} (tables: {', '.join(p.name for p in files[1:])})")
            print(_figures_line(figures, folder))
            if not args.quiet:
                points = int(dataset["best_strategy"].size)
                print(f"{points:,} grid points x {dataset.sizes['strategy']} strategies evaluated and written in "
                      f"{elapsed:.2f} s")
                print(_short_answer(dataset))
    return 0


def _check_room(config, folder: Path, workers: int | None) -> None:
    """Refuse a grid whose cube would not fit on the disk, or whose results would not fit in memory."""
    cube, memory = estimate_bytes(config), estimate_memory(config, workers)
    existing = next(p for p in (folder, *folder.absolute().parents) if p.exists())
    free_disk, free_memory = shutil.disk_usage(existing).free, _available_memory()
    hint = "shrink the grid, or pass --force to run anyway"
    if cube > free_disk:
        raise SweepError(f"{config.path}: grid: the cube would take about {_size(cube)} uncompressed, but {existing} "
                         f"has {_size(free_disk)} free; {hint}")
    if free_memory is not None and memory > free_memory:
        raise SweepError(f"{config.path}: grid: the run would hold about {_size(memory)} of results in memory, but "
                         f"{_size(free_memory)} is available; {hint}")


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


def _check_writable(folder: Path) -> None:
    """Fail before any work if the output folder cannot be made or written to."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        probe = folder / f".capsweep-write-test-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: output folder cannot be written: "
                         f"{err.strerror or err} (choose another with --out)") from err


@contextmanager
def _log_file(path: Path):
    """Copy the run's log lines (INFO and up) to a file beside the outputs."""
    handler = logging.FileHandler(path, encoding="utf-8")
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


def _up_to_date(cube: Path, config) -> bool:
    """The cube exists (writes are atomic, so it is complete) and records the same inputs and version."""
    if not cube.is_file():
        return False
    expected = fingerprint(config)
    try:
        with xr.open_dataset(cube, engine="netcdf4") as existing:
            return all(existing.attrs.get(key) == value for key, value in expected.items())
    except (OSError, ValueError):
        return False


def _write_figures(dataset: xr.Dataset, folder: Path) -> list[Path]:
    from sweep.report.figures import write_figures  # here, not above: matplotlib loads only for commands that draw

    return write_figures(dataset, folder)


def _figures_line(figures: list[Path], folder: Path) -> str:
    return f"figures: {len(figures)} PNG files in {folder}"


def _write(action, folder: Path):
    try:
        return action()
    except OSError as err:
        raise SweepError(f"{err.filename or folder}: cannot write output: {err.strerror or err}") from err


def _short_answer(dataset: xr.Dataset) -> str:
    """The summary's plain-language answers, one block per body."""
    out = []
    for body, sentences in answers(dataset).items():
        out.append(f"{body}:")
        out += [f"  {sentence}" for sentence in sentences]
    out.append("Preliminary patched-conic estimates (impulsive burns; simple finite burns where a thrust axis is "
               "given): verify with higher-fidelity propagation.")
    return "\n".join(out)


def _check(args: argparse.Namespace) -> int:
    config = load_config(args.config)
    shape = config.shape
    points = shape[0] * shape[1] * shape[2] * shape[3]
    print(f"{config.path}: valid")
    print(f"  name: {config.name}")
    print(f"  bodies: {', '.join(b.name for b in config.bodies)}")
    for label, values, unit in (("v_inf", config.v_inf, "km/s"), ("target_altitude", config.target_altitude, "km"),
                                ("periapsis_altitude", config.periapsis_altitude, "km")):
        print(f"  {label}: {values.size} values, {values[0]:g} to {values[-1]:g} {unit}")
    print(f"  grid shape (body, v_inf, target_altitude, periapsis_altitude): {shape}")
    print(f"  points: {points:,} (x 3 strategies)")
    if config.thrust is not None:
        ratio = config.thrust / (config.arrival_mass * STANDARD_GRAVITY)
        print(f"  thrust: {config.thrust.size} values, {config.thrust[0]:,.6g} to {config.thrust[-1]:,.6g} N "
              f"(thrust-to-weight {ratio[0]:.3g} to {ratio[-1]:.3g}), {config.steering} steering")
        print(f"  finite-burn points: {points * config.thrust.size:,} (x 3 strategies, each burn integrated)")
    print(f"  cube size, uncompressed: about {_size(estimate_bytes(config))}")
    print(f"  memory for the run's results (streamed to the cube chunk by chunk), on all cores: about "
          f"{_size(estimate_memory(config))}")
    return 0


def _bodies(_: argparse.Namespace) -> int:
    for name, body in catalog().items():
        print(f"{name}")
        print(f"  gm {body.gm / 1e9:.10g} km3 s-2  [{body.sources.get('gm', '')}]")
        print(f"  mean radius {body.radius / 1e3:g} km  [{body.sources.get('radius', '')}]")
        print(f"  lowest safe periapsis altitude {body.safe_periapsis_altitude / 1e3:g} km  "
              f"[{body.sources.get('safe_periapsis_altitude', '')}]")
        if body.parent:
            print(f"  parent {body.parent}, semi-major axis {body.semi_major_axis / 1e3:.10g} km  "
                  f"[{body.sources.get('semi_major_axis', '')}]")
            print(f"  sphere of influence {body.sphere_of_influence / 1e3:,.0f} km, Hill radius "
                  f"{body.hill_radius / 1e3:,.0f} km  [computed: a (m/M)^(2/5), a (m/3M)^(1/3)]")
    return 0


def _open_cube(path: Path) -> xr.Dataset:
    """Open a cube written by ``capsweep run``, or raise SweepError naming the file and what is wrong."""
    try:
        dataset = xr.open_dataset(path, engine="netcdf4")
    except FileNotFoundError as err:
        raise SweepError(f"{path}: cube not found") from err
    except (OSError, ValueError) as err:
        reason = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise SweepError(f"{path}: not a readable netCDF cube ({reason})") from err
    missing = [v for v in ("best_strategy", "saving_over_direct", "status", "crossover_v_inf") if v not in dataset]
    if missing:
        dataset.close()
        raise SweepError(f"{path}: not a capsweep cube (lacks {', '.join(missing)})")
    return dataset


def _summarize(args: argparse.Namespace) -> int:
    folder = args.out or args.cube.parent
    with _open_cube(args.cube) as dataset:
        summary_tables(dataset)  # fail before writing anything if the cube is inconsistent
        figures = _write(lambda: _write_figures(dataset, folder), folder)  # first: the summary links them
        files = _write(lambda: write_summary(dataset, folder), folder)
    print(f"summary: {files[0]} (tables: {', '.join(p.name for p in files[1:])})")
    print(_figures_line(figures, folder))
    return 0


def _plot(args: argparse.Namespace) -> int:
    folder = args.out or args.cube.parent
    with _open_cube(args.cube) as dataset:
        figures = _write(lambda: _write_figures(dataset, folder), folder)
    print(_figures_line(figures, folder))
    return 0


def _compare(args: argparse.Namespace) -> int:
    from sweep.report.compare import compare_cubes, render_drift

    if not args.tolerance >= 0:
        raise SweepError(f"--tolerance must be >= 0, got {args.tolerance!r}")
    with _open_cube(args.old) as old, _open_cube(args.new) as new:
        drift = compare_cubes(old, new)
    print(render_drift(drift, args.tolerance))
    return 1 if drift.exceeds(args.tolerance) else 0


def _universal(args: argparse.Namespace) -> int:
    import numpy as np

    from sweep.report.figures import DPI, draw_universal_map
    from sweep.universal import universal_dataset

    if not 0 < args.speed_ratio_max <= 100:
        raise SweepError(f"--speed-ratio-max must be in (0, 100], got {args.speed_ratio_max!r}")
    if not 0 < args.periapsis_ratio_min < 3:
        raise SweepError(f"--periapsis-ratio-min must be in (0, 3), got {args.periapsis_ratio_min!r}")
    dataset = universal_dataset(np.linspace(0.0, args.speed_ratio_max, 301),
                                np.geomspace(args.periapsis_ratio_min, 3.0, 121))
    cube = _write(lambda: write_dataset(dataset, args.out / "universal.nc"), args.out)
    figure = args.out / "universal_map.png"
    def draw() -> None:
        with replacing(figure) as temporary:
            draw_universal_map(dataset).savefig(temporary, format="png", dpi=DPI, facecolor="white",
                                                metadata={"Software": None})

    _write(draw, args.out)
    print(f"cube: {cube}")
    print(f"figure: {figure}")
    print("In these units a dive below the target pays above v_inf / v_c = sqrt(2) (two_burn) and above "
          "sqrt(2 r_t / r_a) (three_burn), whatever the body; preliminary patched-conic estimates.")
    return 0


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    verbose, quiet = getattr(args, "verbose", 0), getattr(args, "quiet", False)
    # Without a terminal (cron) progress comes as log lines, so INFO is on unless --quiet.
    level = logging.DEBUG if verbose > 1 else logging.INFO if verbose or not (quiet or sys.stderr.isatty()) \
        else logging.WARNING
    logging.basicConfig(level=level, format="capsweep: %(message)s")
    for handler in logging.getLogger().handlers:  # the file log may lower logger levels; the console keeps its own
        handler.setLevel(level)
    handlers = {"run": _run, "check": _check, "bodies": _bodies, "summarize": _summarize, "plot": _plot,
                "universal": _universal, "compare": _compare}
    try:
        return handlers[args.command](args)
    except SweepError as err:
        if args.debug:
            raise
        print(f"capsweep: error: {err}", file=sys.stderr)
        return 2
    except MemoryError:
        if args.debug:
            raise
        print("capsweep: error: out of memory; shrink the grid (`capsweep check CONFIG` prints what a run holds) or "
              "use fewer --workers; earlier outputs are untouched", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("capsweep: interrupted; no new cube was written and earlier outputs are untouched; run the same "
              "command again to resume (finished finite-burn chunks are kept)", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a reader that closed early, e.g. `| head`
        sys.stderr.close()
        return 0
    except Exception as err:  # a defect, not bad input: still one line, and the way to the details
        if args.debug:
            raise
        print(f"capsweep: internal error: {type(err).__name__}: {err} (a defect in capsweep, not in your input; "
              "rerun with --debug for the traceback and report it); earlier outputs are untouched", file=sys.stderr)
        return 3
