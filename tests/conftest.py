"""Shared fixtures: small configs written to tmp_path, and a small evaluated cube."""

from __future__ import annotations

import textwrap

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
