"""A small LRU of search answers: the same request on the same catalog files gets the same
answer (the searches are deterministic), so it is served without searching again.

Keys hold the catalog's file signature, so any change to a table (a stock PATCH, an edit, a
reload) makes every older entry unreachable; they age out of the LRU.
"""

from __future__ import annotations

import json
import threading
from collections import OrderedDict
from collections.abc import Hashable
from typing import Any


class AnswerCache:
    """Thread-safe LRU from (route, catalog signature, request JSON) to a JSON-ready answer."""

    def __init__(self, size: int) -> None:
        self.size = size
        self._items: OrderedDict[Hashable, dict[str, Any]] = OrderedDict()
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    @staticmethod
    def key(route: str, signature: Hashable, request: Any) -> Hashable:
        return (route, signature, json.dumps(request, sort_keys=True, default=str))

    def get(self, key: Hashable) -> dict[str, Any] | None:
        with self._lock:
            found = self._items.get(key)
            if found is None:
                self.misses += 1
                return None
            self._items.move_to_end(key)
            self.hits += 1
            return found

    def put(self, key: Hashable, answer: dict[str, Any]) -> None:
        if self.size <= 0:
            return
        with self._lock:
            self._items[key] = answer
            self._items.move_to_end(key)
            while len(self._items) > self.size:
                self._items.popitem(last=False)
