"""The registry's storage on SQLite and PostgreSQL (``registry_url`` runs each test on both):
revisions numbered and never overwritten, retirement, the part -> designs index, concurrent
writers, the schema of the migrations, unreachable databases."""

from __future__ import annotations

import threading
from typing import Any

import pytest
import sqlalchemy as sa
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext

from tristock.registry import (
    Registry,
    RegistryUnavailable,
    RetiredDesign,
    UnknownDesign,
    check_name,
    parse_ref,
)
from tristock.registry.records import Draft
from tristock.registry.schema import metadata


def draft(name: str, r3: str = "R-10K", boards: int = 10, note: str = "") -> Draft:
    parts = {"U1": "U-DUAL", "R1": "R-1K", "R2": "R-10K", "R3": r3, "C1": "C-1N"}
    return Draft(
        name=name,
        kind="fixed",
        boards=boards,
        note=note,
        spec={"build": {"boards": boards}},
        design={"parts": parts},
        designator_pieces={d: 1 for d in parts},
        analysis={"predicted": {"frequency_hz": 1000.0}, "yield_fraction": 0.99, "cost": 0.5},
        catalog_fingerprint="f" * 32,
    )


def test_revisions_count_up_and_are_never_overwritten(registry_url: str) -> None:
    reg = Registry.open(url=registry_url)
    first = reg.write(draft("osc-a", note="one"), source="release", who="ann")
    assert (first.revision, first.created_by, first.note) == (1, "ann", "one")
    second = reg.write(draft("osc-a", r3="R-22K", note="two"), source="release", who="bob")
    assert second.revision == 2
    assert reg.revision("osc-a", 1) == first  # revision 1 as it was written
    assert reg.revision("osc-a").revision == 2
    # R2 and R3 share R-10K in revision 1: two pieces a board of one code
    assert first.pieces["R-10K"] == 2 and second.pieces["R-10K"] == 1
    [summary] = reg.designs()
    assert (summary.name, summary.revision, summary.parts["R3"]) == ("osc-a", 2, "R-22K")
    reg.close()


def test_unknown_names_and_revisions(registry_url: str) -> None:
    reg = Registry.open(url=registry_url)
    reg.write(draft("osc-a"), source="release")
    with pytest.raises(UnknownDesign, match="no released design named 'osc-b'"):
        reg.revision("osc-b")
    with pytest.raises(UnknownDesign, match="osc-a has no revision 7"):
        reg.revision("osc-a", 7)
    with pytest.raises(UnknownDesign):
        reg.retire("osc-b")
    reg.close()


def test_retired_designs_keep_revisions_and_leave_the_plan(registry_url: str) -> None:
    reg = Registry.open(url=registry_url)
    reg.write(draft("osc-a"), source="release")
    reg.write(draft("osc-b", r3="R-22K"), source="release")
    assert reg.users_of(["R-10K"]) == ["osc-a", "osc-b"]
    assert reg.users_of(["R-22K"]) == ["osc-b"]
    retired = reg.retire("osc-a")
    assert retired.retired
    assert [r.name for r in reg.active()] == ["osc-b"]
    assert [d.name for d in reg.designs()] == ["osc-b"]
    assert [d.name for d in reg.designs(include_retired=True)] == ["osc-a", "osc-b"]
    assert reg.users_of(["R-10K"]) == ["osc-b"]
    assert reg.revision("osc-a", 1).retired
    with pytest.raises(RetiredDesign):
        reg.write(draft("osc-a"), source="release")
    reg.close()


def test_the_index_follows_the_latest_revision(registry_url: str) -> None:
    reg = Registry.open(url=registry_url)
    reg.write(draft("osc-a", r3="R-22K"), source="release")
    assert reg.users_of(["R-22K"]) == ["osc-a"]
    reg.write(draft("osc-a", r3="R-47K"), source="accept")
    assert reg.users_of(["R-22K"]) == []
    assert reg.users_of(["R-47K", "R-1K"]) == ["osc-a"]
    reg.close()


def test_concurrent_writers_take_distinct_revisions(registry_url: str) -> None:
    """Four writers, each with its own engine, ten revisions each of one name: 1..40, each
    written once (the transaction and the unique constraint, not luck)."""
    writers, each = 4, 10
    Registry.open(url=registry_url).close()  # migrated once, as a first run would
    barrier = threading.Barrier(writers)
    taken: list[int] = []
    failures: list[BaseException] = []
    lock = threading.Lock()

    def work(n: int) -> None:
        reg = Registry.open(url=registry_url)
        barrier.wait()
        try:
            for i in range(each):
                rev = reg.write(draft("shared", note=f"{n}-{i}"), source="release")
                with lock:
                    taken.append(rev.revision)
        except BaseException as err:  # reported below
            failures.append(err)
        finally:
            reg.close()

    threads = [threading.Thread(target=work, args=(n,)) for n in range(writers)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    assert not failures
    assert sorted(taken) == list(range(1, writers * each + 1))
    reg = Registry.open(url=registry_url)
    notes = {reg.revision("shared", r).note for r in range(1, writers * each + 1)}
    assert len(notes) == writers * each  # every write kept, none overwritten
    reg.close()


def test_migrations_create_exactly_the_declared_schema(registry_url: str) -> None:
    reg = Registry.open(url=registry_url)
    with reg.engine.connect() as conn:
        diffs: list[Any] = compare_metadata(MigrationContext.configure(conn), metadata)
        version = conn.execute(sa.text("SELECT version_num FROM alembic_version")).scalar()
    assert diffs == []
    assert version == "0001"
    reg.close()


def test_unreachable_databases_are_one_line_errors(tmp_path: Any) -> None:
    with pytest.raises(RegistryUnavailable, match="folder does not exist"):
        Registry.open(url=str(tmp_path / "missing" / "registry.sqlite"))
    closed = "postgresql+psycopg://nobody:secret@/x?host=/nonexistent-socket-dir&port=1"
    with pytest.raises(RegistryUnavailable) as caught:
        Registry.open(url=closed)
    assert "secret" not in str(caught.value) and "\n" not in str(caught.value)
    with pytest.raises(RegistryUnavailable, match="no registry"):
        Registry.open()


def test_names_and_references() -> None:
    assert parse_ref("osc-a@3") == ("osc-a", 3)
    assert parse_ref("osc.b_2") == ("osc.b_2", None)
    for bad in ("", "-x", "a b", "x" * 101, "a@b"):
        with pytest.raises(ValueError):
            parse_ref(bad)
    with pytest.raises(ValueError, match="revision after '@'"):
        parse_ref("osc@0")
    assert check_name("A1") == "A1"
