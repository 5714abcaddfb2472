# Analysis: a roofline time estimate per nest.
#
# The roofline model (S. Williams, A. Waterman, D. Patterson, "Roofline: an
# insightful visual performance model for multicore architectures", CACM 52(4),
# 2009) bounds a kernel's time from below by the slowest of its resources:
#     time >= max(flops / peak, bytes_level / bandwidth_level over the levels).
# The flops are the exact count of the flops analysis at the --at sizes; the
# bytes are the traffic per cache level of the nest extra "traffic" when that
# analysis ran (lines brought into a level are delivered by the level below
# it, so they are divided by that level's bandwidth; the bytes from main
# memory by the memory bandwidth), else the compulsory footprint of the nest,
# which is a lower bound on the bytes moved (and the time then a lower bound
# on a lower bound). A parallel loop's work is split as the balance analysis
# found it: the slowest thread's share of the flops and of the cache traffic
# runs on one core; memory bandwidth is shared by all. A model estimate, with
# its assumptions stated in the result.

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import TYPE_CHECKING, Any

from tripcount.analysis.results import NestResult
from tripcount.machine import Machine
from tripcount.options import Options

if TYPE_CHECKING:  # budget loads islpy; the ranking of a cached text report reads this module without it
    from tripcount.budget import Budget

MODEL = "roofline (Williams, Waterman & Patterson, CACM 2009)"
HINT = ("no time estimate: no machine description (`tripcount machine --measure -o machine.toml`, then "
        "`--machine machine.toml`, or a [tool.tripcount.machine] table in pyproject.toml)")
ASSUMPTIONS = (
    "a lower bound: the slowest resource alone (compute, or the bytes of one level over its bandwidth); "
    "the others overlap it completely",
    "no vectorisation, instruction mix or latency effects: every flop runs at the peak rate",
    "bandwidths are sustained (streaming) figures; cache bandwidths per core, memory bandwidth shared",
)
COMPULSORY = ("memory bytes are the compulsory footprint only (no traffic model ran): a lower bound on the "
              "bytes moved, so the time is a lower bound too")


@dataclass(frozen=True)
class Term:
    """One resource of the bound: its amount (flops or bytes), rate, and time."""

    resource: str  # "compute", "L2", "L3", "memory"
    amount: float  # flops or bytes (of the slowest thread for per-core resources)
    unit: str  # "flop" or "byte"
    rate: float  # GFLOP/s or GB/s
    seconds: float

    def to_json(self) -> dict[str, Any]:
        """resource, amount, unit, rate (10^9 per second), seconds."""
        return {"resource": self.resource, "amount": self.amount, "unit": self.unit, "rate": self.rate,
                "seconds": self.seconds}


@dataclass(frozen=True)
class Roofline:
    """Nest extra `roofline`: the time estimate and what bounds it (model estimate)."""

    flops: int | Fraction | None
    memory_bytes: int | Fraction | None
    memory_from: str  # "traffic" or "compulsory footprint"
    degree: int | None = None
    machine: Machine | None = None
    terms: tuple[Term, ...] = ()
    threads: int = 1
    slowest_share: Fraction | None = None  # the slowest thread's share of the work (parallel loops)
    notes: tuple[str, ...] = ()

    @property
    def intensity(self) -> float | None:
        """Flops per byte from memory."""
        if self.flops is None or not self.memory_bytes:
            return None
        return float(Fraction(self.flops) / Fraction(self.memory_bytes))

    @property
    def seconds(self) -> float | None:
        """The lower-bound time: the largest term."""
        return max((t.seconds for t in self.terms), default=None)

    @property
    def binding(self) -> str | None:
        """The resource whose term is the time."""
        return max(self.terms, key=lambda t: t.seconds).resource if self.terms else None

    @property
    def peak_used(self) -> float | None:
        """The peak flop rate of the cores the nest runs on."""
        if self.machine is None:
            return None
        return self.machine.peak_gflops_per_core * min(self.threads, self.machine.cores)

    @property
    def attainable_gflops(self) -> float | None:
        """Flops over the time."""
        s = self.seconds
        return None if not s or not self.flops else float(self.flops) / s / 1e9

    @property
    def fraction_of_peak(self) -> float | None:
        """Attainable over the peak of the cores used."""
        a, p = self.attainable_gflops, self.peak_used
        return None if a is None or not p else a / p

    def assumptions(self) -> list[str]:
        """The model's assumptions, with the traffic's when it came from a cache model."""
        out = list(ASSUMPTIONS)
        if self.memory_from != "traffic":
            out.append(COMPULSORY)
        if self.threads > 1:
            out.append("each thread's flops and cache traffic are its share of the balance model's work")
        out.extend(self.notes)
        return out

    def to_json(self) -> dict[str, Any]:
        """The estimate (null time without a machine description), its terms and assumptions."""
        def num(v: Any) -> Any:
            return None if v is None else (int(v) if Fraction(v).denominator == 1 else float(v))

        def rnd(v: float | None) -> float | None:
            return None if v is None else float(f"{v:.6g}")

        return {
            "model": MODEL, "estimate": True, "lower_bound": True,
            "seconds": rnd(self.seconds), "binding": self.binding,
            "attainable_gflops": rnd(self.attainable_gflops), "fraction_of_peak": rnd(self.fraction_of_peak),
            "peak_gflops": self.peak_used, "flops": num(self.flops), "memory_bytes": num(self.memory_bytes),
            "memory_from": self.memory_from, "intensity": rnd(self.intensity), "degree": self.degree,
            "threads": self.threads,
            "slowest_thread_share": None if self.slowest_share is None else rnd(float(self.slowest_share)),
            "terms": [t.to_json() for t in self.terms],
            "machine": None if self.machine is None else self.machine.to_json(),
            "assumptions": self.assumptions(),
            "hint": HINT if self.machine is None else None,
        }

    def text_lines(self) -> list[str]:
        """One line with the time and its binding resource, one with the memory bytes' origin (no
        line without a machine description: the ranking at the end says how to get one)."""
        s = self.seconds
        if self.machine is None or s is None:
            return []
        terms = ", ".join(f"{t.resource} {fmt_seconds(t.seconds)}" for t in self.terms)
        frac = self.fraction_of_peak
        on = f"{self.threads} threads" if self.threads > 1 else "1 core"
        rate = self.attainable_gflops
        line = (f"roofline: at least {fmt_seconds(s)} (model estimate), bound by {self.binding} ({terms})"
                + (f"; {rate:.3g} GFLOP/s" if rate is not None else "")
                + (f" = {frac:.0%} of the peak {self.peak_used:g} GFLOP/s on {on}" if frac is not None else ""))
        out = [line]
        if self.memory_from != "traffic":
            out.append("  (" + COMPULSORY + ")")
        return out


def fmt_seconds(s: float | None) -> str:
    """A time with a readable unit: 1.36 h, 82 min, 3.2 s, 41 ms, 7.5 us, 12 ns."""
    if s is None:
        return "-"
    for unit, scale in (("h", 3600.0), ("min", 60.0), ("s", 1.0), ("ms", 1e-3), ("us", 1e-6)):
        if s >= scale:
            return f"{s / scale:.3g} {unit}"
    return f"{s / 1e-9:.3g} ns"


def _value(count: Any) -> int | Fraction | None:
    return None if count is None else getattr(count, "value", None)


def memory_traffic(result: NestResult) -> tuple[list[tuple[str, Any]], Any, str]:
    """The bytes per level (level name, bytes value) brought in from below, the bytes
    from memory, and where they came from ("traffic" or "compulsory footprint")."""
    traffic = result.extras.get("traffic")
    if traffic is not None and hasattr(traffic, "memory_bytes"):
        levels = [(str(lv.level).upper(), _value(lv.bytes)) for lv in getattr(traffic, "levels", ())
                  if str(lv.level).upper().startswith("L")]  # cache levels only: memory is memory_bytes()
        return levels, _value(traffic.memory_bytes()), "traffic"
    fp = result.extras.get("footprint")
    total = None if fp is None else _value(fp.footprint.bytes)
    return [], total, "compulsory footprint"


def slowest_share(result: NestResult) -> tuple[int, Fraction | None]:
    """Threads and the slowest thread's share of the work, from the outermost
    parallel loop the balance analysis gave per-thread values (1, None: serial)."""
    loops = sorted(result.loops, key=lambda lr: lr.loop.depth)
    for lr in loops:
        par = lr.extras.get("parallel")
        per = getattr(par, "per_thread", None)
        if per:
            total = sum(Fraction(v) for v in per)
            if total > 0:
                return int(par.threads), max(Fraction(v) for v in per) / total
    return 1, None


def terms(flops: Any, levels: list[tuple[str, Any]], memory: Any, machine: Machine, threads: int,
          share: Fraction | None) -> tuple[list[Term], list[str]]:
    """The terms of the bound: compute and each level's bytes over the bandwidth of the
    level that delivers them (the next one down); memory bytes over the memory bandwidth."""
    notes: list[str] = []
    part = float(share) if share is not None else 1.0
    crowd = max(1.0, threads / machine.cores) if share is not None else 1.0  # threads sharing a core
    out: list[Term] = []
    if flops:  # a nest without flops has no compute term
        amount = float(flops) * part
        out.append(Term("compute", amount, "flop", machine.peak_gflops_per_core,
                        amount * crowd / (machine.peak_gflops_per_core * 1e9)))
    for k, (name, nbytes) in enumerate(levels[:-1]):
        src = levels[k + 1][0]
        bw = machine.bandwidth(src)
        if nbytes is None:
            continue
        if bw is None:
            notes.append(f"no bandwidth for {src} in the machine description: the bytes into {name} are left out")
            continue
        amount = float(nbytes) * part
        out.append(Term(src, amount, "byte", bw, amount * crowd / (bw * 1e9)))
    if memory is not None:
        out.append(Term("memory", float(memory), "byte", machine.memory_gbs, float(memory) / (machine.memory_gbs * 1e9)))
    return out, notes


def work_degree(result: NestResult) -> int | None:
    """Degree of growth of the largest statement count (None without formulas)."""
    degrees = [sr.count.formula.degree() for sr in result.statements
               if sr.count.formula is not None and sr.count.formula.pieces]
    return max(degrees, default=None)


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Add the nest extra `roofline` (skipped by the gate, which holds no time budgets)."""
    if options.gate:
        return
    fl = result.extras.get("flops")
    flops = _value(fl.count) if fl is not None else None
    levels, memory, origin = memory_traffic(result)
    threads, share = slowest_share(result)
    machine = options.machine
    found: list[Term] = []
    notes: list[str] = []
    if machine is not None and (flops is not None or memory is not None):
        found, notes = terms(flops, levels, memory, machine, threads, share)
    result.extras["roofline"] = Roofline(flops, memory, origin, work_degree(result), machine, tuple(found),
                                         threads if share is not None else 1, share, tuple(notes))
