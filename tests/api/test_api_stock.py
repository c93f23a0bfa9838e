"""Guards on the catalog endpoints (TestClient, in process): ETag, If-None-Match, If-Match,
Idempotency-Key, the stock cap, stale catalogs, and writes that cannot be done.

Status codes and header semantics follow RFC 9110 (ETag, If-Match -> 412, If-None-Match -> 304,
Retry-After) and the IETF Idempotency-Key header draft (common practice for 422 on a key
reused with another body); expected values come from the library (``load_catalog``,
``part_version``).
"""

from __future__ import annotations

import errno
import os
import shutil
import time
import warnings
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import pytest
from tristock.api.app import create_app
from tristock.api.settings import Settings

from tristock import cli
from tristock.stock.catalog import STOCK_MAX, WritePolicy, load_catalog, part_version

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the TestClient's note about its HTTP client
    from fastapi.testclient import TestClient

DEMO = cli.demo_catalog_dir()
PATIENT = WritePolicy(quiet_s=30.0, max_wait_s=0.5)


def client(catalog: Path, policy: WritePolicy | None = None) -> TestClient:
    app = create_app(Settings(catalog_dir=catalog, allow_open_writes=True))
    if policy is not None:
        app.state.store.write_policy = policy
    return TestClient(app, raise_server_exceptions=False)


@pytest.fixture()
def catalog(tmp_path: Path) -> Path:
    target = tmp_path / "catalog"
    shutil.copytree(DEMO, target)  # copy2: the tables keep their old mtimes
    return target


def first_capacitor(catalog: Path) -> tuple[str, int]:
    part = load_catalog(catalog).capacitors[0]
    return f"/v1/catalog/capacitors/{part.id}", part.stock


def tables(directory: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(directory.glob("*.csv"))}


# ---- ETag and conditional requests -----------------------------------------------------------


def test_item_answers_carry_an_etag_that_changes_with_a_write(catalog: Path) -> None:
    url, stock = first_capacitor(catalog)
    part = load_catalog(catalog).capacitors[0]
    with client(catalog) as c:
        got = c.get(url)
        assert got.headers["ETag"] == f'"{part_version(part)}"'
        assert c.get(url, headers={"If-None-Match": got.headers["ETag"]}).status_code == 304
        weak = "W/" + got.headers["ETag"]
        assert c.get(url, headers={"If-None-Match": f'"other", {weak}'}).status_code == 304
        patched = c.patch(url, json={"stock_delta": 3})
        assert patched.status_code == 200 and patched.json()["stock"] == stock + 3
        assert patched.headers["ETag"] not in (got.headers["ETag"], None)
        again = c.get(url)
        assert again.headers["ETag"] == patched.headers["ETag"]
        assert again.json() == patched.json()  # the answer and later reads agree
        assert c.get(url, headers={"If-None-Match": got.headers["ETag"]}).status_code == 200
        listed = c.get("/v1/catalog/capacitors")
        assert "X-Catalog" not in listed.headers


def test_if_match_makes_the_write_conditional(catalog: Path) -> None:
    url, stock = first_capacitor(catalog)
    with client(catalog) as c:
        etag = c.get(url).headers["ETag"]
        before = tables(catalog)
        for stale in ('"00000000000000000000"', f"W/{etag}", '"a", "b"'):
            r = c.patch(url, json={"stock": 1}, headers={"If-Match": stale})
            assert r.status_code == 412, (stale, r.text)
            assert r.headers["ETag"] == etag
        assert tables(catalog) == before
        r = c.patch(url, json={"stock": 1}, headers={"If-Match": f'"x", {etag}'})
        assert r.status_code == 200
        assert c.patch(url, json={"stock": 2}, headers={"If-Match": etag}).status_code == 412
        assert c.patch(url, json={"stock": 2}, headers={"If-Match": "*"}).status_code == 200
        assert c.patch(url, json={"stock": 3}).status_code == 200  # no If-Match: unconditional
    assert load_catalog(catalog).capacitors[0].stock == 3 != stock


def test_read_then_set_with_if_match_loses_no_update(catalog: Path) -> None:
    """20 clients each read the stock and set it one higher: with If-Match and a retry on 412,
    all 20 increments land (without it, concurrent read-then-set loses updates)."""
    url, stock = first_capacitor(catalog)
    with client(catalog) as c:

        def increment(_: int) -> int:
            for attempt in range(200):
                got = c.get(url)
                r = c.patch(
                    url,
                    json={"stock": got.json()["stock"] + 1},
                    headers={"If-Match": got.headers["ETag"]},
                )
                if r.status_code == 200:
                    return attempt
                assert r.status_code == 412, r.text
            raise AssertionError("no write landed in 200 attempts")

        with ThreadPoolExecutor(max_workers=20) as pool:
            retries = list(pool.map(increment, range(20)))
        assert c.get(url).json()["stock"] == stock + 20
    assert load_catalog(catalog).capacitors[0].stock == stock + 20
    assert sum(retries) > 0  # the guard did refuse some writes


# ---- Idempotency-Key ---------------------------------------------------------------------------


def test_a_repeated_idempotency_key_returns_the_first_answer(catalog: Path) -> None:
    url, stock = first_capacitor(catalog)
    key = {"Idempotency-Key": "order-4711-line-2"}
    with client(catalog) as c:
        first = c.patch(url, json={"stock_delta": -2}, headers=key)
        assert first.status_code == 200 and "Idempotent-Replayed" not in first.headers
        c.patch(url, json={"stock_delta": 10})  # someone else's change in between
        again = c.patch(url, json={"stock_delta": -2}, headers=key)
        assert again.status_code == 200 and again.headers["Idempotent-Replayed"] == "true"
        assert (again.json(), again.headers["ETag"]) == (first.json(), first.headers["ETag"])
        other = c.patch(url, json={"stock_delta": -3}, headers=key)
        assert other.status_code == 422
        [problem] = other.json()["errors"]
        assert problem["loc"] == ["header", "idempotency-key"]
        assert "different request" in problem["msg"]
        quoted = c.patch(url, json={"stock_delta": -2}, headers={"Idempotency-Key": '"q-1"'})
        assert quoted.status_code == 200
        for bad in ("", "x" * 256, "two words", b"na\xefve"):
            r = c.patch(url, json={"stock_delta": 1}, headers={"Idempotency-Key": bad})
            assert r.status_code == 422, bad
    assert load_catalog(catalog).capacitors[0].stock == stock - 2 + 10 - 2


# ---- the stock cap, stale catalogs, refused and failed writes ----------------------------------


def test_stock_stays_within_the_cap_for_deltas_too(catalog: Path) -> None:
    url, stock = first_capacitor(catalog)
    with client(catalog) as c:
        assert c.patch(url, json={"stock": STOCK_MAX + 1}).status_code == 422
        assert c.patch(url, json={"stock_delta": STOCK_MAX + 1}).status_code == 422
        r = c.patch(url, json={"stock_delta": STOCK_MAX - stock + 1})
        assert r.status_code == 409 and "exceed the limit" in r.json()["detail"]
        assert c.patch(url, json={"stock_delta": STOCK_MAX - stock}).json()["stock"] == STOCK_MAX


def test_a_broken_table_is_served_stale_and_never_written(catalog: Path) -> None:
    url, stock = first_capacitor(catalog)
    table = catalog / "resistors.csv"
    good = table.read_bytes()
    with client(catalog) as c:
        assert "X-Catalog" not in c.get(url).headers
        table.write_bytes(good + b"TR-BROKEN,12k,1,100,E24,0.1,0603,0.004,many\n")
        old = time.time() - 60
        os.utime(table, (old, old))
        lines = good.count(b"\n") + 1
        got = c.get(url)
        assert (got.status_code, got.headers["X-Catalog"], got.json()["stock"]) == (
            200,
            "stale",
            stock,
        )
        assert c.get("/v1/catalog/capacitors").headers["X-Catalog"] == "stale"
        assert c.app.state.store.stale  # type: ignore[attr-defined]
        before = tables(catalog)
        r = c.patch(url, json={"stock_delta": 1})
        assert r.status_code == 409
        assert f"{table}:{lines}: stock: 'many'" in r.json()["detail"]
        assert tables(catalog) == before
        assert c.get(url).json()["stock"] == stock  # the answer and the reads agree
        table.write_bytes(good)
        os.utime(table, (old, old))
        fixed = c.patch(url, json={"stock_delta": 1})
        assert fixed.status_code == 200 and "X-Catalog" not in fixed.headers
        assert c.get(url).json()["stock"] == stock + 1
        assert not c.app.state.store.stale  # type: ignore[attr-defined]


def test_a_table_being_written_by_another_program_is_503_with_retry_after(
    catalog: Path,
) -> None:
    url, _ = first_capacitor(catalog)
    table = catalog / "capacitors.csv"
    with client(catalog, PATIENT) as c:
        table.write_bytes(table.read_bytes())  # an editor saved it just now
        before = tables(catalog)
        r = c.patch(url, json={"stock_delta": 1})
        assert r.status_code == 503, r.text
        assert int(r.headers["Retry-After"]) >= 1
        assert "is being written by another program" in r.json()["detail"]
        assert tables(catalog) == before


@pytest.mark.parametrize("code", [errno.ENOSPC, errno.EROFS, errno.EACCES])
def test_a_write_the_system_refuses_is_503_and_the_table_intact(
    catalog: Path, monkeypatch: pytest.MonkeyPatch, code: int
) -> None:
    url, stock = first_capacitor(catalog)
    before = tables(catalog)
    real_open, real_fsync = os.open, os.fsync

    def open_(path: Any, flags: int, *args: Any, **kw: Any) -> int:
        if flags & os.O_CREAT and str(catalog) in str(path):
            raise OSError(code, os.strerror(code), str(path))
        return real_open(path, flags, *args, **kw)

    def fsync(fd: int) -> None:
        raise OSError(code, os.strerror(code))

    with client(catalog) as c:
        assert c.get(url).status_code == 200
        if code == errno.ENOSPC:
            monkeypatch.setattr(os, "fsync", fsync)  # the disk fills while writing
        else:
            monkeypatch.setattr(os, "open", open_)  # nothing can be created in the folder
        r = c.patch(url, json={"stock_delta": 1})
        monkeypatch.setattr(os, "open", real_open)
        monkeypatch.setattr(os, "fsync", real_fsync)
        assert r.status_code == 503, r.text
        assert f"cannot write: {os.strerror(code)}" in r.json()["detail"]
        assert "the table is unchanged" in r.json()["detail"]
        assert c.get(url).json()["stock"] == stock
    assert tables(catalog) == before
    assert not [p for p in catalog.iterdir() if p.name.endswith(".tmp")]
