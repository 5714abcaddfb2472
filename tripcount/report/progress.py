# Progress of a run over many files, on a terminal only: one status line on
# stderr ("[k/n] path"), rewritten in place and erased before anything else is
# written, so that redirected output and logs never contain it.

from __future__ import annotations

import time
from typing import TextIO

# Below this many files a run is short enough not to need a status line.
MIN_FILES = 8
# Redraws at most this often (a fast warm run must not spend its time drawing).
INTERVAL_S = 0.1


def _is_tty(stream: TextIO) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


class Progress:
    """A one-line status of a run over `total` files, drawn on a terminal only."""

    def __init__(self, stream: TextIO, total: int, label: str = "tripcount") -> None:
        self.stream = stream
        self.total = total
        self.label = label
        self.active = total >= MIN_FILES and _is_tty(stream)
        self.shown = False
        self.last = 0.0

    def step(self, done: int, path: str) -> None:
        """Before file number `done` + 1 (`path`) is read."""
        if not self.active:
            return
        now = time.monotonic()
        if self.shown and now - self.last < INTERVAL_S:
            return
        self.last = now
        width = 30
        filled = width * done // max(self.total, 1)
        name = path if len(path) <= 40 else "..." + path[-37:]
        self.stream.write(f"\r\x1b[K{self.label}: [{'#' * filled}{'.' * (width - filled)}] "
                          f"{done}/{self.total} {name}")
        self.stream.flush()
        self.shown = True

    def clear(self) -> None:
        """Erase the status line (before other output, and at the end)."""
        if self.shown:
            self.stream.write("\r\x1b[K")
            self.stream.flush()
            self.shown = False
