# Footprint: worst case of a per-level footprint over the fixed outer loop
# variables, as a function of the sizes. When evaluation at the --at sizes and
# at probe sizes shows every quantity is largest at the extreme values of the
# outer variables (e.g. i = N - 1), those values are substituted into the
# per-level formula; otherwise the footprint with the outer variables free is
# a safe upper bound, marked `bound`.

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from fractions import Fraction
from typing import Any, Protocol

import islpy as isl

from tripcount import engine
from tripcount.analysis.footprint.isets import _in_context, _outer_at, fix_params, points
from tripcount.analysis.footprint.quantities import _Quantity
from tripcount.analysis.footprint.results import FCount, Footprint, Worst
from tripcount.model import Nest, Statement


class Analyzer(Protocol):
    """What the worst-case search needs of the per-nest footprint analyzer (scopes.Analyzer).

    Declared here so that the search, which the analyzer calls, does not import it back.
    """

    nest: Nest
    at: dict[str, int]
    has_at: bool
    probes: list[dict[str, int]]

    def _quantities(self, stmts: list[Statement], n: int, restrict: isl.Set | None,
                    context: isl.Set | None, line_formulas: bool = True) -> dict[str, Any]: ...

    def _totals(self, aq: dict[str, Any]) -> dict[str, _Quantity | None]: ...

    def _count(self, q: _Quantity | None, fixed: tuple[str, ...], outer: isl.Set | None,
               unknown: str = "element size unknown") -> FCount: ...

    def _max(self, q: _Quantity, outer: isl.Set, fixed: tuple[str, ...],
             sizes: Mapping[str, int]) -> tuple[int | Fraction, dict[str, int] | None] | None: ...

# --- worst case over the fixed variables
def worst_case(an: Analyzer, fp: Footprint, stmts: list[Statement], fixed: tuple[str, ...], outer: isl.Set,
           totals: dict[str, _Quantity | None]) -> None:
    """Worst case over the fixed variables: the extreme values when evaluation shows the maximum
    is there (no further counting: the per-level formula is evaluated there), else a safe bound."""
    metrics = {k: q for k, q in totals.items() if q is not None}
    maxima: list[tuple[dict[str, int], list[int | Fraction]]] = []
    for probe in an.probes:
        o = _outer_at(outer, fixed, probe)
        if o is None or o.is_empty():
            continue
        ms = [an._max(q, outer, fixed, probe) for q in metrics.values()]
        if any(m is None for m in ms):
            # a probe size left unchecked (often the one past the tile sizes, where the boundary
            # pieces differ) leaves the claim unproven: no extreme-value worst case then
            maxima = []
            break
        maxima.append((probe, [m[0] for m in ms if m is not None]))
    chosen = None
    if maxima:
        for signs in _sign_patterns(len(fixed)):
            cset = _corner(outer, signs, fixed)
            if cset is not None and _attains(cset, fixed, list(metrics.values()), maxima):
                chosen = (signs, cset)
                break
    if chosen is not None:
        signs, cset = chosen
        fp.worst = _corner_worst(an, cset, signs, fixed, metrics, maxima)
    else:
        fp.worst = _bound_worst(an, stmts, fixed, bool(maxima))
    if an.has_at:  # per-level values too costly to evaluate exactly come from the worst case
        for key in ("elements", "bytes", "lines"):
            mine = getattr(fp, key)
            w = fp.worst.values.get(key)
            if mine.value is None and w is not None:
                mine.value = w
                mine.bound = fp.worst.bound
                mine.unchecked = not fp.worst.bound
                mine.value_is = ("worst case over " + ", ".join(fixed) +
                                 (" (upper bound)" if fp.worst.bound else " (at their extreme values)"))

def _corner_worst(an: Analyzer, cset: isl.Set, signs: tuple[int, ...], fixed: tuple[str, ...],
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
            return 0 if _in_context(an.nest.context, values) else None
        return q.at({**values, **pt})

    extremes = ", ".join(f"{v} {'largest' if sg > 0 else 'smallest'}" for v, sg in zip(fixed, signs, strict=True))
    method = (f"at the extreme values ({extremes}): the maximum over {', '.join(fixed)}, "
              f"as checked by evaluating every value at {_fmt_probes(maxima)}")
    where_q = _corner_exprs(cset, fixed, [p for p, _ in maxima])
    exprs: dict[str, Any] = {}
    if where_q is not None:
        for key, q in metrics.items():
            exprs[key] = _substituted(q.formula, where_q, [(p, corner_point(p)) for p, _ in maxima])
    values = {key: evaluate(key, an.at) for key in metrics} if an.has_at else {}
    return Worst(fixed, False, method, None if where_q is None else {k: v.to_expr() for k, v in where_q.items()},
                 exprs, values, None, evaluate)

def _bound_worst(an: Analyzer, stmts: list[Statement], fixed: tuple[str, ...], checked: bool) -> Worst:
    aq = an._quantities(stmts, 0, None, an.nest.context)
    totals = an._totals(aq)
    counts = {k: an._count(q, (), None) for k, q in totals.items()}
    for c in counts.values():
        c.bound = True

    def evaluate(key: str, values: Mapping[str, int]) -> int | Fraction | None:
        q = totals.get(key)
        return None if q is None else q.at(values)

    method = ("upper bound: the footprint over all values of " + ", ".join(fixed) +
              (" (the maximum over them is not at their extreme values)" if checked else
               " (the maximum over them could not be checked)"))
    values = {k: c.value for k, c in counts.items()} if an.has_at else {}
    return Worst(fixed, True, method, None, {}, values, counts, evaluate)

def _attains(cset: isl.Set, fixed: tuple[str, ...], metrics: list[_Quantity],
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


def _sign_patterns(n: int) -> list[tuple[int, ...]]:
    """Extreme-value patterns to try, all-largest first (the usual worst case), then the others."""
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

