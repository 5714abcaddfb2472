# Balance results: the per-loop balance object (the loop extra "parallel"),
# the what-if alternatives, their JSON and text forms (the TC5xx diagnostics
# are in tripcount/diagnostics/balance.py).

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

from tripcount.analysis.results import Count

ASSUMPTIONS = "equal cost per unit of work, no scheduling overhead"

PAIR = "pair iteration k with iteration n-1-k"
REVERSE = "run the loop backwards (heaviest iterations first)"


# --------------------------------------------------------------------------
# Results


def schedule_text(schedule: str, chunk: int | None) -> str:
    """C spelling of a schedule clause."""
    return f"schedule({schedule}" + (f", {chunk}" if chunk is not None else "") + ")"


def _round(v: Fraction | None, digits: int = 4) -> float | None:
    return None if v is None else round(float(v), digits)


def _exact(v: Fraction | None) -> str | None:
    if v is None:
        return None
    return str(v.numerator) if v.denominator == 1 else f"{v.numerator}/{v.denominator}"


def _json_int(v: Any) -> Any:
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


@dataclass
class Alternative:
    """One schedule (or rewrite) of the what-if comparison."""

    schedule: str
    chunk: int | None
    imbalance: Fraction
    estimate: bool
    rewrite: str | None = None

    @property
    def label(self) -> str:
        """How the alternative reads in text."""
        base = schedule_text(self.schedule, self.chunk)
        if self.rewrite == PAIR:
            return f"the pairing rewrite with {base}"
        if self.rewrite:
            return f"{base} on the loop run backwards"
        return base

    def to_json(self) -> dict[str, Any]:
        """JSON form: schedule, chunk, imbalance (and efficiency, estimate, rewrite)."""
        out: dict[str, Any] = {"schedule": self.schedule, "chunk": self.chunk,
                               "imbalance": _round(self.imbalance),
                               "efficiency": _round(1 / self.imbalance), "estimate": self.estimate}
        if self.rewrite:
            out["rewrite"] = self.rewrite
        return out


@dataclass
class ParallelBalance:
    """The balance result of one parallel loop (the loop extra named "parallel")."""

    var: str
    line: int
    schedule: str
    chunk: int | None
    threads: int
    threads_from: str
    work: str = "statements"
    schedule_written: str | None = None
    origin: str = "pragma"  # or "--parallel"
    collapse: int = 1
    at: str = ""
    per_thread: list[int | Fraction] | None = None
    imbalance: Fraction | None = None
    estimate: bool = False
    work_per_iteration: Count | None = None
    per_thread_formula: Count | None = None
    thread_param: str = "t"
    alternatives: list[Alternative] | None = None
    best: Alternative | None = None
    recommendation: str = ""
    flagged: bool = False
    iterations: int | None = None
    entries: int | None = None
    iteration_work: tuple[int | Fraction, int | Fraction, Fraction] | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def efficiency(self) -> Fraction | None:
        """Mean thread work over the critical path."""
        return None if self.imbalance is None else 1 / self.imbalance

    def to_json(self) -> dict[str, Any]:
        """Fields merged into the loop's `parallel` object."""
        rng = None
        if self.iteration_work is not None:
            lo, hi, mean = self.iteration_work
            rng = {"min": _json_int(lo), "max": _json_int(hi), "mean": _round(mean)}
        return {
            "schedule": self.schedule,
            # `chunk` is text in the pragma part of the object (the clause as written); here the
            # chunk size that was modelled, as text too, and as a number in `chunk_size`.
            "chunk": None if self.chunk is None else str(self.chunk),
            "chunk_size": self.chunk,
            "schedule_written": self.schedule_written,
            "origin": self.origin,
            "threads": self.threads,
            "threads_from": self.threads_from,
            "work": self.work,
            "per_thread": None if self.per_thread is None else [_json_int(v) for v in self.per_thread],
            "imbalance": _round(self.imbalance),
            "imbalance_exact": _exact(self.imbalance),
            "efficiency": _round(self.efficiency),
            "estimate": self.estimate,
            "flagged": self.flagged,
            "iterations": self.iterations,
            "entries": self.entries,
            "iteration_work": rng,
            "work_per_iteration": None if self.work_per_iteration is None else self.work_per_iteration.to_json(),
            "thread_param": self.thread_param,
            "per_thread_formula": None if self.per_thread_formula is None else self.per_thread_formula.to_json(),
            "alternatives": None if self.alternatives is None else [a.to_json() for a in self.alternatives],
            "recommendation": self.recommendation,
            "notes": list(self.notes),
        }

    def text_lines(self) -> list[str]:
        """A summary line; for flagged loops a bar per thread and the recommendation."""
        how = schedule_text(self.schedule, self.chunk)
        est = ", model estimate" if self.estimate else ""
        if self.per_thread is None or self.imbalance is None:
            lines = [f"balance: {how}, {self.threads} threads: {self.recommendation or 'no values'}"]
            f = self.per_thread_formula
            if f is not None and f.formula is not None and f.formula.pieces:
                p = f.formula.pieces[0]
                text = f"work of thread {self.thread_param}: {p.poly.to_expr()}" + (
                    f"   when {p.when}" if p.when != "true" else "")
                more = len(f.formula.pieces) - 1
                if len(text) <= 110:
                    lines.append(text + (f" ({more} more case{'s' if more > 1 else ''} in the JSON report)"
                                         if more else ""))
            return lines
        unit = "flops" if self.work == "flops" else "statement instances"
        head = (f"balance: {how}, {self.threads} threads at {self.at or 'these sizes'}: imbalance "
                f"{float(self.imbalance):.2f}, efficiency {float(self.efficiency):.0%} (work in {unit}{est})")
        lines = [head]
        if self.flagged:
            lines.extend(bar_chart(self.per_thread))
        if self.recommendation:
            lines.append(self.recommendation)
        return lines


BLOCK_CHARS = " ▏▎▍▌▋▊▉█"


def bar_chart(values: list[int | Fraction], width: int = 32, max_rows: int = 32) -> list[str]:
    """One bar per thread, scaled to the largest, with the exact work."""
    top = max(values, default=0)
    if len(values) > max_rows:
        lo = min(values)
        return [f"  threads 0..{len(values) - 1}: least {lo:,} , most {top:,}"]
    digits = len(str(len(values) - 1))
    out = []
    for t, v in enumerate(values):
        eighths = 0 if not top else round(Fraction(v) * width * 8 / top)
        full, part = divmod(eighths, 8)
        bar = "█" * full + (BLOCK_CHARS[part] if part else "")
        num = f"{int(v):,}" if Fraction(v).denominator == 1 else f"{float(v):,.1f}"
        out.append(f"  thread {t:>{digits}} {bar:<{width}} {num}")
    return out

