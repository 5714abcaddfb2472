# Hardening of the driver: the file's time budget and the text of a contained
# failure (the limit diagnostics are in the catalogue, diagnostics/engine.py).
#
# The budgets themselves (deadline, isl operations, bounded point counting,
# hard stop) are tripcount.budget; the driver (pipeline.py) turns a spent
# budget into these diagnostics. When a bound is hit the nest gets a limit
# diagnostic (TC310) instead of a result that could be wrong: partial counts
# that were completed are kept (each is exact), the unfinished analysis'
# outputs are dropped. A file's nests share FILE_TIME_FACTOR x time_limit
# (600 s at the default 20 s; past it, the remaining nests are reported as
# not analyzed, TC311).

from __future__ import annotations

import time

from tripcount.budget import limit_seconds
from tripcount.options import Options

FILE_TIME_FACTOR = 30  # seconds of one file's nests, in units of time_limit


def time_limit_of(options: Options) -> float:
    """Options.time_limit made usable: NaN gives the default, and at most budget.MAX_TIME_LIMIT_S."""
    return limit_seconds(options.time_limit)


def file_deadline(options: Options) -> float:
    """Monotonic time at which a file's remaining nests are no longer analyzed."""
    return time.monotonic() + FILE_TIME_FACTOR * time_limit_of(options)


def _short(exc: BaseException, limit: int = 200) -> str:
    text = " ".join(str(exc).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."
