# Entry point part: `tripcount machine --measure` -- a machine description
# from a short measurement on this host.
#
# Bandwidth: a STREAM-like kernel (McCalpin's STREAM benchmark counts the
# bytes of the arrays read and written, not write-allocate traffic) over
# three float64 arrays sized to fit each cache level but not the one above
# it, and beyond the last level for memory. numpy has no single-pass triad
# (a = b + s*c makes a temporary), so the kernel is the STREAM "add"
# a = b + c: one pass, 24 bytes per element counted. Flops: a dense float64
# matrix multiply (2 n^3 flops) on one thread (the BLAS thread variables are
# set to 1 before numpy is imported), so the figure is a per-core rate that
# the BLAS attains, not a vendor peak. Every figure is the best of a few
# repeats, printed with its median and range: measurements of this host,
# on a machine perhaps shared with other work.

from __future__ import annotations

import os
import platform
import statistics
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, TextIO

from tripcount.analysis.caches import fmt_bytes, hierarchy
from tripcount.options import Options

MEMORY_CAP = 256 * 1024 * 1024  # bytes of the three memory arrays together, at most
THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS")


@dataclass(frozen=True)
class Figure:
    """One measured rate: best, median and range over the repeats (GB/s or GFLOP/s)."""

    what: str  # "L1", "L2", "memory", "flops"
    size: int  # bytes of the arrays (bandwidth) or the matrix order (flops)
    rates: tuple[float, ...]
    note: str = ""

    @property
    def best(self) -> float:
        """The highest rate (STREAM reports the best time)."""
        return max(self.rates)

    def text(self) -> str:
        """'L2 (arrays 512 KiB): 41.2 GB/s best, median 39.8, range 35.1..41.2 over 5 repeats'."""
        unit = "GFLOP/s" if self.what == "flops" else "GB/s"
        where = f"{self.size}x{self.size} multiply" if self.what == "flops" else f"arrays {fmt_bytes(self.size)}"
        return (f"{self.what} ({where}): {self.best:.3g} {unit} best, median {statistics.median(self.rates):.3g}, "
                f"range {min(self.rates):.3g}..{max(self.rates):.3g} over {len(self.rates)} repeats"
                + (f" ({self.note})" if self.note else ""))


def _numpy() -> Any:
    for var in THREAD_VARS:
        os.environ.setdefault(var, "1")
    import numpy

    return numpy


def _repeat(run: Callable[[], None], seconds: float, repeats: int) -> list[float]:
    """Times of `repeats` batches of calls of `run`, each batch about `seconds` long (per call)."""
    run()  # warm: page in the arrays, load the caches
    calls = 1
    while True:
        t0 = time.perf_counter()
        for _ in range(calls):
            run()
        dt = time.perf_counter() - t0
        if dt >= seconds / 4 or calls >= 1 << 20:
            break
        calls *= 2
    calls = max(1, int(calls * seconds / max(dt, 1e-9)))
    out = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        for _ in range(calls):
            run()
        out.append((time.perf_counter() - t0) / calls)
    return out


def bandwidth(np: Any, total_bytes: int, what: str, seconds: float, repeats: int, note: str = "") -> Figure:
    """The STREAM-like add a = b + c over three arrays of `total_bytes` together."""
    n = max(64, total_bytes // 24)
    a, b, c = np.zeros(n), np.ones(n), np.full(n, 2.0)
    times = _repeat(lambda: np.add(b, c, out=a), seconds, repeats)
    return Figure(what, 24 * n, tuple(24 * n / t / 1e9 for t in times), note)


def flop_rate(np: Any, order: int, seconds: float, repeats: int) -> Figure:
    """A dense float64 multiply of two order x order matrices (2 order^3 flops)."""
    x, y = np.ones((order, order)), np.full((order, order), 0.5)
    out = np.empty((order, order))
    times = _repeat(lambda: np.matmul(x, y, out=out), seconds, repeats)
    return Figure("flops", order, tuple(2 * order**3 / t / 1e9 for t in times), "one thread")


def measure(options: Options, budget: float = 3.0, repeats: int = 5) -> list[Figure]:
    """Flops and the bandwidth of each cache level of `options` (host, or --cache) and of memory,
    in about `budget` seconds. Raises ImportError without numpy."""
    np = _numpy()
    caches = hierarchy(options).levels
    share = budget / (len(caches) + 2) / (repeats + 1)
    figures = [flop_rate(np, 96 if budget < 1 else 256, share, repeats)]
    below = 0
    for lv in caches:
        # half the level, and more than the level above: the arrays live in this level
        size = max(lv.size // 2, min(lv.size, 2 * below))
        small = "numpy's per-call overhead is timed too: an underestimate" if size < 256 * 1024 else ""
        figures.append(bandwidth(np, size, lv.name, share, repeats, small))
        below = lv.size
    size = 4 * below if below else MEMORY_CAP
    note = ""
    if size > MEMORY_CAP:
        size = MEMORY_CAP
        if size < 2 * below:
            note = f"arrays not beyond the last cache ({fmt_bytes(below)}): may overstate memory bandwidth"
    figures.append(bandwidth(np, size, "memory", share, repeats, note))
    return figures


def machine_toml(figures: list[Figure], cores: int) -> str:
    """The machine description (TOML) of the figures: the best of each."""
    by = {f.what: f for f in figures}
    stamp = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    caches = ", ".join(f"{f.what} = {f.best:.4g}" for f in figures if f.what.startswith("L"))
    lines = [
        f"# Machine description measured on this host ({platform.node() or 'unknown'}) by "
        f"`tripcount machine --measure`, {stamp}.",
        "# Measurements of this host, not vendor figures; the best of the repeats:",
    ]
    lines += [f"#   {f.text()}" for f in figures]
    lines += [
        f'name = "{(platform.node() or "this host").replace(chr(34), "")}"',
        f'source = "measured on this host {stamp}: dense multiply (one thread), STREAM-like add a = b + c"',
        f"peak_gflops_per_core = {by['flops'].best:.4g}",
        f"cores = {cores}",
        f"memory_gbs = {by['memory'].best:.4g}",
    ]
    if caches:
        lines.append(f"cache_gbs = {{ {caches} }}")
    return "\n".join(lines) + "\n"


def run_measure(options: Options, output: str | None, budget: float, stdout: TextIO) -> None:
    """Measure, print the figures, and write the description to `output` (stdout when None)."""
    figures = measure(options, budget)
    text = machine_toml(figures, os.cpu_count() or 1)
    if output is None:
        stdout.write(text)
        return
    stdout.write("measured on this host (best of the repeats is written):\n")
    for f in figures:
        stdout.write(f"  {f.text()}\n")
    with open(output, "w", encoding="utf-8") as fh:
        fh.write(text)
    stdout.write(f"wrote {output}; use it with --machine {output}\n")
