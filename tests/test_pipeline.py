"""The pipeline as a library: a Python caller gets the skip, the lock and the worker bound too; light imports."""

from __future__ import annotations

import socket
import subprocess
import sys
from pathlib import Path

import pytest

from sweep.config import load_config
from sweep.errors import SweepError
from sweep.lock import LOCK_NAME, LockError
from sweep.pipeline import RunResult, check_text, plot_cube, run_sweep, summarize_cube

ROOT = Path(__file__).resolve().parents[1]


def test_a_second_call_with_unchanged_inputs_is_skipped_and_rewrites_nothing(config_file, tmp_path):
    config = load_config(config_file())
    out = tmp_path / "out"
    first = run_sweep(config, out, workers=1, figures=False)
    assert isinstance(first, RunResult) and not first.skipped
    assert first.cube == out / "small-test.nc" and first.points == 3 * 12 * 2 * 4 and first.strategies == 3
    assert [p.name for p in first.summary] == ["summary.md", "wins.csv", "crossover.csv", "shares.csv"]
    assert first.figures == [] and "mars:" in first.answer
    before = first.cube.stat().st_mtime_ns, first.cube.read_bytes()
    second = run_sweep(config, out, workers=1, figures=False)
    assert second.skipped and second.cube == first.cube and second.summary == [] and second.elapsed == 0.0
    assert (first.cube.stat().st_mtime_ns, first.cube.read_bytes()) == before
    assert not (out / LOCK_NAME).exists()


def test_a_held_lock_refuses_a_python_caller_naming_the_holder(config_file, tmp_path, lock_holder):
    out = tmp_path / "out"
    holder = lock_holder(out)
    with pytest.raises(LockError, match=rf"in use by capsweep pid {holder.pid} on {socket.gethostname()} since "):
        run_sweep(load_config(config_file()), out, workers=1, figures=False)
    assert not (out / "small-test.nc").exists()


@pytest.mark.slow  # about 5 s: three commands run end to end
def test_workers_bound_the_figures_too(config_file, tmp_path, monkeypatch):
    import sweep.report.figures

    asked = []
    draw = sweep.report.figures.write_figures

    def recording(dataset, folder, workers=None):
        asked.append(workers)
        return draw(dataset, folder, workers=workers)

    monkeypatch.setattr(sweep.report.figures, "write_figures", recording)
    result = run_sweep(load_config(config_file()), tmp_path / "out", workers=1)
    assert asked == [1] and len(result.figures) == 6
    again = summarize_cube(result.cube, tmp_path / "again", workers=1)
    assert asked == [1, 1] and [p.name for p in again.figures] == [p.name for p in result.figures]
    assert plot_cube(result.cube, tmp_path / "plots", workers=1) and asked == [1, 1, 1]


def test_bad_worker_counts_are_refused(config_file, tmp_path):
    for workers in (0, -2, 1.5, True):
        refused = rf"workers must be None \(all cores\) or a positive count, got {workers!r}"
        with pytest.raises(SweepError, match=refused):
            run_sweep(load_config(config_file()), tmp_path / "out", workers=workers)
    assert not (tmp_path / "out").exists()


def test_summarize_refuses_a_file_that_is_not_a_capsweep_cube(tmp_path):
    import xarray as xr

    other = tmp_path / "other.nc"
    xr.Dataset({"x": ("n", [1.0, 2.0])}).to_netcdf(other)
    with pytest.raises(SweepError, match=r"other\.nc: not a capsweep cube \(lacks best_strategy, saving_over_direct"):
        summarize_cube(other, tmp_path / "report")
    assert not (tmp_path / "report").exists()


def test_check_text_is_what_check_prints(config_file, capsys):
    from sweep.cli import main

    path = config_file()
    assert main(["check", str(path)]) == 0
    assert capsys.readouterr().out == check_text(load_config(path)) + "\n"


def test_help_and_version_load_no_heavy_module():
    # What the start-up benchmark (tests/bench/bench_startup.py) times, checked here by what is imported.
    code = ("import sys\nfrom sweep.cli import main\n"
            "for argv in (['--help'], ['--version']):\n"
            "    try:\n        main(argv)\n    except SystemExit:\n        pass\n"
            "heavy = ('numpy', 'xarray', 'pandas', 'matplotlib', 'netCDF4', 'joblib', 'pydantic', 'filelock')\n"
            "print(sorted(name for name in heavy if name in sys.modules))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert done.stdout.splitlines()[-1] == "[]" and "capsweep" in done.stdout


def test_the_package_loads_its_public_names_on_first_use():
    code = ("import sys, sweep\nassert 'numpy' not in sys.modules\n"
            "from sweep import open_cube, run\n"
            "print(run.__module__, open_cube.__module__, 'numpy' in sys.modules,\n"
            "      set(sweep.__all__) <= set(dir(sweep)))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert done.stdout.split() == ["sweep.pipeline", "sweep.cube.netcdf", "True", "True"]
    import sweep

    with pytest.raises(AttributeError, match=r"module 'sweep' has no attribute 'no_such_name'"):
        sweep.no_such_name  # noqa: B018


def test_a_run_computes_the_summary_tables_once(config_file, tmp_path, monkeypatch):
    # The summary files and the console answer share one computation of the tables (minutes on
    # a grid of 100 million points).
    import sweep.pipeline
    import sweep.report.summary

    real, calls = sweep.report.summary.summary_tables, []

    def counted(dataset):
        calls.append(1)
        return real(dataset)

    monkeypatch.setattr(sweep.pipeline, "summary_tables", counted)
    monkeypatch.setattr(sweep.report.summary, "summary_tables", counted)
    path = config_file()
    result = run_sweep(load_config(path), tmp_path / "out", workers=1)
    assert calls == [1]
    assert result.answer.startswith("mars:") and (tmp_path / "out" / "summary.md").is_file()
