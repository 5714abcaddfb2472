# Footprint: exact values at given sizes. With every size a number, every
# declared extent is a number too, so the byte address of A[i][j] in the
# packed row-major layout of the declared type (double A[n][m], VLAs,
# `double (*A)[M]`) is affine in the subscripts, and the cache lines a scope
# touches are the image of its iteration domains under one affine map with a
# floor: line = floor(elem*(i0*E1*...*En + ... + i_last)/line_size), the
# array starting on a line boundary. At one value of the fixed outer loop
# variables that is a set without parameters, counted exactly by isl.
#
# The maximum over the outer values: they are split into regions where what
# each array touches is one fixed shape, shifted (isl checks this exactly);
# there the number of elements is the same everywhere and the number of lines
# depends only on the byte offset of the shape's start within a line, so one
# outer value per reachable offset gives every value the count takes. A region
# whose shape varies (a triangular loop) is evaluated at every value when it
# has few. Otherwise, when each reference's part of it is one shape shifted
# (rows i and j of one matrix, at a varying distance), the parts' maxima add
# up, and the sum is exact where isl finds an outer value with every part at
# its maximum and no two sharing a line; else the value is an upper bound and
# says so and why.
#
# isl text is built here from generic names only (x0, y0, ...): user names
# never reach isl's parser (a variable named like an isl word is fine).

from __future__ import annotations

import math
import re
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction

import islpy as isl

from tripcount.affine import mangle
from tripcount.analysis.footprint.isets import points
from tripcount.budget import Budget, count_points
from tripcount.engine.islconv import val_int
from tripcount.formula import FormulaError, parse_expr
from tripcount.model import Access

POINT_CAP = 1024  # outer values counted one by one in a region whose shape varies
MAX_PIECES = 64  # regions of the outer values with one shape of what is touched
MAX_CLASSES = 4096  # alignment classes looked at per region
EXACT_BUDGET_S = 1.5  # exact values of one nest; past it, upper bounds
CHECK_BUDGET_S = 0.5  # exact checks of the cache-fit thresholds of one nest

_dt = isl.dim_type


def _val(ctx: isl.Context, v: int | Fraction) -> isl.Val:
    return isl.Val.read_from_str(ctx, str(Fraction(v)) if isinstance(v, Fraction) else str(int(v)))


def _param_names(s: isl.Set | isl.Map) -> list[str]:
    return [s.get_dim_name(_dt.param, i) for i in range(s.dim(_dt.param))]


def fix_some(s: isl.Set, values: Mapping[str, int]) -> isl.Set:
    """`s` with the parameters named in `values` fixed and removed (the others stay parameters)."""
    for i, name in enumerate(_param_names(s)):
        if name in values:
            s = s.fix_val(_dt.param, i, _val(s.get_ctx(), values[name]))
    for i in range(s.dim(_dt.param) - 1, -1, -1):
        if s.get_dim_name(_dt.param, i) in values:
            s = s.project_out(_dt.param, i, 1)
    return s


def inner_extents(acc: Access, sizes: Mapping[str, int]) -> list[int] | None:
    """The declared extents of every dimension but the first, as numbers at `sizes` (None if one is open
    or not a function of the sizes)."""
    n = acc.map.dim(_dt.out) if acc.map is not None else 0
    ext = list(acc.extents)
    if n <= 1:
        return []
    if len(ext) != n:
        return None
    out = []
    for text in ext[1:]:
        if text is None:
            return None
        # the sizes carry the model's names (a C name that is a word of the set library is renamed)
        text = re.sub(r"[A-Za-z_][A-Za-z0-9_]*", lambda m: mangle(m.group(0)), text)
        try:
            v = parse_expr(text).evaluate(dict(sizes))
        except (FormulaError, KeyError, ValueError, TypeError, ZeroDivisionError):
            return None
        if not isinstance(v, (int, Fraction)) or Fraction(v).denominator != 1 or v < 0:
            return None
        out.append(int(v))
    return out


def packed_line_map(n: int, extents: Sequence[int], elem: int, line: int) -> isl.Map:
    """{ element -> cache line } of the packed row-major layout, the array starting on a line boundary."""
    xs = [f"x{k}" for k in range(n)]
    if n == 0:
        return isl.Map("{ [] -> [0] }")
    terms = []
    for k in range(n):
        stride = math.prod(extents[k:])
        terms.append(f"{stride}*x{k}")
    g = math.gcd(elem, line)
    return isl.Map(f"{{ [{', '.join(xs)}] -> [floor(({elem // g}*({' + '.join(terms)}))/{line // g})] }}")


def aligned_line_map(n: int, elem: int, line: int) -> isl.Map:
    """{ element -> cache line } when every row starts on a line boundary (extents unknown)."""
    xs = [f"x{k}" for k in range(n)]
    if n == 0:
        return isl.Map("{ [] -> [0] }")
    g = math.gcd(elem, line)
    out = xs[:-1] + [f"floor(({elem // g}*{xs[-1]})/{line // g})"]
    return isl.Map(f"{{ [{', '.join(xs)}] -> [{', '.join(out)}] }}")


# --------------------------------------------------------------------------
# Maximum over the outer variables


@dataclass
class Max:
    """Maximum of a count over the fixed outer variables at given sizes.

    `side`: None when exact, "upper" or "lower" when only a bound was had
    (`why` says why); `at`: a point where the maximum is reached.
    """

    value: int | None
    side: str | None = None
    why: str | None = None
    at: dict[str, int] | None = None


class _TooHard(Exception):
    pass


def _first(s: isl.Set, names: Sequence[str]) -> dict[str, int] | None:
    if s.is_empty():
        return None
    p = s.sample_point()
    return {nm: val_int(p.get_coordinate_val(_dt.set, k)) for k, nm in enumerate(names)}


def _relation(s: isl.Set, fixed: Sequence[str]) -> isl.Map:
    """{ [outer values] -> [touched elements or lines] } from a set whose parameters are the fixed variables."""
    m = isl.Map.from_range(s)
    names = _param_names(m)
    for nm in fixed:
        if nm not in names:
            m = m.add_dims(_dt.param, 1).set_dim_name(_dt.param, m.dim(_dt.param), nm)
            names.append(nm)
    for k, nm in enumerate(fixed):
        idx = _param_names(m).index(nm)
        m = m.move_dims(_dt.in_, k, _dt.param, idx, 1)
    return m.reset_tuple_id(_dt.in_).reset_tuple_id(_dt.out)


def _domains(pw: isl.PwMultiAff) -> list[isl.Set]:
    out: list[isl.Set] = []
    pw.foreach_piece(lambda dom, _ma: out.append(dom))
    return out


def _shift_map(n: int) -> isl.Map:
    xs = [f"x{k}" for k in range(n)]
    ys = [f"y{k}" for k in range(n)]
    diff = [f"{x} - {y}" for x, y in zip(xs, ys, strict=True)]
    return isl.Map(f"{{ [[{', '.join(xs)}] -> [{', '.join(ys)}]] -> [{', '.join(diff)}] }}")


def _residue_map(strides: Sequence[int], elem: int, line: int) -> isl.Map:
    """{ element -> its byte offset within its cache line, in units of gcd(elem, line) } (packed layout)."""
    n = len(strides)
    g = math.gcd(elem, line)
    xs = [f"x{k}" for k in range(n)]
    terms = " + ".join(f"{st}*x{k}" for k, st in enumerate(strides)) or "0"
    return isl.Map(f"{{ [{', '.join(xs)}] -> [({elem // g}*({terms})) mod {line // g}] }}")



@dataclass
class Part:
    """What one array touches, as a relation of the outer values; `residue` maps the outer values to the byte
    offset of the first touched element within its cache line (None for element counts)."""

    elements: isl.Map  # { o -> element }
    counted: isl.Map  # { o -> what is counted (elements or lines) }
    weight: int
    residue: isl.Map | None
    to_counted: isl.Map | None = None  # { element -> line } (None: elements are counted)
    offset_of: isl.Map | None = None  # { element -> byte offset within its line } (None for elements)
    layout: tuple[tuple[int, ...], int, int] | None = None  # (element strides, element size, line size)


def maximum(parts: Sequence[Part], outer: isl.Set, fixed: Sequence[str],
            budget: ExactBudget | None = None) -> Max:
    """Exact maximum over the outer values of sum(weight * |counted(o)|).

    The outer values are split into regions where every array's touched elements are one fixed shape
    shifted (checked exactly by isl); there, a count of elements is the same everywhere and a count of
    cache lines depends only on where the shape starts within a line, so one outer value per reachable
    start offset gives every value the count takes. A region where the shape varies is evaluated at every
    value when it has few; otherwise the maximum is not found and a bound is given instead.
    """
    if not fixed:
        return Max(sum(p.weight * count_points(p.counted.range(), _limit(budget)) for p in parts))
    if outer.is_empty():
        return Max(0)
    regions = [outer]
    normal = []
    for p in parts:
        e = p.elements.intersect_domain(outer)
        lo = e.lexmin_pw_multi_aff()
        hi = e.lexmax_pw_multi_aff()
        for doms in (_domains(lo), _domains(hi)):
            touched = e.domain()
            if not outer.is_subset(touched):  # outer values where this array is not touched: a region too
                doms = doms + [outer.subtract(touched)]
            regions = [r.intersect(d) for r in regions for d in doms]
            regions = [r for r in regions if not r.is_empty()]
            if len(regions) > MAX_PIECES:
                raise _TooHard
        n_out = e.dim(_dt.out)
        normal.append(e.range_product(isl.Map.from_pw_multi_aff(lo)).apply_range(_shift_map(n_out))
                      if n_out else e)
    best: Max | None = None
    above: Max | None = None  # the largest upper bound of a region whose maximum was not found
    for r in regions:
        got = _region_max(parts, normal, r, fixed, budget)
        if got.side == "upper":
            if above is None or got.value > above.value:  # type: ignore[operator]
                above = got
        elif best is None or got.value > best.value:  # type: ignore[operator]
            best = got
    if above is not None and (best is None or above.value > best.value):  # type: ignore[operator]
        return above
    return best or Max(0)


def _limit(budget: ExactBudget | None) -> Budget | None:
    """The nest's budget behind an exact-values budget (bounds every enumeration)."""
    return budget.limit if budget is not None else None


def _value_at(parts: Sequence[Part], pt: Mapping[str, int], fixed: Sequence[str],
              limit: Budget | None = None) -> int:
    total = 0
    for p in parts:
        o = isl.Set.universe(p.counted.get_space().domain())
        for k, nm in enumerate(fixed):
            o = o.fix_val(_dt.set, k, _val(o.get_ctx(), pt[nm]))
        total += p.weight * count_points(p.counted.intersect_domain(o).range(), limit)
    return total


def _region_max(parts: Sequence[Part], normal: Sequence[isl.Map], r: isl.Set, fixed: Sequence[str],
                budget: ExactBudget | None) -> Max:
    o_star = _first(r, fixed)
    assert o_star is not None
    shifted = True
    for nm in normal:
        nr = nm.intersect_domain(r)
        at = r
        for k, name in enumerate(fixed):
            at = at.fix_val(_dt.set, k, _val(r.get_ctx(), o_star[name]))
        shape = nr.intersect_domain(at).range()
        if not nr.is_equal(isl.Map.from_domain_and_range(r, shape)):
            shifted = False
            break
    if not shifted:
        pts = points(r, fixed, POINT_CAP)
        if pts is None:
            return _by_reference(parts, r, fixed, budget)
        best = Max(0)
        for pt in pts:
            if budget is not None and budget.spent():
                raise _TooHard
            v = _value_at(parts, pt, fixed, _limit(budget))
            if best.at is None or v > (best.value or 0):
                best = Max(v, at=dict(pt))
        return best
    offsets = None
    for p in parts:
        if p.residue is None:
            continue
        rm = p.residue.intersect_domain(r)
        if rm.is_empty():  # nothing of this array is touched in the region
            continue
        offsets = rm if offsets is None else offsets.flat_range_product(rm)
    if offsets is None:
        return Max(_value_at(parts, o_star, fixed, _limit(budget)), at=o_star)
    best = Max(0)
    for m in _classes(offsets, 0, [MAX_CLASSES]):
        pt = _first(m.domain(), fixed)
        if pt is None:
            continue
        v = _value_at(parts, pt, fixed, _limit(budget))
        if best.at is None or v > (best.value or 0):
            best = Max(v, at=dict(pt))
    return best


def _by_reference(parts: Sequence[Part], r: isl.Set, fixed: Sequence[str], budget: ExactBudget | None) -> Max:
    """The maximum over a region where the union of what is touched changes shape (two rows i and j of
    one matrix: their distance varies) but each of its pieces -- one reference, say -- is a fixed shape
    shifted. The region is cut into cells where the same pieces are present. In a cell the count is at
    most the sum of each piece's own maximum (a union is no larger than the sum of its parts); it equals
    that sum at an outer value where every piece is at its maximum and no two pieces share an element
    or line, which isl finds or rules out exactly. Without such a value the sum is an upper bound."""
    pieces: list[tuple[Part, isl.Map]] = []
    for p in parts:
        p.elements.intersect_domain(r).foreach_basic_map(lambda b, p=p: pieces.append((p, isl.Map.from_basic_map(b))))
    cells = [r]
    for _, b in pieces:
        d = b.domain()
        cells = [c for x in cells for c in (x.intersect(d), x.subtract(d)) if not c.is_empty()]
        if len(cells) > MAX_PIECES:
            raise _TooHard
    best: Max | None = None
    above: Max | None = None
    for cell in cells:
        got = _cell_sum([(p, b.intersect_domain(cell)) for p, b in pieces], cell, fixed, budget)
        if got.side == "upper":
            above = got if above is None or got.value > above.value else above  # type: ignore[operator]
        elif best is None or got.value > best.value:  # type: ignore[operator]
            best = got
    if above is not None and (best is None or above.value > best.value):  # type: ignore[operator]
        return above
    return best or Max(0)


def _cell_sum(pieces: Sequence[tuple[Part, isl.Map]], cell: isl.Set, fixed: Sequence[str],
              budget: ExactBudget | None) -> Max:
    """The maximum over one cell where every piece is present (see _by_reference)."""
    total = 0
    argmax = cell
    overlap = isl.Set.empty(cell.get_space())
    counted: dict[int, list[isl.Map]] = {}
    for p, b in pieces:
        if b.is_empty():
            continue
        if budget is not None and budget.spent():
            raise _TooHard
        got = _piece_max(p, b, cell, fixed, budget)
        if got is None:
            raise _TooHard
        value, where = got
        total += p.weight * value
        argmax = argmax.intersect(where)
        c = b.apply_range(p.to_counted) if p.to_counted is not None else b
        same = counted.setdefault(id(p), [])  # arrays do not overlap: only pieces of one part can
        for other in same:
            overlap = overlap.union(c.intersect(other).domain())
        same.append(c)
    hit = argmax.subtract(overlap)
    if not hit.is_empty():
        return Max(total, at=_first(hit, fixed))
    return Max(total, side="upper", at=_first(cell, fixed),
               why=("the maximum over " + ", ".join(fixed) + " was not found exactly; upper bound: the sum of "
                    "the largest part each reference touches"))


def _piece_max(p: Part, b: isl.Map, r: isl.Set, fixed: Sequence[str],
               budget: ExactBudget | None = None) -> tuple[int, isl.Set] | None:
    """Largest count of one piece `b` (outer values -> elements) of a part over `r`, and where it is
    reached; None when the piece is not one shape shifted over `r`."""
    lo = b.lexmin_pw_multi_aff()
    if len(_domains(lo)) != 1:
        return None
    n_out = b.dim(_dt.out)
    normal = b.range_product(isl.Map.from_pw_multi_aff(lo)).apply_range(_shift_map(n_out)) if n_out else b
    o_star = _first(b.domain(), fixed)
    if o_star is None:
        return 0, r
    at = r
    for k, name in enumerate(fixed):
        at = at.fix_val(_dt.set, k, _val(r.get_ctx(), o_star[name]))
    if not normal.is_equal(isl.Map.from_domain_and_range(b.domain(), normal.intersect_domain(at).range())):
        return _segment_max(p, b)
    counted = b.apply_range(p.to_counted) if p.to_counted is not None else b
    one = Part(b, counted, 1, None)
    if p.offset_of is None or not n_out:
        return _value_at([one], o_star, fixed, _limit(budget)), b.domain()
    offsets = isl.Map.from_pw_multi_aff(lo).apply_range(p.offset_of)
    best, where = -1, isl.Set.empty(r.get_space())
    for m in _classes(offsets, 0, [MAX_CLASSES]):
        pt = _first(m.domain(), fixed)
        if pt is None:
            continue
        v = _value_at([one], pt, fixed, _limit(budget))
        if v > best:
            best, where = v, m.domain()
        elif v == best:
            where = where.union(m.domain())
    return best, where


def _segment_max(p: Part, b: isl.Map) -> tuple[int, isl.Set] | None:
    """Largest count of a piece that is one contiguous run of a row whose ends move with the outer values
    (A[i][k+1..N-1] in LU), and where it is reached: the count is an affine expression with floors of
    the outer values (the run's elements, or floor(last byte / line) - floor(first byte / line) + 1
    lines), maximised exactly by isl. None for any other piece."""
    n = b.dim(_dt.out)
    if n == 0 or (p.to_counted is not None and p.layout is None):
        return None
    lo, hi = b.lexmin_pw_multi_aff(), b.lexmax_pw_multi_aff()
    # lexmin and lexmax agreeing on the first coordinates: every element is in that one row
    for k in range(n - 1):
        if not lo.get_pw_aff(k).is_equal(hi.get_pw_aff(k)):
            return None
    first, last = lo.get_pw_aff(n - 1), hi.get_pw_aff(n - 1)
    run = (isl.Map.from_pw_aff(first).apply_range(isl.Map("{ [a] -> [t] : t >= a }"))
           .intersect(isl.Map.from_pw_aff(last).apply_range(isl.Map("{ [z] -> [t] : t <= z }"))))
    if not run.is_subset(b.project_out(_dt.out, 0, n - 1)):
        return None  # holes in the run
    if p.to_counted is None:
        f = last.sub(first)
    else:
        strides, elem, line = p.layout  # type: ignore[misc]
        ctx = b.get_ctx()

        def line_of(end: isl.PwMultiAff) -> isl.PwAff:
            addr = None
            for k in range(n):
                term = end.get_pw_aff(k).scale_val(_val(ctx, elem * strides[k]))
                addr = term if addr is None else addr.add(term)
            return addr.scale_down_val(_val(ctx, line)).floor()  # type: ignore[union-attr]

        f = line_of(hi).sub(line_of(lo))
    top = f.max_val()
    if not top.is_int():
        return None
    where = f.eq_set(isl.PwAff.val_on_domain(f.domain(), top))
    return int(top.to_python()) + 1, where


def _classes(m: isl.Map, k: int, left: list[int]) -> list[isl.Map]:
    """`m` (outer values -> offsets) restricted to each reachable vector of offsets, one offset at a time
    (the reachable vectors are few; their product is not)."""
    if k == m.dim(_dt.out):
        left[0] -= 1
        if left[0] < 0:
            raise _TooHard
        return [m]
    hi = m.range().project_out(_dt.set, k + 1, m.dim(_dt.out) - k - 1).project_out(_dt.set, 0, k)
    top = hi.max_val(isl.Aff.var_on_domain(isl.LocalSpace.from_space(hi.get_space()), _dt.set, 0))
    if not top.is_int():
        raise _TooHard
    out: list[isl.Map] = []
    for v in range(val_int(top) + 1):
        sub = m.fix_val(_dt.out, k, _val(m.get_ctx(), v))
        if not sub.is_empty():
            out.extend(_classes(sub, k + 1, left))
    return out


def bound(parts: Sequence[Part], outer: isl.Set, fixed: Sequence[str], limit: Budget | None = None) -> Max:
    """Upper bound: what all values of the outer variables touch together (enumerations within `limit`)."""
    total = sum(p.weight * count_points(p.counted.intersect_domain(outer).range(), limit) for p in parts)
    return Max(total, side="upper", why=("the maximum over " + ", ".join(fixed) + " could not be found within "
                                         "the limits; upper bound: what all their values touch together"))


# --------------------------------------------------------------------------
# One scope at the --at sizes


class ExactBudget:
    """Time share of the exact values of one nest (only the time spent computing them counts), within
    the nest's budget `limit`, which bounds every enumeration."""

    def __init__(self, seconds: float | None = None, limit: Budget | None = None) -> None:
        self.seconds = EXACT_BUDGET_S if seconds is None else seconds
        self.limit = limit
        self.used = 0.0
        self.started: float | None = None

    def spent(self) -> bool:
        """Whether the budget is used up."""
        running = time.monotonic() - self.started if self.started is not None else 0.0
        if self.used + running > self.seconds:
            if self.limit is not None:
                self.limit.mark_time_cut()
            return True
        return False


@dataclass
class ScopeValues:
    """Exact values (or bounds) of one scope at the --at sizes: per array and in total."""

    arrays: dict[str, tuple[Max, Max | None, str]]  # name -> (elements, lines, layout)
    elements: Max
    bytes: Max | None
    lines: Max | None


def scope_values(images: Mapping[str, isl.Set], elems: Mapping[str, int | None], accesses: Mapping[str, Access],
                 line: int, outer: isl.Set | None, fixed: Sequence[str], sizes: Mapping[str, int],
                 budget: ExactBudget, bounds: bool = True,
                 known: Mapping[tuple[str, str], int] | None = None) -> ScopeValues:
    """Exact values at `sizes` of a scope whose touched elements per array are `images` (sets with the
    sizes and the fixed variables as parameters); where the maximum is not found, an upper bound
    (or, without `bounds`, no value). `known`: exact values already had, by (array or "", kind)."""
    budget.started = time.monotonic()
    try:
        return _scope_values(images, elems, accesses, line, outer, fixed, sizes, budget, bounds, known or {})
    finally:
        budget.used += time.monotonic() - budget.started
        budget.started = None


def _scope_values(images: Mapping[str, isl.Set], elems: Mapping[str, int | None], accesses: Mapping[str, Access],
                  line: int, outer: isl.Set | None, fixed: Sequence[str], sizes: Mapping[str, int],
                  budget: ExactBudget, bounds: bool, known: Mapping[tuple[str, str], int]) -> ScopeValues:
    o = outer if outer is not None else isl.Set("{ [] }")

    def best(parts: list[Part], key: tuple[str, str] | None = None) -> Max:
        if key in known:
            return Max(known[key])  # type: ignore[index]
        if not (budget.spent() and fixed):
            try:
                return maximum(parts, o, fixed, budget)
            except (_TooHard, isl.Error):
                pass
        if bounds and fixed:
            return bound(parts, o, fixed, budget.limit)
        return Max(None, why="the maximum over " + ", ".join(fixed) + " could not be found within the limits")

    el_parts: dict[str, Part] = {}
    ln_parts: dict[str, Part] = {}
    arrays: dict[str, tuple[Max, Max | None, str]] = {}
    for name, img in images.items():
        rel = _relation(fix_some(img, sizes).coalesce(), fixed)
        el_parts[name] = Part(rel, rel, 1, None)
        lines, layout = None, "rows aligned"
        elem = elems.get(name)
        if elem:
            acc = accesses[name]
            n = acc.map.dim(_dt.out)
            ext = inner_extents(acc, sizes)
            if ext is not None:
                layout = "linear"
                lm = packed_line_map(n, ext, elem, line)
                rmap = _residue_map([math.prod(ext[k:]) for k in range(n)], elem, line)
            else:
                lm = aligned_line_map(n, elem, line)
                # rows aligned: a row's lines depend on where its first element sits in a line
                rmap = _residue_map([0] * (n - 1) + [1], elem, line)
            lo = isl.Map.from_pw_multi_aff(rel.lexmin_pw_multi_aff()) if n else None
            residue = lo.apply_range(rmap) if lo is not None else None
            strides = tuple(math.prod(ext[k:]) for k in range(n)) if ext is not None else (0,) * (n - 1) + (1,)
            ln_parts[name] = Part(rel, rel.apply_range(lm), 1, residue, lm, rmap, (strides, elem, line))
            lines = best([ln_parts[name]], (name, "lines"))
        arrays[name] = (best([el_parts[name]], (name, "elements")), lines, layout)
    total_el = (best(list(el_parts.values()), ("", "elements")) if len(el_parts) != 1
                else next(iter(arrays.values()))[0])
    all_sized = all(elems.get(n) for n in images)
    sizes_set = {elems.get(n) for n in images}
    by = ln = None
    if all_sized and images:
        if len(sizes_set) == 1:
            k = sizes_set.pop() or 0
            by = Max(None if total_el.value is None else total_el.value * k, total_el.side, total_el.why, total_el.at)
        else:
            by = best([Part(el_parts[n].elements, el_parts[n].counted, elems[n] or 0, None) for n in images],
                      ("", "bytes"))
        ln = (best(list(ln_parts.values()), ("", "lines")) if len(ln_parts) != 1
              else next(iter(arrays.values()))[1])
    return ScopeValues(arrays, total_el, by, ln)
