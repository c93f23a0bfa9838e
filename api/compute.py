"""Compute in processes of its own: each worker keeps a pool of ``processes`` children for
design, reoptimise, analyse and simulate.

Why processes: the library's numpy work on small arrays holds the GIL, so compute threads
would make the event loop wait for the GIL at every socket operation (and run one at a time).
In children, the loop that serves ``/health`` and catalog reads only waits for the CPU.

Children run at a lower CPU priority (``niceness``) and start from a fork server that has
imported the library once (spawn where fork is unavailable), so a new child is ready in
milliseconds. A catalog travels as a :class:`Parcel` (pickled once per catalog, unpickled
once per child and kept). Whatever a call raises comes back as itself when it can be pickled,
otherwise as a RuntimeError naming it; a child that dies (a crash, the OOM killer) breaks the
pool, which is replaced for the next call. A child whose worker is gone exits.
"""

from __future__ import annotations

import asyncio
import logging
import multiprocessing
import multiprocessing.connection
import os
import pickle
import threading
import uuid
import weakref
from collections import OrderedDict
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from typing import Any, TypeVar

from tristock.stock.catalog import Catalog

T = TypeVar("T")
log = logging.getLogger("tristock.api")

#: Imported once by the fork server, so children start with the library loaded.
PRELOAD = ["tristock.api.routers.design", "tristock.api.routers.analysis"]
#: Catalogs a child keeps (a reload makes a new one; the old is dropped after this many).
KEPT_CATALOGS = 2

_opened: OrderedDict[str, Catalog] = OrderedDict()  # in a child: parcel token -> catalog


@dataclass(frozen=True, slots=True)
class Parcel:
    """A catalog on its way to a child: a token and its pickle."""

    token: str
    data: bytes

    def open(self) -> Catalog:
        """The catalog (unpickled on first use in this process, then kept)."""
        found = _opened.get(self.token)
        if found is None:
            found = pickle.loads(self.data)
            _opened[self.token] = found
            while len(_opened) > KEPT_CATALOGS:
                _opened.popitem(last=False)
        _opened.move_to_end(self.token)
        return found


def _in_child(fn: Callable[..., T], args: tuple[Any, ...]) -> T:
    try:
        return fn(*args)
    except Exception as err:
        try:
            pickle.loads(pickle.dumps(err))
        except Exception:
            raise RuntimeError(f"{type(err).__name__}: {err}") from None
        raise


def _ready() -> bool:
    return True


def _start_child(niceness: int) -> None:
    """In each child: lower its CPU priority by ``niceness``, and end it when its worker
    process is gone (a worker that dies without shutting its pool down, e.g. on ``kill -9``,
    would otherwise leave children waiting forever on a queue they hold both ends of)."""
    if niceness and hasattr(os, "nice"):
        os.nice(niceness)
    parent = multiprocessing.parent_process()
    if parent is not None and parent.sentinel is not None:
        sentinel = parent.sentinel

        def orphaned() -> None:
            multiprocessing.connection.wait([sentinel])
            os._exit(0)

        threading.Thread(target=orphaned, name="tristock-orphan-watch", daemon=True).start()


def _context() -> multiprocessing.context.BaseContext:
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(PRELOAD)
        return ctx
    return multiprocessing.get_context("spawn")


class ProcessPool:
    """A lazily started pool of ``processes`` children, replaced when it breaks; children run
    ``niceness`` steps nicer than the worker, so the CPU scheduler lets the event loop
    (``/health``, catalog reads) run first whenever it has something to do."""

    def __init__(self, processes: int, niceness: int = 10) -> None:
        self.processes = processes
        self.niceness = niceness
        self._executor: ProcessPoolExecutor | None = None
        self._lock = threading.Lock()
        self._parcels: list[tuple[weakref.ref[Catalog], Parcel]] = []

    def _pool(self) -> ProcessPoolExecutor:
        with self._lock:
            if self._executor is None:
                self._executor = ProcessPoolExecutor(
                    self.processes,
                    mp_context=_context(),
                    initializer=_start_child,
                    initargs=(self.niceness,),
                )
            return self._executor

    def warm(self) -> None:
        """Start every child now (in the background), not on the first requests."""
        pool = self._pool()
        for _ in range(self.processes):
            pool.submit(_ready)

    async def call(self, fn: Callable[..., T], *args: Any) -> T:
        """``fn(*args)`` in a child; its result, or what it raised."""
        pool = self._pool()
        try:
            return await asyncio.wrap_future(pool.submit(_in_child, fn, args))
        except BrokenProcessPool:
            log.error("a compute process died; starting a new pool")
            self._replace(pool)
            raise RuntimeError("a compute process died during the request") from None

    def _replace(self, broken: ProcessPoolExecutor) -> None:
        with self._lock:
            if self._executor is broken:
                self._executor = None
        broken.shutdown(wait=False, cancel_futures=True)

    def parcel(self, catalog: Catalog) -> Parcel:
        """The catalog's parcel (pickled on first use; the last few are kept)."""
        with self._lock:
            for ref, parcel in self._parcels:
                if ref() is catalog:
                    return parcel
        parcel = Parcel(uuid.uuid4().hex, pickle.dumps(catalog, protocol=pickle.HIGHEST_PROTOCOL))
        with self._lock:
            live = [(r, p) for r, p in self._parcels if r() is not None]
            self._parcels = [*live[-(KEPT_CATALOGS - 1) :], (weakref.ref(catalog), parcel)]
        return parcel

    def shutdown(self) -> None:
        with self._lock:
            pool, self._executor = self._executor, None
        if pool is not None:
            pool.shutdown(wait=False, cancel_futures=True)
