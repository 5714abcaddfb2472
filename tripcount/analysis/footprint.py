# Analysis: data footprint and cache fit per loop level, flops and arithmetic intensity.
#
# For every loop of a nest and every array, the number of distinct elements
# (and bytes, and cache lines) touched
#   * by the whole loop with the enclosing loop variables fixed -- the loop's
#     "working set", what a tiling engineer compares with a cache; and
#   * by one iteration of the loop (its own variable fixed too: everything
#     its body does for one value of the variable);
# and, for the nest, by all of it (the compulsory footprint). Each is the
# exact number of points of the image of the iteration domains under the
# access maps (the union over all references to an array, across the
# statements of the loop), counted by the engine as a formula in the size
# parameters and the fixed loop variables -- a projection count, not a sum of
# references. Cache lines are the image of those elements under a line map
# (row-major C layout; see LAYOUT_NOTE).
#
# The value at the --at sizes of a per-level quantity is its maximum over the
# values of the fixed loop variables, found by evaluating the formula at every
# value when that is cheap. The worst case as a function of the sizes is the
# per-level formula at the extreme values of the outer variables (substituted
# symbolically, e.g. i = N - 1) when evaluation at the --at sizes and at a
# small probe size shows the maximum is there; otherwise a safe upper bound
# (the footprint with the outer variables free), marked `bound`.
#
# The cache-fit model compares each loop's worst-case working set (in cache
# lines times the line size) with the host's data caches and solves for the
# largest size that still fits; findings are TC4xx diagnostics. A loop is
# flagged only when its enclosing loop touches the same lines again in a later
# iteration: without such reuse, exceeding a cache costs nothing beyond the
# compulsory misses. The model is
# an estimate with stated assumptions (CACHE_ASSUMPTIONS), not a simulation.
# Flops come from tripcount.analysis.flops; the arithmetic intensity divides
# them by the compulsory footprint in bytes.

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount import engine
from tripcount.analysis import flops as flops_mod
from tripcount.analysis.caches import CacheHierarchy, fmt_bytes, hierarchy
from tripcount.analysis.results import Count, LoopResult, NestResult
from tripcount.diagnostics import Diagnostic
from tripcount.engine.islconv import exceeds
from tripcount.model import Access, Loop, Nest, Statement
from tripcount.options import Options

LAYOUT_NOTE = ("row-major C layout, arrays do not overlap; a cache line holds consecutive elements "
               "of the innermost dimension and every row starts on a line boundary "
               "(line = (i0, ..., floor(i_last*elem/line))), or the exact linear layout "
               "(line = floor((i0*E1*...*En + ... + i_last)*elem/line), array start aligned to a line) "
               "when all inner extents are constants")
CACHE_ASSUMPTIONS = ("model estimate: fully associative caches, capacity only (no replacement policy, "
                     "no conflict misses), no other data or threads competing, row-major layout, "
                     "the working set counted in whole cache lines")
CACHE_MODEL_SHORT = ("model estimate: fully associative capacity-only caches, no other traffic, "
                     "row-major layout")
INTENSITY_ASSUMPTIONS = ("model estimate: flops divided by compulsory traffic -- every byte of the whole-nest "
                         "footprint moved from memory exactly once, nothing else")

ENUM_CAP = 512  # outer-variable values evaluated exactly per maximum (formula evaluation)
ENUM_CAP_NO_FORMULA = 48  # ... when every value needs an enumeration of its own
BUDGET_S = 3.0  # footprint formulas per nest; past it, values at the --at sizes only
ELEMENTS_TIME_S = 1.0  # per element-count formula
LINES_TIME_S = 0.4  # per line-count formula (floors make these the hard ones)
SEARCH_MAX = 1 << 40  # largest size the threshold search looks at
THRESHOLD_TIME_S = 0.2  # per threshold search (evaluation without a formula enumerates)


# --------------------------------------------------------------------------
# Diagnostics


class WorkingSetExceedsCache(Diagnostic):
    """A loop's working set at the --at sizes is larger than a cache level that the enclosing loop needs.

    Flagged only when the enclosing loop touches this loop's data (cache lines)
    again in a later iteration: that reuse then finds the data evicted.
    """

    code = "TC401"
    severity = "note"
    title = "working-set-exceeds-cache"
    template = ("working set of loop '{var}' (line {line}) is {size} at {at}, more than {level} ({capacity}): "
                "lines that loop '{outer}' uses again in its next iteration are evicted first{fits}{threshold} "
                "({assumptions})")


class FootprintLimit(Diagnostic):
    """The engine could not give a footprint formula; values at the --at sizes are still exact."""

    code = "TC402"
    severity = "note"
    title = "footprint-formula-limit"
    template = "no footprint formula for {what}: {reason}; {fallback}"


class ElementSizeUnknown(Diagnostic):
    """Arrays whose element type is not declared: bytes and cache lines cannot be given."""

    code = "TC403"
    severity = "note"
    title = "element-size-unknown"
    template = ("element size unknown for {arrays}: working sets in bytes and cache lines are not computed "
                "(declare the arrays or give --elem-size BYTES)")


class FootprintRefused(Diagnostic):
    """Statements of a loop, or an array's references, could not be modelled, so their footprint is unknown."""

    code = "TC404"
    severity = "note"
    title = "footprint-unknown"
    template = "working sets of {what} unknown: {reason}"


# --------------------------------------------------------------------------
# Result objects


@dataclass
class FCount(Count):
    """A count object with what its value means (maximum over outer variables, bound)."""

    value_is: str | None = None
    bound: bool = False
    worst_at: dict[str, int] | None = None
    lower_bound: bool = False  # references are left out: the true count is at least this

    def to_json(self) -> dict[str, Any]:
        """Count object plus `value_is`, `bound`, `lower_bound` and `worst_at` when set."""
        out = super().to_json()
        if self.value_is:
            out["value_is"] = self.value_is
        if self.bound:
            out["bound"] = True
        if self.lower_bound:
            out["lower_bound"] = True
        if self.worst_at:
            out["worst_at"] = dict(self.worst_at)
        return out


def _count_json(c: Count | None) -> dict[str, Any] | None:
    return None if c is None else c.to_json()


@dataclass
class ArrayFootprint:
    """One array's share of a footprint."""

    array: str
    elem_size: int | None
    layout: str  # "rows aligned" or "linear"
    elements: Count
    bytes: Count
    lines: Count

    def to_json(self) -> dict[str, Any]:
        """elements, bytes, lines (count objects), element size and layout model."""
        return {"elements": self.elements.to_json(), "bytes": self.bytes.to_json(),
                "lines": self.lines.to_json(), "elem_size": self.elem_size, "layout": self.layout}


@dataclass
class Worst:
    """Worst case of a per-level footprint over the fixed loop variables, as a function of the sizes.

    Either exact at the extreme values of the fixed variables (`where`: their
    values as expressions of the sizes; `exprs`: the footprint formulas there),
    as checked by evaluation, or a safe upper bound (`bound`: the footprint with
    the fixed variables free, `counts` its formulas).
    """

    fixed: tuple[str, ...]
    bound: bool
    method: str
    where: dict[str, str] | None = None
    exprs: dict[str, Any] = field(default_factory=dict)  # key -> QPoly at the extreme values (or None)
    values: dict[str, int | Fraction | None] = field(default_factory=dict)  # at the --at sizes
    counts: dict[str, Count] | None = None  # the bound's count objects
    evaluate: Callable[[str, Mapping[str, int]], int | Fraction | None] | None = field(default=None, repr=False)
    lower_bound: bool = False  # the footprint it bounds leaves references out

    def value(self, key: str, sizes: Mapping[str, int]) -> int | Fraction | None:
        """Exact worst-case (or bound) value of 'elements', 'bytes' or 'lines' at some sizes."""
        return self.evaluate(key, sizes) if self.evaluate is not None else None

    def to_json(self) -> dict[str, Any]:
        """bound, method, where, and elements/bytes/lines (value, expr, degree, leading)."""
        out: dict[str, Any] = {"bound": self.bound, "method": self.method, "where": self.where}
        if self.lower_bound:
            out["lower_bound"] = True
        for key in ("elements", "bytes", "lines"):
            if self.counts is not None:
                c = self.counts.get(key)
                out[key] = None if c is None else c.to_json()
                continue
            q = self.exprs.get(key)
            out[key] = {"value": _json_value(self.values.get(key)),
                        "expr": None if q is None else q.to_expr(),
                        "degree": None if q is None else q.degree(),
                        "leading": None if q is None else q.leading()}
        return out


def _json_value(v: int | Fraction | None) -> int | str | None:
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


@dataclass
class Footprint:
    """Distinct elements, bytes and lines touched in one scope, in total and per array."""

    scope: str  # human label of what was counted
    fixed: tuple[str, ...]  # loop variables held fixed (they appear in the formulas)
    elements: Count
    bytes: Count
    lines: Count
    by_array: dict[str, ArrayFootprint] = field(default_factory=dict)
    worst: Worst | None = None  # worst case over the fixed variables
    notes: list[str] = field(default_factory=list)
    quantities: dict[str, Any] = field(default_factory=dict, repr=False)  # totals, for evaluation
    typical_piece: int | None = None  # piece holding for most outer values at the --at sizes (text)
    lower_bound: bool = False  # references of the scope are left out (the notes say which)

    def to_json(self) -> dict[str, Any]:
        """The footprint shape of the JSON report."""
        out: dict[str, Any] = {"scope": self.scope, "fixed": list(self.fixed),
                               "elements": self.elements.to_json(), "bytes": self.bytes.to_json(),
                               "lines": self.lines.to_json(),
                               "by_array": {k: v.to_json() for k, v in self.by_array.items()}}
        if self.lower_bound:
            out["lower_bound"] = True
        if self.fixed:
            out["worst"] = None if self.worst is None else self.worst.to_json()
        if self.notes:
            out["notes"] = list(self.notes)
        return out


@dataclass
class Threshold:
    """Largest value of a size for which a working set still fits a cache level."""

    param: str
    largest: int | None  # None: does not fit even at the smallest size
    unbounded: bool = False  # fits at every size searched
    safe: bool = False  # computed from an upper bound: fits at least up to `largest`
    fixed: dict[str, int] = field(default_factory=dict)

    def text(self) -> str:
        """'N <= 2047', 'any N', 'no N >= 1'."""
        if self.unbounded:
            return f"any {self.param}"
        if self.largest is None or self.largest < 1:  # fitting only an empty loop is no answer
            return f"no {self.param} >= 1"
        return f"{self.param} <= {self.largest}"

    def to_json(self) -> dict[str, Any]:
        """param, largest, unbounded, safe, the other sizes held fixed."""
        return {"param": self.param, "largest": self.largest, "unbounded": self.unbounded,
                "safe": self.safe, "others": dict(self.fixed)}


@dataclass
class WorkingSet:
    """Loop extra `working_set`: the loop's working set, per-iteration footprint and cache fit."""

    loop: Loop
    whole: Footprint
    per_iteration: Footprint | None
    reuse: bool | None  # the enclosing loop touches this loop's lines again in a later iteration (None: no such loop)
    occupancy: int | None = None  # worst-case bytes in whole lines at the --at sizes
    fits: dict[str, bool] = field(default_factory=dict)
    thresholds: dict[str, Threshold] = field(default_factory=dict)
    assumptions: str = ""
    outer_var: str | None = None  # variable of the enclosing loop
    lines_at: Callable[[Mapping[str, int]], int | Fraction | None] | None = field(default=None, repr=False)

    def occupancy_at(self, sizes: Mapping[str, int]) -> int | None:
        """Worst-case working set in bytes of whole lines at other sizes (for plots), None if unknown."""
        if self.lines_at is None:
            return None
        try:
            v = self.lines_at(sizes)
        except (isl.Error, KeyError, ValueError):
            return None
        return None if v is None else int(v) * self.line_size

    line_size: int = 64

    def to_json(self) -> dict[str, Any]:
        """Working set of the loop (all its iterations, outer variables fixed) and more."""
        out = self.whole.to_json()
        out["per_iteration"] = None if self.per_iteration is None else self.per_iteration.to_json()
        out["reused_by_enclosing_loop"] = self.reuse
        out["cache_fit"] = None if not self.fits and not self.thresholds else {
            "occupancy_bytes": self.occupancy,
            "fits": dict(self.fits),
            "thresholds": {k: v.to_json() for k, v in self.thresholds.items()},
        }
        out["assumptions"] = self.assumptions
        return out


@dataclass
class Intensity:
    """Nest extra `intensity`: flops per byte of compulsory traffic."""

    value: Fraction | None
    asymptotic: str | None
    roofline: dict[str, Any] | None
    note: str | None = None
    upper_bound: bool = False  # the footprint is a lower bound, so the ratio is at most this

    def to_json(self) -> dict[str, Any]:
        """value (float), exact (fraction text), asymptotic (text), roofline (or None)."""
        out: dict[str, Any] = {
            "value": None if self.value is None else round(float(self.value), 6),
            "exact": None if self.value is None else str(self.value),
            "asymptotic": self.asymptotic,
            "roofline": self.roofline,
            "assumptions": INTENSITY_ASSUMPTIONS,
        }
        if self.note:
            out["note"] = self.note
        if self.upper_bound:
            out["upper_bound"] = True
        return out


@dataclass
class NestFootprint:
    """Nest extra `footprint`: the whole nest's footprint, plus the per-level text table."""

    footprint: Footprint
    levels: list[WorkingSet]
    caches: CacheHierarchy
    at: dict[str, int]
    flops: flops_mod.Flops | None = None
    intensity: Intensity | None = None

    def to_json(self) -> dict[str, Any]:
        """The whole-nest footprint (same shape as a loop's working set) and the cache model used."""
        out = self.footprint.to_json()
        out["caches"] = self.caches.to_json()
        out["layout"] = LAYOUT_NOTE
        return out

    def text_lines(self) -> list[str]:
        """A compact per-level table: loop, working set formula, value at the sizes, cache that holds it."""
        return text_table(self)


# --------------------------------------------------------------------------
# isl helpers


def _params(s: isl.Set | isl.Map) -> list[str]:
    return [s.get_dim_name(isl.dim_type.param, i) for i in range(s.dim(isl.dim_type.param))]


def fix_params(s: isl.Set, values: Mapping[str, int]) -> isl.Set | None:
    """`s` with its parameters fixed at `values`; None if one is missing."""
    for i, name in enumerate(_params(s)):
        if name not in values:
            return None
        s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(int(values[name]))))
    return s


def enum_count(s: isl.Set, values: Mapping[str, int]) -> int | None:
    """Exact number of points of `s` at the given parameter values (None if one is missing)."""
    f = fix_params(s, values)
    if f is None:
        return None
    return int(f.count_val().to_python())


def points(s: isl.Set, names: Sequence[str], cap: int) -> list[dict[str, int]] | None:
    """The points of a parameter-free set as dicts (None when there are more than `cap`).

    The scan stops at the first point past `cap`, so a set of 10^9 points costs
    no more than a small one (counting it first took seconds each time).
    """
    out: list[dict[str, int]] = []

    def visit(p: isl.Point) -> Any:
        out.append({nm: int(p.get_coordinate_val(isl.dim_type.set, k).to_python()) for k, nm in enumerate(names)})
        return isl.stat.error if len(out) > cap else None

    try:
        s.foreach_point(visit)
    except isl.Error:
        if len(out) > cap:
            return None
        raise
    return out


def _name_in(m: isl.Map, names: Sequence[str]) -> isl.Map:
    for k, nm in enumerate(names[: m.dim(isl.dim_type.in_)]):
        m = m.set_dim_name(isl.dim_type.in_, k, nm)
    return m


def _plain_constraint(c: isl.Constraint, ls: isl.LocalSpace) -> isl.Constraint | None:
    """`c` rebuilt without local variables, or None if it involves one (a floor or an existential)."""
    dt = isl.dim_type
    if any(not c.get_coefficient_val(dt.div, k).is_zero() for k in range(c.dim(dt.div))):
        return None
    new = isl.Constraint.equality_alloc(ls) if c.is_equality() else isl.Constraint.inequality_alloc(ls)
    new = new.set_constant_val(c.get_constant_val())
    for t in (dt.param, dt.set):
        for k in range(c.dim(t)):
            new = new.set_coefficient_val(t, k, c.get_coefficient_val(t, k))
    return new


_SIMPLIFY_MAX_BASIC = 64
_SIMPLIFY_MAX_DIVS = 48


def simplify(s: isl.Set) -> isl.Set:
    """The same integer set, as a single polyhedron without existentials when it is one.

    The image of a tiled (strided, MIN-bounded) loop nest is typically a plain
    rectangle that isl still writes as a union with floors; counting that form
    is much harder. The candidate is the intersection of every constraint of
    the pieces that holds for the whole set; it is used only if it contains no
    other point (checked exactly by isl).
    """
    s = s.coalesce()
    bsets = s.get_basic_sets()
    if len(bsets) == 1 and bsets[0].dim(isl.dim_type.div) == 0:
        return s
    # the subset tests below are isl calls no limit can interrupt; on a huge union
    # they could run for minutes (the bundled corpus needs at most 20 basic sets
    # and 8 existentials here)
    if exceeds(s, _SIMPLIFY_MAX_BASIC, _SIMPLIFY_MAX_DIVS):
        return s
    space = s.get_space()
    ls = isl.LocalSpace.from_space(space)
    hull = isl.Set.universe(space)
    seen: set[str] = set()
    try:
        for b in bsets:
            for c in b.get_constraints():
                plain = _plain_constraint(c, ls)
                if plain is None or str(plain) in seen:
                    continue
                seen.add(str(plain))
                half = isl.Set.from_basic_set(isl.BasicSet.universe(space).add_constraint(plain))
                if s.is_subset(half):
                    hull = hull.intersect(half)
        # conditions on the parameters alone (e.g. a tile origin's stride) come from the set itself
        hull = hull.intersect_params(s.params())
        # s is finite at fixed sizes, so an unbounded candidate cannot equal it; testing
        # that by subset is one uninterruptible isl call that can run for minutes when s
        # has existentials (the candidate's complement is the hard part).
        if not hull.is_bounded():
            return s
        return hull.coalesce() if hull.is_subset(s) else s
    except isl.Error:
        return s


def access_image(stmt: Statement, acc: Access, n_fixed: int, restrict: isl.Set | None = None) -> isl.Set:
    """Elements of `acc.array` touched by `stmt`, the first `n_fixed` loop variables as parameters.

    `restrict` (a set over the first loop variables) limits the domain, e.g. to extreme outer values.
    """
    dom = stmt.domain
    if restrict is not None:
        extra = dom.dim(isl.dim_type.set) - restrict.dim(isl.dim_type.set)
        r = restrict.add_dims(isl.dim_type.set, extra).set_tuple_name(dom.get_tuple_name())
        for k, nm in enumerate(stmt.loop_vars):
            r = r.set_dim_name(isl.dim_type.set, k, nm)
        dom = dom.intersect(r)
    m = _name_in(acc.map.intersect_domain(dom), stmt.loop_vars)
    if n_fixed:
        m = m.move_dims(isl.dim_type.param, m.dim(isl.dim_type.param), isl.dim_type.in_, 0, n_fixed)
    return m.range()


def line_map(acc: Access, elem: int, line: int) -> tuple[isl.Map, str]:
    """Map from array elements to cache-line coordinates, and the layout model's name."""
    name = acc.map.get_tuple_name(isl.dim_type.out) or acc.array
    n = acc.map.dim(isl.dim_type.out)
    xs = [f"a{k}" for k in range(n)]
    g = math.gcd(elem, line)
    e, ln = elem // g, line // g

    def fl(expr: str) -> str:
        return f"floor(({e}*({expr}))/{ln})" if ln > 1 else f"{e}*({expr})"

    # an open extent (`[]`, a pointer level) is None: only the linear layout needs the values
    inner = [None if x is None else x.strip() for x in acc.extents[1:]] if acc.extents else []
    if n == 0:
        return isl.Map(f"{{ {name}[] -> {name}[] }}"), "linear"
    if n >= 2 and len(inner) == n - 1 and all(x is not None and x.isdigit() for x in inner):
        terms = []
        for k in range(n):
            mult = 1
            for x in inner[k:]:
                mult *= int(x)
            terms.append(f"{mult}*{xs[k]}")
        return isl.Map(f"{{ {name}[{', '.join(xs)}] -> {name}[{fl(' + '.join(terms))}] }}"), "linear"
    out = xs[:-1] + [fl(xs[-1])]
    return isl.Map(f"{{ {name}[{', '.join(xs)}] -> {name}[{', '.join(out)}] }}"), (
        "linear" if n == 1 else "rows aligned")


# --------------------------------------------------------------------------
# Counting with the engine, with fallbacks


class _Budget:
    """Wall-clock budget of the footprint formulas of one nest."""

    def __init__(self, seconds: float) -> None:
        self.seconds = seconds
        self.deadline = time.monotonic() + seconds

    def left(self) -> float:
        return self.deadline - time.monotonic()


def _formula(s: isl.Set, context: isl.Set | None, options: Options, budget: _Budget,
             cap: float) -> tuple[Any, str | None]:
    """Engine count of `s` (formula, None) or (None, reason), within `cap` seconds and the budget."""
    left = budget.left()
    spent = f"the footprint analysis's time budget ({budget.seconds:g} s per nest) is used up"
    if left <= 0:
        return None, spent
    allowed = min(options.time_limit, left, cap)
    limits = engine.Limits(time_s=allowed, max_pieces=options.max_pieces)
    try:
        return engine.count(s, context, limits), None
    except engine.EngineLimit as exc:
        if budget.left() <= 0:
            return None, spent
        if allowed < options.time_limit and "time" in str(exc):
            return None, f"no formula within the footprint analysis's time of {allowed:.2g} s per formula"
        return None, str(exc)


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
    reason: str | None = None

    def at(self, values: Mapping[str, int]) -> int | Fraction | None:
        """Exact value at a point of the parameters (formula, else enumeration)."""
        if self.formula is not None:
            return _safe_eval(self.formula, values)
        total: int | Fraction = 0
        for s, w in self.sets:
            v = enum_count(s, values)
            if v is None:
                return None
            total += w * v
        return total

    def scaled(self, w: int) -> _Quantity:
        """w times this quantity (bytes from elements)."""
        f = self.formula.scale(w) if self.formula is not None else None
        return _Quantity([(s, w * k) for s, k in self.sets], f, self.reason)


def _sum(qs: list[_Quantity], zero: Any) -> _Quantity:
    """Sum of quantities (the arrays are disjoint, so footprints add up)."""
    if len(qs) == 1:
        return qs[0]
    sets = [x for q in qs for x in q.sets]
    reasons = [q.reason for q in qs if q.reason]
    if any(q.formula is None for q in qs):
        return _Quantity(sets, None, reasons[0] if reasons else "formula not available")
    if not qs:
        return _Quantity([], zero, None if zero is not None else "counting engine not available")
    return _Quantity(sets, engine.add_all([q.formula for q in qs]))


def _outer_part(dom: isl.Set, fixed: Sequence[str], sizes: Mapping[str, int]) -> isl.Set | None:
    """A piece's parameter domain as a set over the fixed loop variables, sizes fixed."""
    names = _params(dom)
    for nm in fixed:
        if nm not in names:
            dom = dom.add_dims(isl.dim_type.param, 1)
            dom = dom.set_dim_name(isl.dim_type.param, dom.dim(isl.dim_type.param) - 1, nm)
    for i, nm in enumerate(_params(dom)):
        if nm in fixed:
            continue
        if nm not in sizes:
            return None
        dom = dom.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(dom.get_ctx(), str(int(sizes[nm]))))
    for k, nm in enumerate(fixed):
        idx = _params(dom).index(nm)
        dom = dom.move_dims(isl.dim_type.set, k, isl.dim_type.param, idx, 1)
    for k, nm in enumerate(fixed):
        dom = dom.set_dim_name(isl.dim_type.set, k, nm)
    return dom


def _outer_at(outer: isl.Set, fixed: Sequence[str], sizes: Mapping[str, int]) -> isl.Set | None:
    """The values of the fixed loop variables at the given sizes (a set without free parameters)."""
    o = fix_params(outer, sizes)
    if o is None:
        return None
    o = o.reset_tuple_id()
    for k, nm in enumerate(fixed):
        o = o.set_dim_name(isl.dim_type.set, k, nm)
    return o


def _fix_dims(s: isl.Set, names: Sequence[str], values: Mapping[str, int]) -> isl.Set:
    """`s` with the named set dimensions fixed."""
    for k, nm in enumerate(names):
        if nm in values:
            s = s.fix_val(isl.dim_type.set, k, isl.Val.read_from_str(s.get_ctx(), str(int(values[nm]))))
    return s


def _first_point(s: isl.Set, names: Sequence[str]) -> dict[str, int]:
    p = s.sample_point()
    return {nm: int(p.get_coordinate_val(isl.dim_type.set, k).to_python()) for k, nm in enumerate(names)}


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


@dataclass
class _ArrayInfo:
    name: str
    elem: int | None
    access: Access  # a representative reference (for the line map)


_ArrayQ = dict[str, tuple[_Quantity, "_Quantity | None", str]]  # array -> (elements, lines, layout)


# --------------------------------------------------------------------------
# Scope computation


class _Analyzer:
    """Footprints of one nest: scopes, worst cases, cache fit."""

    def __init__(self, result: NestResult, options: Options) -> None:
        self.result = result
        self.nest: Nest = result.nest
        self.options = options
        self.caches = hierarchy(options)
        self.line = self.caches.line_size
        self.budget = _Budget(min(BUDGET_S, options.time_limit))
        full = options.sizes(self.nest.params)  # `--at '*=V'` sizes every parameter
        self.at = full if full is not None else {k: v for k, v in options.at.items() if k in self.nest.params}
        self.has_at = full is not None
        self.mixed = self._mixed_ranks()
        self.arrays = self._arrays()
        self._cache: dict[tuple, Footprint] = {}
        self._formulas: dict[tuple[str, str], tuple[Any, str | None]] = {}
        self._maxima: dict[tuple, tuple[_Quantity, Any]] = {}
        self._zero = _zero(self.nest)
        self.probes = self._probes()

    # --- setup
    def _mixed_ranks(self) -> dict[str, tuple[Access, Access]]:
        """Arrays used with different numbers of subscripts (`A[i][j]` and `A[i]`), with the first
        reference of each kind: their element sets live in different spaces, so they are left out."""
        first: dict[str, Access] = {}
        out: dict[str, tuple[Access, Access]] = {}
        for s in self.nest.statements:
            if s.domain is None:
                continue
            for a in s.accesses:
                if a.map is None or a.array in out:
                    continue
                seen = first.setdefault(a.array, a)
                if seen.map.dim(isl.dim_type.out) != a.map.dim(isl.dim_type.out):
                    out[a.array] = (seen, a)
        return out

    def usable(self, a: Access) -> bool:
        """Whether a reference is in the model: affine subscripts, an array of one rank."""
        return a.map is not None and a.array not in self.mixed

    def left_out(self, stmts: Sequence[Statement]) -> dict[str, str]:
        """The references of `stmts` that the footprints leave out, as written, and their arrays."""
        out: dict[str, str] = {}
        for s in stmts:
            if s.domain is None:
                continue
            for a in s.accesses:
                if not self.usable(a):
                    out.setdefault(f"{a.array}[{']['.join(a.subscripts)}]", a.array)
        return out

    def _arrays(self) -> dict[str, _ArrayInfo]:
        out: dict[str, _ArrayInfo] = {}
        for s in self.nest.statements:
            if s.domain is None:  # not modelled: in no footprint
                continue
            for a in s.accesses:
                if not self.usable(a):  # left out (the model says so)
                    continue
                info = out.get(a.array)
                elem = a.elem_size if a.elem_size else None
                if info is None:
                    out[a.array] = _ArrayInfo(a.array, elem, a)
                elif info.elem is None and elem:
                    info.elem = elem
        for info in out.values():
            if info.elem is None and self.options.elem_size:
                info.elem = int(self.options.elem_size)
        return out

    def _probes(self) -> list[dict[str, int]]:
        """Size points where the worst case over the outer variables is checked by evaluation."""
        params = list(self.nest.params)
        if not params:
            return [{}]
        out: list[dict[str, int]] = []
        if self.has_at:
            out.append(dict(self.at))
        # a small size, and one past common tile and unroll sizes (32, 64), so that the
        # interior and the boundary pieces of a footprint both occur
        for base, step, lo, hi in ((9, 4, 4, 40), (70, 6, 66, 200)):
            pt: dict[str, int] | None = {p: base + step * k for k, p in enumerate(params)}
            if not _in_context(self.nest.context, pt):
                pt = _sample(self.nest.context, params, lo, hi)
            if pt is not None and pt not in out:
                out.append(pt)
        return out

    def chain(self, loop: Loop) -> list[Loop]:
        """The loop and its ancestors, outermost first."""
        out = [loop]
        while out[0].parent is not None:
            out.insert(0, self.nest.loops[out[0].parent])
        return out

    def statements_in(self, loop: Loop) -> list[Statement]:
        """Statements inside `loop` (at any depth)."""
        return [s for s in self.nest.statements if loop.index in s.loops]

    # --- quantities
    def _formula(self, s: isl.Set, context: isl.Set | None, cap: float) -> tuple[Any, str | None]:
        """Engine count with a per-call time cap; identical sets are counted once per nest."""
        key = (str(s), str(context))
        if key not in self._formulas:
            self._formulas[key] = _formula(s, context, self.options, self.budget, cap)
        return self._formulas[key]

    def _quantities(self, stmts: list[Statement], n: int, restrict: isl.Set | None,
                    context: isl.Set | None, line_formulas: bool = True) -> _ArrayQ:
        """Per array: distinct elements and lines of `stmts`, first `n` loop variables fixed.

        Without `line_formulas` the lines are only evaluated by enumeration (line
        counts carry floors and are the costly ones for the engine).
        """
        images: dict[str, isl.Set] = {}
        for s in stmts:
            if s.domain is None:
                continue
            for a in s.accesses:
                if not self.usable(a):
                    continue
                # simplified one by one: each reference's image is usually a plain polyhedron
                img = simplify(access_image(s, a, n, restrict))
                images[a.array] = images[a.array].union(img) if a.array in images else img
        out: _ArrayQ = {}
        for name in sorted(images):
            img = simplify(images[name])
            info = self.arrays[name]
            f, why = self._formula(img, context, ELEMENTS_TIME_S)
            elems = _Quantity([(img, 1)], f, why)
            lines = None
            layout = "rows aligned"
            if info.elem:
                lm, layout = line_map(info.access, info.elem, self.line)
                lset = simplify(img.apply(lm))
                if line_formulas:
                    g, why2 = self._formula(lset, context, LINES_TIME_S)
                else:
                    g, why2 = None, "not computed for one iteration"
                lines = _Quantity([(lset, 1)], g, why2)
            out[name] = (elems, lines, layout)
        return out

    def _totals(self, aq: _ArrayQ) -> dict[str, _Quantity | None]:
        el = _sum([e for e, _, _ in aq.values()], self._zero)
        sizes = {self.arrays[n].elem for n in aq}
        if len(sizes) == 1 and None not in sizes:  # one element size: no second sum of formulas
            by = el.scaled(sizes.pop() or 0)
            ln = _sum([ln for _, ln, _ in aq.values() if ln is not None], self._zero)
        elif all(self.arrays[n].elem for n in aq):
            by = _sum([e.scaled(self.arrays[n].elem or 0) for n, (e, _, _) in aq.items()], self._zero)
            ln = _sum([ln for _, ln, _ in aq.values() if ln is not None], self._zero)
        else:
            by = ln = None
        return {"elements": el, "bytes": by, "lines": ln}

    def _count(self, q: _Quantity | None, fixed: tuple[str, ...], outer: isl.Set | None,
               unknown: str = "element size unknown") -> FCount:
        """Count object of a quantity: formula, and value at --at (maximum over the fixed variables)."""
        if q is None:
            return FCount(note=unknown)
        value, arg, value_is = None, None, None
        if self.has_at:
            if not fixed:
                value = q.at(self.at)
            elif outer is not None:
                r = self._max(q, outer, fixed, self.at)
                if r is not None:
                    value, arg = r
                    value_is = "maximum over " + ", ".join(fixed) + " at the --at sizes"
        note = None if q.formula is not None else f"formula not available: {q.reason}"
        c = FCount(value=value, formula=q.formula, note=note, value_is=value_is, worst_at=arg)
        if value is not None and (arg is not None or not fixed):
            c.locate({**self.at, **(arg or {})})
        return c

    def _max(self, q: _Quantity, outer: isl.Set, fixed: tuple[str, ...],
             sizes: Mapping[str, int]) -> tuple[int | Fraction, dict[str, int] | None] | None:
        """max_over, remembered (the same maxima serve the values and the worst-case check)."""
        key = (id(q), fixed, tuple(sorted(sizes.items())))
        if key not in self._maxima:
            self._maxima[key] = (q, max_over(q, outer, fixed, sizes))  # q kept alive: ids stay unique
        return self._maxima[key][1]

    # --- one scope
    def scope(self, stmts: list[Statement], fixed: tuple[str, ...], outer: isl.Set | None,
              label: str, line_formulas: bool = True) -> Footprint:
        """Footprint of `stmts` with the loop variables `fixed` held fixed (outer: their domain)."""
        key = (tuple(s.id for s in stmts), fixed)
        if key in self._cache and line_formulas and self._cache[key].lines.formula is None:
            del self._cache[key]  # computed before without line formulas
        if key in self._cache:
            fp = self._cache[key]
            return Footprint(label, fp.fixed, fp.elements, fp.bytes, fp.lines, fp.by_array, fp.worst,
                             list(fp.notes), fp.quantities, fp.typical_piece, fp.lower_bound)
        n = len(fixed)
        aq = self._quantities(stmts, n, None, self._context(outer, n), line_formulas)
        totals = self._totals(aq)
        unknown = sorted(nm for nm in aq if not self.arrays[nm].elem)
        unknown_note = "element size unknown for " + ", ".join(unknown)
        by_array = {}
        for name, (e, ln, layout) in aq.items():
            elem = self.arrays[name].elem
            el = self._count(e, fixed, outer)
            by_array[name] = ArrayFootprint(name, elem, layout, el,
                                            _scaled_count(el, elem) if elem else FCount(note="element size unknown"),
                                            self._count(ln, fixed, outer))
        tot_el = self._count(totals["elements"], fixed, outer)
        sizes = {self.arrays[nm].elem for nm in aq}
        if len(sizes) == 1 and None not in sizes:  # one element size: bytes are proportional
            tot_by = _scaled_count(tot_el, sizes.pop() or 0)
        else:
            tot_by = self._count(totals["bytes"], fixed, outer, unknown_note)
        fp = Footprint(label, fixed, tot_el, tot_by, self._count(totals["lines"], fixed, outer, unknown_note),
                       by_array, quantities=totals)
        wanted = [e for e, _, _ in aq.values()] + ([ln for _, ln, _ in aq.values() if ln] if line_formulas else [])
        reasons = sorted({q.reason for q in wanted if q.formula is None and q.reason})
        if n and outer is not None and self.has_at:
            fp.typical_piece = self._typical_piece(tot_el.formula, outer, fixed, tot_el.worst_at)
        if reasons:
            fp.notes.append("formula not available (" + "; ".join(reasons) + "): values at the --at sizes only")
        missing = self.left_out(stmts)
        if missing:
            self._mark_lower_bound(fp, "references that are not modelled are left out (" + ", ".join(missing)
                                   + ")", set(missing.values()))
        if n and stmts and outer is not None:
            self._worst(fp, stmts, fixed, outer, totals)
            if fp.lower_bound and fp.worst is not None:
                fp.worst.lower_bound = True
        self._cache[key] = fp
        return fp

    @staticmethod
    def _mark_lower_bound(fp: Footprint, why: str, arrays: set[str] | None = None) -> None:
        """The footprint misses some references (of `arrays`; None: of any array): its totals, and
        those arrays' shares, are at least what is shown."""
        fp.lower_bound = True
        fp.notes.append("lower bound: " + why)
        counts = [fp.elements, fp.bytes, fp.lines]
        for name, a in fp.by_array.items():
            if arrays is None or name in arrays:
                counts += [a.elements, a.bytes, a.lines]
        for c in counts:
            if isinstance(c, FCount):
                c.lower_bound = True

    def _context(self, outer: isl.Set | None, n: int) -> isl.Set:
        ctx = self.nest.context
        if outer is None or n == 0:
            return ctx
        o = outer.move_dims(isl.dim_type.param, outer.dim(isl.dim_type.param), isl.dim_type.set, 0, n).params()
        return o.intersect_params(ctx) if ctx is not None else o

    def _typical_piece(self, formula: Any, outer: isl.Set, fixed: tuple[str, ...],
                       worst_at: dict[str, int] | None) -> int | None:
        """Index of the piece that holds for the most values of the fixed variables at the --at sizes
        (ties: the one holding at the worst case), for the text report."""
        if formula is None or len(formula.pieces) < 2:
            return None
        o = _outer_at(outer, fixed, self.at)
        if o is None:
            return None
        best, best_n = None, -1
        for k, piece in enumerate(formula.pieces):
            d = _outer_part(piece.domain, fixed, self.at)
            if d is None:
                return None
            n = int(d.intersect(o).count_val().to_python())
            holds = worst_at is not None and piece.contains({**self.at, **worst_at})
            if n > best_n or (n == best_n and holds):
                best, best_n = k, n
        return best

    # --- worst case over the fixed variables
    def _worst(self, fp: Footprint, stmts: list[Statement], fixed: tuple[str, ...], outer: isl.Set,
               totals: dict[str, _Quantity | None]) -> None:
        """Worst case over the fixed variables: the extreme values when evaluation shows the maximum
        is there (no further counting: the per-level formula is evaluated there), else a safe bound."""
        metrics = {k: q for k, q in totals.items() if q is not None}
        maxima: list[tuple[dict[str, int], list[int | Fraction]]] = []
        for probe in self.probes:
            o = _outer_at(outer, fixed, probe)
            if o is None or o.is_empty():
                continue
            ms = [self._max(q, outer, fixed, probe) for q in metrics.values()]
            if any(m is None for m in ms):
                continue
            maxima.append((probe, [m[0] for m in ms if m is not None]))
        chosen = None
        if maxima:
            for signs in _sign_patterns(len(fixed)):
                cset = _corner(outer, signs, fixed)
                if cset is not None and self._attains(cset, fixed, list(metrics.values()), maxima):
                    chosen = (signs, cset)
                    break
        if chosen is not None:
            signs, cset = chosen
            fp.worst = self._corner_worst(cset, signs, fixed, metrics, maxima)
        else:
            fp.worst = self._bound_worst(stmts, fixed, bool(maxima))
        if self.has_at:  # per-level values too costly to evaluate exactly come from the worst case
            for key in ("elements", "bytes", "lines"):
                mine = getattr(fp, key)
                w = fp.worst.values.get(key)
                if mine.value is None and w is not None:
                    mine.value = w
                    mine.bound = fp.worst.bound
                    mine.value_is = ("worst case over " + ", ".join(fixed) +
                                     (" (upper bound)" if fp.worst.bound else " (at their extreme values)"))

    def _corner_worst(self, cset: isl.Set, signs: tuple[int, ...], fixed: tuple[str, ...],
                      metrics: dict[str, _Quantity],
                      maxima: list[tuple[dict[str, int], list[int | Fraction]]]) -> Worst:
        def corner_point(values: Mapping[str, int]) -> dict[str, int] | None:
            c = fix_params(cset, values)
            pts = points(c, fixed, 1) if c is not None else None
            return pts[0] if pts else None

        def evaluate(key: str, values: Mapping[str, int]) -> int | Fraction | None:
            q = metrics.get(key)
            if q is None:
                return None
            pt = corner_point(values)
            if pt is None:
                return 0 if _in_context(self.nest.context, values) else None
            return q.at({**values, **pt})

        extremes = ", ".join(f"{v} {'largest' if sg > 0 else 'smallest'}" for v, sg in zip(fixed, signs, strict=True))
        method = (f"at the extreme values ({extremes}): the maximum over {', '.join(fixed)}, "
                  f"as checked by evaluating every value at {_fmt_probes(maxima)}")
        where_q = _corner_exprs(cset, fixed, [p for p, _ in maxima])
        exprs: dict[str, Any] = {}
        if where_q is not None:
            for key, q in metrics.items():
                exprs[key] = _substituted(q.formula, where_q, [(p, corner_point(p)) for p, _ in maxima])
        values = {key: evaluate(key, self.at) for key in metrics} if self.has_at else {}
        return Worst(fixed, False, method, None if where_q is None else {k: v.to_expr() for k, v in where_q.items()},
                     exprs, values, None, evaluate)

    def _bound_worst(self, stmts: list[Statement], fixed: tuple[str, ...], checked: bool) -> Worst:
        aq = self._quantities(stmts, 0, None, self.nest.context)
        totals = self._totals(aq)
        counts = {k: self._count(q, (), None) for k, q in totals.items()}
        for c in counts.values():
            c.bound = True

        def evaluate(key: str, values: Mapping[str, int]) -> int | Fraction | None:
            q = totals.get(key)
            return None if q is None else q.at(values)

        method = ("upper bound: the footprint over all values of " + ", ".join(fixed) +
                  (" (the maximum over them is not at their extreme values)" if checked else
                   " (the maximum over them could not be checked)"))
        values = {k: c.value for k, c in counts.items()} if self.has_at else {}
        return Worst(fixed, True, method, None, {}, values, counts, evaluate)

    def _attains(self, cset: isl.Set, fixed: tuple[str, ...], metrics: list[_Quantity],
                 maxima: list[tuple[dict[str, int], list[int | Fraction]]]) -> bool:
        """Whether every metric reaches its maximum at the corner, at every probe size."""
        for probe, maxes in maxima:
            c = fix_params(cset, probe)
            pts = points(c, fixed, 1) if c is not None else None
            if not pts:
                return False
            for q, mx in zip(metrics, maxes, strict=True):
                v = q.at({**probe, **pts[0]})
                if v is None or v < mx:
                    return False
        return True

    # --- reuse
    def _touch_relation(self, stmts: list[Statement], depth: int) -> dict[str, isl.Map]:
        """Per array: { L[first depth+1 loop variables] -> cache line (element if size unknown) }."""
        rel: dict[str, isl.Map] = {}
        for s in stmts:
            if s.domain is None:  # not modelled: what it touches is unknown (see reuse)
                continue
            for a in s.accesses:
                if not self.usable(a):
                    continue
                m = _name_in(a.map.intersect_domain(s.domain), s.loop_vars)
                nin = m.dim(isl.dim_type.in_)
                m = m.project_out(isl.dim_type.in_, depth + 1, nin - depth - 1).set_tuple_name(isl.dim_type.in_, "L")
                for k in range(depth + 1):
                    m = m.set_dim_name(isl.dim_type.in_, k, f"x{k}")
                info = self.arrays[a.array]
                if info.elem:
                    lm, _ = line_map(info.access, info.elem, self.line)
                    m = m.apply_range(lm)
                rel[a.array] = rel[a.array].union(m) if a.array in rel else m
        return rel

    def reuse(self, inner: list[Statement], outer: list[Statement], depth: int) -> bool | None:
        """Whether a line touched by `inner` in one iteration of the loop at `depth` is touched again
        by `outer` (the loop's statements) in a later iteration, the enclosing variables being equal."""
        try:
            src = self._touch_relation(inner, depth)
            dst = self._touch_relation(outer, depth)
            vs = [f"x{k}" for k in range(depth + 1)]
            ws = vs[:-1] + [f"{vs[-1]}p"]
            later = isl.Map(f"{{ L[{', '.join(vs)}] -> L[{', '.join(ws)}] : {ws[-1]} > {vs[-1]} }}")
            for name, m in src.items():
                if name not in dst:
                    continue
                pairs = m.apply_range(dst[name].reverse())
                if not pairs.intersect(later).is_empty():
                    return True
            # no reuse among what is modelled; what is left out may still touch the same lines
            if any(s.domain is None for s in outer) or self.left_out(outer):
                return None
            return False
        except isl.Error:
            return None

    # --- cache fit
    def cache_fit(self, ws: WorkingSet) -> None:
        """Fit of the loop's worst-case working set (in whole lines) with each cache level."""
        fp = ws.whole
        if fp.fixed:
            if fp.worst is None:
                return
            worst = fp.worst

            def lines_at(values: Mapping[str, int]) -> int | Fraction | None:
                return worst.value("lines", values)
            safe = worst.bound
            q = fp.quantities.get("lines") if not worst.bound else None
            has_formula = (q is not None and q.formula is not None) if not worst.bound else (
                worst.counts is not None and worst.counts["lines"].formula is not None)
        else:
            q = fp.quantities.get("lines")
            if q is None:
                return

            def lines_at(values: Mapping[str, int]) -> int | Fraction | None:
                return q.at(values)
            safe = False
            has_formula = q.formula is not None
        value = fp.lines.value
        if fp.lower_bound and (fp.lines.bound or (fp.worst is not None and fp.worst.bound)):
            return  # an upper bound of a footprint that misses references bounds nothing
        if value is not None:
            ws.occupancy = int(value) * self.line
            for lv in self.caches.levels:
                if not fp.lower_bound:
                    ws.fits[lv.name] = ws.occupancy <= lv.size
                elif ws.occupancy > lv.size:  # a lower bound proves only that a cache is exceeded
                    ws.fits[lv.name] = False
        if not has_formula or fp.lower_bound:  # a search by enumeration would count ever larger sets;
            return  # a threshold of a lower bound is no threshold of the working set
        ws.lines_at, ws.line_size = lines_at, self.line
        param = self._solve_param(lines_at)
        if param is None:
            return
        others = {p: v for p, v in self.at.items() if p != param}
        if any(p not in others for p in self.nest.params if p != param):
            return
        for lv in self.caches.levels:
            t = self._threshold(lines_at, param, others, lv.size // self.line)
            if t is not None:
                t.safe = safe
                ws.thresholds[lv.name] = t

    def _solve_param(self, f: Callable[[Mapping[str, int]], int | Fraction | None]) -> str | None:
        """--solve-for, the only parameter, or the one the working set grows fastest in at the --at sizes."""
        params = list(self.nest.params)
        if not params:
            return None
        if self.options.solve_for in params:
            return self.options.solve_for
        if len(params) == 1:
            return params[0]
        if not self.has_at:
            return None
        base = f(self.at)
        best, best_ratio = None, None
        for p in params:
            v = f({**self.at, p: 2 * self.at[p] + 1})
            if v is None or base is None:
                continue
            ratio = Fraction(v) / Fraction(base) if base else Fraction(v)
            if best_ratio is None or ratio > best_ratio:
                best, best_ratio = p, ratio
        return best

    def _threshold(self, f: Callable[[Mapping[str, int]], int | Fraction | None], param: str,
                   others: dict[str, int], capacity_lines: int) -> Threshold | None:
        """Largest `param` with f <= capacity: exact evaluation, doubling then bisection.

        Working sets grow with the sizes in practice; the answer's neighbours
        are checked (and a few smaller sizes), otherwise no threshold is given.
        None also when the search runs out of time (evaluation without a formula
        enumerates) or leaves the parameter assumptions.
        """
        deadline = time.monotonic() + THRESHOLD_TIME_S

        class _Stop(Exception):
            pass

        def fits(x: int) -> bool | None:
            """True/False; None outside the parameter assumptions."""
            pt = {**others, param: x}
            if not _in_context(self.nest.context, pt):
                return None
            if time.monotonic() > deadline:
                raise _Stop
            v = f(pt)
            if v is None:
                raise _Stop
            return v <= capacity_lines

        try:
            lo = _context_min(self.nest.context, param, others)
            lo = 0 if lo is None else lo
            if fits(lo) is not True:
                return Threshold(param, None, fixed=others) if fits(lo) is False else None
            hi = max(2 * lo, lo + 1)
            while True:
                ok = fits(hi)
                if ok is None:  # the assumptions end before the cache fills
                    return Threshold(param, None, unbounded=True, fixed=others)
                if not ok:
                    break
                lo = hi
                if hi >= SEARCH_MAX:
                    return Threshold(param, None, unbounded=True, fixed=others)
                hi *= 2
            while hi - lo > 1:  # fits(lo) and not fits(hi)
                mid = (lo + hi) // 2
                if fits(mid):
                    lo = mid
                else:
                    hi = mid
            for x in (lo - 1, lo // 2):  # a dip below the answer would make it meaningless
                if x >= 0 and fits(x) is False:
                    return None
            if not f({**others, param: lo}):  # it fits only where the loop does not run: say nothing
                return None
        except _Stop:
            return None
        return Threshold(param, lo, fixed=others)


def _scaled_count(c: FCount, k: int) -> FCount:
    """k times a count (bytes from elements: the maximum is at the same place)."""
    return FCount(value=None if c.value is None else c.value * k,
                  formula=None if c.formula is None else c.formula.scale(k), note=c.note,
                  at_piece=c.at_piece, value_is=c.value_is, bound=c.bound, worst_at=c.worst_at,
                  lower_bound=c.lower_bound)


def _zero(nest: Nest) -> Any:
    """A zero formula (no array is touched)."""
    try:
        return engine.count(isl.Set.empty(nest.context.get_space()), nest.context)
    except Exception:  # a zero count is a convenience, never a reason to fail
        return None


def _in_context(context: isl.Set | None, values: Mapping[str, int]) -> bool:
    if context is None:
        return True
    s = context
    for i, name in enumerate(_params(s)):
        if name in values:
            s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(int(values[name]))))
    return not s.is_empty()


def _context_min(context: isl.Set, param: str, others: Mapping[str, int]) -> int | None:
    """Smallest value of `param` allowed by the context with the others fixed (None if unbounded)."""
    s = context
    names = _params(s)
    if param not in names:
        return 0
    for i, name in enumerate(names):
        if name in others:
            s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(int(others[name]))))
    k = names.index(param)
    s = s.move_dims(isl.dim_type.set, 0, isl.dim_type.param, k, 1)
    try:
        lex = s.lexmin()
        if lex.is_empty():
            return None
        pt = lex.sample_point()
        v = int(pt.get_coordinate_val(isl.dim_type.set, 0).to_python())
        return max(v, 0)
    except isl.Error:
        return None


def _sample(context: isl.Set, params: list[str], lo: int, hi: int) -> dict[str, int] | None:
    s = context
    for i in range(s.dim(isl.dim_type.param)):
        s = s.lower_bound_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(lo)))
        s = s.upper_bound_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(hi)))
    pt = s.sample_point()
    if pt.is_void():
        return None
    names = _params(s)
    return {n: int(pt.get_coordinate_val(isl.dim_type.param, i).to_python()) for i, n in enumerate(names)}


def _sign_patterns(n: int) -> list[tuple[int, ...]]:
    """Extreme-value patterns to try, all-largest first (the usual worst case), then the others."""
    import itertools

    return list(itertools.product((1, -1), repeat=n))


def _corner(outer: isl.Set, signs: tuple[int, ...], fixed: Sequence[str]) -> isl.Set | None:
    """The point of `outer` at the extreme values given by `signs`, outermost variable first.

    Lexicographic maximum after flipping the sign of the variables to minimise:
    the outermost variable takes its extreme value, then the next one given it, and so on.
    """
    n = outer.dim(isl.dim_type.set)
    xs = [f"x{k}" for k in range(n)]
    ys = [x if s > 0 else f"-{x}" for x, s in zip(xs, signs, strict=True)]
    try:
        flip = isl.Map(f"{{ [{', '.join(xs)}] -> [{', '.join(ys)}] }}")
        c = outer.reset_tuple_id().apply(flip).lexmax().apply(flip.reverse())
        for k, nm in enumerate(fixed):
            c = c.set_dim_name(isl.dim_type.set, k, nm)
        return c
    except isl.Error:
        return None


def _frac(v: isl.Val) -> Fraction:
    return Fraction(str(v))


def aff_qpoly(aff: isl.Aff) -> Any:
    """An isl quasi-affine expression of the parameters as an engine QPoly (None if not one)."""
    dt = isl.dim_type
    if aff.dim(dt.in_) and any(
            not aff.get_coefficient_val(dt.in_, k).is_zero() for k in range(aff.dim(dt.in_))):
        return None
    q = engine.QPoly.const(_frac(aff.get_constant_val()))
    for k in range(aff.dim(dt.param)):
        c = _frac(aff.get_coefficient_val(dt.param, k))
        if c:
            q = q + engine.QPoly.var(aff.get_dim_name(dt.param, k)) * c
    for k in range(aff.dim(dt.div)):
        c = _frac(aff.get_coefficient_val(dt.div, k))
        if not c:
            continue
        inner = aff_qpoly(aff.get_div(k))
        if inner is None:
            return None
        den = 1
        for coef in inner.terms.values():
            den = den * Fraction(coef).denominator // math.gcd(den, Fraction(coef).denominator)
        q = q + engine.QPoly.floor(inner * den, den) * c
    return q


def _corner_exprs(cset: isl.Set, fixed: Sequence[str], probes: list[dict[str, int]]) -> dict[str, Any] | None:
    """The extreme values of the fixed variables as QPolys of the sizes (the piece valid at the probes)."""
    try:
        pieces: list[tuple[isl.Set, isl.MultiAff]] = []
        cset.lexmax_pw_multi_aff().foreach_piece(lambda dom, ma: pieces.append((dom, ma)))
        for dom, ma in pieces:
            if not all(fix_params(dom, p) is not None and not fix_params(dom, p).is_empty() for p in probes):
                continue
            out = {}
            for k, name in enumerate(fixed):
                q = aff_qpoly(ma.get_aff(k))
                if q is None:
                    return None
                out[name] = q
            return out
    except (isl.Error, ValueError, AttributeError):
        return None
    return None


def _substituted(formula: Any, where: dict[str, Any], probes: list[tuple[dict[str, int], dict[str, int] | None]]) -> Any:
    """The formula's piece valid at the extreme values (at every probe), with them substituted."""
    if formula is None:
        return None
    try:
        chosen = None
        for piece in formula.pieces:
            if all(pt is not None and piece.contains({**p, **pt}) for p, pt in probes):
                chosen = piece
                break
        if chosen is None:
            return None
        q = chosen.poly.subs(where)
        for p, pt in probes:  # the substituted formula must agree with the evaluation
            if pt is not None and q.evaluate(p) != chosen.poly.evaluate({**p, **pt}):
                return None
        return q
    except (KeyError, ValueError, TypeError, AttributeError):
        return None


def _fmt_probes(maxima: list[tuple[dict[str, int], Any]]) -> str:
    parts = [", ".join(f"{k}={v}" for k, v in p.items()) or "no sizes" for p, _ in maxima]
    return " and ".join(parts) if parts else "no sizes"


def _fmt_at(at: Mapping[str, int]) -> str:
    return ", ".join(f"{k}={v}" for k, v in at.items()) or "any size"


# --------------------------------------------------------------------------
# Intensity


def asymptotic_ratio(num: Any, den: Any) -> str | None:
    """Ratio of the leading terms of two formulas as text ('N/12', '1/4', 'K*M*N/(4*(K*M + K*N + M*N))').

    The common numeric content and the common monomial factor are cancelled;
    None when either leading term is zero. (No sympy: it is slow to import.)
    """
    try:
        n = num.pieces[0].poly.leading_poly()
        d = den.pieces[0].poly.leading_poly()
    except (AttributeError, IndexError):
        return None
    if n.is_zero() or d.is_zero():
        return None

    def exps(m: tuple) -> dict[str, int]:
        return {a: e for a, e in m if isinstance(a, str)}

    def content(t: dict) -> Fraction:
        vals = [Fraction(v) for v in t.values()]
        g = 0
        lcd = 1
        for v in vals:
            g = math.gcd(g, v.numerator)
            lcd = lcd * v.denominator // math.gcd(lcd, v.denominator)
        c = Fraction(g, lcd)
        return -c if vals[0] < 0 else c

    nt = {tuple(sorted(exps(m).items())): v for m, v in n.terms.items()}
    dt = {tuple(sorted(exps(m).items())): v for m, v in d.terms.items()}
    cn, cd = content(nt), content(dt)
    coef = cn / cd
    names = {a for m in list(nt) + list(dt) for a, _ in m}
    common = {a: min(dict(m).get(a, 0) for m in list(nt) + list(dt)) for a in names}

    def strip(t: dict, c: Fraction) -> dict:
        out = {}
        for m, v in t.items():
            e = {a: k - common.get(a, 0) for a, k in m}
            out[tuple((a, k) for a, k in sorted(e.items()) if k)] = Fraction(v) / c
        return out

    nt, dt = strip(nt, cn), strip(dt, cd)
    num_q = engine.QPoly({m: v * coef.numerator for m, v in nt.items()})
    den_factors: list[str] = []
    if coef.denominator != 1:
        den_factors.append(str(coef.denominator))
    if len(dt) > 1 or (dt and next(iter(dt)) != ()):
        den_text = engine.QPoly(dt).to_expr()
        den_factors.append(f"({den_text})" if len(dt) > 1 else den_text)
    num_text = num_q.to_expr()
    if not den_factors:
        return num_text
    if " " in num_text:
        num_text = f"({num_text})"
    den_text = "*".join(den_factors)
    atomic = len(den_factors) == 1 and (den_text.startswith("(") or not any(ch in den_text for ch in "*+- "))
    return f"{num_text}/{den_text}" if atomic else f"{num_text}/({den_text})"


def intensity(nest_flops: flops_mod.Flops, footprint: Footprint, nest: Nest, options: Options) -> Intensity:
    """Flops per compulsory byte: at the --at sizes, asymptotically, and a roofline estimate if configured."""
    fc = nest_flops.count
    bc = footprint.bytes
    value = None
    if fc.value is not None and bc.value:
        value = Fraction(fc.value) / Fraction(bc.value)
    asym = None
    if fc.formula is not None and bc.formula is not None and not fc.formula.is_zero() and not bc.formula.is_zero():
        asym = asymptotic_ratio(fc.formula, bc.formula)
    roof = None
    if options.peak_gflops and options.bandwidth_gbs and value is not None:
        mem = float(value) * float(options.bandwidth_gbs)
        attain = min(float(options.peak_gflops), mem)
        roof = {"attainable_gflops": round(attain, 3), "peak_gflops": options.peak_gflops,
                "bandwidth_gbs": options.bandwidth_gbs,
                "bound_by": "memory bandwidth" if mem < float(options.peak_gflops) else "compute",
                "note": "model estimate: attainable = min(peak, intensity * bandwidth), compulsory traffic only"}
    note = None
    if bc.value is None and bc.note:
        note = bc.note
    if footprint.lower_bound:
        note = "upper bound: the footprint it divides by leaves references out (a lower bound)"
    return Intensity(value, asym, roof, note, upper_bound=footprint.lower_bound)


# --------------------------------------------------------------------------
# Text


def _piece_expr(c: Count, point: Mapping[str, int] | None = None) -> str | None:
    """Formula text of a count: the piece valid at `point` (the --at sizes), else the generic piece."""
    if c.formula is None:
        return None
    pieces = list(c.formula.pieces)
    if not pieces:
        return "0"
    if point:
        for p in pieces:
            try:
                if p.contains(point):
                    return p.poly.to_expr()
            except (KeyError, AttributeError):
                break
    return pieces[0].poly.to_expr()


def _short(expr: str, c: Count, limit: int = 44) -> str:
    """A long formula is shown by its leading term (the JSON report has it all)."""
    if len(expr) <= limit or c.formula is None:
        return expr
    return "~" + c.formula.leading()


def _value_text(c: Count | None, unit: str = "") -> str:
    if c is None or c.value is None:
        return "-"
    v = c.value
    if unit == "bytes":
        text = fmt_bytes(v)
    else:
        text = f"{int(v):,}" if isinstance(v, int) else str(v)
    if getattr(c, "bound", False) and getattr(c, "lower_bound", False):
        return "unknown"  # an upper bound of a footprint that misses references bounds nothing
    if getattr(c, "bound", False):
        text = "<= " + text
    elif getattr(c, "lower_bound", False):
        text = ">= " + text
    return text


def _sources(h: CacheHierarchy) -> str:
    names = {"host": "from this host", "default": "default (host not read)", "configured": "configured"}
    return ", ".join(sorted({names.get(lv.source, lv.source) for lv in h.levels}))


def _caches_text(h: CacheHierarchy) -> str:
    sources = {lv.source for lv in h.levels}
    levels = ", ".join(f"{lv.name} {fmt_bytes(lv.size)}" + ("" if len(sources) == 1 else f" ({lv.source})")
                       for lv in h.levels)
    where = {"host": " from this host", "default": " (defaults: host not read)", "configured": " (configured)"}
    return levels + (where.get(next(iter(sources)), "") if len(sources) == 1 else "") + f", {h.line_size} B lines"


def text_table(nf: NestFootprint) -> list[str]:
    """The per-level working-set table and the nest totals (footprint, flops, intensity)."""
    out: list[str] = []
    at = _fmt_at(nf.at)
    if not nf.levels and not nf.footprint.by_array:
        out.append("working sets: unknown (the nest could not be modelled)")
    else:
        out.append(f"working sets (model estimate: {_caches_text(nf.caches)}; fully associative, capacity only):")
        head = ("loop", "bytes touched by all its iterations, outer variables fixed",
                f"at {at}" if nf.at else "", "in lines" if nf.at else "", "fits" if nf.at else "", "reused by")
        rows = [head]
        for ws in nf.levels:
            fp = ws.whole
            point = nf.at if nf.at and not fp.fixed else None
            expr = _piece_expr(fp.bytes, point)
            if fp.typical_piece is not None and fp.bytes.formula is not None:
                expr = fp.bytes.formula.pieces[fp.typical_piece].poly.to_expr()
            if expr is not None:
                expr = _short(expr, fp.bytes)
            else:
                el = _piece_expr(fp.elements, point)
                expr = (_short(el, fp.elements) + " elements") if el is not None else (
                    "no formula" if fp.bytes.value is not None else (fp.bytes.note or "unknown"))
            if fp.fixed:
                expr += f"  (for each {', '.join(fp.fixed)})"
            fits = ""
            if ws.fits:
                fitting = [k for k, ok in ws.fits.items() if ok]
                fits = fitting[0] if fitting else "none"
                thr = [(f"{k} while {t.text()}" if t.largest is not None and t.largest >= 1 else
                        f"{k}: {t.text()}") for k, t in ws.thresholds.items()
                       if not ws.fits.get(k, True) and not t.unbounded]
                if thr:
                    fits += f" ({thr[-1]})"
            reuse = "-" if ws.loop.parent is None else (
                f"loop {ws.outer_var}" if ws.reuse else ("nothing" if ws.reuse is False else "?"))
            value = _value_text(fp.bytes, "bytes") if nf.at else ""
            if nf.at and fp.bytes.value is None and fp.elements.value is not None:
                value = f"{_value_text(fp.elements)} elements"
            in_lines = fmt_bytes(ws.occupancy) if ws.occupancy is not None else ("-" if nf.at else "")
            if ws.occupancy is not None and fp.lower_bound and not fp.lines.bound:
                in_lines = ">= " + in_lines
            rows.append((f"{ws.loop.var} (line {ws.loop.span.line})", expr, value, in_lines, fits, reuse))
        widths = [min(max(len(r[k]) for r in rows), 60) for k in range(6)]
        for r in rows:
            cells = [r[k].ljust(widths[k]) for k in range(6)]
            out.append("  " + "  ".join(c for c in cells if c.strip() or c == cells[0]).rstrip())
        if nf.at:
            out.append("  (values: the largest over the outer loop variables; 'in lines': the whole cache lines "
                       "they occupy; 'fits': the smallest cache holding them)")
        partial = [ws for ws in nf.levels if ws.whole.lower_bound]
        if partial:
            out.append("  (>=: a lower bound, the loop's references that are not modelled are left out: "
                       + ", ".join(f"loop {ws.loop.var}" for ws in partial) + ")")
    fp = nf.footprint
    n_arr = len(fp.by_array)
    if n_arr:
        el = _piece_expr(fp.elements, nf.at or None) or "-"
        line = f"footprint of the nest: {n_arr} array{'s' if n_arr != 1 else ''}, {_short(el, fp.elements)} elements"
        by = _piece_expr(fp.bytes, nf.at or None)
        if by is not None:
            line += f", {_short(by, fp.bytes)} bytes"
        if nf.at and fp.bytes.value is not None:
            line += f" {'>=' if fp.lower_bound else '='} {fmt_bytes(fp.bytes.value)} at {at}"
        elif fp.bytes.note and fp.bytes.value is None:
            line += f" ({fp.bytes.note})"
        out.append(line)
    for note in fp.notes:
        if not note.startswith("formula not available"):
            out.append(f"  note: {note}")
    if nf.flops is not None:
        out.extend(_flops_lines(nf, at))
    return out


def _flops_lines(nf: NestFootprint, at: str) -> list[str]:
    f = nf.flops
    if f is None:
        return []
    total = f.count
    if total.formula is not None and total.formula.is_zero() or total.value == 0 and total.formula is None:
        return ["flops: none (no floating-point arithmetic)"]
    expr = _piece_expr(total, nf.at or None)
    line = "flops " + (_short(expr, total) if expr is not None else "unknown")
    if nf.at and total.value is not None:
        line += f" = {_value_text(total)}"
    kinds = []
    for k in ("add", "mul", "div"):
        c = f.kinds[k].count
        if c.value or (c.formula is not None and not c.formula.is_zero()):
            kinds.append(f"{k} {_value_text(c) if nf.at and c.value is not None else c.formula.leading()}")
    for name, wc in sorted(f.calls.items()):
        c = wc.count
        if c.value or (c.formula is not None and not c.formula.is_zero()):
            kinds.append(f"{name} {_value_text(c) if nf.at and c.value is not None else c.formula.leading()}")
    if kinds:
        line += f" ({', '.join(kinds)})"
    out = [line]
    it = nf.intensity
    if it is not None and (it.value is not None or it.asymptotic):
        parts = []
        if it.asymptotic:
            parts.append(f"{it.asymptotic} flop/byte for large sizes")
        if it.value is not None:
            parts.append(f"{float(it.value):.3g} at {at}")
        out.append("arithmetic intensity " + ("at most " if it.upper_bound else "") + "; ".join(parts)
                   + " (model estimate: flops / compulsory bytes, each moved once"
                   + ("; the footprint is a lower bound)" if it.upper_bound else ")"))
        if it.roofline:
            r = it.roofline
            out.append(f"roofline estimate: {'at most ' if it.upper_bound else ''}{r['attainable_gflops']:g} "
                       f"GFLOP/s attainable, bound by {r['bound_by']} "
                       f"(model estimate: peak {r['peak_gflops']:g} GFLOP/s, {r['bandwidth_gbs']:g} GB/s)")
    return out


# --------------------------------------------------------------------------
# Entry


def analyze(result: NestResult, options: Options) -> None:
    """Footprints of every loop level and of the nest, cache fit, flops and intensity of one nest."""
    nest = result.nest
    scalar_types = getattr(nest, "scalar_types", None)
    total_flops = flops_mod.analyze(result, options, scalar_types=scalar_types)
    an = _Analyzer(result, options)
    diags = result.diagnostics
    unknown = sorted(a.name for a in an.arrays.values() if not a.elem)
    if unknown:
        diags.append(ElementSizeUnknown(nest.span, arrays=", ".join(f"'{a}'" for a in unknown)))
    for name, (first, other) in sorted(an.mixed.items()):
        k, m = first.map.dim(isl.dim_type.out), other.map.dim(isl.dim_type.out)
        diags.append(FootprintRefused(
            other.span, what=f"array '{name}'",
            reason=(f"it is used with {m} subscript{'s' if m != 1 else ''} here and with {k} "
                    f"subscript{'s' if k != 1 else ''} at {first.span.line}:{first.span.column}, so its elements "
                    "have no single index space; its references are left out and the working sets that contain "
                    "them are lower bounds")))
    assumptions = LAYOUT_NOTE + "; cache fit: " + CACHE_ASSUMPTIONS
    levels: list[WorkingSet] = []
    by_index: dict[int, LoopResult] = {lr.loop.index: lr for lr in result.loops}
    refused_stmts = [s for s in nest.statements if s.domain is None]
    refused_loops: list[Loop] = []
    # the gate (options.detail == "gate") holds only innermost working sets against budgets
    has_inner = {lp.parent for lp in nest.loops if lp.parent is not None} if options.gate else set()
    for loop in nest.loops:
        if loop.index in has_inner:
            continue
        stmts = an.statements_in(loop)
        if loop.domain is None or any(s.domain is None for s in stmts):
            refused_loops.append(loop)
            continue
        chain = an.chain(loop)
        fixed = tuple(lp.var for lp in chain[:-1])
        parent = nest.loops[loop.parent] if loop.parent is not None else None
        whole_label = (f"all iterations of loop '{loop.var}', with {', '.join(fixed)} fixed" if fixed
                       else f"all iterations of loop '{loop.var}' (the whole nest)")
        whole = an.scope(stmts, fixed, parent.domain if parent else None, whole_label)
        it_label = (f"one iteration of loop '{loop.var}' (its body for one value of {loop.var}"
                    + (f", with {', '.join(fixed)} fixed)" if fixed else ")"))
        per_it = None if options.gate else an.scope(stmts, fixed + (loop.var,), loop.domain, it_label,
                                                    line_formulas=False)
        reuse = an.reuse(stmts, an.statements_in(parent), parent.depth) if parent is not None else None
        ws = WorkingSet(loop, whole, per_it, reuse, assumptions=assumptions,
                        outer_var=parent.var if parent is not None else None)
        an.cache_fit(ws)
        if loop.index in by_index:
            by_index[loop.index].extras["working_set"] = ws
        levels.append(ws)
        _flag(ws, an, diags)
    if refused_loops:
        first = refused_loops[0]
        names = ", ".join("'for (;;)'" if lp.display == "?" else f"'{lp.var}'" for lp in refused_loops)
        diags.append(FootprintRefused(first.header, what=f"loop{'s' if len(refused_loops) > 1 else ''} {names}",
                                      reason="statements inside could not be modelled"))
    # whole nest: every statement, nothing fixed
    good = [s for s in nest.statements if s.domain is not None]
    nest_fp = an.scope(good, (), None, "the whole nest (compulsory footprint)")
    if refused_stmts:
        an._mark_lower_bound(nest_fp, "statements that could not be modelled are left out ("
                             + ", ".join(s.id for s in refused_stmts) + ")")
    limit_notes: list[str] = []
    for fp in [nest_fp] + [w.whole for w in levels] + [w.per_iteration for w in levels if w.per_iteration]:
        for note in fp.notes:
            if note.startswith("formula not available") and note not in limit_notes:
                limit_notes.append(note)
    if limit_notes:
        missing = [p for p in nest.params if p not in an.at]
        fallback = ("the values at the --at sizes are exact enumerations" if an.has_at and nest.params
                    else f"give --at sizes (for {', '.join(missing)}) for exact values")
        reason = limit_notes[0][len("formula not available ("):].rsplit("):", 1)[0]
        diags.append(FootprintLimit(nest.span, what="some working sets of this nest", reason=reason,
                                    fallback=fallback))
    nf = NestFootprint(nest_fp, levels, an.caches, dict(an.at) if an.has_at else {}, total_flops)
    nf.intensity = intensity(total_flops, nest_fp, nest, options)
    result.extras["footprint"] = nf
    result.extras["intensity"] = nf.intensity


def _flag(ws: WorkingSet, an: _Analyzer, diags: list[Diagnostic]) -> None:
    """TC401 when the loop's working set exceeds a cache level at the --at sizes and the enclosing loop
    reuses its lines."""
    if not ws.fits or ws.occupancy is None or not ws.reuse:
        return
    exceeded = [lv for lv in an.caches.levels if not ws.fits.get(lv.name, True)]
    if not exceeded:
        return
    largest = exceeded[-1]
    fitting = [lv for lv in an.caches.levels if ws.fits.get(lv.name)]
    fits_text = f"; it fits {fitting[0].name} ({fmt_bytes(fitting[0].size)})" if fitting else ""
    parts = []
    others: dict[str, int] = {}
    for lv in exceeded:
        t = ws.thresholds.get(lv.name)
        if t is None:
            continue
        others = t.fixed
        if t.largest is None or t.largest < 1:
            parts.append(f"it cannot fit {lv.name} for any {t.param} >= 1")
        else:
            parts.append(f"it would fit {lv.name} {'at least ' if t.safe else ''}while {t.text()}")
    threshold = ("; " + "; ".join(parts) + (f" ({_fmt_at(others)} fixed)" if others else "")) if parts else ""
    fp = ws.whole
    at = _fmt_at(an.at)
    if fp.fixed:
        at += " (largest over " + ", ".join(fp.fixed) + ")"
    diags.append(WorkingSetExceedsCache(
        ws.loop.header, var=ws.loop.var, line=ws.loop.span.line,
        size=("at least " if fp.lower_bound else "") + fmt_bytes(ws.occupancy), at=at,
        level=largest.name, capacity=fmt_bytes(largest.size), outer=ws.outer_var, fits=fits_text, threshold=threshold,
        assumptions=CACHE_MODEL_SHORT + f", whole {an.caches.line_size} B lines; cache sizes {_sources(an.caches)}"))
