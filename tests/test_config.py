"""Config loading: valid documents become frozen grids; bad ones name file, key and value."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from sweep.config import CONFIG_LIMIT, load_config, parse_config
from sweep.errors import ConfigError


def _replace(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new)


def test_small_config_parses(small_config_text):
    config = parse_config(small_config_text, "small.toml")
    assert [b.name for b in config.bodies] == ["mars", "moon", "enceladus"]
    np.testing.assert_allclose(config.v_inf, np.linspace(0.5, 6.0, 12))
    assert config.shape == (3, 12, 2, 4)
    assert config.max_time_to_orbit == 20 * 86400.0
    assert config.text == small_config_text


def test_log_spacing_and_sorting(small_config_text):
    text = _replace(small_config_text, "periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
                    'periapsis_altitude = { start = 1000.0, stop = 10.0, num = 3, spacing = "log" }')
    text = _replace(text, "target_altitude = [300.0, 5000.0]", "target_altitude = [5000.0, 300.0]")
    config = parse_config(text)
    np.testing.assert_allclose(config.periapsis_altitude, [10.0, 100.0, 1000.0])
    np.testing.assert_allclose(config.target_altitude, [300.0, 5000.0])


def test_packaged_demo_loads():
    config = load_config(None)
    assert config.name and np.prod(config.shape) > 1000


def test_custom_body_and_override(small_config_text):
    text = _replace(small_config_text, 'bodies = ["mars", "moon", "enceladus"]', 'bodies = ["mars", "vesta"]')
    # test inputs, roughly Vesta-like (from memory)
    text += ("\n[bodies.vesta]\ngm = 17.29\nmean_radius = 262.7\nsafe_periapsis_altitude = 30.0\n"
             'parent = "sun"\nsemi_major_axis = 353.3e6\n\n[bodies.mars]\nsafe_periapsis_altitude = 120.0\n')
    config = parse_config(text, "c.toml")
    assert config.bodies[1].name == "vesta" and config.bodies[1].radius == 262.7e3
    assert config.bodies[0].safe_periapsis_altitude == 120e3


@pytest.mark.parametrize(
    ("old", "new", "message"),
    [
        ("num = 12 }", "num = 0 }", r"small\.toml: grid\.v_inf\.num: Input should be greater than 0 \(got 0\)"),
        ("num = 12 }", "num = 2.5 }", r"grid\.v_inf\.num: Input should be a valid integer \(got 2\.5\)"),
        ("[grid]", "[grid]\nvinf = 3", r"unknown key 'grid\.vinf'; did you mean 'v_inf'\? \(valid keys here: bodies, "),
        ("[spacecraft]", "[spacecraft]\nisp = 3", r"unknown key 'spacecraft\.isp'.*arrival_mass, specific_impulse"),
        ("target_altitude = [300.0, 5000.0]", "target_altitude = []", r"grid\.target_altitude: an axis needs at least one value"),
        ("target_altitude = [300.0, 5000.0]", 'target_altitude = "high"', r"grid\.target_altitude: an axis is a list"),
        ("target_altitude = [300.0, 5000.0]", "target_altitude = [300.0, 300.0]", r"grid\.target_altitude: duplicate value 300\.0"),
        ("target_altitude = [300.0, 5000.0]", "target_altitude = [300.0, nan]", r"grid\.target_altitude\.1: Input should be a finite number \(got nan\)"),
        ("target_altitude = [300.0, 5000.0]", "target_altitude = [-300.0]", r"grid\.target_altitude: altitudes must be >= 0 km .*got -300\.0"),
        ("v_inf = { start = 0.5", "v_inf = { start = -0.5", r"grid\.v_inf: arrival speeds must be >= 0 km/s \(got -0\.5\)"),
        ("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
         'periapsis_altitude = { start = 0.0, stop = 10.0, num = 3, spacing = "log" }',
         r"grid\.periapsis_altitude: log spacing needs positive start and stop \(got 0\.0, 10\.0\)"),
        ("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
         'periapsis_altitude = { start = 1.0, stop = 10.0, num = 3, spacing = "cubic" }',
         r"grid\.periapsis_altitude\.spacing: Input should be 'linear' or 'log' \(got 'cubic'\)"),
        ('"enceladus"]', '"enceladas"]', r"grid\.bodies\.2: unknown body 'enceladas'; did you mean 'enceladus'\?"),
        ('"enceladus"]', '"sun"]', r"grid\.bodies\.2: 'sun' has no parent body"),
        ('"enceladus"]', '"mars"]', r"grid\.bodies\.2: duplicate body 'mars'"),
        ("specific_impulse = 320.0", "specific_impulse = -1.0", r"spacecraft\.specific_impulse: Input should be greater than or equal to 1 \(got -1\.0\)"),
        ("arrival_mass = 1000.0", 'arrival_mass = "heavy"', r"spacecraft\.arrival_mass: Input should be a valid number \(got 'heavy'\)"),
        ("apoapsis_fraction = 0.5", "apoapsis_fraction = 1.5", r"three_burn\.apoapsis_fraction: Input should be less than or equal to 1"),
        ('name = "small-test"\n', "", r"small\.toml: missing required key 'name'"),
        ('name = "small-test"', 'name = "../up one"', r"small\.toml: name: String should match pattern .* \(got '\.\./up one'\)"),
        ("[spacecraft]", "[spacecraft\n", r"small\.toml: not valid TOML: .*line \d+"),
    ],
)
def test_bad_values_name_file_key_and_value(small_config_text, old, new, message):
    with pytest.raises(ConfigError, match=message):
        parse_config(_replace(small_config_text, old, new), "small.toml")


def test_thrust_axes(small_config_text):
    config = parse_config(small_config_text.replace("[spacecraft]", "[spacecraft]").replace(
        "periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
        "periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]\nthrust = [500.0, 100.0]"))
    np.testing.assert_allclose(config.thrust, [100.0, 500.0])
    assert config.finite_shape == (3, 12, 2, 4, 2) and config.thrust_given_as == "thrust"
    assert parse_config(small_config_text).thrust is None
    both = small_config_text.replace("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
                                     "periapsis_altitude = [20.0]\nthrust = [1.0]\nthrust_to_weight = [0.1]")
    with pytest.raises(ConfigError, match=r"c\.toml: grid: give thrust or thrust_to_weight, not both"):
        parse_config(both, "c.toml")
    zero = small_config_text.replace("periapsis_altitude = [20.0, 250.0, 1000.0, 8000.0]",
                                     "periapsis_altitude = [20.0]\nthrust_to_weight = [0.0, 0.1]")
    with pytest.raises(ConfigError, match=r"c\.toml: grid\.thrust_to_weight: values must be > 0 \(got 0\.0\)"):
        parse_config(zero, "c.toml")


def test_incomplete_custom_body_is_named(small_config_text):
    text = _replace(small_config_text, '"enceladus"]', '"vesta"]') + '\n[bodies.vesta]\ngm = 17.0\n'
    with pytest.raises(ConfigError, match=r"c\.toml: body 'vesta' lacks mean_radius.*\(in \[bodies\.vesta\]\)"):
        parse_config(text, "c.toml")


def test_crossover_range_must_be_ordered(small_config_text):
    text = small_config_text + "\n[crossover]\nv_inf_min = 5.0\nv_inf_max = 2.0\n"
    with pytest.raises(ConfigError, match=r"crossover: v_inf_min must be below v_inf_max \(got 5\.0 and 2\.0\)"):
        parse_config(text, "c.toml")


def test_missing_and_unreadable_files(tmp_path):
    with pytest.raises(ConfigError, match=r"nope\.toml: config file not found"):
        load_config(tmp_path / "nope.toml")
    binary = tmp_path / "binary.toml"
    binary.write_bytes(b"\xff\xfe\x00name")
    with pytest.raises(ConfigError, match=r"binary\.toml: config file is not UTF-8 text"):
        load_config(binary)


HOHMANN = """
name = "hohmann-test"
[grid]
bodies = ["mars"]
v_inf = { hohmann_from = "earth", margin = [0.0, 0.5] }
target_altitude = [400.0]
periapsis_altitude = [250.0]
[spacecraft]
specific_impulse = 320.0
arrival_mass = 1000.0
"""


def test_hohmann_arrival_axis():
    from sweep.catalog import catalog
    from sweep.physics.conics import hohmann_excess_speeds

    config = parse_config(HOHMANN, "h.toml")
    bodies = catalog()
    # independent of the config path: the kernel on the catalog's Earth and Mars orbits
    _, arrival = hohmann_excess_speeds(bodies["sun"].gm, bodies["earth"].semi_major_axis,
                                       bodies["mars"].semi_major_axis)
    np.testing.assert_allclose(config.v_inf, [arrival / 1e3, arrival / 1e3 + 0.5], rtol=1e-12)
    # Curtis Example 8.5 (from memory) prints 2.648 km/s with rounded orbit radii: 1 m/s apart
    assert config.v_inf[0] == pytest.approx(2.648, abs=2e-3)
    assert "Hohmann transfer from earth to mars" in config.v_inf_note


@pytest.mark.parametrize(
    ("old", "new", "message"),
    [
        ('"earth", margin', '"earht", margin', r"h\.toml: grid\.v_inf\.hohmann_from: unknown body 'earht'; did you mean 'earth'\?"),
        ('"earth", margin', '"moon", margin', r"grid\.v_inf\.hohmann_from: 'moon' and 'mars' must be different bodies orbiting the same parent"),
        ('bodies = ["mars"]', 'bodies = ["mars", "venus"]', r"grid\.v_inf\.hohmann_from: a Hohmann arrival speed belongs to one arrival body, but grid\.bodies has 2"),
        ("margin = [0.0, 0.5]", "margn = [0.0]", r"unknown key 'grid\.v_inf\.margn'; did you mean 'margin'\? \(valid keys here: hohmann_from, margin\)"),
        ("margin = [0.0, 0.5]", "margin = [-9.0]", r"grid\.v_inf\.margin: the Hohmann arrival speed is 2\.6\d+ km/s, so margins below"),
    ],
)
def test_hohmann_axis_errors(old, new, message):
    with pytest.raises(ConfigError, match=message):
        parse_config(HOHMANN.replace(old, new), "h.toml")


def _load_in_subprocess(path) -> subprocess.CompletedProcess:
    """load_config(path) in a child process; the timeout only guards against a hang (a FIFO waiting for a writer)."""
    code = ("import sys\nfrom sweep.config import load_config\nfrom sweep.errors import ConfigError\n"
            "try:\n    load_config(sys.argv[1])\nexcept ConfigError as err:\n    print(err)\n")
    return subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True, timeout=120,
                          cwd=Path(__file__).resolve().parents[1])


def test_a_fifo_is_refused_without_waiting(tmp_path):
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    done = _load_in_subprocess(fifo)
    assert f"{fifo}: not a regular file (a FIFO, socket or device)" in done.stdout, done.stderr


def test_a_device_is_refused_before_reading():
    with pytest.raises(ConfigError, match=r"/dev/zero: not a regular file .* at most 1,048,576 bytes \(1 MiB\)"):
        load_config("/dev/zero")


def test_a_config_above_the_limit_is_refused(tmp_path, small_config_text):
    big = tmp_path / "big.toml"
    big.write_text(small_config_text + "#" * (2 << 20), encoding="utf-8")  # 2 MiB of comment: legal TOML
    with pytest.raises(ConfigError, match=r"big\.toml: config file is 2,097,\d{3} bytes, above the limit of "
                                          r"1,048,576 bytes \(1 MiB\)"):
        load_config(big)


def test_a_netcdf_cube_is_refused_as_binary(tmp_path, small_cube):
    from sweep.cube.netcdf import write_dataset

    _, dataset = small_cube
    cube = write_dataset(dataset.isel(body=[0], v_inf=[0, 1]), tmp_path / "cube.nc")
    assert os.path.getsize(cube) <= CONFIG_LIMIT  # small enough that the size is not what refuses it
    with pytest.raises(ConfigError, match=r"cube\.nc: config file is not UTF-8 text \(invalid start byte at byte 0\)"):
        load_config(cube)
    text = tmp_path / "nul.toml"
    text.write_bytes(b'name = "x"\n\0\n')  # UTF-8, but with a NUL byte: binary
    with pytest.raises(ConfigError, match=r"nul\.toml: config file is binary \(a NUL byte at byte 11\), not TOML"):
        load_config(text)
