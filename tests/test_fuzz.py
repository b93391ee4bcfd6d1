"""Property-based fuzzing (hypothesis) of the config loader and the command line.

Random and mutated TOML documents must either load or be rejected with a ConfigError whose
message names the file and then a key or a line; never another exception, never a traceback.
"""

from __future__ import annotations

import contextlib
import io
import re
import tempfile
import tomllib
from pathlib import Path

import tomli_w
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sweep.cli import main
from sweep.config import parse_config
from sweep.errors import ConfigError
from tests.conftest import SMALL_CONFIG

FILE = "fuzz.toml"
# What a rejection names after the file: a key path, a table, a line (TOML syntax), or a body.
NAMES_A_KEY_OR_LINE = re.compile(
    r"^fuzz\.toml: (not valid TOML: .*\bline \d+"
    r"|unknown key '[^']*'"
    r"|missing required key '[^']+'"
    r'|(?:[\w-]+|"(?:[^"\\]|\\.)*")(?:\.(?:[\w-]+|"(?:[^"\\]|\\.)*"))*: '  # a quoted key may hold \" escapes
    r"|\[bodies\.[^\]]+\] \w+: "
    r"|body '[^']+' )"
)
BASE = tomllib.loads(SMALL_CONFIG)
FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])

scalars = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12),
    st.booleans(),
    st.sampled_from(["mars", "moon", "log", "linear", "earth", "sun", "phobos", "tangential"]),
)
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=5),
                                                      st.dictionaries(st.text(max_size=8), inner, max_size=4)),
                      max_leaves=12)
KEYS = ["name", "description", "grid", "spacecraft", "three_burn", "crossover", "target_orbit", "finite_burn",
        "bodies", "bodies", "v_inf", "start", "stop", "num", "spacing", "target_altitude", "periapsis_altitude",
        "thrust", "thrust_to_weight", "plane_change", "specific_impulse", "arrival_mass", "apoapsis_fraction",
        "apoapsis_bound_of", "max_time_to_orbit", "v_inf_min", "v_inf_max", "apoapsis_altitude", "period", "steering",
        "passes", "max_passes", "ranking", "tie_tolerance",
        "gm", "mean_radius", "safe_periapsis_altitude", "parent", "semi_major_axis", "hohmann_from", "margin", "mars"]


def _check(text: str) -> None:
    try:
        parse_config(text, FILE)
    except ConfigError as err:
        message = str(err)
        assert message.count("\n") <= 1, message  # one line, at most a hint below it
        assert NAMES_A_KEY_OR_LINE.search(message), message


@st.composite
def mutated_documents(draw) -> dict:
    """The small test config with a few keys replaced, deleted or added, anywhere in it."""
    document = tomllib.loads(SMALL_CONFIG)
    for _ in range(draw(st.integers(1, 4))):
        table = document
        while True:  # walk down a random path of tables
            tables = [k for k, v in table.items() if isinstance(v, dict)]
            if not tables or draw(st.booleans()):
                break
            table = table[draw(st.sampled_from(tables))]
        action = draw(st.sampled_from(["replace", "delete", "add"]))
        if action == "replace" and table:
            table[draw(st.sampled_from(sorted(table)))] = draw(values)
        elif action == "delete" and table:
            del table[draw(st.sampled_from(sorted(table)))]
        else:
            table[draw(st.sampled_from(KEYS))] = draw(values)
    return document


def _dump(document: dict) -> str | None:
    try:
        return tomli_w.dumps(document)
    except (TypeError, ValueError):  # a value TOML cannot hold (e.g. an integer beyond 64 bits)
        return None


@FUZZ
@given(mutated_documents())
def test_mutated_documents_load_or_name_a_key(document):
    text = _dump(document)
    if text is not None:
        _check(text)


@FUZZ
@given(st.text(max_size=300))
def test_random_text_loads_or_names_a_line(text):
    _check(text)


@FUZZ
@given(st.data())
def test_edited_text_loads_or_names_a_key_or_line(data):
    # character-level edits of a valid document: deletions, insertions, swaps
    text = SMALL_CONFIG
    for _ in range(data.draw(st.integers(1, 5))):
        at = data.draw(st.integers(0, len(text)))
        edit = data.draw(st.sampled_from(["delete", "insert", "duplicate"]))
        if edit == "delete":
            text = text[:at] + text[at + data.draw(st.integers(1, 8)):]
        elif edit == "insert":
            text = text[:at] + data.draw(st.text(alphabet='=[]{}",.0123456789-e_abcnaxi \n', max_size=6)) + text[at:]
        else:
            line = text[:at].rsplit("\n", 1)[-1]
            text = text[:at] + "\n" + line + text[at:]
    _check(text)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_documents())
def test_command_line_never_shows_a_traceback(document):
    # `capsweep check` loads the whole config (bodies, axes, cross-checks) without computing.
    text = _dump(document)
    if text is None:
        return
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / FILE
        path.write_text(text, encoding="utf-8")
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(["check", str(path)])
    assert "Traceback" not in err.getvalue()
    if code == 0:
        assert f"{path}: valid" in out.getvalue()
    else:
        assert code == 2, err.getvalue()
        lines = err.getvalue().splitlines()
        assert 1 <= len(lines) <= 2 and lines[0].startswith(f"capsweep: error: {path}: "), lines
        assert NAMES_A_KEY_OR_LINE.search(lines[0].removeprefix("capsweep: error: ").replace(str(path), FILE))


def _numeric_leaves(table: dict, path: tuple = ()) -> list[tuple]:
    leaves = []
    for key, value in table.items():
        if isinstance(value, dict):
            leaves += _numeric_leaves(value, (*path, key))
        elif isinstance(value, list):
            leaves += [((*path, key), i) for i, v in enumerate(value) if isinstance(v, int | float)]
        elif isinstance(value, int | float) and not isinstance(value, bool):
            leaves.append(((*path, key), None))
    return leaves


numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=-1e4, max_value=1e6),
    st.sampled_from([0.0, -0.0, 1e-300, 5e-324, 1e300, 0.1, 1.0, 200.0, 199.999999, 49_000.0, 66_000.0]),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
)


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_numeric_extremes_are_rejected_or_evaluated_without_a_warning(data):
    # Keep the structure, change one to three numbers (anywhere: axes, spacecraft, bounds) to
    # anything a TOML number can be. Accepted documents are evaluated with every warning an error:
    # legal extremes give finite values or a status code, never a silent NaN or a numpy warning.
    import warnings

    import numpy as np

    from sweep import run

    document = tomllib.loads(SMALL_CONFIG)
    leaves = _numeric_leaves(document)
    for _ in range(data.draw(st.integers(1, 3))):
        (path, index) = data.draw(st.sampled_from(leaves))
        table = document
        for key in path[:-1]:
            table = table[key]
        value = data.draw(numbers)
        if index is None:
            table[path[-1]] = value
        else:
            table[path[-1]][index] = value
    text = _dump(document)
    if text is None:
        return
    try:
        config = parse_config(text, FILE)
    except ConfigError as err:
        assert NAMES_A_KEY_OR_LINE.search(str(err)), str(err)
        return
    if int(np.prod(config.shape)) > 200_000:
        return  # legal but slow for a fuzz example
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        cube = run(config, workers=1)
    delta_v, status = cube.delta_v.values, cube.status.values
    assert (np.isfinite(delta_v) | (status != 0)).all()
