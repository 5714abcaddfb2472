# Memo tables of the engine: results that recur within one process (the same
# loop shapes in many kernels, the same images at many footprint levels).
# A table forgets everything when it is full: the entries are cheap to
# recompute, and a whole-table reset keeps memory bounded without bookkeeping.
# Every table is registered, so that a benchmark can time the computation
# itself (clear_all() before each measurement) rather than a memo hit.

from __future__ import annotations

import weakref
from typing import Generic, TypeVar

K = TypeVar("K")
V = TypeVar("V")

_TABLES: weakref.WeakSet = weakref.WeakSet()


class Memo(dict, Generic[K, V]):
    """A dict of at most `cap` entries, emptied when a new one would pass the cap."""

    def __init__(self, cap: int) -> None:
        super().__init__()
        self.cap = cap
        _TABLES.add(self)

    __hash__ = object.__hash__  # registered by identity (a dict is not hashable)

    def keep(self, key: K, value: V) -> V:
        """Store `value` under `key` (emptying the table first when full); return it."""
        if len(self) >= self.cap:
            self.clear()
        self[key] = value
        return value


def clear_all() -> int:
    """Empty every memo table of the process; returns how many entries were dropped."""
    n = 0
    for t in list(_TABLES):
        n += len(t)
        t.clear()
    return n
