"""Checkpoints are verified before use: a swapped, partial, foreign, altered or planted chunk is
recomputed with a warning, never trusted and never a defect exit."""

from __future__ import annotations

import json
import logging
import shutil
import zipfile

import numpy as np
import pytest

from sweep import parse_config
from sweep.engine.checkpoint import chunk_file, load_chunk
from sweep.engine.finite import evaluate_finite
from sweep.engine.impulsive import plan_body
from tests.test_evaluate import assert_same_arrays
from tests.test_evaluate_finite import FINITE_CONFIG


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """A finite sweep computed fresh, and the folder of checkpoints a run of it leaves."""
    config = parse_config(FINITE_CONFIG, "finite.toml")
    plans = [plan_body(body, config) for body in config.bodies]
    fresh = evaluate_finite(config, plans, 1, points_per_chunk=64)
    folder = tmp_path_factory.mktemp("chunks")
    evaluate_finite(config, plans, 1, points_per_chunk=64, checkpoint=folder)
    assert len(list(folder.glob("chunk-*.npz"))) >= 8
    return config, plans, fresh, folder


def _resume(saved, tmp_path, spoil, caplog):
    """Copy the checkpoints, spoil some, resume: the arrays must equal a fresh run's."""
    config, plans, fresh, folder = saved
    copy = tmp_path / "chunks"
    shutil.copytree(folder, copy)
    spoil(copy)
    with caplog.at_level(logging.WARNING, logger="sweep"):
        resumed = evaluate_finite(config, plans, 1, points_per_chunk=64, checkpoint=copy)
    assert_same_arrays(fresh, resumed)
    return [r.getMessage() for r in caplog.records if r.levelno >= logging.WARNING]


def _members(path):
    with np.load(path) as data:
        return {name: data[name] for name in data.files}


def _edit_record(folder, index, edit):
    """Rewrite chunk ``index`` with its arrays and record changed by ``edit(members, record)``."""
    members = _members(chunk_file(folder, index))
    meta = json.loads(str(members["__checkpoint__"]))
    edit(members, meta)
    members["__checkpoint__"] = np.array(json.dumps(meta))
    np.savez(chunk_file(folder, index), **members)


def test_a_swapped_chunk_is_recomputed(saved, tmp_path, caplog):
    def spoil(folder):
        # another chunk of the same run and the same shape, under this chunk's name
        shutil.copyfile(chunk_file(folder, 0), chunk_file(folder, 2))

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000002.npz not used" in w and "holds chunk 0" in w for w in warnings), warnings
    assert any("recomputing 1 finite-burn chunks" in w for w in warnings), warnings


def test_a_chunk_with_an_array_missing_is_recomputed(saved, tmp_path, caplog):
    def spoil(folder):
        def drop(members, meta):
            del members["gravity_loss"]
            del meta["arrays"]["gravity_loss"]  # a consistent record of the incomplete set

        _edit_record(folder, 1, drop)

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000001.npz not used" in w and "not this run's" in w for w in warnings), warnings


def test_altered_values_fail_the_checksum(saved, tmp_path, caplog):
    def spoil(folder):
        members = _members(chunk_file(folder, 3))
        members["finite_delta_v"] = members["finite_delta_v"] + 877.0  # m/s: values off, shapes intact
        np.savez(chunk_file(folder, 3), **members)

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000003.npz not used" in w and "checksum mismatch" in w for w in warnings), warnings


def test_a_chunk_of_another_run_is_recomputed(saved, tmp_path, caplog):
    def spoil(folder):
        _edit_record(folder, 4, lambda members, meta: meta.update(key="0" * 64))  # as saved by a run of other inputs

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000004.npz not used" in w and "another run" in w for w in warnings), warnings


@pytest.mark.parametrize("damage", ["truncated", "bit flip", "garbage", "empty", "old format"])
def test_damaged_chunks_are_recomputed(saved, tmp_path, caplog, damage):
    def spoil(folder):
        path = chunk_file(folder, 5)
        data = bytearray(path.read_bytes())
        if damage == "truncated":
            path.write_bytes(bytes(data[: len(data) // 2]))
        elif damage == "bit flip":
            data[len(data) // 2] ^= 0x10
            path.write_bytes(bytes(data))
        elif damage == "garbage":
            path.write_bytes(b"not a checkpoint\n" * 100)
        elif damage == "empty":
            path.write_bytes(b"")
        else:  # a chunk as an older version wrote it: arrays only, no record
            members = _members(path)
            del members["__checkpoint__"]
            np.savez(path, **members)

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000005.npz not used" in w for w in warnings), warnings


def test_a_symlink_in_place_of_a_chunk_is_not_read(saved, tmp_path, caplog):
    _, _, _, folder = saved
    outside = tmp_path / "elsewhere.npz"
    shutil.copyfile(chunk_file(folder, 6), outside)  # a valid chunk, but reached through a link
    before = outside.read_bytes()

    def spoil(copy):
        chunk_file(copy, 6).unlink()
        chunk_file(copy, 6).symlink_to(outside)

    warnings = _resume(saved, tmp_path, spoil, caplog)
    assert any("chunk-000006.npz not used" in w and "unreadable" in w for w in warnings), warnings
    assert outside.read_bytes() == before  # neither read as ours nor written through
    assert not (tmp_path / "chunks" / "chunk-000006.npz").is_symlink()  # replaced by the recomputed chunk


def test_load_chunk_accepts_its_own_run_only(saved):
    config, _, _, folder = saved
    with np.load(chunk_file(folder, 0)) as data:
        meta = json.loads(str(data["__checkpoint__"]))
    good = load_chunk(folder, 0, meta["key"])
    assert good is not None and "finite_delta_v" in good and "__checkpoint__" not in good
    assert load_chunk(folder, 0, "another key") is None
    with zipfile.ZipFile(chunk_file(folder, 0)) as archive:  # the record travels inside the file
        assert "__checkpoint__.npy" in archive.namelist()


def test_a_small_dev_shm_falls_back_to_file_maps_beside_the_checkpoints(saved, tmp_path, caplog, monkeypatch):
    # Containers often give /dev/shm 64 MB; mapping more than it holds kills the workers with SIGBUS.
    import sweep.engine.finite as finite

    config, plans, fresh, _ = saved
    real = finite.shutil.disk_usage
    monkeypatch.setattr(finite, "_shared_folder", lambda: str(tmp_path / "shm"))
    (tmp_path / "shm").mkdir()
    monkeypatch.setattr(finite.shutil, "disk_usage", lambda p: real(p)._replace(free=1 << 20)
                        if str(p).endswith("shm") else real(p))
    checkpoint = tmp_path / "out" / ".chunks"
    with caplog.at_level(logging.INFO, logger="sweep"):
        result = evaluate_finite(config, plans, 2, points_per_chunk=64, checkpoint=checkpoint)
    assert_same_arrays(fresh, result)
    lines = [r.getMessage() for r in caplog.records if "do not fit" in r.getMessage()]
    assert len(lines) == 1 and str(tmp_path / "out") in lines[0], lines
    assert not list((tmp_path / "out").glob(".capsweep-*"))  # the maps are gone once the arrays are read
    assert not list((tmp_path / "shm").iterdir())  # nothing was put in the small memory folder
