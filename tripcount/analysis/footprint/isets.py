# Footprint: integer-set helpers -- fixing sizes, enumerating small sets,
# images of the iteration domains under the access maps, the cache-line map
# of the layout model, and the simplification that makes images countable.

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import islpy as isl

from tripcount import engine
from tripcount.budget import Budget, count_points
from tripcount.engine.islconv import exceeds, val_int
from tripcount.engine.piecewise import Piece, Piecewise
from tripcount.model import Access, Statement


def _params(s: isl.Set | isl.Map) -> list[str]:
    return [s.get_dim_name(isl.dim_type.param, i) for i in range(s.dim(isl.dim_type.param))]


def fix_params(s: isl.Set, values: Mapping[str, int]) -> isl.Set | None:
    """`s` with its parameters fixed at `values`; None if one is missing."""
    for i, name in enumerate(_params(s)):
        if name not in values:
            return None
        s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(int(values[name]))))
    return s


def enum_count(s: isl.Set, values: Mapping[str, int], budget: Budget | None = None) -> int | None:
    """Exact number of points of `s` at the given parameter values (None if one is missing),
    enumerated within `budget`."""
    f = fix_params(s, values)
    if f is None:
        return None
    return count_points(f, budget)


def points(s: isl.Set, names: Sequence[str], cap: int) -> list[dict[str, int]] | None:
    """The points of a parameter-free set as dicts (None when there are more than `cap`).

    The scan stops at the first point past `cap`, so a set of 10^9 points costs
    no more than a small one (counting it first took seconds each time).
    """
    out: list[dict[str, int]] = []

    def visit(p: isl.Point) -> Any:
        out.append({nm: val_int(p.get_coordinate_val(isl.dim_type.set, k)) for k, nm in enumerate(names)})
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
# Values of the fixed loop variables at given sizes


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
    return {nm: val_int(p.get_coordinate_val(isl.dim_type.set, k)) for k, nm in enumerate(names)}



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
        v = val_int(pt.get_coordinate_val(isl.dim_type.set, 0))
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
    return {n: val_int(pt.get_coordinate_val(isl.dim_type.param, i)) for i, n in enumerate(names)}


# --------------------------------------------------------------------------
# Counting under neutral parameter names

_NEUTRAL = re.compile(r"\bfp(\d+)_(?![A-Za-z0-9_])")


def _renamed(s: isl.Set, mapping: Mapping[str, str]) -> isl.Set:
    for i in range(s.dim(isl.dim_type.param)):
        name = s.get_dim_name(isl.dim_type.param, i)
        if name in mapping:
            s = s.set_dim_name(isl.dim_type.param, i, mapping[name])
    return s


def _formula_renamed(f: Any, mapping: Mapping[str, str]) -> Any:
    """A piecewise formula with its parameters renamed (domains, polynomials and condition texts)."""
    def when(text: str) -> str:
        return re.sub(r"[A-Za-z_][A-Za-z0-9_]*", lambda m: mapping.get(m.group(0), m.group(0)), text)

    pieces = [Piece(_renamed(p.domain, mapping), p.poly.rename(mapping), when(p.when)) for p in f.pieces]
    return Piecewise(pieces, tuple(mapping.get(x, x) for x in f.params),
                     None if f.context is None else _renamed(f.context, mapping))


def _neutral_names(names: Sequence[str]) -> tuple[dict[str, str], dict[str, str]]:
    there = {n: f"fp{k}_" for k, n in enumerate(names)}
    return there, {v: k for k, v in there.items()}


def neutral_count(s: isl.Set, context: isl.Set | None, limits: Any = None) -> Any:
    """engine.count with every parameter renamed to a neutral name (fp0_, fp1_, ...) and the formula
    renamed back: a size or loop variable spelled like a word of the integer-set library's input
    language (`q`, `exists`, ...) then never meets the engine's own names."""
    names: list[str] = []
    for t in (s, context):
        if t is not None:
            names += [n for n in _params(t) if n not in names]
    there, back = _neutral_names(names)
    f = engine.count(_renamed(s, there), None if context is None else _renamed(context, there), limits)
    return _formula_renamed(f, back)


def neutral_add_all(formulas: Sequence[Any]) -> Any:
    """engine.add_all under neutral parameter names (see neutral_count)."""
    names: list[str] = []
    for f in formulas:
        names += [n for n in f.params if n not in names]
        if f.context is not None:
            names += [n for n in _params(f.context) if n not in names]
        for p in f.pieces:
            names += [n for n in _params(p.domain) if n not in names]
    there, back = _neutral_names(names)
    return _formula_renamed(engine.add_all([_formula_renamed(f, there) for f in formulas]), back)
