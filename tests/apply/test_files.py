"""The one atomic file write: a user's file is never lost or left half-written.
Common practice, no source (write to a temporary file in the same folder, fsync, rename)."""
from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

from duality.apply import files
from duality.apply.files import atomic_path, write_atomic
from duality.errors import DualityError


def test_writes_text_and_bytes(tmp_path):
    path = tmp_path / "out.txt"
    assert write_atomic(path, "first\nline é\n") == path
    assert path.read_bytes() == "first\nline é\n".encode("utf-8")
    write_atomic(path, b"\x00\x01")
    assert path.read_bytes() == b"\x00\x01"
    assert os.listdir(tmp_path) == ["out.txt"]


def test_backup_keeps_the_previous_version(tmp_path):
    path = tmp_path / "case.toml"
    path.write_text("old")
    write_atomic(path, "new", backup=True)
    assert path.read_text() == "new"
    assert (tmp_path / "case.toml.bak").read_text() == "old"
    # no backup of a file that did not exist, and none unless asked
    write_atomic(tmp_path / "fresh.txt", "x", backup=True)
    write_atomic(path, "newer")
    assert sorted(os.listdir(tmp_path)) == ["case.toml", "case.toml.bak", "fresh.txt"]
    assert (tmp_path / "case.toml.bak").read_text() == "old"


def test_interrupted_write_leaves_the_old_file_intact(tmp_path, monkeypatch):
    path = tmp_path / "data.csv"
    path.write_text("a,b\n1,2\n")

    def half_write(fd, data):
        os.write(fd, data[: len(data) // 2])
        raise OSError(28, "No space left on device")
    monkeypatch.setattr(files, "_write_and_sync", half_write)
    with pytest.raises(DualityError, match=r"data\.csv: could not write \(No space left "
                                           r"on device\); the previous file is unchanged"):
        write_atomic(path, "a,b\n3,4\n" * 100)
    assert path.read_text() == "a,b\n1,2\n"
    assert os.listdir(tmp_path) == ["data.csv"]


def test_keyboard_interrupt_inside_the_block_removes_the_temporary_file(tmp_path):
    path = tmp_path / "out.parquet"
    path.write_bytes(b"old")
    with pytest.raises(KeyboardInterrupt):
        with atomic_path(path) as tmp:
            assert tmp.parent == tmp_path and tmp != path
            tmp.write_bytes(b"half")
            raise KeyboardInterrupt
    assert path.read_bytes() == b"old"
    assert os.listdir(tmp_path) == ["out.parquet"]


def test_an_error_in_the_block_passes_through_unchanged(tmp_path):
    path = tmp_path / "x.txt"
    with pytest.raises(DualityError, match="^bad row 3$"):
        with atomic_path(path):
            raise DualityError("bad row 3")
    assert not path.exists() and os.listdir(tmp_path) == []


def test_failed_rename_names_the_file_and_keeps_the_old_one(tmp_path, monkeypatch):
    path = tmp_path / "case.toml"
    path.write_text("old")
    real = os.replace

    def failing(src, dst):
        if Path(dst) == path:
            raise OSError(5, "Input/output error")
        return real(src, dst)
    monkeypatch.setattr(files.os, "replace", failing)
    with pytest.raises(DualityError, match=r"case\.toml: could not save .*unchanged"):
        write_atomic(path, "new", backup=True, what="save")
    assert path.read_text() == "old"
    assert all(not n.endswith(".tmp") for n in os.listdir(tmp_path))


def test_missing_folder_is_a_clear_error(tmp_path):
    with pytest.raises(DualityError, match=r"folder .*nowhere does not exist"):
        write_atomic(tmp_path / "nowhere" / "f.txt", "x")


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
def test_written_files_follow_the_umask_and_keep_a_replaced_files_mode(tmp_path):
    # a new file gets 0666 less the umask, as open(path, "w") would give (POSIX open(2),
    # common practice, no source); a replaced file keeps its own mode
    old = os.umask(0o022)
    try:
        path = tmp_path / "out.txt"
        write_atomic(path, "a")
        assert stat.S_IMODE(path.stat().st_mode) == 0o644
        os.chmod(path, 0o640)
        write_atomic(path, "b")
        assert stat.S_IMODE(path.stat().st_mode) == 0o640
        os.umask(0o077)
        other = tmp_path / "other.txt"
        write_atomic(other, "c")
        assert stat.S_IMODE(other.stat().st_mode) == 0o600
    finally:
        os.umask(old)
