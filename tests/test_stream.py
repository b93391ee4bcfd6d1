"""Streamed writes: the cube written chunk by chunk equals the in-memory cube, in bounded memory."""

from __future__ import annotations

import tracemalloc

import netCDF4
import numpy as np
import pytest

from sweep import build_dataset, parse_config, run, run_to_file, write_dataset
from sweep.engine.impulsive import add_placeholders, estimate_bytes, prepare, sweep_chunks
from sweep.model.strategies import STRATEGIES
from sweep.model.variables import cube_variables
from tests.conftest import SMALL_CONFIG, cube_contents
from tests.test_evaluate_finite import FINITE_CONFIG
from tests.test_plane_change import PLANE

ELLIPSE = SMALL_CONFIG + "\n[target_orbit]\napoapsis_altitude = 20000.0\n"
CONFIGS = {"small": SMALL_CONFIG, "plane_change": PLANE, "finite": FINITE_CONFIG, "ellipse": ELLIPSE}


@pytest.mark.parametrize("name", sorted(CONFIGS))
def test_streamed_cube_equals_the_in_memory_cube(name, tmp_path):
    # The in-memory write (xarray writes every variable) is the reference: same variables,
    # attributes (including the CF coordinates attribute xarray adds) and bytes.
    config = parse_config(CONFIGS[name], f"{name}.toml")
    whole = write_dataset(run(config, workers=1), tmp_path / "whole.nc")
    # 40 grid points a chunk: several chunks per body, a short last one
    streamed = run_to_file(config, tmp_path / "streamed.nc", workers=2, points_per_chunk=40)
    reference, streamed_ = cube_contents(whole), cube_contents(streamed)
    assert set(reference[0]) == set(streamed_[0])
    for variable in reference[0]:
        assert reference[0][variable][:3] == streamed_[0][variable][:3], variable
        assert reference[0][variable][3] == streamed_[0][variable][3], variable
    assert reference[1:] == streamed_[1:]
    assert not list(tmp_path.glob(".*.part"))  # no temporary left beside the cube


def test_compressed_streamed_cube_is_chunked_by_body_and_speed_run(tmp_path):
    config = parse_config(PLANE, "plane.toml")
    whole = write_dataset(run(config, workers=1), tmp_path / "whole.nc")
    streamed = run_to_file(config, tmp_path / "streamed.nc", workers=1, compression=1, points_per_chunk=16)
    # 16 points / (2 targets x 4 periapses) = 2 arrival speeds per chunk
    with netCDF4.Dataset(whole) as a, netCDF4.Dataset(streamed) as b:
        streamed = [v.name for v in cube_variables(STRATEGIES, config=config) if v.streamed]
        assert {"delta_v", "status", "plane_change_delta_v", "plane_change_best_strategy"} <= set(streamed)
        for name in streamed:
            variable = b.variables[name]
            sizes = dict(zip(variable.dimensions, variable.chunking(), strict=True))
            assert sizes["body"] == 1 and sizes["v_inf"] == 2, name
            assert sizes.get("strategy", 1) == 1 and sizes["periapsis_altitude"] == 4, name
            assert variable.filters()["zlib"] and variable.filters()["complevel"] == 1, name
            np.testing.assert_array_equal(variable[...], a.variables[name][...], err_msg=name)


def _streamed_peak(speeds: int, folder) -> tuple[int, int]:
    """Largest Python-side allocation (tracemalloc sees numpy's buffers) of a streamed run, and the
    bytes its per-point arrays would take held whole."""
    config = _memory_config(speeds)
    tracemalloc.start()
    try:
        path = run_to_file(config, folder / f"memory-{speeds}.nc", workers=2, points_per_chunk=1 << 13)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    with netCDF4.Dataset(path) as file:  # and the file holds every point
        assert file.variables["delta_v"].shape == (3, *config.shape)
        assert np.isfinite(file.variables["delta_v"][0, 1, -1]).any()
    return peak, estimate_bytes(config)


@pytest.mark.slow  # about 12 s: two streamed grids of 0.6 and 2.4 million points under tracemalloc
def test_stream_memory_does_not_grow_with_the_grid(tmp_path):
    # 0.6 and 2.4 million points (100 and 400 MB of per-point arrays held whole): the streamed
    # run's peak is a few 8,192-point chunks plus the per-body plans (the apoapsis scan over
    # target x periapsis), about 10 MB for either; held whole, it would grow fourfold.
    small, small_whole = _streamed_peak(120, tmp_path)
    large, large_whole = _streamed_peak(480, tmp_path)
    assert large_whole > 3.9 * small_whole
    assert large < 2 * small, f"peak {small / 1e6:.1f} MB, then {large / 1e6:.1f} MB"
    assert large < 0.05 * large_whole, f"peak {large / 1e6:.1f} MB of {large_whole / 1e6:.0f} MB"


def test_chunks_arrive_in_grid_order_with_one_body_each():
    config = parse_config(SMALL_CONFIG, "small.toml")
    plans, arrays = prepare(config, workers=1)
    add_placeholders(config, arrays)
    assert arrays["delta_v"].strides == (0,) * arrays["delta_v"].ndim  # a label, not memory
    seen = [(chunk.body, chunk.v_inf_start, chunk.v_inf_stop, local["delta_v"].shape)
            for chunk, local in sweep_chunks(config, plans, workers=2, points_per_chunk=24)]
    # 24 points / (2 targets x 4 periapses) = 3 arrival speeds a chunk; 12 speeds per body
    assert seen == [(b, s, s + 3, (3, 1, 3, 2, 4)) for b in range(3) for s in range(0, 12, 3)]


def test_a_failure_mid_stream_leaves_no_file_and_the_old_cube_intact(tmp_path):
    config = parse_config(SMALL_CONFIG, "small.toml")
    path = write_dataset(run(config, workers=1), tmp_path / "cube.nc")
    before = path.read_bytes()
    plans, arrays = prepare(config, workers=1)
    dataset = build_dataset(config, add_placeholders(config, arrays))

    def failing():
        for count, item in enumerate(sweep_chunks(config, plans, workers=1, points_per_chunk=24)):
            if count == 5:
                raise OSError(28, "No space left on device")
            yield item

    with pytest.raises(OSError, match="No space left"):
        write_dataset(dataset, path, stream=failing())
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cube.nc"]


def _memory_config(speeds: int):
    return parse_config(f"""
    name = "memory-test"
    [grid]
    bodies = ["mars", "moon"]
    v_inf = {{ start = 0.2, stop = 8.0, num = {speeds} }}
    target_altitude = {{ start = 200.0, stop = 20000.0, num = 50 }}
    periapsis_altitude = {{ start = 100.0, stop = 20000.0, num = 50 }}
    [spacecraft]
    specific_impulse = 320.0
    arrival_mass = 1000.0
    """, "memory.toml")


def test_memory_estimate_counts_chunks_not_the_grid():
    # Common practice for a streamed writer: the estimate is the held arrays plus the chunks in
    # flight, so multiplying the arrival speeds multiplies the cube, not the estimate.
    from sweep.engine.impulsive import estimate_memory

    small, large = _memory_config(2_000), _memory_config(8_000)  # cubes of 1.7 and 6.9 GB (not made)
    assert estimate_bytes(large) > 3.9 * estimate_bytes(small)
    assert estimate_memory(large, workers=2) < 0.1 * estimate_bytes(large)
    # held arrays with a v_inf axis (free periapsis: body x v_inf x target) still grow, by a little
    assert estimate_memory(large, workers=2) - estimate_memory(small, workers=2) < 0.01 * estimate_bytes(large)
