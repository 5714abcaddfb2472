# Analysis: --verify for the working sets -- every element, byte and cache
# line count the footprint analysis prints, per array and in total, for the
# whole nest, for each loop with its outer variables fixed (the largest over
# them) and for one iteration of each loop, against brute-force enumeration.
#
# At fixed sizes every statement instance is listed (verify_enum) and every
# reference's element is computed from its subscripts; the distinct elements
# are collected per scope and per value of the fixed loop variables. Lines
# follow the layout the footprint analysis states (results.LAYOUT_NOTE):
# arrays start on a line boundary and do not overlap; at the --at sizes the
# packed row-major layout of the declared type when the inner extents are
# numbers there (byte = elem * (i0*E1*...*En + ... + i_last), line = byte //
# line size), else every row starting on a line boundary (line = (i0, ...,
# elem*i_last // line size)); formulas in the sizes use the packed layout
# only when every inner extent is a constant. Checked:
#   * at the --at sizes: each value (the largest over the fixed variables),
#     exact, or on its side when marked as an upper or lower bound; the worst
#     case's values, the cache occupancy and the arithmetic intensity;
#   * at a few small sizes: each formula (evaluated, and as printed, read back
#     with tripcount.formula) at values of the fixed variables, and the worst
#     case over them as a function of the sizes (an upper bound must hold);
#   * each cache-fit threshold P <= T: the largest working set fits at P = T
#     and not at T + 1 (fits only, for a safe bound), smallest T first, while
#     the enumeration budget lasts.
# A value of a footprint that leaves references out (lower_bound) is checked
# as a lower bound of what the modelled references touch.

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount.analysis.footprint.exact import inner_extents
from tripcount.analysis.results import NestResult
from tripcount.analysis.verify_enum import (
    Budget,
    OverBudget,
    Tally,
    afford,
    as_number,
    compare,
    compare_formula,
    fix_sizes,
    point_label,
    scan,
    size_points,
    subscripts,
)
from tripcount.formula import parse_expr
from tripcount.model import Access, Nest
from tripcount.options import Options

MAX_GROUPS = 40  # values of the fixed variables at which one formula is checked per size point
KEYS = ("elements", "bytes", "lines")


@dataclass
class _Array:
    elem: int | None
    access: Access  # a representative reference: declared extents


@dataclass
class _Scope:
    """One printed footprint: where it is, what is fixed, and its key in the enumeration."""

    label: str
    fp: Any  # results.Footprint
    loop: int | None  # index of the loop (None: the whole nest)
    n_fixed: int  # leading loop variables fixed (per value of them, a separate count)
    occupancy: Any = None  # the WorkingSet whose occupancy follows from these lines


def _arrays(nest: Nest, options: Options) -> dict[str, _Array]:
    """Arrays whose references are all modelled with one rank (the others are left out of the
    footprints, which then say they are lower bounds)."""
    ranks: dict[str, set[int]] = {}
    out: dict[str, _Array] = {}
    for s in nest.statements:
        if s.domain is None:
            continue
        for a in s.accesses:
            if a.map is None:
                continue
            ranks.setdefault(a.array, set()).add(a.map.dim(isl.dim_type.out))
            info = out.setdefault(a.array, _Array(a.elem_size or None, a))
            if info.elem is None and a.elem_size:
                info.elem = a.elem_size
    for info in out.values():
        if info.elem is None and options.elem_size:
            info.elem = int(options.elem_size)
    return {n: a for n, a in out.items() if len(ranks[n]) == 1}


def _scopes(result: NestResult) -> list[_Scope]:
    nf = result.extras.get("footprint")
    if nf is None:
        return []
    out = [_Scope("the footprint of the nest", nf.footprint, None, 0)]
    for ws in nf.levels:
        lp = ws.loop
        where = f"loop '{lp.var}' (line {lp.header.line})"
        out.append(_Scope(f"the working set of {where}", ws.whole, lp.index, lp.depth, ws))
        if ws.per_iteration is not None:
            out.append(_Scope(f"one iteration of {where}", ws.per_iteration, lp.index, lp.depth + 1))
    return out


Touched = dict[tuple[int | None, int], dict[tuple[int, ...], dict[str, set[tuple[int, ...]]]]]


def _touched(nest: Nest, arrays: Mapping[str, _Array], keys: set[tuple[int | None, int]],
             sizes: Mapping[str, int], budget: Budget) -> Touched:
    """Per scope key (loop, number of fixed variables): per value of the fixed variables, the
    elements each array has touched (raises OverBudget)."""
    out: Touched = {k: {} for k in keys}
    doms = [fix_sizes(s.domain, sizes) for s in nest.statements if s.domain is not None]
    afford([d for d in doms if d is not None], budget)
    for s in nest.statements:
        if s.domain is None:
            continue
        dom = fix_sizes(s.domain, sizes)
        if dom is None:
            raise KeyError("a size is missing")
        refs = [(a.array, subscripts(a, s.domain, sizes)) for a in s.accesses if a.array in arrays]
        mine = [(k, n) for k, n in keys if k is None or k in s.loops]
        targets = [(out[(k, n)], n) for k, n in mine]
        for pt in scan(dom, budget):
            elems = [(name, f(pt)) for name, f in refs if f is not None]
            for groups, n in targets:
                g = groups.setdefault(pt[:n], {})
                for name, e in elems:
                    g.setdefault(name, set()).add(e)
    return out


def _line_of(idx: tuple[int, ...], elem: int, line: int, strides: list[int] | None) -> Any:
    if strides is not None:  # packed row-major layout, the array starting on a line boundary
        return elem * sum(st * x for st, x in zip(strides, idx, strict=True)) // line
    return idx[:-1] + (elem * idx[-1] // line,)  # every row starting on a line boundary


def _strides(acc: Access, sizes: Mapping[str, int] | None) -> list[int] | None:
    """Element strides of the packed layout (None: rows aligned). `sizes` None: only when every inner
    extent is a constant (the layout of the formulas)."""
    n = acc.map.dim(isl.dim_type.out) if acc.map is not None else 0
    ext = inner_extents(acc, sizes or {})
    if ext is None:
        return None
    return [math.prod(ext[k:]) for k in range(n)]


def _metrics(group: Mapping[str, set[tuple[int, ...]]], arrays: Mapping[str, _Array], names: Sequence[str],
             line: int, strides: Mapping[str, list[int] | None]) -> dict[tuple[str, str], int | None]:
    """(array or '' for the total, key) -> the number, for one value of the fixed variables."""
    out: dict[tuple[str, str], int | None] = {}
    tot: dict[str, int | None] = {"elements": 0, "bytes": 0, "lines": 0}
    for name in names:
        els = group.get(name, set())
        elem = arrays[name].elem
        out[(name, "elements")] = len(els)
        out[(name, "bytes")] = None if elem is None else len(els) * elem
        out[(name, "lines")] = None if elem is None else len({_line_of(e, elem, line, strides[name]) for e in els})
        for key in KEYS:
            v = out[(name, key)]
            tot[key] = None if v is None or tot[key] is None else tot[key] + v  # type: ignore[operator]
    for key in KEYS:
        out[("", key)] = tot[key]
    return out


def _side(c: Any) -> str | None:
    if getattr(c, "bound", False) or getattr(c, "value_bound", None) == "upper":
        return "upper"
    if getattr(c, "value_bound", None) == "lower" or getattr(c, "lower_bound", False):
        return "lower"
    return None


def _counts(fp: Any) -> list[tuple[str, str, Any]]:
    """(array or '', key, count object) of every count a footprint prints."""
    out = [("", k, getattr(fp, k)) for k in KEYS]
    for name, a in fp.by_array.items():
        out += [(name, k, getattr(a, k)) for k in KEYS]
    return out


def _what(sc: _Scope, name: str, key: str) -> str:
    return f"{key} of {sc.label}" + (f" for array '{name}'" if name else "")


class _Checker:
    def __init__(self, result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
        self.result = result
        self.nest = result.nest
        self.options = options
        self.budget = budget
        self.tally = tally
        nf = result.extras.get("footprint")
        self.line = nf.caches.line_size if nf is not None else options.line_size
        self.caches = nf.caches if nf is not None else None
        self.arrays = _arrays(self.nest, options)
        self.scopes = _scopes(result)

    def check(self, what: str, got: Any, want: int | Fraction | None, side: str | None,
              pt: Mapping[str, int]) -> bool:
        return compare(self.result, self.tally, what, got, want, pt, side)

    def enumerate_at(self, sizes: Mapping[str, int], reuse: bool = False) -> Touched | None:
        keys = {(sc.loop, sc.n_fixed) for sc in self.scopes}
        if reuse:  # one iteration of each enclosing loop whose reuse is printed
            keys |= {(p.index, p.depth + 1) for p in self.reuse_parents()}
        try:
            return _touched(self.nest, self.arrays, keys, sizes, self.budget)
        except OverBudget:
            return None

    def table(self, sc: _Scope, touched: Touched, strides: Mapping[str, list[int] | None]
              ) -> dict[tuple[int, ...], dict[tuple[str, str], int | None]]:
        names = [n for n in sc.fp.by_array if n in self.arrays]
        groups = touched[(sc.loop, sc.n_fixed)]
        return {g: _metrics(els, self.arrays, names, self.line, strides) for g, els in groups.items()}

    def reuse_parents(self) -> list[Any]:
        out = []
        for sc in self.scopes:
            ws = sc.occupancy
            if ws is not None and ws.reuse is not None and ws.loop.parent is not None:
                out.append(self.nest.loops[ws.loop.parent])
        return out

    def check_reuse(self, sc: _Scope, touched: Touched, strides: Mapping[str, list[int] | None],
                    at: Mapping[str, int]) -> None:
        """'reused by': whether the enclosing loop touches a line of this loop's working set again in a
        later iteration (in the order it runs), the loops around it at the same values."""
        ws = sc.occupancy
        parent = self.nest.loops[ws.loop.parent]
        d = parent.depth
        mine = touched[(sc.loop, sc.n_fixed)]
        theirs = touched[(parent.index, d + 1)]
        sign = 1 if (parent.step or 1) > 0 else -1

        def lines(group: Mapping[str, set[tuple[int, ...]]]) -> set[tuple[str, Any]]:
            out = set()
            for name, els in group.items():
                a = self.arrays[name]
                out |= {(name, _line_of(e, a.elem, self.line, strides[name]) if a.elem else e) for e in els}
            return out

        by_outer: dict[tuple[int, ...], list[tuple[int, ...]]] = {}
        for g in set(theirs) | set(mine):
            by_outer.setdefault(g[:d], []).append(g)
        found = False
        for gs in by_outer.values():
            later: set[tuple[str, Any]] = set()
            for g in sorted(gs, key=lambda g: -sign * g[d]):  # the last iteration first
                if g in mine and lines(mine[g]) & later:
                    found = True
                    break
                if g in theirs:
                    later |= lines(theirs[g])
            if found:
                break
        self.check(f"reuse by loop '{parent.var}' of the lines of {sc.label} (1: reused, 0: not)",
                   int(bool(ws.reuse)), int(found), None, at)

    # --- at the --at sizes
    def values_at(self, at: Mapping[str, int]) -> None:
        touched = self.enumerate_at(at, reuse=True)
        if touched is None:
            self.tally.skip(f"working sets at {point_label(at)} (more statement instances than the "
                            "enumeration budget of the nest)")
            return
        self.tally.points.add(tuple(sorted(at.items())))
        strides = {n: _strides(a.access, at) for n, a in self.arrays.items()}
        flops = self.result.extras.get("flops")
        for sc in self.scopes:
            if any(n not in self.arrays for n in sc.fp.by_array):
                self.tally.skip(f"{sc.label} (an array is used with several ranks)")
                continue
            rows = self.table(sc, touched, strides)
            best = {ck: max((r[ck] or 0 for r in rows.values()), default=0) for ck in _keys(sc)}
            over = f" (the largest over {', '.join(sc.fp.fixed)})" if sc.n_fixed else ""
            for name, key, c in _counts(sc.fp):
                want = best.get((name, key)) if all(r.get((name, key)) is not None for r in rows.values()) else None
                self.check(_what(sc, name, key) + over, getattr(c, "value", None), want, _side(c), at)
            w = sc.fp.worst
            if w is not None:
                side = "upper" if w.bound else ("lower" if w.lower_bound else None)
                for key in KEYS:
                    if ("", key) in best:
                        self.check(f"worst case of {key} of {sc.label}", w.values.get(key), best[("", key)], side, at)
            ws = sc.occupancy
            if ws is not None and ws.occupancy is not None and best.get(("", "lines")) is not None:
                true = best[("", "lines")] * self.line
                self.check(f"cache occupancy in bytes of {sc.label}", ws.occupancy, true, _side(sc.fp.lines), at)
                for lv in self.caches.levels:
                    if lv.name in ws.fits:
                        self.check(f"whether {sc.label} fits {lv.name} (1: fits, 0: not)", int(ws.fits[lv.name]),
                                   int(true <= lv.size), None, at)
            if ws is not None and ws.reuse is not None and not sc.fp.lower_bound:
                self.check_reuse(sc, touched, strides, at)
            if sc.loop is None and flops is not None:
                inten = self.result.extras.get("intensity")
                fv = as_number(flops.count.value)
                by = best.get(("", "bytes"))
                if inten is not None and inten.value is not None and fv is not None and by:
                    self.check("arithmetic intensity", inten.value, fv / by, "upper" if inten.upper_bound else None, at)

    # --- formulas at small sizes
    def formulas_at(self, pt: Mapping[str, int]) -> None:
        touched = self.enumerate_at(pt)
        if touched is None:
            self.tally.skip(f"working-set formulas at {point_label(pt)} (enumeration budget spent)")
            return
        self.tally.points.add(tuple(sorted(pt.items())))
        strides = {n: _strides(a.access, None) for n, a in self.arrays.items()}
        for sc in self.scopes:
            if any(n not in self.arrays for n in sc.fp.by_array):
                continue
            rows = self.table(sc, touched, strides)
            picked = _spread(sorted(rows), MAX_GROUPS)
            for name, key, c in _counts(sc.fp):
                f = getattr(c, "formula", None)
                if f is None:
                    continue
                side = "lower" if getattr(c, "lower_bound", False) else None
                for g in picked:
                    want = rows[g].get((name, key))
                    values = {**pt, **dict(zip(sc.fp.fixed, g, strict=True))}
                    if not self._formula(_what(sc, name, key), f, values, want, side):
                        break
            self.worst_at(sc, rows, pt)

    def _formula(self, what: str, f: Any, values: Mapping[str, int], want: int | None, side: str | None) -> bool:
        return compare_formula(self.result, self.tally, what, f, values, want, side)

    def worst_at(self, sc: _Scope, rows: Mapping[tuple[int, ...], Mapping[tuple[str, str], int | None]],
                 pt: Mapping[str, int]) -> None:
        w = sc.fp.worst
        if w is None or not rows:
            return
        side = "upper" if w.bound else ("lower" if w.lower_bound else None)
        for key in KEYS:
            if any(r.get(("", key)) is None for r in rows.values()):
                continue
            want = max(r[("", key)] or 0 for r in rows.values())
            what = f"worst case over {', '.join(sc.fp.fixed)} of {key} of {sc.label}"
            if w.counts is not None:
                c = w.counts.get(key)
                if c is not None and c.formula is not None:
                    self._formula(f"the {what}", c.formula, pt, want, "upper")
                continue
            q = w.exprs.get(key)
            if q is not None:
                try:
                    if self.check(f"formula for the {what}", q.evaluate(dict(pt)), want, side, pt):
                        self.check(f"printed formula for the {what}", parse_expr(q.to_expr()).evaluate(dict(pt)),
                                   want, side, pt)
                except (KeyError, ValueError, ZeroDivisionError) as exc:
                    self.tally.skip(f"formula for the {what} ({exc})")


    # --- cache-fit thresholds
    def _affordable(self, sizes: Mapping[str, int]) -> bool:
        """Whether the statement instances at `sizes` fit the enumeration budget, from the exact
        statement counts (no integer-set operation: a threshold can lie at sizes in the millions)."""
        total = 0
        for sr in self.result.statements:
            f = sr.count.formula
            if sr.stmt.domain is None or f is None:
                return False
            try:
                total += int(f.evaluate(dict(sizes)))
            except (KeyError, ValueError, ZeroDivisionError):
                return False
            if total > self.budget.instances:
                return False
        return True

    def thresholds(self) -> None:
        """Each printed 'fits L while P <= T': the largest working set over the fixed variables, in the
        layout the threshold states, fits L at P = T and (unless it is a safe bound) not at T + 1."""
        if self.caches is None:
            return
        capacity = {lv.name: lv.size for lv in self.caches.levels}
        todo = []
        for sc in self.scopes:
            ws = sc.occupancy
            if ws is None or not ws.thresholds:
                continue
            if any(n not in self.arrays for n in sc.fp.by_array) or sc.fp.lower_bound:
                self.tally.skip(f"cache-fit thresholds of {sc.label} (not every reference is modelled)")
                continue
            todo += [(t.largest, sc, level, t) for level, t in ws.thresholds.items()
                     if not t.unbounded and t.largest is not None and t.largest >= 1 and level in capacity]
        for _, sc, level, t in sorted(todo, key=lambda x: x[0]):
            for value, claim in [(t.largest, True)] + ([] if t.safe else [(t.largest + 1, False)]):
                sizes = {**t.fixed, t.param: value}
                try:
                    if not self.budget.left() or not self._affordable(sizes):
                        raise OverBudget
                    touched = _touched(self.nest, self.arrays, {(sc.loop, sc.n_fixed)}, sizes, self.budget)
                except (OverBudget, KeyError):
                    self.tally.skip(f"cache-fit threshold {t.text()} for {level} of {sc.label} (enumeration "
                                    "budget of the nest spent)")
                    break
                # the layout the threshold was found in: packed where checked, else rows aligned
                strides = {n: (None if t.assumes else _strides(a.access, sizes)) for n, a in self.arrays.items()}
                rows = self.table(sc, touched, strides)
                if any(r.get(("", "lines")) is None for r in rows.values()):
                    break
                lines = max((r[("", "lines")] or 0 for r in rows.values()), default=0)
                self.tally.points.add(tuple(sorted(sizes.items())))
                self.check(f"whether {sc.label} fits {level} at {point_label(sizes)} (threshold {t.text()}; "
                           "1: fits, 0: not)", int(claim), int(lines * self.line <= capacity[level]), None, sizes)


def _keys(sc: _Scope) -> list[tuple[str, str]]:
    return [(name, key) for name, key, _ in _counts(sc.fp)]


def _spread(items: Sequence[Any], n: int) -> list[Any]:
    """At most `n` of `items`, evenly spread, the first and the last included."""
    if len(items) <= n:
        return list(items)
    step = (len(items) - 1) / (n - 1)
    return [items[round(k * step)] for k in range(n)]


def verify_at(result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
    """Check every working-set value at the --at sizes against brute-force enumeration."""
    ch = _Checker(result, options, budget, tally)
    nest = result.nest
    at = options.sizes(nest.params) if nest.params else {}
    if ch.scopes and at is not None:
        ch.values_at(at)


def verify_thresholds(result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
    """Check every cache-fit threshold at it and one past it (smallest first: the cheapest to enumerate)."""
    _Checker(result, options, budget, tally).thresholds()


def verify_formulas(result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
    """Check every working-set formula, and the worst cases, at a few small sizes."""
    ch = _Checker(result, options, budget, tally)
    if not ch.scopes:
        return
    nest = result.nest
    for pt in size_points(nest, options.sizes(nest.params) if nest.params else {}):
        if not budget.left():
            tally.skip(f"working-set formulas at {point_label(pt)} (enumeration budget spent)")
            continue
        ch.formulas_at(pt)
