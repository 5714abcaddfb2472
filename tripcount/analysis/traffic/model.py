# Traffic model: lines brought into each cache level by one nest, from the
# per-level working sets and the reuse each loop level carries.
#
# The rule is the layer condition of the working-set and roofline/ECM-style
# literature (see README): a reference's reuse across the iterations of loop
# L is served by a cache level when the lines of one iteration of L fit it.
# Then each execution of L brings the distinct lines it touches into the
# level once, and the traffic of all executions of L is the number of pairs
# (values of the variables outside L, line touched by that execution of L).
# Otherwise every iteration of L brings in again what its inner loops and
# the statements directly in L touch: the traffic is the sum of the inner
# loops' traffic and of the pairs (values of the variables up to L, line
# touched by that iteration) of L's own statements. Pair counts are exact
# counts of integer sets: at the --at sizes in the packed layout (enumerated
# within the budget), and as engine formulas in the sizes with every row
# starting on a line boundary (the footprint's formula layout).

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount.analysis.footprint.exact import inner_extents
from tripcount.analysis.footprint.quantities import LINES_TIME_S, _formula, formula_budget
from tripcount.analysis.footprint.scopes import Analyzer, _at_sizes
from tripcount.budget import Budget, LimitReached, count_points, scan_estimate
from tripcount.engine.piecewise import add_all
from tripcount.model import Loop, Statement
from tripcount.options import Options

MAX_ENUMERATED = 100_000  # pair sets larger than this are valued by their formula (rows aligned): enumeration is slow


@dataclass
class Term:
    """A count of (execution, line) pairs: its value at the --at sizes and its formula."""

    value: int | None = None
    formula: Any = None
    packed: bool = True  # the value follows the packed layout (else: the rows-aligned formula's value)


@dataclass
class LevelCount:
    """The model's line count into one level: value, formula, and what makes it less than exact."""

    value: int | None
    formula: Any
    notes: list[str] = field(default_factory=list)
    bound: str | None = None


class TrafficModel:
    """Pair counts of one nest, shared by every cache level."""

    def __init__(self, an: Analyzer, options: Options, budget: Budget | None,
                 per_iteration: dict[int, tuple[int | Fraction | None, bool]]) -> None:
        self.an = an
        self.nest = an.nest
        self.options = options
        self.limit = budget
        self.fbudget = formula_budget(budget, options)
        self.per_iteration = per_iteration  # loop index -> (largest lines of one iteration, is an upper bound)
        self._terms: dict[tuple[tuple[str, ...], int], Term] = {}

    def term(self, stmts: list[Statement], fixed: int) -> Term:
        """Pairs (values of the first `fixed` loop variables, line touched with them) of `stmts`."""
        key = (tuple(s.id for s in stmts), fixed)
        if key not in self._terms:
            self._terms[key] = self._count(stmts, fixed)
        return self._terms[key]

    def _count(self, stmts: list[Statement], fixed: int) -> Term:
        t = Term(value=0 if self.an.has_at else None)
        formulas: list[Any] | None = []
        try:
            aligned = self.an.touch_relation(stmts, fixed - 1, packed=False)
            packed = self.an.touch_relation(stmts, fixed - 1) if self.an.has_at else {}
        except (isl.Error, LimitReached):
            return Term(packed=False)
        for name, m in aligned.items():
            try:
                f, _why = _formula(m.wrap(), self.nest.context, self.options, self.fbudget, LINES_TIME_S)
            except isl.Error:  # a set the engine cannot count: the value alone (enumerated) stands
                f = None
            if f is None or formulas is None:
                formulas = None
            else:
                formulas.append(f)
            if t.value is None:
                continue
            # where the rows are whole lines the two layouts have the same lines: the formula's value is
            # the packed count; elsewhere the packed lines are enumerated (within a size limit)
            v = None
            if f is not None and self._layouts_agree(name):
                v = int(f.evaluate(self.an.at))
            if v is None and name in packed:
                v = self._enumerated(packed[name])
            if v is None and f is not None:
                v = int(f.evaluate(self.an.at))
                t.packed = False
            t.value = None if v is None else t.value + v
        if formulas is not None:
            t.formula = add_all(formulas) if formulas else None
        return t

    def _layouts_agree(self, name: str) -> bool:
        """Whether an array's rows are whole cache lines at the --at sizes (or it has no rows)."""
        info = self.an.arrays.get(name)
        if info is None or not info.elem:
            return False
        ext = inner_extents(info.access, self.an.at)
        if ext is None:
            return True  # the packed row length is not known: both counts use aligned rows
        return not ext or (ext[-1] * info.elem) % self.an.line == 0

    def _enumerated(self, m: isl.Map) -> int | None:
        try:
            s = _at_sizes(m, self.an.at).wrap()
            rows = scan_estimate(s)
            if rows is None or rows > MAX_ENUMERATED:
                return None
            return count_points(s, self.limit)
        except (isl.Error, LimitReached):
            return None

    def level(self, capacity_lines: int) -> LevelCount:
        """Lines brought into a level of `capacity_lines` lines over the whole nest."""
        out = LevelCount(0 if self.an.has_at else None, None)
        parts: list[Any] = []
        for lp in self.nest.loops:
            if lp.parent is None:
                self._loop(lp, capacity_lines, out, parts)
        if parts and all(p is not None for p in parts):
            out.formula = add_all(parts)
        return out

    def _add(self, out: LevelCount, t: Term, parts: list[Any]) -> None:
        if out.value is not None:
            out.value = None if t.value is None else out.value + t.value
        parts.append(t.formula)
        if not t.packed:
            note = ("value from the formula with every row starting on a line boundary (the packed layout's "
                    "count at these sizes was not enumerated)")
            if note not in out.notes:
                out.notes.append(note)

    def _loop(self, lp: Loop, cap: int, out: LevelCount, parts: list[Any]) -> None:
        stmts = self.an.statements_in(lp)
        if lp.domain is None or any(s.domain is None for s in stmts):
            out.bound = "lower"
            shown = "for (;;)" if lp.display == "?" else (lp.display or lp.var)
            note = f"loop '{shown}' is not modelled: its traffic is left out (the counts are lower bounds)"
            if note not in out.notes:
                out.notes.append(note)
            return
        missing = self.an.left_out(stmts)
        if missing:
            out.bound = "lower"
            note = ("references that are not modelled are left out (" + ", ".join(sorted(missing))
                    + "): the counts are lower bounds")
            if note not in out.notes:
                out.notes.append(note)
        lines, upper = self.per_iteration.get(lp.index, (None, False))
        if lines is not None and lines <= cap:
            self._add(out, self.term(stmts, lp.depth), parts)
            return
        if not self.an.has_at:
            note = "without --at sizes every loop level is counted as not fitting (the counts may be too high)"
            if note not in out.notes:
                out.notes.append(note)
        elif lines is None or upper:
            note = (f"whether one iteration of loop '{lp.display or lp.var}' fits is not known exactly; counted as not "
                    "fitting (the counts may be too high)")
            if note not in out.notes:
                out.notes.append(note)
        for k in lp.children:
            self._loop(self.nest.loops[k], cap, out, parts)
        direct = [s for s in stmts if s.loops and s.loops[-1] == lp.index]
        if direct:
            self._add(out, self.term(direct, lp.depth + 1), parts)
