# Analysis: brute-force enumeration for --verify of the working sets and the
# per-thread balance (verify_memory, verify_threads), and their diagnostics.
#
# At fixed sizes every iteration domain is a finite set without parameters:
# its points are listed one by one (isl's point scan), and every affine
# subscript is evaluated at each point here, in Python, from the coefficients
# of the access function. Nothing is counted with the engine, no image or
# line map is built with isl: the figures the analyses print are compared
# with what this plain enumeration finds. The scan has a budget (statement
# instances and seconds per nest); what does not fit is reported as not
# checked, with the reason, never as passed.

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount.analysis.counts import in_context, printed_value
from tripcount.analysis.results import NestResult
from tripcount.budget import count_points
from tripcount.diagnostics.engine import FigureMismatch
from tripcount.model import Access, Nest

MAX_INSTANCES = 120_000  # statement instances enumerated per nest, over all size points
MAX_SECONDS = 3.0  # time spent enumerating per nest (bounded by the nest's time limit too)

_dt = isl.dim_type


class OverBudget(Exception):
    """The enumeration budget of the nest is spent."""


@dataclass
class Budget:
    """Statement instances and seconds left for the enumerations of one nest."""

    instances: int = MAX_INSTANCES
    seconds: float = MAX_SECONDS
    start: float = field(default_factory=time.monotonic)

    def take(self, n: int) -> None:
        """Account for `n` more instances; raise OverBudget when the budget is spent."""
        self.instances -= n
        if self.instances < 0 or time.monotonic() - self.start > self.seconds:
            raise OverBudget

    def left(self) -> bool:
        """Whether anything is left."""
        return self.instances > 0 and time.monotonic() - self.start <= self.seconds


def budget_for(time_limit: float) -> Budget:
    """The budget of one nest: MAX_SECONDS, at most a third of its time limit."""
    return Budget(instances=MAX_INSTANCES, seconds=min(MAX_SECONDS, max(0.2, time_limit / 3)))


def fix_sizes(s: isl.Set | isl.Map, sizes: Mapping[str, int]) -> isl.Set | isl.Map | None:
    """`s` with every parameter fixed at `sizes` and dropped (None when one is not given)."""
    for i in range(s.dim(_dt.param)):
        name = s.get_dim_name(_dt.param, i)
        if name not in sizes:
            return None
        s = s.fix_val(_dt.param, i, isl.Val.read_from_str(s.get_ctx(), str(int(sizes[name]))))
    return s.project_out(_dt.param, 0, s.dim(_dt.param))


def afford(sets: Sequence[isl.Set], budget: Budget) -> None:
    """Raise OverBudget, before any scan, when the points of these parameter-free sets are more than
    the budget has left (a scan that would be cut spends nothing)."""
    total = 0
    for s in sets:
        total += count_points(s, None)
        if total > budget.instances:
            raise OverBudget


def scan(s: isl.Set, budget: Budget) -> list[tuple[int, ...]]:
    """Every point of a parameter-free set, in the order isl lists them (raises OverBudget)."""
    out: list[tuple[int, ...]] = []
    n = s.dim(_dt.set)
    over = [False]

    def visit(p: isl.Point) -> isl.stat | None:
        out.append(tuple(int(p.get_coordinate_val(_dt.set, k).to_python()) for k in range(n)))
        if len(out) % 4096 == 0:
            try:
                budget.take(4096)
            except OverBudget:
                over[0] = True
                return isl.stat.error
        return None

    try:
        s.foreach_point(visit)
    except isl.Error:
        if over[0]:
            raise OverBudget from None
        raise
    if over[0]:
        raise OverBudget
    budget.take(len(out) % 4096)
    return out


Subscripts = Callable[[tuple[int, ...]], tuple[int, ...]]


def _frac(v: isl.Val) -> Fraction:
    return Fraction(str(v))


def subscripts(acc: Access, domain: isl.Set, sizes: Mapping[str, int]) -> Subscripts | None:
    """The subscripts of a reference as a function of a point of the statement's domain at `sizes`:
    the coefficients of its affine access function, or, when that has integer divisions or pieces,
    the image of each point asked of isl (slower). None when the reference is not affine."""
    if acc.map is None:
        return None
    m = fix_sizes(acc.map, sizes)
    d = fix_sizes(domain, sizes)
    if m is None or d is None:
        return None
    m = m.intersect_domain(d)
    n_in = m.dim(_dt.in_)
    try:
        pma = isl.PwMultiAff.from_map(m).coalesce()
    except isl.Error:
        pma = None
    pieces: list[isl.MultiAff] = []
    if pma is not None:
        pma.foreach_piece(lambda _dom, ma: pieces.append(ma))
    if len(pieces) == 1 and all(pieces[0].get_aff(k).dim(_dt.div) == 0 for k in range(pieces[0].dim(_dt.out))):
        rows = []  # per subscript: integer coefficients, constant and common denominator
        for k in range(pieces[0].dim(_dt.out)):
            a = pieces[0].get_aff(k)
            coef = [_frac(a.get_coefficient_val(_dt.in_, j)) for j in range(n_in)]
            const = _frac(a.get_constant_val())
            den = math.lcm(const.denominator, *(c.denominator for c in coef))
            rows.append(([int(c * den) for c in coef], int(const * den), den))

        def affine(pt: tuple[int, ...]) -> tuple[int, ...]:
            out = []
            for coef, const, den in rows:
                v = const
                for c, x in zip(coef, pt, strict=True):
                    v += c * x
                q, r = divmod(v, den)
                if r:
                    raise ValueError(f"subscript {Fraction(v, den)} is not an integer")
                out.append(q)
            return tuple(out)

        return affine
    space = m.get_space().domain()

    def by_isl(pt: tuple[int, ...]) -> tuple[int, ...]:
        p = isl.Point.zero(space)
        for k, x in enumerate(pt):
            p = p.set_coordinate_val(_dt.set, k, isl.Val.read_from_str(p.get_ctx(), str(x)))
        img = m.intersect_domain(isl.Set.from_point(p)).range()
        q = img.sample_point()
        return tuple(int(q.get_coordinate_val(_dt.set, k).to_python()) for k in range(img.dim(_dt.set)))

    return by_isl


def size_points(nest: Nest, at: Mapping[str, int] | None) -> list[dict[str, int]]:
    """Small sizes to check formulas at (values on both sides of a 64-byte line of doubles and of
    common tile sizes), within the nest's assumptions; every point different."""
    params = list(nest.params)
    if not params:
        return [{}]
    candidates = [{p: 5 for p in params}, {p: 9 + 2 * k for k, p in enumerate(params)},
                  {p: 13 + (3 * k) % 5 for k, p in enumerate(params)}]
    if any(lp.step not in (1, -1, None) for lp in nest.loops):  # tiles: one full tile and a partial one
        candidates.append({p: 34 + k for k, p in enumerate(params)})
    out: list[dict[str, int]] = []
    for pt in candidates:
        if pt not in out and pt != at and (nest.context is None or in_context(nest.context, pt)):
            out.append(pt)
    if not out and nest.context is not None:
        from tripcount.analysis.footprint.isets import _sample

        pt = _sample(nest.context, params, 1, 40)
        if pt is not None:
            out.append(pt)
    return out


def point_label(pt: Mapping[str, int]) -> str:
    """`N=7, M=9` (or 'the fixed sizes' for a nest without parameters)."""
    return ", ".join(f"{k}={v}" for k, v in pt.items()) or "the fixed sizes"


@dataclass
class Tally:
    """What one verifier checked, what it skipped and why, and how many mismatches it reported."""

    checked: int = 0  # comparisons made
    figures: set[str] = field(default_factory=set)  # what was compared (one entry per printed figure)
    skipped: list[str] = field(default_factory=list)
    mismatches: int = 0
    points: set[tuple] = field(default_factory=set)

    def skip(self, what: str) -> None:
        """Note something that was not checked (with its reason), once."""
        if what not in self.skipped:
            self.skipped.append(what)


def as_number(v: object) -> Fraction | None:
    """A printed value as an exact number (None for no value)."""
    if v is None or isinstance(v, bool):
        return None
    if isinstance(v, int | Fraction):
        return Fraction(v)
    return None


def holds(got: Fraction, want: int | Fraction, side: str | None) -> bool:
    """Whether a printed value is right: equal, or on its side of the truth when it is a bound."""
    if side == "upper":
        return got >= want
    if side == "lower":
        return got <= want
    return got == want


def shown(got: Fraction, side: str | None) -> str:
    """How a value reads in a mismatch message."""
    text = str(int(got)) if got.denominator == 1 else str(got)
    return {"upper": f"the upper bound {text}", "lower": f"the lower bound {text}"}.get(side or "", text)


def compare(result: NestResult, tally: Tally, what: str, got: object, want: int | Fraction | None,
            pt: Mapping[str, int], side: str | None = None) -> bool:
    """Compare one printed figure with the enumerated truth (or its side of it, for a bound); a
    mismatch is a TC305 error on the nest. False on a mismatch."""
    g = as_number(got)
    if g is None or want is None:
        return True
    tally.checked += 1
    tally.figures.add(what.removeprefix("printed "))
    if holds(g, want, side):
        return True
    tally.mismatches += 1
    w = Fraction(want)
    result.diagnostics.append(FigureMismatch(result.nest.span, what=what, got=shown(g, side),
                                             want=int(w) if w.denominator == 1 else w, point=point_label(pt)))
    return False


def compare_formula(result: NestResult, tally: Tally, what: str, f: Any, values: Mapping[str, int],
                    want: int | Fraction | None, side: str | None = None) -> bool:
    """A formula, as computed and as printed (read back with tripcount.formula), against the truth."""
    if want is None:
        return True
    try:
        got = f.evaluate(values)
        text = printed_value(f, values)
    except (KeyError, ValueError, ZeroDivisionError) as exc:
        tally.skip(f"{what} ({exc})")
        return True
    return (compare(result, tally, f"formula for {what}", got, want, values, side)
            and compare(result, tally, f"printed formula for {what}", text, want, values, side))
