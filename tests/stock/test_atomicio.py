"""The shared atomic writer: whole files or nothing, modes kept, no temporary file left.

Crash safety rests on POSIX rename(2) replacing the target atomically (common practice).
"""

from __future__ import annotations

import errno
import os
from pathlib import Path
from typing import BinaryIO

import pytest

from tristock.stock.atomicio import clean_stale_temps, is_temp_of, temp_name, write_atomic


def test_replaces_keeps_mode_and_returns_the_new_files_stamp(tmp_path: Path) -> None:
    target = tmp_path / "table.csv"
    target.write_bytes(b"old")
    os.chmod(target, 0o640)
    written = write_atomic(target, b"new contents")
    st = os.stat(target)
    assert target.read_bytes() == b"new contents"
    assert st.st_mode & 0o777 == 0o640
    assert (written.st_ino, written.st_size, written.st_mtime_ns) == (
        st.st_ino,
        st.st_size,
        st.st_mtime_ns,
    )
    assert sorted(os.listdir(tmp_path)) == ["table.csv"]


def test_new_file_mode_and_streamed_content(tmp_path: Path) -> None:
    def content(stream: BinaryIO) -> None:
        stream.write(b"part one, ")
        stream.write(b"part two")

    target = tmp_path / "plot.svg"
    write_atomic(target, content)
    assert target.read_bytes() == b"part one, part two"
    assert os.stat(target).st_mode & 0o777 == 0o644


def test_no_overwrite_refuses_an_existing_file(tmp_path: Path) -> None:
    target = tmp_path / "t.csv"
    target.write_bytes(b"keep me")
    with pytest.raises(FileExistsError, match="file exists"):
        write_atomic(target, b"other", overwrite=False)
    assert target.read_bytes() == b"keep me"
    assert os.listdir(tmp_path) == ["t.csv"]


@pytest.mark.parametrize("code", [errno.ENOSPC, errno.EIO])
def test_failure_leaves_the_old_file_and_no_temporary(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, code: int
) -> None:
    target = tmp_path / "t.csv"
    target.write_bytes(b"old")

    def fail(fd: int) -> None:
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(os, "fsync", fail)
    with pytest.raises(OSError) as caught:
        write_atomic(target, b"new")
    assert caught.value.errno == code
    assert target.read_bytes() == b"old"
    assert os.listdir(tmp_path) == ["t.csv"]


def test_before_replace_can_abort(tmp_path: Path) -> None:
    target = tmp_path / "t.csv"
    target.write_bytes(b"old")
    seen: list[int] = []

    def veto(st: os.stat_result) -> None:
        seen.append(st.st_size)
        raise RuntimeError("changed meanwhile")

    with pytest.raises(RuntimeError, match="changed meanwhile"):
        write_atomic(target, b"newer", before_replace=veto)
    assert seen == [5]
    assert target.read_bytes() == b"old"
    assert os.listdir(tmp_path) == ["t.csv"]


def test_temp_names_match_the_cleanup_pattern(tmp_path: Path) -> None:
    name = temp_name(tmp_path / "resistors.csv").name
    assert is_temp_of(name, "resistors.csv")
    assert not is_temp_of(name, "capacitors.csv")
    assert not is_temp_of(".resistors.csv.tmp", "resistors.csv")
    assert is_temp_of(".resistors.csv.abc_XY12.tmp", "resistors.csv")  # tempfile's alphabet


def test_clean_stale_temps_by_age(tmp_path: Path) -> None:
    old = tmp_path / ".t.csv.00000000.tmp"
    young = tmp_path / ".t.csv.11111111.tmp"
    for p in (old, young):
        p.write_bytes(b"x")
    os.utime(old, (1000.0, 1000.0))
    os.utime(young, (1100.0, 1100.0))
    assert clean_stale_temps(tmp_path, ["t.csv"], older_than_s=60.0, now=1120.0) == [old]
    assert young.exists()
    assert clean_stale_temps(tmp_path / "missing", ["t.csv"]) == []
