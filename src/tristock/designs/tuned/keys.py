"""Small shared pieces of the walk: integer caches, the clock's signal."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

I64 = NDArray[np.int64]


class TimeUp(Exception):
    """The deadline passed inside a step that cannot return a partial answer."""


class IntCache:
    """Integer values by integer key (sorted arrays; vectorised look-up)."""

    def __init__(self) -> None:
        self.keys = np.zeros(0, dtype=np.int64)
        self.values = np.zeros(0, dtype=np.int64)

    def get(self, keys: I64) -> tuple[NDArray[np.bool_], I64]:
        at = np.searchsorted(self.keys, keys)
        at_c = np.minimum(at, max(len(self.keys) - 1, 0))
        found = (
            (at < len(self.keys)) & (self.keys[at_c] == keys)
            if len(self.keys)
            else np.zeros(len(keys), dtype=bool)
        )
        values = (
            np.where(found, self.values[at_c], 0)
            if len(self.keys)
            else np.zeros(len(keys), dtype=np.int64)
        )
        return found, values.astype(np.int64)

    def put(self, keys: I64, values: I64) -> None:
        k = np.concatenate([self.keys, keys])
        v = np.concatenate([self.values, values])
        order = np.argsort(k, kind="stable")
        self.keys, self.values = k[order], v[order]
