"""Shared fixtures: small configs written to tmp_path, and a small evaluated cube."""

from __future__ import annotations

import textwrap

import netCDF4
import numpy as np
import pytest

SMALL_CONFIG = textwrap.dedent(
    """
    # Test input of our own: three bodies, a coarse grid.
    name = "small-test"
    description = "test sweep"

    [grid]
    bodies = ["mars", "moon", "enceladus"]
    v_inf = { start = 0.5, stop = 6.0, num = 12 }   # km/s
    target_altitude = [300.0, 5000.0]                # km
    periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]  # km

    [spacecraft]
    specific_impulse = 320.0
    arrival_mass = 1000.0

    [three_burn]
    apoapsis_fraction = 0.5
    max_time_to_orbit = 20.0
    """
)


@pytest.fixture
def small_config_text() -> str:
    return SMALL_CONFIG


@pytest.fixture
def config_file(tmp_path):
    """Write TOML text to tmp_path/sweep.toml and return the path."""

    def write(text: str = SMALL_CONFIG, name: str = "sweep.toml"):
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return write


@pytest.fixture(scope="session")
def small_cube():
    """The small test config evaluated and labelled (in memory)."""
    from sweep import parse_config, run

    config = parse_config(SMALL_CONFIG, "small.toml")
    return config, run(config, workers=1)


def cube_contents(path):
    """
    A netCDF file as comparable values: every variable's dimensions, dtype, attributes and raw
    bytes (so NaN equals NaN and -0.0 differs from 0.0), the global attributes but the time
    stamp (``history``), and the dimension sizes. Equal contents: the same cube bit for bit.
    """
    with netCDF4.Dataset(path) as file:
        file.set_auto_maskandscale(False)
        variables = {
            name: (v.dimensions, str(v.dtype), {k: repr(np.asarray(v.getncattr(k)).tolist()) for k in v.ncattrs()},
                   _raw(v[...]))
            for name, v in file.variables.items()
        }
        attrs = {k: repr(np.asarray(file.getncattr(k)).tolist()) for k in file.ncattrs() if k != "history"}
        return variables, attrs, {k: len(d) for k, d in file.dimensions.items()}


def _raw(values: np.ndarray):
    """Bytes of numeric data; the strings of label variables."""
    return values.tolist() if values.dtype == object else np.ascontiguousarray(values).tobytes()


_HOLD_LOCK = """
import sys, time
from sweep.lock import output_lock
with output_lock(sys.argv[1]):
    print("locked", flush=True)
    time.sleep(120)
"""


@pytest.fixture
def lock_holder():
    """Start a separate process that takes a folder's output lock and keeps it; return the process.

    Call it with the folder; the process is killed at the end of the test if still running.
    """
    import subprocess
    import sys
    from pathlib import Path

    started = []

    def hold(folder):
        process = subprocess.Popen([sys.executable, "-c", _HOLD_LOCK, str(folder)], stdout=subprocess.PIPE,
                                   text=True, cwd=Path(__file__).resolve().parents[1])
        started.append(process)
        assert process.stdout.readline() == "locked\n"  # it holds the lock from here on
        return process

    yield hold
    for process in started:
        process.kill()
        process.wait()
        process.stdout.close()
