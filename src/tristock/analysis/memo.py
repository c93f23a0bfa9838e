"""What the analysis remembers for the process: results that depend on a board and on the
spec's supply and environment only (the spread box), never on its bands.

A board is a frozen dataclass of frozen parts, so it is its own key: every field of every
part takes part (an edited catalog row is another board). ``box_key`` adds the spec's supply
and environment; a board that cannot be hashed is simply not remembered. Each ``Memo`` keeps
its most recently used entries within a count and a byte budget, behind a lock (a server's
threads share it). ``forget`` empties them all (tests and benchmarks measure fresh work).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import TYPE_CHECKING, Any, Generic, TypeVar

if TYPE_CHECKING:
    from tristock.spec.model import Spec

V = TypeVar("V")


class Memo(Generic[V]):
    """Values by key, least recently used dropped past ``max_items`` entries or ``max_bytes``
    (``size`` of a value, in bytes)."""

    def __init__(
        self, max_items: int, max_bytes: int, size: Callable[[V], int] = lambda _: 0
    ) -> None:
        self.max_items, self.max_bytes, self.size = max_items, max_bytes, size
        self._items: OrderedDict[Hashable, tuple[V, int]] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()
        _ALL.append(self)

    def get(self, key: Hashable | None) -> V | None:
        if key is None:
            return None
        with self._lock:
            found = self._items.get(key)
            if found is None:
                return None
            self._items.move_to_end(key)
            return found[0]

    def put(self, key: Hashable | None, value: V) -> None:
        if key is None:
            return
        size = self.size(value)
        with self._lock:
            old = self._items.pop(key, None)
            self._bytes -= old[1] if old else 0
            self._items[key] = (value, size)
            self._bytes += size
            while self._items and (
                len(self._items) > self.max_items or self._bytes > self.max_bytes
            ):
                _, (_, dropped) = self._items.popitem(last=False)
                self._bytes -= dropped

    def clear(self) -> None:
        with self._lock:
            self._items.clear()
            self._bytes = 0

    def __len__(self) -> int:
        return len(self._items)


_ALL: list[Memo[Any]] = []


def forget() -> None:
    """Empty every memo of the analysis."""
    for memo in _ALL:
        memo.clear()


def box_key(board: object, spec: Spec, *extra: Hashable) -> Hashable | None:
    """(board, supply, environment, *extra), or None for a board that cannot be a key."""
    try:
        hash(board)
    except TypeError:
        return None
    return (board, spec.supply.model_dump_json(), spec.environment.model_dump_json(), *extra)


__all__ = ["Memo", "box_key", "forget"]
