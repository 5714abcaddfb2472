# Footprint quantities: a count in one scope (a weighted sum of set sizes),
# with the engine's formula when it gives one within the footprint's time
# share of the nest's budget, evaluation at given sizes, and the exact maximum over the values of
# fixed outer loop variables.

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount import engine
from tripcount.analysis.footprint.isets import (
    _first_point,
    _fix_dims,
    _outer_at,
    _outer_part,
    enum_count,
    neutral_add_all,
    neutral_count,
    points,
)
from tripcount.analysis.footprint.results import FCount
from tripcount.budget import Budget, time_dependent
from tripcount.model import Nest
from tripcount.options import Options

ENUM_CAP = 512  # outer-variable values evaluated exactly per maximum (formula evaluation)
ENUM_CAP_NO_FORMULA = 48  # ... when every value needs an enumeration of its own
BUDGET_S = 3.0  # footprint formulas per nest; past it, values at the --at sizes only
ELEMENTS_TIME_S = 1.0  # per element-count formula
LINES_TIME_S = 0.4  # per line-count formula (floors make these the hard ones)


@dataclass(frozen=True, order=True)
class Missing:
    """Why a quantity has no formula; `time_bound` when a time limit, not the set, was the cause
    (such a result is not cached: a less busy run may find the formula)."""

    text: str
    time_bound: bool = False

    def __str__(self) -> str:
        return self.text


def formula_budget(nest_budget: Budget | None, options: Options) -> Budget:
    """The footprint formulas' share of the nest's budget: BUDGET_S at most (a budget of
    its own when the analysis runs outside the driver)."""
    seconds = min(BUDGET_S, options.time_limit)
    return nest_budget.sub(seconds) if nest_budget is not None else Budget.start(seconds)


def _formula(s: isl.Set, context: isl.Set | None, options: Options, budget: Budget,
             cap: float) -> tuple[Any, Missing | None]:
    """Engine count of `s` (formula, None) or (None, reason), within `cap` seconds and the budget."""
    left = budget.remaining()
    spent = Missing(f"the footprint analysis's time budget ({budget.time_limit:g} s per nest) is used up", True)
    if left <= 0:
        return None, spent
    allowed = min(options.time_limit, left, cap)
    limits = engine.Limits(time_s=allowed, max_pieces=options.max_pieces, budget=budget)
    try:
        return neutral_count(s, context, limits), None
    except engine.EngineLimit as exc:
        if budget.remaining() <= 0:
            return None, spent
        timed = time_dependent(exc)
        if allowed < options.time_limit and timed:
            return None, Missing(f"no formula within the footprint analysis's time of {allowed:.2g} s per formula", True)
        return None, Missing(str(exc), timed)


def _eval(formula: Any, values: Mapping[str, int]) -> int | Fraction:
    v = formula.evaluate(values)
    return int(v) if isinstance(v, Fraction) and v.denominator == 1 else v


def _safe_eval(formula: Any, values: Mapping[str, int]) -> int | Fraction | None:
    try:
        return _eval(formula, values)
    except (KeyError, ValueError, TypeError, ZeroDivisionError):
        return None


@dataclass
class _Quantity:
    """A count in one scope: a weighted sum of set sizes, with its formula when the engine gave one."""

    sets: list[tuple[isl.Set, int]]
    formula: Any
    reason: Missing | None = None
    budget: Budget | None = field(default=None, compare=False)  # bounds the enumerations of `at`

    def at(self, values: Mapping[str, int]) -> int | Fraction | None:
        """Exact value at a point of the parameters (formula, else enumeration)."""
        if self.formula is not None:
            return _safe_eval(self.formula, values)
        total: int | Fraction = 0
        for s, w in self.sets:
            v = enum_count(s, values, self.budget)
            if v is None:
                return None
            total += w * v
        return total

    def scaled(self, w: int) -> _Quantity:
        """w times this quantity (bytes from elements)."""
        f = self.formula.scale(w) if self.formula is not None else None
        return _Quantity([(s, w * k) for s, k in self.sets], f, self.reason, self.budget)


def _sum(qs: list[_Quantity], zero: Any) -> _Quantity:
    """Sum of quantities (the arrays are disjoint, so footprints add up)."""
    if len(qs) == 1:
        return qs[0]
    sets = [x for q in qs for x in q.sets]
    reasons = [q.reason for q in qs if q.reason]
    budget = next((q.budget for q in qs if q.budget is not None), None)
    if any(q.formula is None for q in qs):
        return _Quantity(sets, None, reasons[0] if reasons else Missing("formula not available"), budget)
    if not qs:
        return _Quantity([], zero, None if zero is not None else Missing("counting engine not available"))
    return _Quantity(sets, neutral_add_all([q.formula for q in qs]), None, budget)



def max_over(q: _Quantity, outer: isl.Set, fixed: Sequence[str], sizes: Mapping[str, int],
             cap: int = ENUM_CAP) -> tuple[int | Fraction, dict[str, int] | None] | None:
    """Exact maximum of `q` over the values of the fixed variables at `sizes`, and where it is.

    With a formula, pieces whose formula does not involve the fixed variables
    are evaluated once; the others at each of their points (at most `cap`).
    Without one, every value is enumerated (at most ENUM_CAP_NO_FORMULA).
    None when that is too much work or a size is missing.
    """
    o = _outer_at(outer, fixed, sizes)
    if o is None:
        return None
    if o.is_empty():
        return 0, None
    best: int | Fraction | None = None
    arg: dict[str, int] | None = None
    if q.formula is not None:
        covered = None
        budget = cap
        for piece in q.formula.pieces:
            d = _outer_part(piece.domain, fixed, sizes)
            if d is None:
                return None
            d = d.intersect(o)
            if d.is_empty():
                continue
            covered = d if covered is None else covered.union(d)
            used = [v for v in fixed if v in piece.poly.variables()]
            if not used:
                cands = [_first_point(d, fixed)]
            else:
                # the formula depends on some fixed variables only: their values suffice
                proj = d
                for k in range(len(fixed) - 1, -1, -1):
                    if fixed[k] not in used:
                        proj = proj.project_out(isl.dim_type.set, k, 1)
                cands = _critical_points(piece.poly, used, sizes, proj)
                if cands is None:
                    cands = points(proj, used, budget)
                if cands is None:
                    return None
                budget -= len(cands)
                if len(used) < len(fixed):  # complete the point for `arg`
                    cands = [{**_first_point(_fix_dims(d, fixed, c), fixed), **c} for c in cands]
            for pt in cands:
                v = piece.poly.evaluate({**sizes, **pt})
                if best is None or v > best:
                    best, arg = v, pt
        rest = o if covered is None else o.subtract(covered)
        if not rest.is_empty() and (best is None or best < 0):
            best, arg = 0, _first_point(rest, fixed)
    else:
        pts = points(o, fixed, ENUM_CAP_NO_FORMULA)
        if pts is None:
            return None
        for pt in pts:
            v = q.at({**sizes, **pt})
            if v is None:
                return None
            if best is None or v > best:
                best, arg = v, pt
    if isinstance(best, Fraction) and best.denominator == 1:
        best = int(best)
    return (best if best is not None else 0), arg


def _critical_points(poly: Any, used: Sequence[str], sizes: Mapping[str, int],
                     proj: isl.Set) -> list[dict[str, int]] | None:
    """The values of one fixed variable where a polynomial of degree <= 2 in it takes its maximum over an
    interval of integers: the ends, and the integers beside the vertex of a parabola inside it (a
    triangular loop's working set grows like i or i^2, and its outer loop has too many values to try
    one by one). None when the piece is not of that kind (then its points are tried)."""
    if len(used) != 1:
        return None
    var = used[0]
    p = poly
    for name in list(p.variables()):
        if name in sizes:
            p = p.substitute(name, sizes[name])
    if p.variables() - {var}:
        return None
    try:
        cs = p.coeffs_in(var)
    except ValueError:  # the variable inside a floor: a periodic part, try every value
        return None
    if not cs or max(cs) > 2 or not all(c.is_const() for c in cs.values()):
        return None
    lo, hi = proj.dim_min_val(0), proj.dim_max_val(0)
    if not (lo.is_int() and hi.is_int()):
        return None
    lo, hi = int(lo.to_python()), int(hi.to_python())
    whole = isl.Set.universe(proj.get_space())
    whole = whole.lower_bound_val(isl.dim_type.set, 0, lo).upper_bound_val(isl.dim_type.set, 0, hi)
    whole = whole.intersect_params(proj.params())  # the sizes, fixed
    if not proj.is_equal(whole):  # holes (a stride): every point is tried
        return None
    cands = {lo, hi}
    a = cs[2].const_value() if 2 in cs else Fraction(0)
    b = cs[1].const_value() if 1 in cs else Fraction(0)
    if a != 0:
        x = -b / (2 * a)
        cands |= {k for k in (math.floor(x), math.ceil(x)) if lo <= k <= hi}
    return [{var: k} for k in sorted(cands)]


def _scaled_count(c: FCount, k: int) -> FCount:
    """k times a count (bytes from elements: the maximum is at the same place)."""
    return FCount(value=None if c.value is None else c.value * k,
                  formula=None if c.formula is None else c.formula.scale(k), note=c.note,
                  at_piece=c.at_piece, value_is=c.value_is, bound=c.bound, worst_at=c.worst_at,
                  lower_bound=c.lower_bound)


def _zero(nest: Nest) -> Any:
    """A zero formula (no array is touched)."""
    try:
        return neutral_count(isl.Set.empty(nest.context.get_space()), nest.context)
    except Exception:  # a zero count is a convenience, never a reason to fail
        return None
