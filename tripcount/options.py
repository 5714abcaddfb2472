# Analysis options: everything that changes what the analyses compute.
#
# Built by the CLI from the command line and from `[tool.tripcount]` in
# pyproject.toml (see tripcount/config.py); passed unchanged through the
# pipeline. A stable `cache_key()` feeds the result cache.

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable
from dataclasses import asdict, dataclass, field

from tripcount.machine import Machine


@dataclass(frozen=True)
class Includes:
    """How #include and the command-line macros are handled for one file.

    `dirs`: the -I directories, in order. `defines`: -D NAME[=VALUE] as
    (NAME, VALUE) pairs in command-line order, NAME possibly with a
    parameter list (`F(x)`); `undefines`: -U NAME, applied after them.
    """

    dirs: tuple[str, ...] = ()
    defines: tuple[tuple[str, str], ...] = ()
    undefines: tuple[str, ...] = ()


@dataclass
class Options:
    """What to compute and at which sizes."""

    at: dict[str, int] = field(default_factory=dict)  # --at N=64,M=32
    assume: str | None = None  # --assume 'N >= 16, M >= N'
    verify: bool = False  # --verify: re-check every formula by enumeration
    time_limit: float = 20.0  # seconds per nest for the counting engine
    max_pieces: int = 256  # cap on pieces of one formula
    # working set / cache model
    line_size: int = 64
    caches: dict[str, int] = field(default_factory=dict)  # {"L1": 49152, "L2": ..., "L3": ...}
    elem_size: int | None = None  # --elem-size for undeclared arrays
    solve_for: str | None = None  # parameter whose threshold the cache-fit diagnostics solve for
    # parallel balance
    threads: int | None = None
    work: str = "statements"  # or "flops"
    parallel_lines: tuple[int, ...] = ()  # --parallel LINE: treat these loops as `omp parallel for`
    imbalance_threshold: float = 1.10
    # performance model (optional roofline)
    peak_gflops: float | None = None
    bandwidth_gbs: float | None = None
    machine: Machine | None = None  # peak and bandwidths of the roofline estimate (tripcount/machine.py)
    # how the sources are read: -I, -D NAME[=VALUE], -U, and a compilation database
    include_dirs: tuple[str, ...] = ()
    defines: tuple[tuple[str, str], ...] = ()
    undefines: tuple[str, ...] = ()
    compile_commands: str | None = None
    # "full": every analysis at every loop level; "gate": what `tripcount check`
    # holds against budgets and baselines (statement counts, innermost working
    # sets, balance), so that a cold pre-commit run stays fast
    detail: str = "full"

    @property
    def gate(self) -> bool:
        """Only what the gate needs (see `detail`)."""
        return self.detail == "gate"

    def sizes(self, params: Iterable[str]) -> dict[str, int] | None:
        """Values of `params` at the --at sizes, or None unless every one is given.

        `--at '*=256'` gives a default for every parameter not named.
        """
        out: dict[str, int] = {}
        default = self.at.get("*")
        for p in params:
            if p in self.at:
                out[p] = self.at[p]
            elif default is not None:
                out[p] = default
            else:
                return None
        return out

    def cache_key(self) -> str:
        """A stable hash of the options (for the result cache)."""
        blob = json.dumps(asdict(self), sort_keys=True, default=str)
        return hashlib.sha256(blob.encode()).hexdigest()[:16]
