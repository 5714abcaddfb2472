# Typed summaries of analysis results: what the gate (`tripcount check`) and
# the language server read.
#
# The analyses attach live objects to a NestResult (engine formulas, isl
# sets); the driver turns each nest's result into one frozen NestSummary
# (`summarize`), which the result cache stores through its `to_json` and
# gives back through `from_json`. Every type here has exactly one such pair,
# and `T.from_json(x.to_json()) == x` holds for each (tested). Consumers read
# fields, never JSON keys: in particular a working set says whether its value
# at the --at sizes is exact, an upper bound or a lower bound, so that no
# consumer takes a bound for the value.
#
# This module is light on purpose (no islpy, no engine): the warm-cache gate
# imports it.

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Any

EXACT, UPPER, LOWER, UNKNOWN = "exact", "upper_bound", "lower_bound", "unknown"
ESTIMATES = (EXACT, UPPER, LOWER, UNKNOWN)


def _num_json(v: int | Fraction | None) -> int | str | None:
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


def _num_from(v: Any) -> int | Fraction | None:
    if v is None or isinstance(v, bool):
        return None
    if isinstance(v, int):
        return v
    if isinstance(v, float):
        return Fraction(v)
    if isinstance(v, str):
        try:
            f = Fraction(v)
        except (ValueError, ZeroDivisionError):
            return None
        return int(f) if f.denominator == 1 else f
    return None


def _str_or_none(v: Any) -> str | None:
    return v if isinstance(v, str) else None


def _int_or_none(v: Any) -> int | None:
    return v if isinstance(v, int) and not isinstance(v, bool) else None


@dataclass(frozen=True)
class Span4:
    """A source range: 1-based line/column, end exclusive (the JSON position fields)."""

    line: int
    column: int
    end_line: int
    end_column: int

    def to_json(self) -> dict[str, int]:
        """line, column, end_line, end_column."""
        return {"line": self.line, "column": self.column, "end_line": self.end_line, "end_column": self.end_column}

    @staticmethod
    def from_json(d: dict[str, Any]) -> Span4:
        """Inverse of to_json (missing ends collapse onto the start)."""
        line, col = int(d.get("line", 1)), int(d.get("column", 1))
        return Span4(line, col, int(d.get("end_line", line)), int(d.get("end_column", col)))

    def contains(self, line: int, column: int) -> bool:
        """True when (line, column) lies in the range."""
        return (self.line, self.column) <= (line, column) < (self.end_line, self.end_column)


@dataclass(frozen=True)
class Piece:
    """One piece of a formula: `expr` holds `when` (both in the report's notation)."""

    when: str
    expr: str


@dataclass(frozen=True)
class Quantity:
    """A count: its exact value at the --at sizes (None without them) and its formula.

    `pieces` is None when no formula could be had within the limits (`note`
    then says why); an empty tuple is the formula 0.
    """

    value: int | Fraction | None = None
    pieces: tuple[Piece, ...] | None = None
    degree: int | None = None
    leading: str | None = None
    note: str | None = None

    def to_json(self) -> dict[str, Any]:
        """value, pieces, degree, leading, note (the report's count object shape)."""
        return {"value": _num_json(self.value),
                "pieces": None if self.pieces is None else [{"when": p.when, "expr": p.expr} for p in self.pieces],
                "degree": self.degree, "leading": self.leading, "note": self.note}

    @staticmethod
    def from_json(d: dict[str, Any]) -> Quantity:
        """Inverse of to_json; also reads a count object of the JSON report."""
        pieces = d.get("pieces")
        return Quantity(value=_num_from(d.get("value")),
                        pieces=None if not isinstance(pieces, list) else tuple(
                            Piece(str(p.get("when", "true")), str(p.get("expr", ""))) for p in pieces),
                        degree=_int_or_none(d.get("degree")), leading=_str_or_none(d.get("leading")),
                        note=_str_or_none(d.get("note")))

    @staticmethod
    def of(count: Any) -> Quantity | None:
        """The Quantity of an analysis Count (through its one JSON rendering), None for None."""
        return None if count is None else Quantity.from_json(count.to_json())


def _quantity(d: Any) -> Quantity | None:
    return Quantity.from_json(d) if isinstance(d, dict) else None


@dataclass(frozen=True)
class WorkingSetSummary:
    """A loop's working set as the cache model holds it against a capacity.

    `occupancy` is the worst case over the enclosing loop variables at the
    --at sizes, in bytes of whole cache lines; `estimate` says what it is:
    EXACT, UPPER (the true value is at most this), LOWER (references that are
    not modelled are left out: at least this) or UNKNOWN. `reason` says why it
    is a bound. `bytes` is the per-level byte count (outer variables fixed).
    """

    scope: str = ""
    bytes: Quantity | None = None
    occupancy: int | None = None
    estimate: str = EXACT
    reason: str = ""
    assumptions: str = ""

    def to_json(self) -> dict[str, Any]:
        """scope, bytes, occupancy_bytes, estimate, reason, assumptions."""
        return {"scope": self.scope, "bytes": None if self.bytes is None else self.bytes.to_json(),
                "occupancy_bytes": self.occupancy, "estimate": self.estimate, "reason": self.reason,
                "assumptions": self.assumptions}

    @staticmethod
    def from_json(d: dict[str, Any]) -> WorkingSetSummary:
        """Inverse of to_json."""
        est = d.get("estimate", EXACT)
        return WorkingSetSummary(scope=str(d.get("scope", "")), bytes=_quantity(d.get("bytes")),
                                 occupancy=_int_or_none(d.get("occupancy_bytes")),
                                 estimate=est if est in ESTIMATES else UNKNOWN, reason=str(d.get("reason", "")),
                                 assumptions=str(d.get("assumptions", "")))

    def proves_above(self, capacity: int) -> bool:
        """True when the working set is certainly larger than `capacity` bytes (exact, or a lower bound above)."""
        return self.occupancy is not None and self.estimate in (EXACT, LOWER) and self.occupancy > capacity

    def proves_within(self, capacity: int) -> bool:
        """True when the working set certainly fits `capacity` bytes (exact, or an upper bound within)."""
        return self.occupancy is not None and self.estimate in (EXACT, UPPER) and self.occupancy <= capacity

    @property
    def exact(self) -> bool:
        """True when `occupancy` is the value itself, not a bound."""
        return self.estimate == EXACT


@dataclass(frozen=True)
class FlopsSummary:
    """Flops of a statement (per run and in all) or of a whole nest (per_execution None)."""

    total: Quantity
    per_execution: int | None = None

    def to_json(self) -> dict[str, Any]:
        """total, per_execution."""
        return {"total": self.total.to_json(), "per_execution": self.per_execution}

    @staticmethod
    def from_json(d: dict[str, Any]) -> FlopsSummary:
        """Inverse of to_json."""
        return FlopsSummary(_quantity(d.get("total")) or Quantity(), _int_or_none(d.get("per_execution")))


@dataclass(frozen=True)
class BalanceSummary:
    """An OpenMP loop: its pragma and, when modelled, the balance at the --at sizes.

    `imbalance` is the busiest thread's work over the mean (exact), None when
    not modelled; `estimate` marks the dynamic/guided model estimates.
    """

    directive: str | None = None
    schedule: str | None = None
    chunk: str | None = None
    threads: int | None = None
    imbalance: Fraction | None = None
    estimate: bool = False
    recommendation: str = ""

    def to_json(self) -> dict[str, Any]:
        """directive, schedule, chunk, threads, imbalance (exact, as text), estimate, recommendation."""
        return {"directive": self.directive, "schedule": self.schedule, "chunk": self.chunk,
                "threads": self.threads, "imbalance": None if self.imbalance is None else str(self.imbalance),
                "estimate": self.estimate, "recommendation": self.recommendation}

    @staticmethod
    def from_json(d: dict[str, Any]) -> BalanceSummary:
        """Inverse of to_json."""
        imb = _num_from(d.get("imbalance"))
        return BalanceSummary(_str_or_none(d.get("directive")), _str_or_none(d.get("schedule")),
                              None if d.get("chunk") is None else str(d["chunk"]), _int_or_none(d.get("threads")),
                              None if imb is None else Fraction(imb), bool(d.get("estimate", False)),
                              str(d.get("recommendation") or ""))

    @property
    def efficiency(self) -> Fraction | None:
        """Mean thread work over the busiest thread's."""
        return None if not self.imbalance else 1 / self.imbalance


@dataclass(frozen=True)
class LoopSummary:
    """A loop with its trip counts, working set and balance."""

    index: int
    var: str
    depth: int
    parent: int | None
    span: Span4
    trips: Quantity | None = None
    per_entry: Quantity | None = None
    working_set: WorkingSetSummary | None = None
    balance: BalanceSummary | None = None

    def to_json(self) -> dict[str, Any]:
        """The loop fields (positions at the top level, so that the cache can move them)."""
        return {"index": self.index, "var": self.var, "depth": self.depth, "parent": self.parent,
                **self.span.to_json(), "trips": None if self.trips is None else self.trips.to_json(),
                "trips_per_entry": None if self.per_entry is None else self.per_entry.to_json(),
                "working_set": None if self.working_set is None else self.working_set.to_json(),
                "balance": None if self.balance is None else self.balance.to_json()}

    @staticmethod
    def from_json(d: dict[str, Any]) -> LoopSummary:
        """Inverse of to_json."""
        ws, bal = d.get("working_set"), d.get("balance")
        return LoopSummary(int(d.get("index", 0)), str(d.get("var", "?")), int(d.get("depth", 0)),
                           _int_or_none(d.get("parent")), Span4.from_json(d), _quantity(d.get("trips")),
                           _quantity(d.get("trips_per_entry")),
                           WorkingSetSummary.from_json(ws) if isinstance(ws, dict) else None,
                           BalanceSummary.from_json(bal) if isinstance(bal, dict) else None)


@dataclass(frozen=True)
class StatementSummary:
    """A statement with its execution count and flops."""

    id: str
    span: Span4
    text: str
    count: Quantity | None = None
    flops: FlopsSummary | None = None

    def to_json(self) -> dict[str, Any]:
        """id, positions, text, count, flops."""
        return {"id": self.id, **self.span.to_json(), "text": self.text,
                "count": None if self.count is None else self.count.to_json(),
                "flops": None if self.flops is None else self.flops.to_json()}

    @staticmethod
    def from_json(d: dict[str, Any]) -> StatementSummary:
        """Inverse of to_json."""
        fl = d.get("flops")
        return StatementSummary(str(d.get("id", "?")), Span4.from_json(d), str(d.get("text", "")),
                                _quantity(d.get("count")), FlopsSummary.from_json(fl) if isinstance(fl, dict) else None)


@dataclass(frozen=True)
class Work:
    """The work of a nest: the highest degree of its statement counts and who has it."""

    degree: int | None
    leading: tuple[str, ...]  # leading terms of the statements of that degree
    who: str  # 'S2' or 'statements S1, S3'


@dataclass(frozen=True)
class NestSummary:
    """One nest as the gate and the editor read it."""

    function: str
    span: Span4
    parameters: tuple[str, ...]
    loops: tuple[LoopSummary, ...]
    statements: tuple[StatementSummary, ...]
    flops: FlopsSummary | None = None

    def to_json(self) -> dict[str, Any]:
        """function, positions, parameters, loops, statements, flops."""
        return {"function": self.function, **self.span.to_json(), "parameters": list(self.parameters),
                "loops": [lp.to_json() for lp in self.loops],
                "statements": [s.to_json() for s in self.statements],
                "flops": None if self.flops is None else self.flops.to_json()}

    @staticmethod
    def from_json(d: dict[str, Any]) -> NestSummary:
        """Inverse of to_json."""
        fl = d.get("flops")
        return NestSummary(str(d.get("function", "")), Span4.from_json(d),
                           tuple(str(p) for p in d.get("parameters", [])),
                           tuple(LoopSummary.from_json(x) for x in d.get("loops", [])),
                           tuple(StatementSummary.from_json(x) for x in d.get("statements", [])),
                           FlopsSummary.from_json(fl) if isinstance(fl, dict) else None)

    def outer_loop(self) -> LoopSummary | None:
        """The outermost loop (None for a nest without loops)."""
        return next((lp for lp in self.loops if lp.parent is None), None)

    def innermost_loops(self) -> list[LoopSummary]:
        """Loops with no loop inside them."""
        parents = {lp.parent for lp in self.loops}
        return [lp for lp in self.loops if lp.index not in parents]

    def work(self) -> Work:
        """Degree of the work, the leading terms of the dominant statements, and who they are.

        The degree is the highest degree of any statement count with a
        formula; the nest's leading term is the sum of the leading terms of
        the statements of that degree (the others grow more slowly).
        """
        best: int | None = None
        leads: list[tuple[str, str]] = []
        for s in self.statements:
            c = s.count
            if c is None or c.pieces is None or c.degree is None:
                continue
            if best is None or c.degree > best:
                best, leads = c.degree, []
            if c.degree == best:
                leads.append((s.id, c.leading or ""))
        who = leads[0][0] if len(leads) == 1 else "statements " + ", ".join(i for i, _ in leads)
        return Work(best, tuple(lead for _, lead in leads if lead), who)


# --------------------------------------------------------------------------
# From the analyses' live results (the driver calls this once per nest)


def _working_set(ws: Any) -> WorkingSetSummary:
    """Summary of a footprint WorkingSet: the occupancy and whether it is exact or a bound.

    The occupancy is the cache-fit figure (worst case in whole lines); when
    the cache model gave none, the byte count stands in, as before.
    """
    fp = ws.whole
    measure = fp.lines if ws.occupancy is not None else fp.bytes
    occupancy = ws.occupancy if ws.occupancy is not None else (
        None if fp.bytes.value is None else int(fp.bytes.value))
    lower = bool(getattr(fp, "lower_bound", False))
    upper = bool(getattr(measure, "bound", False))
    worst = getattr(fp, "worst", None)
    reasons = []
    if upper:
        reasons.append(worst.method.removeprefix("upper bound: ") if worst is not None and worst.bound
                       else "the exact value was not computed")
    if lower:
        reasons += [n[len("lower bound: "):] for n in fp.notes if n.startswith("lower bound: ")] \
            or ["references that are not modelled are left out"]
    estimate = UNKNOWN if upper and lower else UPPER if upper else LOWER if lower else EXACT
    return WorkingSetSummary(scope=str(fp.scope), bytes=Quantity.of(fp.bytes),
                             occupancy=None if estimate == UNKNOWN else occupancy, estimate=estimate,
                             reason="; ".join(reasons), assumptions=str(getattr(ws, "assumptions", "")))


def _balance(loop: Any, bal: Any) -> BalanceSummary | None:
    omp = loop.omp
    if omp is None and bal is None:
        return None
    from tripcount.ir import c_text

    directive = omp.directive if omp is not None else None
    schedule = omp.schedule if omp is not None else None
    chunk = c_text(omp.chunk) if omp is not None and omp.chunk is not None else None
    if bal is None:
        return BalanceSummary(directive, schedule, chunk)
    return BalanceSummary(directive, bal.schedule, None if bal.chunk is None else str(bal.chunk), bal.threads,
                          None if bal.imbalance is None else Fraction(bal.imbalance), bool(bal.estimate),
                          str(bal.recommendation or ""))


def _flops(f: Any) -> FlopsSummary | None:
    if f is None:
        return None
    return FlopsSummary(Quantity.of(f.count) or Quantity(), f.total.per_execution)


def summarize(nr: Any) -> NestSummary:
    """The NestSummary of an analysis NestResult (counts, working sets, balance, flops)."""
    n = nr.nest
    loops = []
    for lr in nr.loops:
        lp = lr.loop
        ws = lr.extras.get("working_set")
        loops.append(LoopSummary(lp.index, lp.var, lp.depth, lp.parent, Span4.from_json(_span(lp.span)),
                                 Quantity.of(lr.trips), Quantity.of(lr.per_entry),
                                 None if ws is None else _working_set(ws), _balance(lp, lr.extras.get("parallel"))))
    stmts = [StatementSummary(sr.stmt.id, Span4.from_json(_span(sr.stmt.span)), sr.stmt.text, Quantity.of(sr.count),
                              _flops(sr.extras.get("flops"))) for sr in nr.statements]
    return NestSummary(n.function, Span4.from_json(_span(n.span)), tuple(n.params), tuple(loops), tuple(stmts),
                       _flops(nr.extras.get("flops")))


def _span(span: Any) -> dict[str, int]:
    return {"line": span.line, "column": span.column, "end_line": span.end_line, "end_column": span.end_column}
