"""Small shared pieces of the walk: integer caches, combination keys, the clock's signal."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.network import Shared

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


def shared_keys(model: TunedModel, sh: Shared, ids: dict[tuple[int, ...], int]) -> I64:
    """One integer per combination: its indices packed, or (when the packed number would not
    fit in 62 bits) a number given to it in ``ids``."""
    nr = len(model.resistors) + 1
    nv = max(len(model.pots), 1)
    if len(model.opamps) * nr**5 * nv < 1 << 62:
        key = sh.u * nr + sh.i1
        key = (key * nr + sh.i2) * nr + sh.i3
        key = (key * nr + sh.i4 + 1) * nv + sh.v
        return np.asarray(key, dtype=np.int64)
    rows = zip(*(x.tolist() for x in (sh.u, sh.i1, sh.i2, sh.i3, sh.i4, sh.v)), strict=True)
    return np.array([ids.setdefault(r, len(ids)) for r in rows], dtype=np.int64)
