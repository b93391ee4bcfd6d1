"""Output folders other users may write: no planted link is followed, nothing of theirs is removed.

The suite runs as root: "another user" is uid/gid 65534 (nobody), made by ``os.chown``. Root
ignores permissions, so the planted links below are followed unless capsweep refuses to; the
folders are ones we own (mode 0755, or 1777 with the sticky bit), so the kernel's
fs.protected_symlinks (which guards only sticky world-writable folders) plays no part in 0755.
"""

from __future__ import annotations

import logging
import os
import re
import stat
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest

from sweep import parse_config
from sweep.atomic import replacing
from sweep.cli import main
from sweep.engine.checkpoint import chunk_file, load_chunk, save_chunk
from sweep.engine.finite import _remove_stale_shared
from sweep.errors import SweepError
from sweep.lock import LOCK_NAME
from sweep.pipeline import LOG_NAME, checkpoint_folder
from sweep.safefs import check_folder, open_log
from tests.conftest import SMALL_CONFIG

NOBODY = 65534
VICTIM_BYTES = b"export PATH=/usr/bin  # the victim's own file\n"
OUTPUTS = ("small-test.nc", "summary.md", "wins.csv", "crossover.csv", "shares.csv")
PLANTED = "planted0"  # the first name every mkstemp tries below (8 characters, as mkstemp's own)

needs_root = pytest.mark.skipif(os.geteuid() != 0, reason="needs root to chown files to another user")


def _dead_pid() -> int:
    """A pid no process can have: above the kernel's pid_max."""
    return int(Path("/proc/sys/kernel/pid_max").read_text()) + 1


@pytest.fixture
def victim(tmp_path):
    """A file outside the output folder that a planted link points at."""
    path = tmp_path / "victim" / ".bashrc"
    path.parent.mkdir()
    path.write_bytes(VICTIM_BYTES)
    return path


@pytest.fixture
def predictable_names(monkeypatch):
    """Every mkstemp tries the name ``PLANTED`` first (then random ones): planted links sit in its way."""
    real = tempfile._get_candidate_names  # private, but the one place mkstemp takes its names from

    def names():
        yield PLANTED
        yield from real()

    monkeypatch.setattr(tempfile, "_get_candidate_names", names)


def _run(capsys, config: Path, out: Path) -> tuple[int, list[str]]:
    """The CLI's exit code and its error lines."""
    code = main(["run", str(config), "--out", str(out), "-q", "--workers", "1"])
    return code, [line for line in capsys.readouterr().err.splitlines() if line.startswith("capsweep:")]


def _folder(tmp_path: Path, mode: int, owner: int | None = None) -> Path:
    out = tmp_path / "out"
    out.mkdir()
    os.chmod(out, mode)
    if owner is not None:
        os.chown(out, owner, owner)
    return out


def _output_names(tmp_path: Path, config: Path, capsys) -> list[str]:
    """Every file a clean run writes (cube, summary, tables, figures), from a run into another folder."""
    reference = tmp_path / "reference"
    assert _run(capsys, config, reference)[0] == 0
    return sorted(p.name for p in reference.iterdir() if p.name != LOG_NAME)


@pytest.mark.parametrize("mode", [0o755, 0o1777], ids=["own-0755", "own-sticky-1777"])
def test_links_planted_at_every_name_are_replaced_not_followed(tmp_path, config_file, victim, capsys, mode,
                                                               predictable_names):
    config = config_file()
    names = _output_names(tmp_path, config, capsys)
    assert set(OUTPUTS) <= set(names) and any(name.endswith(".png") for name in names)
    out = _folder(tmp_path, mode)
    pid = os.getpid()
    planted = [f".capsweep-write-test-{pid}", f".capsweep-write-test.{pid}.{PLANTED}.part"]  # old and new probe
    for name in names:  # the final names, and the temporary each write tries first
        planted += [name, f".{name}.{pid}.{PLANTED}.part"]
    for name in planted:
        (out / name).symlink_to(victim)
    assert _run(capsys, config, out) == (0, [])
    assert victim.read_bytes() == VICTIM_BYTES
    for name in names:  # each final name is now a real file of the run's, the link replaced
        info = os.lstat(out / name)
        assert stat.S_ISREG(info.st_mode) and info.st_size > 0 and info.st_uid == os.geteuid(), name
    assert (out / LOG_NAME).is_file() and not (out / LOG_NAME).is_symlink()
    # the planted temporaries are links, not files of ours: left alone, the victim still intact behind them
    assert all((out / name).is_symlink() for name in planted if name.endswith(".part"))


@pytest.mark.parametrize("plant", ["symlink", "hardlink"])
def test_a_planted_log_is_refused_with_one_line(tmp_path, config_file, victim, capsys, plant):
    out = _folder(tmp_path, 0o755)
    if plant == "symlink":
        (out / LOG_NAME).symlink_to(victim)
    else:
        os.link(victim, out / LOG_NAME)  # same file system; ours, but a second name of the victim
    code, lines = _run(capsys, config_file(), out)
    assert code == 2 and len(lines) == 1, lines
    reason = "it is a symbolic link" if plant == "symlink" else "it has 2 hard links"
    assert re.fullmatch(rf"capsweep: error: {out / LOG_NAME}: refusing to append to the log file: {reason}.*",
                        lines[0]), lines[0]
    assert victim.read_bytes() == VICTIM_BYTES
    assert sorted(p.name for p in out.iterdir()) == [LOG_NAME]  # nothing else written, not even the cube


@pytest.mark.parametrize("plant", ["symlink", "hardlink"])
def test_a_planted_lock_file_is_refused_with_one_line(tmp_path, config_file, victim, capsys, plant):
    out = _folder(tmp_path, 0o755)
    lock = out / LOCK_NAME
    lock.symlink_to(victim) if plant == "symlink" else os.link(victim, lock)
    code, lines = _run(capsys, config_file(), out)
    assert code == 2 and len(lines) == 1, lines
    reason = "a symbolic link, not followed" if plant == "symlink" else r"not a regular file of yours with one link"
    assert re.fullmatch(rf"capsweep: error: {lock}: cannot take the output folder's lock file: {reason}.*", lines[0])
    assert victim.read_bytes() == VICTIM_BYTES  # the note was not written into it
    assert sorted(p.name for p in out.iterdir()) == [LOCK_NAME]


@needs_root
def test_a_log_owned_by_another_user_is_refused(tmp_path):
    log = tmp_path / LOG_NAME
    log.write_bytes(VICTIM_BYTES)
    os.chown(log, NOBODY, NOBODY)
    with pytest.raises(SweepError, match=rf"{log}: refusing to append to the log file: it is owned by uid {NOBODY}"):
        open_log(log)
    assert log.read_bytes() == VICTIM_BYTES


def test_a_planted_fifo_log_is_refused_without_hanging(tmp_path):
    os.mkfifo(tmp_path / LOG_NAME)
    with pytest.raises(SweepError, match="refusing to append to the log file: it is not a regular file"):
        open_log(tmp_path / LOG_NAME)


@needs_root
@pytest.mark.parametrize(("mode", "owner", "message"), [
    (0o755, NOBODY, rf"output folder is owned by uid {NOBODY} \(mode 0755\), not by you \(uid 0\).*choose another "
                    "with --out"),
    (0o1777, NOBODY, rf"output folder is owned by uid {NOBODY} \(mode 1777\)"),
    (0o775, None, r"output folder is writable by group or others \(mode 0775\) without the sticky bit.*chmod go-w"),
    (0o777, None, r"output folder is writable by group or others \(mode 0777\) without the sticky bit"),
], ids=["other-user", "other-user-sticky", "group-writable", "world-writable"])
def test_an_unsafe_folder_is_refused_before_anything_is_written(tmp_path, config_file, capsys, mode, owner, message):
    out = _folder(tmp_path, mode, owner)
    code, lines = _run(capsys, config_file(), out)
    assert code == 2 and len(lines) == 1, lines
    assert re.fullmatch(rf"capsweep: error: {out}: {message}.*", lines[0]), lines[0]
    assert list(out.iterdir()) == []


def test_a_sticky_world_writable_folder_of_ours_is_accepted(tmp_path, config_file, capsys):
    out = _folder(tmp_path, 0o1777)
    assert _run(capsys, config_file(), out) == (0, [])
    assert all((out / name).stat().st_size > 0 for name in OUTPUTS)


@needs_root
def test_a_checkpoint_folder_made_by_another_user_is_refused(tmp_path, config_file, capsys):
    config = config_file()
    out = _folder(tmp_path, 0o1777)  # sticky: anyone may add an entry, such as the checkpoint folder's name
    planted = checkpoint_folder(parse_config(config.read_text(), str(config)), out)
    planted.mkdir()
    os.chown(planted, NOBODY, NOBODY)
    code, lines = _run(capsys, config, out)
    assert code == 2 and len(lines) == 1 and f"{planted}: output folder is owned by uid {NOBODY}" in lines[0], lines
    assert not (out / "small-test.nc").exists()


@needs_root
def test_a_symbolic_link_of_another_user_as_output_folder_is_refused(tmp_path):
    mine = tmp_path / "mine"
    mine.mkdir()
    link = tmp_path / "out"
    link.symlink_to(mine)
    os.lchown(link, NOBODY, NOBODY)
    with pytest.raises(SweepError, match=rf"{link}: output folder is a symbolic link owned by uid {NOBODY}"):
        check_folder(link)


def test_replacing_replaces_links_at_the_final_name(tmp_path, victim):
    for name, plant in (("soft.txt", Path.symlink_to), ("hard.txt", lambda p, v: os.link(v, p))):
        plant(tmp_path / name, victim)
        with replacing(tmp_path / name) as temporary:
            assert stat.S_ISREG(os.lstat(temporary).st_mode) and temporary.stat().st_size == 0  # new and empty
            temporary.write_bytes(b"new")
        assert (tmp_path / name).read_bytes() == b"new" and not (tmp_path / name).is_symlink()
    assert victim.read_bytes() == VICTIM_BYTES


def test_a_checkpoint_chunk_is_written_past_planted_links(tmp_path, victim, predictable_names):
    folder = tmp_path / "chunks"
    folder.mkdir(mode=0o700)
    final = chunk_file(folder, 0)
    for name in ("chunk-000000.part", f".{final.name}.{os.getpid()}.{PLANTED}.part"):  # the old name, the new first
        (folder / name).symlink_to(victim)
    save_chunk(folder, 0, {"x": np.arange(3.0)})
    assert victim.read_bytes() == VICTIM_BYTES
    assert stat.S_ISREG(os.lstat(final).st_mode)
    np.testing.assert_array_equal(load_chunk(folder, 0)["x"], np.arange(3.0))


@needs_root
def test_leftover_temporaries_of_ours_are_removed_and_others_kept(tmp_path, config_file, capsys):
    config = config_file()
    out = _folder(tmp_path, 0o755)
    chunks = checkpoint_folder(parse_config(config.read_text(), str(config)), out)
    chunks.mkdir(mode=0o700)
    dead, live = _dead_pid(), os.getpid()
    ours = [out / f".small-test.nc.{dead}.{'0123456789abcdef' * 2}.part",  # as uuid4 named them before
            out / f".summary.md.{dead}.abc_0xyz.part",  # as mkstemp names them now
            chunks / "chunk-000001.part"]  # an old checkpoint temporary: no pid, stale under the lock
    kept = [out / f".wins.csv.{live}.abcdefgh.part",  # a live writer's (a `capsweep plot` meanwhile)
            out / f".shares.csv.{dead}.abcdefgh.part",  # another user's
            out / "notes.part", out / f".summary.md.{dead}.abcdefgh.part\nx"]  # not our pattern
    for path in ours + kept:
        path.write_bytes(b"partial")
    os.chown(kept[1], NOBODY, NOBODY)
    link = out / f".crossover.csv.{dead}.abcdefgh.part"
    link.symlink_to(kept[2])
    assert _run(capsys, config, out) == (0, [])
    assert not any(path.exists() for path in ours)
    assert all(path.read_bytes() == b"partial" for path in kept) and link.is_symlink()
    log = (out / LOG_NAME).read_text()
    assert len(re.findall(r"INFO sweep\.pipeline: removed 3 partial file\(s\) left by killed runs", log)) == 1, log


@needs_root
def test_only_our_stale_shared_memory_folders_are_removed(tmp_path, caplog):
    # The rules of /dev/shm applied to a folder of the test's own, so that no other run's files are touched.
    dead = _dead_pid()
    ours = tmp_path / f"capsweep-{dead}-abc_0xyz"
    foreign = tmp_path / f"capsweep-{dead}-bcdefghi"
    newline = tmp_path / f"capsweep-{dead}-cdefghij\n"
    trailing = tmp_path / f"capsweep-{dead}-x\nevil"
    live = tmp_path / f"capsweep-{os.getpid()}-defghijk"
    target = tmp_path / "target"
    link = tmp_path / f"capsweep-{dead}-efghijkl"
    for folder in (ours, foreign, newline, trailing, live, target):
        folder.mkdir()
        (folder / "a.npy").write_bytes(b"map")
    os.chown(foreign, NOBODY, NOBODY)
    link.symlink_to(target)
    with caplog.at_level(logging.DEBUG, logger="sweep"):
        _remove_stale_shared(str(tmp_path))
    assert not ours.exists()
    assert all((folder / "a.npy").read_bytes() == b"map" for folder in (foreign, newline, trailing, live, target))
    assert link.is_symlink()
    info = [record.getMessage() for record in caplog.records if record.levelno >= logging.INFO]
    assert info == [f"removing {ours}, left by a killed run (pid {dead})"]


def _as_nobody(argv: list[str]) -> tuple[int, str]:
    """Run the CLI in a forked child that has become uid/gid 65534; its exit code and what it printed to stderr.

    Forked, not executed: the test's interpreter may sit where nobody may run it (under /root).
    """
    read, write = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: never returns into pytest
        code = 99
        try:
            os.close(read)
            sys.stderr = os.fdopen(write, "w")
            os.setgroups([])
            os.setgid(NOBODY)
            os.setuid(NOBODY)
            code = main(argv)
            sys.stderr.flush()
        finally:
            os._exit(code)
    os.close(write)
    with os.fdopen(read) as stream:
        printed = stream.read()
    return os.waitstatus_to_exitcode(os.waitpid(pid, 0)[1]), printed


@needs_root
def test_an_unprivileged_user_is_refused_a_folder_root_owns():
    # As nobody, in a sticky world-writable folder root owns (as /tmp is): refused, since its owner could swap files.
    shared = Path(tempfile.mkdtemp(prefix="capsweep-safety-"))
    try:
        os.chmod(shared, 0o1777)
        config = shared / "sweep.toml"
        config.write_text(SMALL_CONFIG, encoding="utf-8")
        config.chmod(0o644)
        code, printed = _as_nobody(["run", str(config), "--out", str(shared), "-q"])
        assert code == 2, printed
        assert re.fullmatch(rf"capsweep: error: {shared}: output folder is owned by uid 0 \(mode 1777\), not by you "
                            rf"\(uid {NOBODY}\).*\n", printed), printed
        assert sorted(p.name for p in shared.iterdir()) == ["sweep.toml"]
    finally:
        for path in shared.iterdir():
            path.unlink()
        shared.rmdir()
