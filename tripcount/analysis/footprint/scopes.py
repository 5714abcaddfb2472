# Footprint: the scopes of one nest. For a set of statements with some outer
# loop variables held fixed, the distinct elements, bytes and cache lines
# touched per array and in total (counts of the images of the iteration
# domains under the access maps, not sums of references), their values at
# the --at sizes, and whether an enclosing loop touches the same lines again.

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount.analysis.caches import hierarchy
from tripcount.analysis.footprint.exact import (
    CHECK_BUDGET_S,
    ExactBudget,
    Max,
    ScopeValues,
    inner_extents,
    packed_line_map,
    scope_values,
)
from tripcount.analysis.footprint.isets import (
    _in_context,
    _name_in,
    _outer_at,
    _outer_part,
    _sample,
    access_image,
    line_map,
    simplify,
)
from tripcount.analysis.footprint.quantities import (
    ELEMENTS_TIME_S,
    LINES_TIME_S,
    Missing,
    _formula,
    _Quantity,
    _scaled_count,
    _sum,
    _zero,
    formula_budget,
    max_over,
)
from tripcount.analysis.footprint.results import ArrayFootprint, FCount, Footprint
from tripcount.analysis.footprint.worst import worst_case
from tripcount.analysis.results import NestResult
from tripcount.budget import Budget, count_points
from tripcount.model import Access, Loop, Nest, Statement
from tripcount.options import Options


@dataclass
class _ArrayInfo:
    name: str
    elem: int | None
    access: Access  # a representative reference (for the line map)


_ArrayQ = dict[str, tuple[_Quantity, "_Quantity | None", str]]  # array -> (elements, lines, layout)


# --------------------------------------------------------------------------
# Scope computation


class Analyzer:
    """Footprints of one nest: scopes, worst cases, cache fit."""

    def __init__(self, result: NestResult, options: Options, budget: Budget | None = None) -> None:
        self.result = result
        self.limit = budget  # the nest's budget: bounds every enumeration
        self.nest: Nest = result.nest
        self.options = options
        self.caches = hierarchy(options)
        self.line = self.caches.line_size
        self.budget = formula_budget(budget, options)
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
        self.exact_budget = ExactBudget(limit=budget)
        self.check_budget = ExactBudget(CHECK_BUDGET_S, limit=budget)

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
    def _formula(self, s: isl.Set, context: isl.Set | None, cap: float) -> tuple[Any, Missing | None]:
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
            elems = _Quantity([(img, 1)], f, why, self.limit)
            lines = None
            layout = "rows aligned"
            if info.elem:
                lm, layout = line_map(info.access, info.elem, self.line)
                lset = simplify(img.apply(lm))
                if line_formulas:
                    g, why2 = self._formula(lset, context, LINES_TIME_S)
                else:
                    g, why2 = None, Missing("not computed for one iteration")
                lines = _Quantity([(lset, 1)], g, why2, self.limit)
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
            fp.notes.append("formula not available (" + "; ".join(map(str, reasons)) + "): values at the --at sizes only")
            fp.time_limited = any(r.time_bound for r in reasons)
        missing = self.left_out(stmts)
        if missing:
            self._mark_lower_bound(fp, "references that are not modelled are left out (" + ", ".join(missing)
                                   + ")", set(missing.values()))
        if n and stmts and outer is not None:
            worst_case(self, fp, stmts, fixed, outer, totals)
            if fp.lower_bound and fp.worst is not None:
                fp.worst.lower_bound = True
        if self.has_at:
            self._exact_values(fp, stmts, fixed, outer, aq)
        self._cache[key] = fp
        return fp

    def _scope_values(self, stmts: list[Statement], fixed: tuple[str, ...], outer: isl.Set | None,
                      sizes: Mapping[str, int], bounds: bool = True,
                      known: Mapping[tuple[str, str], int] | None = None,
                      budget: ExactBudget | None = None) -> ScopeValues | None:
        n = len(fixed)
        images: dict[str, isl.Set] = {}
        for s in stmts:
            if s.domain is None:
                continue
            for a in s.accesses:
                if self.usable(a):
                    img = access_image(s, a, n)
                    images[a.array] = images[a.array].union(img) if a.array in images else img
        o = _outer_at(outer, fixed, sizes) if n and outer is not None else None
        if n and o is None:
            return None
        try:
            return scope_values(images, {k: self.arrays[k].elem for k in images},
                                {k: self.arrays[k].access for k in images}, self.line, o, fixed, sizes,
                                budget or self.exact_budget, bounds, known)
        except isl.Error:
            return None

    def exact_lines(self, stmts: list[Statement], fixed: tuple[str, ...],
                    outer: isl.Set | None) -> Callable[[Mapping[str, int]], int | None]:
        """Exact worst-case cache lines of a scope at other sizes (None when only a bound is had)."""
        def at(sizes: Mapping[str, int]) -> int | None:
            if any(p not in sizes for p in self.nest.params) or self.check_budget.spent():
                return None
            if any(abs(v) > EXACT_SIZE_CAP for v in sizes.values()):
                return None  # counting at one outer value takes time linear in the sizes
            sv = self._scope_values(stmts, fixed, outer, sizes, bounds=False, budget=self.check_budget)
            if sv is None or sv.lines is None or sv.lines.side is not None:
                return None
            return sv.lines.value
        return at

    def _exact_values(self, fp: Footprint, stmts: list[Statement], fixed: tuple[str, ...],
                      outer: isl.Set | None, aq: _ArrayQ) -> None:
        """Values at the --at sizes from the packed layout, exact (or a bound that says so)."""
        # exact values found before (by the formulas) stand where the layout is the same
        known: dict[tuple[str, str], int] = {}
        same_all = True
        for name, a in fp.by_array.items():
            same = name in aq and self._same_layout(name, aq[name][2])
            same_all = same_all and same
            for kind, c in (("elements", a.elements), ("lines", a.lines)):
                if (kind == "elements" or same) and _exact_int(c) is not None:
                    known[(name, kind)] = _exact_int(c)  # type: ignore[assignment]
        for kind, c in (("elements", fp.elements), ("bytes", fp.bytes), ("lines", fp.lines)):
            if (kind != "lines" or same_all) and _exact_int(c) is not None:
                known[("", kind)] = _exact_int(c)  # type: ignore[assignment]
        # without the exact maximum, lines get a cheap upper bound from the values found before
        upper = {name: _lines_upper(a.elements, a.lines, self.arrays[name].elem, self.line)
                 for name, a in fp.by_array.items()}
        upper[""] = _lines_upper(fp.elements, fp.lines,
                                 min((self.arrays[n].elem or 0) for n in fp.by_array) if fp.by_array else None,
                                 self.line)
        sv = self._scope_values(stmts, fixed, outer, self.at, known=known, bounds=False)
        if sv is None:
            return
        over = ", ".join(fixed)
        same = True  # the values found before used the same layout for every array
        for name, (el, ln, layout) in sv.arrays.items():
            a = fp.by_array.get(name)
            if a is None:
                continue
            formula_layout = aq[name][2] if name in aq else layout
            same = same and formula_layout == layout
            a.layout = layout
            _set_value(a.elements, el, over)
            if a.elem_size:
                _set_value(a.bytes, Max(None if el.value is None else el.value * a.elem_size, el.side, el.why,
                                        el.at), over)
            if ln is not None:
                _set_value(a.lines, _or_upper(ln, upper.get(name)), over, formula_layout == layout)
                if formula_layout != "linear" and layout == "linear" and a.lines.formula is not None:
                    a.lines.formula_assumes = ROWS_ALIGNED
        _set_value(fp.elements, sv.elements, over)
        if sv.bytes is not None:
            _set_value(fp.bytes, sv.bytes, over)
        if sv.lines is not None:
            _set_value(fp.lines, _or_upper(sv.lines, upper.get("")), over, same)
            if fp.lines.formula is not None and any(
                    a.lines.formula_assumes for a in fp.by_array.values() if isinstance(a.lines, FCount)):
                fp.lines.formula_assumes = ROWS_ALIGNED
        if fp.worst is not None:
            for key, c in (("elements", fp.elements), ("bytes", fp.bytes), ("lines", fp.lines)):
                if c.value is not None and not c.bound and not getattr(c, "value_bound", None):
                    fp.worst.values[key] = c.value
                    if fp.worst.counts is not None and fp.worst.counts.get(key) is not None:
                        fp.worst.counts[key].value = c.value  # the exact maximum is the tightest bound
                elif not fp.worst.bound:
                    # the value at the extreme outer values is not shown as the maximum unless the exact
                    # maximum (packed layout) confirms it
                    fp.worst.values[key] = None

    def _same_layout(self, name: str, formula_layout: str) -> bool:
        """Whether an array's formula layout is the layout of its values at the --at sizes."""
        info = self.arrays.get(name)
        if info is None or info.access.map is None:
            return False
        packed = inner_extents(info.access, self.at) is not None
        return packed == (formula_layout == "linear")

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
            n = count_points(d.intersect(o), self.limit)
            holds = worst_at is not None and piece.contains({**self.at, **worst_at})
            if n > best_n or (n == best_n and holds):
                best, best_n = k, n
        return best


    # --- reuse
    def _touch_relation(self, stmts: list[Statement], depth: int, packed: bool = True) -> dict[str, isl.Map]:
        """Per array: { L[first depth+1 loop variables] -> cache line (element if size unknown) }; lines of
        the packed layout at the --at sizes unless `packed` is false (then the formulas' layout)."""
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
                    m = m.apply_range(self._reuse_lines(info, m, packed))
                rel[a.array] = rel[a.array].union(m) if a.array in rel else m
        return rel

    def touch_relation(self, stmts: list[Statement], depth: int, packed: bool = True) -> dict[str, isl.Map]:
        """Per array: the cache lines each value of the first depth+1 loop variables touches (see
        _touch_relation); depth -1 gives the lines of the whole statement set."""
        return self._touch_relation(stmts, depth, packed)

    def _reuse_lines(self, info: _ArrayInfo, m: isl.Map, packed: bool = True) -> isl.Map:
        """The line map of reuse: at the --at sizes the packed layout of the values (rows that are not
        a multiple of the line share lines with their neighbours), else the formulas' layout."""
        ext = inner_extents(info.access, self.at) if self.has_at and packed else None
        if ext is None:
            return line_map(info.access, info.elem or 0, self.line)[0]
        n = m.dim(isl.dim_type.out)
        name = m.get_tuple_name(isl.dim_type.out)
        lm = packed_line_map(n, ext, info.elem or 0, self.line)
        if name:
            lm = lm.set_tuple_name(isl.dim_type.in_, name).set_tuple_name(isl.dim_type.out, name)
        return lm.align_params(m.get_space())

    def reuse(self, inner: list[Statement], outer: list[Statement], depth: int, step: int = 1) -> bool | None:
        """Whether a line touched by `inner` in one iteration of the loop at `depth` is touched again
        by `outer` (the loop's statements) in a later iteration (in the order the loop runs: `step`'s
        sign), the enclosing variables being equal."""
        try:
            src = self._touch_relation(inner, depth)
            dst = self._touch_relation(outer, depth)
            if self.has_at:  # the packed lines hold at the --at sizes only
                src = {k: _at_sizes(m, self.at) for k, m in src.items()}
                dst = {k: _at_sizes(m, self.at) for k, m in dst.items()}
            vs = [f"x{k}" for k in range(depth + 1)]
            ws = vs[:-1] + [f"{vs[-1]}p"]
            order = ">" if step > 0 else "<"
            later = isl.Map(f"{{ L[{', '.join(vs)}] -> L[{', '.join(ws)}] : {ws[-1]} {order} {vs[-1]} }}")
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


def _at_sizes(m: isl.Map, sizes: Mapping[str, int]) -> isl.Map:
    """`m` with the parameters named in `sizes` fixed at their values."""
    for i in range(m.dim(isl.dim_type.param)):
        name = m.get_dim_name(isl.dim_type.param, i)
        if name in sizes:
            m = m.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(m.get_ctx(), str(int(sizes[name]))))
    return m


EXACT_SIZE_CAP = 1 << 20  # largest size at which a threshold is checked with the exact count

ROWS_ALIGNED = ("every row starts on a cache-line boundary (the value at the --at sizes uses the packed "
                "row-major layout, which can differ)")


def _lines_upper(elements: Any, lines: Any, elem: int | None, line: int) -> int | None:
    """An upper bound of the packed layout's lines from exact values with every row aligned: a line of
    the aligned layout is at most `line` contiguous bytes, so it meets at most two packed lines; and an
    element (its size dividing the line) lies in one line."""
    bounds = []
    al = _exact_int(lines)
    if al is not None:
        bounds.append(2 * al)
    el = _exact_int(elements)
    if el is not None and elem and line % elem == 0:
        bounds.append(el)
    return min(bounds) if bounds else None


def _or_upper(m: Max, upper: int | None) -> Max:
    if m.value is not None or upper is None:
        return m
    return Max(upper, side="upper", why=(m.why or "no exact maximum") + "; upper bound: at most two lines for each line with every "
               "row starting on a line boundary, and at most one line per element")


def _exact_int(c: Any) -> int | None:
    """The value of a count object when it is exact (an integer, not a bound)."""
    if not isinstance(c, FCount) or c.bound or c.unchecked or c.value is None:
        return None
    v = c.value
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else None
    return int(v) if isinstance(v, int) else None


def _set_value(c: Any, m: Max, over: str, same_layout: bool = True) -> None:
    """Put an exact value (or a bound with its side) at the --at sizes into a count object. Without one,
    the value found before stays only when it is exact and of the same layout."""
    if not isinstance(c, FCount):
        return
    if m.value is None or (m.side == "upper" and same_layout and c.value is not None and not c.bound):
        # keep a value found before only when it is exact and of the same layout
        if c.bound or c.unchecked or not same_layout:
            c.value, c.bound, c.value_is = None, False, m.why
            c.unchecked = False
        return
    c.unchecked = False
    c.value = m.value
    c.bound = m.side == "upper"
    c.value_bound = m.side
    if m.at:
        c.worst_at = dict(m.at)
    if m.side:
        c.value_is = m.why
    elif over:
        c.value_is = "maximum over " + over + " at the --at sizes (exact)"
    if m.side == "lower":
        c.lower_bound = True
