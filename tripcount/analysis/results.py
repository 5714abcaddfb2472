# Analysis results: what the analyses hand to the reporters.
#
# A report is a list of files, each with its nests; a nest carries its loops
# and statements with their counts, plus `extras`: named, JSON-ready results
# of the further analyses (working set, flops, balance). Every extra has a
# `to_json()`; extras that want a text section also have `text_lines()`.
# Reporters only read these objects. What the gate and the language server
# read is the frozen NestSummary (analysis/summary.py) the driver makes of a
# NestResult; `NestResult.summary()` is that one conversion.

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import TYPE_CHECKING, Any, Protocol

from tripcount.analysis.summary import NestSummary
from tripcount.diagnostics import Diagnostic

if TYPE_CHECKING:  # the model imports islpy; readers of results (the gate) must not need it
    from tripcount.model import Loop, Nest, Statement


class Extra(Protocol):
    """A result of an analysis attached to a nest, loop or statement."""

    def to_json(self) -> Any: ...


def _json_number(v: Fraction | int | None) -> int | float | str | None:
    if v is None:
        return None
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


@dataclass
class Count:
    """A count object: exact value at the --at sizes and, when known, the formula.

    `formula` is an engine Piecewise (or None when the formula could not be
    computed within the limits, or the quantity was refused). `value` is an
    exact integer (or Fraction for averages) or None without --at.
    """

    value: int | Fraction | None = None
    formula: Any = None
    note: str | None = None
    exact: bool = True
    at_piece: int | None = None  # index of the piece that holds at the --at sizes

    def locate(self, point: dict[str, int] | None) -> None:
        """Remember which piece of the formula holds at `point` (the --at sizes)."""
        self.at_piece = None
        if point is None or self.formula is None:
            return
        for k, piece in enumerate(self.formula.pieces):
            if piece.contains(point):
                self.at_piece = k
                return

    def to_json(self) -> dict[str, Any]:
        """JSON form: value, pieces, degree, leading (and note when set)."""
        out: dict[str, Any] = {"value": _json_number(self.value)}
        if self.formula is not None:
            out.update(self.formula.to_json())
        else:
            out["pieces"] = None
        if self.note:
            out["note"] = self.note
        if self.at_piece is not None:
            out["at_piece"] = self.at_piece
        return out


@dataclass
class LoopResult:
    """A loop with its trip counts."""

    loop: Loop
    trips: Count  # total executions of the loop body over the whole nest
    per_entry: Count | None = None  # trips each time the loop is entered (outer vars as params)
    extras: dict[str, Any] = field(default_factory=dict)


@dataclass
class StatementResult:
    """A statement with its execution count."""

    stmt: Statement
    count: Count
    extras: dict[str, Any] = field(default_factory=dict)


@dataclass
class NestResult:
    """One nest: loops, statements, further results and diagnostics."""

    nest: Nest
    loops: list[LoopResult]
    statements: list[StatementResult]
    extras: dict[str, Any] = field(default_factory=dict)
    diagnostics: list[Diagnostic] = field(default_factory=list)
    # some part was decided by the clock (a time limit, a skipped optional pass): a less busy
    # run may give more, so the result is not cached
    time_cut: bool = False

    def summary(self) -> NestSummary:
        """The frozen, typed reading of this result (what the gate and the editor hold against budgets)."""
        from tripcount.analysis.summary import summarize

        return summarize(self)


@dataclass
class FileResult:
    """One analyzed file."""

    path: str
    nests: list[NestResult] = field(default_factory=list)
    diagnostics: list[Diagnostic] = field(default_factory=list)
    source: str | None = None  # text for the snippet reporters; None for files on disk

    def time_cut(self) -> bool:
        """Whether some nest's result was decided by the clock (not to be cached)."""
        return any(n.time_cut for n in self.nests)

    def all_diagnostics(self) -> list[Diagnostic]:
        """File-level and nest-level diagnostics, in source order."""
        out = list(self.diagnostics)
        for n in self.nests:
            out.extend(n.diagnostics)
        for d in out:
            if d.path is None:
                d.path = self.path
        out.sort(key=lambda d: (d.span.line, d.span.column, d.code))
        return out


@dataclass
class Report:
    """Everything one run produced."""

    files: list[FileResult]
    at: dict[str, int] = field(default_factory=dict)
    settings: dict[str, Any] = field(default_factory=dict)  # assumptions of the models (cache sizes, threads)
