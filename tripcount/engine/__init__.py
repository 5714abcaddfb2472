# The exact parametric counting engine of tripcount.
#
# count(s) turns a parametric integer set (isl Set: loop variables as set
# dimensions, size parameters as parameters; unions, strides, floors allowed)
# into a piecewise quasi-polynomial in the parameters: disjoint parameter
# domains, each with an exact formula (rational coefficients, floors). The
# method is variable elimination with residue splitting and Faulhaber sums
# (see count.py); results are simplified and printed in tripcount's notation
# (piecewise.py, fmt.py). sympy is never imported here.

from __future__ import annotations

from collections.abc import Mapping

import islpy as isl

from tripcount.budget import Budget, count_points
from tripcount.engine.memo import Memo, clear_all
from tripcount.engine.piecewise import Piece, PieceList, Piecewise, add_all, build, qpoly_identical
from tripcount.engine.qpoly import Floor, QPoly
from tripcount.engine.readable import plain_forms  # also registers the printer of QPoly
from tripcount.engine.summation import EngineLimit, Limits, _State, sum_set

__all__ = [
    "EngineLimit",
    "Floor",
    "Limits",
    "Piece",
    "PieceList",
    "Piecewise",
    "QPoly",
    "add_all",
    "clear_memos",
    "count",
    "enumerate_count",
    "plain_forms",
    "qpoly_identical",
    "sum_over",
]

_dt = isl.dim_type


def _prepare(s: isl.Set, context: isl.Set | None) -> tuple[isl.Set, dict[str, str]]:
    """Unnamed tuple, internal set-dimension names, explicit divs, context applied."""
    if isinstance(s, isl.BasicSet):
        s = isl.Set.from_basic_set(s)
    if context is not None:
        if isinstance(context, isl.BasicSet):
            context = isl.Set.from_basic_set(context)
        s = s.intersect_params(context)
    s = s.reset_tuple_id()
    rename: dict[str, str] = {}
    sp = s.get_space()
    for i in range(s.dim(_dt.set)):
        old = sp.get_dim_name(_dt.set, i)
        new = f"_t{i}_"
        if old is not None:
            rename[old] = new
        s = s.set_dim_name(_dt.set, i, new)
    s = s.compute_divs()
    return s, rename


def _params(s: isl.Set) -> tuple[str, ...]:
    sp = s.get_space()
    return tuple(sp.get_dim_name(_dt.param, i) for i in range(s.dim(_dt.param)))


def sum_over(
    s: isl.Set,
    weight: QPoly,
    context: isl.Set | None = None,
    limits: Limits | None = None,
) -> Piecewise:
    """Sum of `weight` (over set-dimension and parameter names) over the integer points of s."""
    limits = limits or Limits()
    if context is not None and isinstance(context, isl.BasicSet):
        context = isl.Set.from_basic_set(context)
    key = (s.to_str(), None if context is None else context.to_str(), weight, limits.max_pieces)
    found = _MEMO.get(key)
    if found is None:
        st = _State(limits)
        found = _sum_over(s, weight, context, st)
        if not st.hurried:
            _MEMO.keep(key, found)
    return found


# Results by (set, context, weight) text: kernels repeat the same loop shapes
# (and the footprint analysis counts the same images per level), and a result
# is exact whatever the limits it was found under. Give-ups are not kept, nor
# results whose optional passes were skipped for lack of time (their form
# depends on the clock).
_MEMO: Memo[tuple, Piecewise] = Memo(4096)


def _sum_over(s: isl.Set, weight: QPoly, context: isl.Set | None, st: _State) -> Piecewise:
    prepared, rename = _prepare(s, context)
    params = _params(prepared)
    unknown = weight.variables() - set(rename) - set(params)
    if unknown:
        raise ValueError(f"weight uses names that are neither set dimensions nor parameters: {sorted(unknown)}")
    w = weight.rename(rename)
    if prepared.is_empty() or w.is_zero():
        return Piecewise([], params, context)
    try:
        terms = sum_set(prepared, w, st)
        return build(terms, params, context, st, support=prepared.params())
    except RecursionError as e:  # pragma: no cover - defensive
        raise EngineLimit("nest too deep for the engine") from e


def clear_memos() -> None:
    """Forget every remembered result of the engine (benchmarks time the computation so)."""
    clear_all()


def count(
    s: isl.Set,
    context: isl.Set | None = None,
    limits: Limits | None = None,
) -> Piecewise:
    """Number of integer points of s as a piecewise quasi-polynomial in its parameters."""
    return sum_over(s, QPoly.const(1), context, limits)


def enumerate_count(s: isl.Set, values: Mapping[str, int], budget: Budget | None = None) -> int:
    """Oracle: fix every parameter to values[name] and count the points (isl enumeration,
    bounded by `budget`: budget.count_points)."""
    if isinstance(s, isl.BasicSet):
        s = isl.Set.from_basic_set(s)
    sp = s.get_space()
    ctx = s.get_ctx()
    for i in range(s.dim(_dt.param)):
        name = sp.get_dim_name(_dt.param, i)
        s = s.fix_val(_dt.param, i, isl.Val.read_from_str(ctx, str(int(values[name]))))
    return count_points(s, budget)
