# Memo tables of the engine: results that recur within one process (the same
# loop shapes in many kernels, the same images at many footprint levels).
# A table forgets everything when it is full: the entries are cheap to
# recompute, and a whole-table reset keeps memory bounded without bookkeeping.

from __future__ import annotations

from typing import Generic, TypeVar

K = TypeVar("K")
V = TypeVar("V")


class Memo(dict, Generic[K, V]):
    """A dict of at most `cap` entries, emptied when a new one would pass the cap."""

    def __init__(self, cap: int) -> None:
        super().__init__()
        self.cap = cap

    def keep(self, key: K, value: V) -> V:
        """Store `value` under `key` (emptying the table first when full); return it."""
        if len(self) >= self.cap:
            self.clear()
        self[key] = value
        return value
