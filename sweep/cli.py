"""The ``capsweep`` command line: argv in, calls into the pipeline, an exit code out.

No science and no validation live here. Exit 0 on success, 2 on bad input or a failed write
(one line on stderr naming the file, the field and the value; ``--debug`` adds the traceback).
"""

from __future__ import annotations

import argparse
import logging
import signal
import sys
import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from sweep.version import __version__

__all__ = ["main"]


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
    universal_parser.add_argument("--out", type=Path,
                                  help="output folder (default: outputs/universal/)")
    universal_parser.add_argument("--speed-ratio-max", type=float, default=3.0,
                                  help="largest v_inf / v_circular(target) swept, from 0 (default 3)")
    universal_parser.add_argument("--periapsis-ratio-min", type=float, default=0.05,
                                  help="smallest r_periapsis / r_target swept, up to 3 (default 0.05)")
    return parser


def _run(args: argparse.Namespace) -> int:
    from sweep.config import load_config
    from sweep.errors import SweepError
    from sweep.pipeline import run_sweep

    config = load_config(args.config)
    if args.workers < 0:
        raise SweepError(f"--workers must be 0 (all cores) or a positive count, got {args.workers}")
    result = run_sweep(config, args.out, workers=args.workers or None, force=args.force, compression=args.compression,
                       scheduler=args.scheduler, progress=sys.stderr.isatty() and not args.quiet)
    if result.skipped:
        print(f"up to date: {result.cube} (config, body catalog and capsweep version unchanged, every output file as "
              "the manifest records it; --force recomputes)")
        return 0
    if result.action == "report":
        print(f"cube: {result.cube} (unchanged; report redone: {result.reason})")
    else:
        print(f"cube: {result.cube}")
    if result.removed:
        print(f"removed {len(result.removed)} files of the previous run: {', '.join(p.name for p in result.removed)}")
    _print_report(result.summary, result.figures, result.folder)
    if not args.quiet and result.action == "computed":
        print(f"{result.points:,} grid points x {result.strategies} strategies evaluated and written in "
              f"{result.elapsed:.2f} s")
        print(result.answer)
    return 0


def _print_report(summary: list[Path], figures: list[Path], folder: Path) -> None:
    if summary:
        print(f"summary: {summary[0]} (tables: {', '.join(p.name for p in summary[1:])})")
    print(f"figures: {len(figures)} PNG files in {folder}")


def _check(args: argparse.Namespace) -> int:
    from sweep.config import load_config
    from sweep.pipeline import check_text

    print(check_text(load_config(args.config)))
    return 0


def _bodies(_: argparse.Namespace) -> int:
    from sweep.pipeline import bodies_text

    print(bodies_text())
    return 0


def _summarize(args: argparse.Namespace) -> int:
    from sweep.pipeline import summarize_cube

    folder = args.out or args.cube.parent
    report = summarize_cube(args.cube, folder)
    _print_report(report.summary, report.figures, folder)
    return 0


def _plot(args: argparse.Namespace) -> int:
    from sweep.pipeline import plot_cube

    folder = args.out or args.cube.parent
    _print_report([], plot_cube(args.cube, folder), folder)
    return 0


def _compare(args: argparse.Namespace) -> int:
    from sweep.errors import SweepError
    from sweep.pipeline import compare_files

    if not args.tolerance >= 0:
        raise SweepError(f"--tolerance must be >= 0, got {args.tolerance!r}")
    result = compare_files(args.old, args.new, args.tolerance)
    print(result.text)
    return 1 if result.exceeds else 0


def _universal(args: argparse.Namespace) -> int:
    from sweep.errors import SweepError
    from sweep.pipeline import universal_map

    if not 0 < args.speed_ratio_max <= 100:
        raise SweepError(f"--speed-ratio-max must be in (0, 100], got {args.speed_ratio_max!r}")
    if not 0 < args.periapsis_ratio_min < 3:
        raise SweepError(f"--periapsis-ratio-min must be in (0, 3), got {args.periapsis_ratio_min!r}")
    cube, figure = universal_map(args.out, args.speed_ratio_max, args.periapsis_ratio_min)
    print(f"cube: {cube}")
    print(f"figure: {figure}")
    print("In these units a dive below the target pays above v_inf / v_c = sqrt(2) (two_burn) and above "
          "sqrt(2 r_t / r_a) (three_burn), whatever the body; preliminary patched-conic estimates.")
    return 0


def _raise_terminated(signum: int, frame: object) -> None:
    from sweep.errors import Terminated

    raise Terminated()


def _stop_workers() -> None:
    """Kill the finite-burn and figure worker processes (joblib's reusable loky executor), if any were started."""
    from joblib.externals.loky import reusable_executor  # joblib 1.6: the module keeps its one executor here

    executor = getattr(reusable_executor, "_executor", None)
    if executor is not None:
        executor.shutdown(wait=False, kill_workers=True)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (SIGTERM is handled like Ctrl-C while it runs)."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    verbose, quiet = getattr(args, "verbose", 0), getattr(args, "quiet", False)
    # Without a terminal (cron) progress comes as log lines, so INFO is on unless --quiet.
    level = logging.DEBUG if verbose > 1 else logging.INFO if verbose or not (quiet or sys.stderr.isatty()) \
        else logging.WARNING
    logging.basicConfig(level=level, format="capsweep: %(message)s")
    for handler in logging.getLogger().handlers:  # the file log may lower logger levels; the console keeps its own
        handler.setLevel(level)
    if threading.current_thread() is not threading.main_thread():  # signal handlers belong to the main thread
        return _dispatch(args)
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        return _dispatch(args)
    finally:
        signal.signal(signal.SIGTERM, previous)


@contextmanager
def _signals_ignored() -> Iterator[None]:
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {number: signal.signal(number, signal.SIG_IGN) for number in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler)


def _dispatch(args: argparse.Namespace) -> int:
    from sweep.errors import SweepError, Terminated  # here, not above: --help and --version import nothing heavy

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
    except KeyboardInterrupt as err:
        with _signals_ignored():  # a second Ctrl-C or SIGTERM must not cut the cleanup short
            _stop_workers()
        how, code = ("terminated (SIGTERM)", 143) if isinstance(err, Terminated) else ("interrupted", 130)
        print(f"capsweep: {how}; every output is whole, of this run or the one before (no partial file), the lock "
              "is released and the worker processes stopped; run the same command again to finish (finished "
              "finite-burn chunks are kept)", file=sys.stderr)
        return code
    except BrokenPipeError:  # output piped into a reader that closed early, e.g. `| head`
        sys.stderr.close()
        return 0
    except Exception as err:  # a defect, not bad input: still one line, and the way to the details
        if args.debug:
            raise
        print(f"capsweep: internal error: {type(err).__name__}: {err} (a defect in capsweep, not in your input; "
              "rerun with --debug for the traceback and report it); earlier outputs are untouched", file=sys.stderr)
        return 3
