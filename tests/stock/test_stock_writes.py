"""Stock writes: byte-preserving edits, limits, validation before writing, the quiet wait, the
check before the rename, failures that leave the table intact, idempotency keys and kill -9.

Crash safety rests on POSIX rename(2) and fsync semantics (common practice for crash-safe
files); everything else is checked against the files' bytes.
"""

from __future__ import annotations

import errno
import multiprocessing
import os
import resource
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from tristock import cli
from tristock.stock import journal as journal_module
from tristock.stock.catalog import (
    JOURNAL_NAME,
    KINDS,
    LOCK_NAME,
    STOCK_MAX,
    CatalogBusy,
    CatalogError,
    CatalogWriteError,
    FileStamp,
    KeyReused,
    PreconditionFailed,
    RequestKey,
    StockError,
    UnknownPart,
    WritePolicy,
    adjust_stock,
    load_catalog,
    lock_path,
    part_version,
    set_stock,
    update_stock,
)

SMALL = Path(__file__).resolve().parents[1] / "fixtures" / "small_catalog"
#: Short waits for tests that make other programs' edits on purpose.
FAST = WritePolicy(quiet_s=0.3, max_wait_s=3.0)
#: A quiet period no test waits out: a write under it succeeds only without waiting.
PATIENT = WritePolicy(quiet_s=30.0, max_wait_s=0.5)
NEW_ROW = b"TR-9K10,9.1k,1,100,E24,0.1,0603,0.004,77\n"


@pytest.fixture
def small(tmp_path: Path) -> Path:
    """A writable copy of the small valid catalog (copy2 keeps the files' old mtimes)."""
    target = tmp_path / "small"
    shutil.copytree(SMALL, target)
    return target


def age(path: Path, seconds: float = 120.0) -> None:
    """Make ``path`` look unchanged for ``seconds`` (an edit made long ago)."""
    then = time.time() - seconds
    os.utime(path, (then, then))


def tables(directory: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(directory.glob("*.csv"))}


def names(directory: Path) -> list[str]:
    return sorted(p.name for p in directory.iterdir())


# ---------------------------------------------------------------------------------------------
# Byte-preserving edits and limits

ODD_TABLE = (
    b"\xef\xbb\xbf# odd but valid: byte-order mark, CRLF, quotes, blanks, comments\r\n"
    b"\r\n"
    b" id , value_ohm ,tolerance_pct,tempco_ppm,series,power_w,package,unit_cost, stock \r\n"
    b'"Q-1" ,  1k ,1,100,E96,0.1,"0603",0.004,  "250"  \r\n'
    b"# a comment between rows\r\n"
    b"Q-2,4k7,5,200,E24,0.125,0805,0.003,1k\r\n"
    b"Q-3,\t10k\t,5,200,E24,0.125,0805,0.003,\t0\r\n"
)


def test_set_stock_changes_only_that_field(tmp_path: Path) -> None:
    catalog = tmp_path / "odd"
    shutil.copytree(SMALL, catalog)
    (catalog / "resistors.csv").write_bytes(ODD_TABLE)
    age(catalog / "resistors.csv")
    assert load_catalog(catalog).get("Q-1").stock == 250
    assert set_stock(catalog, "Q-1", 7) == 250
    assert (catalog / "resistors.csv").read_bytes() == ODD_TABLE.replace(b'"250"', b'"7"')
    assert set_stock(catalog, "Q-2", 1500) == 1000
    assert adjust_stock(catalog, "Q-3", 12) == 12
    expected = (ODD_TABLE.replace(b'"250"', b'"7"').replace(b",1k\r\n", b",1500\r\n")).replace(
        b",\t0\r\n", b",\t12\r\n"
    )
    assert (catalog / "resistors.csv").read_bytes() == expected
    reloaded = load_catalog(catalog)
    assert [reloaded.get(i).stock for i in ("Q-1", "Q-2", "Q-3")] == [7, 1500, 12]
    assert names(catalog) == sorted([*(p.name for p in SMALL.iterdir()), LOCK_NAME, JOURNAL_NAME])


def test_other_tables_are_left_alone(small: Path) -> None:
    before = tables(small)
    assert adjust_stock(small, "TU-CM1", -300) == 0
    after = tables(small)
    assert {n for n in before if before[n] != after[n]} == {"opamps.csv"}
    assert after["opamps.csv"] == before["opamps.csv"].replace(b",0.35,300\n", b",0.35,0\n")


def test_stock_stays_within_zero_and_the_cap(small: Path) -> None:
    before = tables(small)
    with pytest.raises(StockError, match="cannot take 41 of 'TP-10K0': only 40 on hand"):
        adjust_stock(small, "TP-10K0", -41)
    with pytest.raises(StockError, match="would exceed the limit of 1000000000 pieces"):
        adjust_stock(small, "TR-2K20", STOCK_MAX - 3999)  # 4000 on hand
    with pytest.raises(StockError, match=r"stock count must be in 0\.\.1000000000"):
        set_stock(small, "TR-2K20", STOCK_MAX + 1)
    assert tables(small) == before
    assert adjust_stock(small, "TR-2K20", STOCK_MAX - 4000) == STOCK_MAX
    assert adjust_stock(small, "TP-10K0", -40) == 0


@pytest.mark.parametrize("count", [-1, 2.5, True, "3"])
def test_bad_counts_are_refused_before_any_file_is_touched(small: Path, count: object) -> None:
    with pytest.raises(StockError, match="stock count"):
        set_stock(small, "TR-1K00", count)  # type: ignore[arg-type]
    assert names(small) == names(SMALL)
    assert tables(small) == tables(SMALL)


def test_unknown_ids_and_kinds(small: Path) -> None:
    with pytest.raises(UnknownPart, match="no part with id 'NOPE'"):
        set_stock(small, "NOPE", 1)
    with pytest.raises(UnknownPart, match="no part with id 'TR-1K00' in pots"):
        update_stock(small, "TR-1K00", stock=1, kind="pots")
    assert tables(small) == tables(SMALL)


def test_a_catalog_that_does_not_validate_is_never_written(small: Path) -> None:
    with (small / "pots.csv").open("a") as fh:
        fh.write("TR-1K00,1k,10,100,trimmer,0.45,1\n")  # an id the resistors already use
    with (small / "capacitors.csv").open("a") as fh:
        fh.write("TC-BAD,1n,C0G,5,0,,50,0603,0.01,lots\n")
    for f in small.glob("*.csv"):
        age(f)
    before = tables(small)
    with pytest.raises(CatalogError) as caught:
        adjust_stock(small, "TR-1K00", 1)  # its own table is fine
    lines = [str(e) for e in caught.value.errors]
    assert any(ln.startswith(f"{small}/capacitors.csv:") and "'lots'" in ln for ln in lines)
    assert any(f"{small}/pots.csv:" in ln and "duplicate id 'TR-1K00'" in ln for ln in lines)
    assert tables(small) == before


# ---------------------------------------------------------------------------------------------
# Failing writes: the table intact, no temporary file, one clear line


def _fail_fsync(code: int, monkeypatch: pytest.MonkeyPatch) -> None:
    def fsync(fd: int) -> None:
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(os, "fsync", fsync)


def _fail_create(code: int, monkeypatch: pytest.MonkeyPatch) -> None:
    real_open = os.open

    def open_(path: str | os.PathLike[str], flags: int, *args: int, **kw: object) -> int:
        if flags & os.O_CREAT:
            raise OSError(code, os.strerror(code), str(path))
        return real_open(path, flags, *args, **kw)  # type: ignore[arg-type]

    monkeypatch.setattr(os, "open", open_)


@pytest.mark.parametrize(
    ("code", "how", "hint"),
    [
        (errno.ENOSPC, _fail_fsync, "the disk is full"),
        (errno.EROFS, _fail_create, "read-only file system"),
        (errno.EACCES, _fail_create, "no write permission"),
    ],
)
def test_failed_write_keeps_the_table_and_says_why(
    small: Path, monkeypatch: pytest.MonkeyPatch, code: int, how: object, hint: str
) -> None:
    before = tables(small)
    how(code, monkeypatch)  # type: ignore[operator]
    with pytest.raises(CatalogWriteError) as caught:
        adjust_stock(small, "TC-4N70", 5)
    monkeypatch.undo()
    assert caught.value.errno == code
    [issue] = caught.value.errors
    assert f"cannot write: {os.strerror(code)}" in str(issue) and hint in str(issue)
    assert "the table is unchanged" in str(issue) and "\n" not in str(issue)
    assert tables(small) == before
    assert not [n for n in names(small) if n.endswith(".tmp")]
    assert load_catalog(small).get("TC-4N70").stock == 800


def _add_one_fifty_times(catalog_dir: str, part_id: str, start: object) -> None:
    start.wait()  # type: ignore[attr-defined]
    for _ in range(50):
        adjust_stock(catalog_dir, part_id, 1)


def test_two_processes_never_lose_an_update(small: Path) -> None:
    ctx = multiprocessing.get_context("spawn")
    start = ctx.Event()
    workers = [
        ctx.Process(target=_add_one_fifty_times, args=(str(small), "TR-2K20", start))
        for _ in range(2)
    ]
    for worker in workers:
        worker.start()
    start.set()
    for worker in workers:
        worker.join(timeout=120)
    assert [w.exitcode for w in workers] == [0, 0]
    original = (SMALL / "resistors.csv").read_bytes()
    assert (small / "resistors.csv").read_bytes() == original.replace(
        b"TR-2K20,2.2k,1,100,E12,0.1,0603,0.004,4000", b"TR-2K20,2.2k,1,100,E12,0.1,0603,0.004,4100"
    )


# ---------------------------------------------------------------------------------------------
# Other programs: the quiet wait and the check before the rename


def test_a_table_changed_just_now_is_not_written_until_quiet(small: Path) -> None:
    table = small / "resistors.csv"
    table.write_bytes(table.read_bytes())  # another program saved it a moment ago
    before = tables(small)
    with pytest.raises(CatalogBusy) as caught:
        adjust_stock(small, "TR-2K20", 1, policy=PATIENT)
    assert caught.value.retry_after_s >= 1
    assert "is being written by another program" in str(caught.value.errors[0])
    assert str(caught.value.errors[0]).startswith(str(table))
    assert tables(small) == before
    assert adjust_stock(small, "TR-2K20", 1, policy=FAST) == 4001  # waits 0.3 s, then writes


def test_our_own_last_write_needs_no_quiet_wait(small: Path) -> None:
    assert adjust_stock(small, "TR-2K20", 1, policy=PATIENT) == 4001
    assert adjust_stock(small, "TR-2K20", 1, policy=PATIENT) == 4002  # just written, by us


def test_a_rewrite_with_our_stamp_but_other_bytes_is_foreign(small: Path) -> None:
    table = small / "resistors.csv"
    adjust_stock(small, "TR-2K20", 1, policy=PATIENT)
    st = os.stat(table)
    edited = table.read_bytes().replace(b"0603,0.004,4001", b"0603,0.005,4001")
    with table.open("r+b") as fh:  # same inode, same size
        fh.write(edited)
    os.utime(table, ns=(st.st_atime_ns, st.st_mtime_ns))  # and the same mtime
    with pytest.raises(CatalogBusy):
        adjust_stock(small, "TR-2K20", 1, policy=PATIENT)
    assert table.read_bytes() == edited


def test_an_mtime_ahead_of_the_clock_still_settles(small: Path) -> None:
    future = time.time() + 3600.0
    os.utime(small / "resistors.csv", (future, future))
    assert adjust_stock(small, "TR-2K20", 1, policy=FAST) == 4001


def _foreign_write_before_rename(
    table: Path, monkeypatch: pytest.MonkeyPatch, times: int
) -> list[bytes]:
    """Make another program append a row to ``table`` while our temporary file is synced,
    ``times`` times (then let writes through). Returns the contents it wrote."""
    real_fsync = os.fsync
    written: list[bytes] = []

    def fsync(fd: int) -> None:
        if len(written) < times and os.fstat(fd).st_size > 0:
            data = table.read_bytes() + NEW_ROW.replace(
                b"TR-9K10", f"TR-9K1{len(written)}".encode()
            )
            table.write_bytes(data)
            age(table)
            written.append(data)
        real_fsync(fd)

    monkeypatch.setattr(os, "fsync", fsync)
    return written


def test_a_table_changed_before_the_rename_is_read_again(
    small: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    table = small / "resistors.csv"
    foreign = _foreign_write_before_rename(table, monkeypatch, times=1)
    assert adjust_stock(small, "TR-2K20", 5, policy=FAST) == 4005
    monkeypatch.undo()
    # The other program's row is kept and our change applied to its table.
    assert table.read_bytes() == foreign[0].replace(
        b"2.2k,1,100,E12,0.1,0603,0.004,4000\n", b"2.2k,1,100,E12,0.1,0603,0.004,4005\n"
    )
    assert load_catalog(small).get("TR-9K10").stock == 77


def test_a_table_that_keeps_changing_is_refused_and_kept(
    small: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    table = small / "resistors.csv"
    foreign = _foreign_write_before_rename(table, monkeypatch, times=FAST.attempts)
    with pytest.raises(CatalogBusy, match="changed under the write 3 times"):
        adjust_stock(small, "TR-2K20", 5, policy=FAST)
    monkeypatch.undo()
    assert table.read_bytes() == foreign[-1]
    assert not [n for n in names(small) if n.endswith(".tmp")]


# ---------------------------------------------------------------------------------------------
# Preconditions and idempotency keys


def test_expected_versions(small: Path) -> None:
    part = load_catalog(small).get("TR-2K20")
    with pytest.raises(PreconditionFailed) as caught:
        update_stock(small, "TR-2K20", delta=1, expect_versions=["0" * 20])
    assert caught.value.current_version == part_version(part)
    assert tables(small) == tables(SMALL)
    write = update_stock(small, "TR-2K20", delta=1, expect_versions=[part_version(part)])
    assert write.version == part_version(load_catalog(small).get("TR-2K20")) != part_version(part)


def test_a_repeated_key_changes_nothing(small: Path) -> None:
    key = RequestKey("k-1", "add 5 to TR-2K20")
    first = update_stock(small, "TR-2K20", delta=5, request_key=key)
    again = update_stock(small, "TR-2K20", delta=5, request_key=key)
    assert (first.new, first.replayed, again.new, again.replayed) == (4005, False, 4005, True)
    assert again.part == first.part and again.version == first.version
    assert load_catalog(small).get("TR-2K20").stock == 4005
    with pytest.raises(KeyReused, match="different request"):
        update_stock(small, "TR-2K20", delta=6, request_key=RequestKey("k-1", "add 6"))
    expired = WritePolicy(key_lifetime_s=1e-9)
    assert update_stock(small, "TR-2K20", delta=5, request_key=key, policy=expired).new == 4010


def test_a_torn_journal_line_is_ignored(small: Path) -> None:
    update_stock(small, "TR-2K20", delta=1, request_key=RequestKey("a", "a"))
    with (small / JOURNAL_NAME).open("ab") as fh:
        fh.write(b'{"op":"intent","id":"cut-sho')  # killed mid-append
    update_stock(small, "TR-2K20", delta=1, request_key=RequestKey("b", "b"))
    assert update_stock(small, "TR-2K20", delta=1, request_key=RequestKey("a", "a")).replayed
    assert load_catalog(small).get("TR-2K20").stock == 4002


def test_the_journal_is_compacted_without_expired_keys(
    small: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    for n in range(5):
        update_stock(small, "TR-2K20", delta=1, request_key=RequestKey(f"k{n}", f"r{n}"))
    assert len((small / JOURNAL_NAME).read_bytes().splitlines()) == 10  # intent + done each
    monkeypatch.setattr(journal_module, "COMPACT_AFTER_LINES", 6)
    assert update_stock(small, "TR-2K20", delta=1, request_key=RequestKey("k3", "r3")).replayed
    assert update_stock(small, "TR-2K20", delta=1, request_key=RequestKey("k0", "r0")).replayed
    short = WritePolicy(key_lifetime_s=1e-9)
    update_stock(small, "TR-2K20", delta=1, policy=short)  # every key has expired for it
    lines = (small / JOURNAL_NAME).read_text().splitlines()
    assert len(lines) == 2 and not any('"key"' in line for line in lines)
    assert all('"resistors.csv"' in line and '"stamp"' in line for line in lines)
    assert load_catalog(small).get("TR-2K20").stock == 4006


_KILLED_WRITER = textwrap.dedent(
    """
    import os, signal, sys
    from tristock.stock.catalog import RequestKey, update_stock

    real_replace = os.replace

    def replace(src, dst):
        if sys.argv[2] == "after":
            real_replace(src, dst)
        os.kill(os.getpid(), signal.SIGKILL)

    os.replace = replace
    update_stock(sys.argv[1], "TR-2K20", delta=7, request_key=RequestKey("kill-key", "add 7"))
    """
)


@pytest.mark.parametrize("when", ["before", "after"])
def test_a_key_whose_writer_was_killed_applies_once(small: Path, when: str) -> None:
    """kill -9 just before or just after the rename: no answer was given; the retry with the
    same key applies the change exactly once and answers as the first would have."""
    proc = subprocess.run(
        [sys.executable, "-c", _KILLED_WRITER, str(small), when], timeout=120, check=False
    )
    assert proc.returncode == -9
    on_disk = load_catalog(small).get("TR-2K20").stock
    assert on_disk == (4007 if when == "after" else 4000)
    retry = update_stock(small, "TR-2K20", delta=7, request_key=RequestKey("kill-key", "add 7"))
    assert (retry.new, retry.replayed) == (4007, when == "after")
    assert load_catalog(small).get("TR-2K20").stock == 4007
    temps = [n for n in names(small) if n.endswith(".tmp")]
    # Killed before the rename, its temporary file stays until it is a minute old.
    assert len(temps) == (1 if when == "before" else 0)


def test_the_lock_of_a_read_only_catalog_lives_in_the_state_directory(
    small: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    assert lock_path(small) == small / LOCK_NAME
    monkeypatch.setenv("XDG_STATE_HOME", str(tmp_path / "state"))
    monkeypatch.setattr(os, "access", lambda path, mode: False)  # as for a read-only folder
    path = lock_path(small)
    assert path.parent == tmp_path / "state" / "tristock" / "locks" and path.suffix == ".lock"


def test_a_write_returns_the_catalog_and_stamps_now_on_disk(small: Path) -> None:
    first = update_stock(small, "TR-2K20", delta=3)
    second = update_stock(small, "TC-4N70", delta=-1)  # validated from the first's memory
    for write in (first, second):
        assert write.catalog is not None and write.stamps is not None
    assert second.catalog == load_catalog(small)
    stamps = [
        FileStamp.of(os.stat(small / f"{kind}.csv")) if (small / f"{kind}.csv").exists() else None
        for kind in KINDS
    ]
    assert list(second.stamps or ()) == stamps


# ---------------------------------------------------------------------------------------------
# The CLI: a write that cannot be done exits 1 with one line


def test_cli_set_stock_delta_adds_and_takes_within_the_stock(
    small: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """``--delta`` changes the count (a negative COUNT takes pieces); taking more than is on
    hand is refused (exit 2) and leaves the table as it was."""
    stock_of = {p.id: p.stock for p in load_catalog(small).resistors}
    start = stock_of["TR-2K20"]
    assert cli.main(["catalog", "set-stock", str(small), "TR-2K20", "7", "--delta"]) == 0
    assert cli.main(["catalog", "set-stock", str(small), "TR-2K20", "-3", "--delta"]) == 0
    out = capsys.readouterr().out
    assert f"TR-2K20: stock {start + 7} -> {start + 4} (-3)" in out
    assert {p.id: p.stock for p in load_catalog(small).resistors}["TR-2K20"] == start + 4
    before = tables(small)
    too_many = str(-(start + 5))
    assert cli.main(["catalog", "set-stock", str(small), "TR-2K20", too_many, "--delta"]) == 2
    assert cli.main(["catalog", "set-stock", str(small), "TR-2K20", "-1"]) == 2  # no --delta
    assert "COUNT -1 is below 0" in capsys.readouterr().err
    assert tables(small) == before


def test_cli_set_stock_on_a_full_disk_exits_1_with_one_line(
    small: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    before = tables(small)
    _fail_fsync(errno.ENOSPC, monkeypatch)
    code = cli.main(["catalog", "set-stock", str(small), "TR-2K20", "12"])
    monkeypatch.undo()
    err = capsys.readouterr().err
    assert code == 1
    assert err.count("\n") == 1 and "cannot write: No space left on device" in err
    assert tables(small) == before


def _limit_file_size() -> None:
    """In the child: files may not grow past 2 KiB (writes beyond fail with EFBIG)."""
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (2048, 2048))


def test_cli_set_stock_under_a_real_file_size_limit_exits_1(small: Path) -> None:
    """Not simulated: the kernel refuses the write (RLIMIT_FSIZE, EFBIG) part-way through the
    temporary file of a 2.3 KiB table."""
    table = small / "resistors.csv"
    table.write_bytes(table.read_bytes() + b"# " + b"padding " * 200 + b"\n")
    age(table)
    before = tables(small)
    assert len(before["resistors.csv"]) > 2048
    proc = subprocess.run(
        [sys.executable, "-m", "tristock.cli", "catalog", "set-stock", str(small), "TR-2K20", "9"],
        capture_output=True,
        text=True,
        timeout=120,
        preexec_fn=_limit_file_size,
        check=False,
    )
    assert proc.returncode == 1, proc.stderr
    assert proc.stderr.count("\n") == 1 and "cannot write: File too large" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert tables(small) == before
    assert not [n for n in names(small) if n.endswith(".tmp")]
