# Analysis: execution counts of statements and trip counts of loops.
#
# For every statement the engine counts the integer points of its iteration
# domain; for every loop, the points of the loop's own domain (total body
# executions) and, with the outer loop variables turned into parameters, the
# trips per entry of the loop. Values at the --at sizes come from the
# formula, or from exact enumeration when the formula could not be had within
# the limits (said in a diagnostic). With --verify every formula is compared
# with enumeration at several sizes per piece.

from __future__ import annotations

import itertools
from collections.abc import Mapping
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount import engine
from tripcount.analysis.results import Count, LoopResult, NestResult, StatementResult
from tripcount.budget import Budget, TimeLimit, time_dependent
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.engine import FormulaLimit, VerifyMismatch, VerifyPassed
from tripcount.engine.islconv import val_int
from tripcount.formula import piecewise_value
from tripcount.ir import Span
from tripcount.model import Nest
from tripcount.options import Options


def context_for(s: isl.Set, context: isl.Set | None) -> isl.Set | None:
    """The nest's assumptions restricted to the parameters of `s` (same parameter space)."""
    if context is None:
        return None
    names = params_of(s)
    ctx = context
    for i in reversed(range(ctx.dim(isl.dim_type.param))):
        if ctx.get_dim_name(isl.dim_type.param, i) not in names:
            ctx = ctx.project_out(isl.dim_type.param, i, 1)
    if ctx.dim(isl.dim_type.set) > 0:
        ctx = ctx.params()
    elif not ctx.get_space().is_params():
        ctx = ctx.params()
    return ctx.align_params(s.get_space().params())


# Below this many seconds left in the nest's budget a formula is not attempted:
# the value at the --at sizes comes from enumeration (bounded by the hard stop).
MIN_FORMULA_S = 0.05


def limits_of(options: Options, budget: Budget | None = None) -> engine.Limits:
    """Engine limits of one count: the nest's, and never past the time left in
    its budget (each count used to get the whole limit, so the counts of the
    loops could spend the nest's time and leave the statements to the hard stop,
    with no value at all)."""
    time_s = options.time_limit
    if budget is not None:
        time_s = min(time_s, round(budget.remaining(), 2))
    return engine.Limits(time_s=time_s, max_pieces=options.max_pieces, budget=budget)


def params_of(s: isl.Set) -> list[str]:
    """Parameter names of an isl set."""
    return [s.get_dim_name(isl.dim_type.param, i) for i in range(s.dim(isl.dim_type.param))]


def value_at(formula: engine.Piecewise | None, s: isl.Set, options: Options,
             budget: Budget | None = None) -> int | Fraction | None:
    """Exact value at the --at sizes: None unless every parameter of `s` is given
    (without a formula, by enumeration within `budget`)."""
    point = options.sizes(params_of(s))
    if point is None:
        return None
    if formula is not None:
        return _as_int(formula.evaluate(point))
    return engine.enumerate_count(s, point, budget)


def _as_int(v: Fraction | int) -> int | Fraction:
    if isinstance(v, Fraction) and v.denominator == 1:
        return int(v)
    return v


def count_set(s: isl.Set, nest: Nest, options: Options, what: str, span: Span,
              diags: list[Diagnostic], budget: Budget | None = None) -> Count:
    """Count a set: formula plus value, with a diagnostic and fallback on limits."""
    try:
        limits = limits_of(options, budget)
        if limits.time_s < MIN_FORMULA_S:
            raise TimeLimit(f"time limit of {options.time_limit:g} s per nest spent before this count")
        formula = engine.count(s, context_for(s, nest.context), limits)
    except engine.EngineLimit as exc:
        v = None
        fallback = "values below are exact enumerations at the given sizes"
        try:
            v = value_at(None, s, options, budget)
        except Exception:  # enumeration too can be out of reach; say so
            fallback = "no value either"
        if v is None and not options.at:
            fallback = "give --at sizes for exact values"
        diags.append(FormulaLimit(span, what=what, reason=str(exc), fallback=fallback,
                                  time_bound=time_dependent(exc)))
        return Count(value=v, formula=None, note="formula not available: " + str(exc))
    c = Count(value=value_at(formula, s, options), formula=formula)
    c.locate(options.sizes(params_of(s)))
    return c


def middle_point(reach: isl.Set, n_outer: int, options: Options) -> dict[str, int] | None:
    """A typical entry of an inner loop: --at sizes, outer variables mid-range in turn.

    Used to pick which piece of a per-entry trip count to show first (the
    generic piece of a formula in sizes and outer variables is ambiguous).
    """
    names = params_of(reach)
    n_sizes = len(names) - n_outer
    point = options.sizes(names[:n_sizes])
    if point is None:
        return None
    s = reach
    ctx = s.get_ctx()
    for i, n in enumerate(names[:n_sizes]):
        s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(ctx, str(point[n])))
    for k in range(n_outer):
        pos = n_sizes + k
        t = s.move_dims(isl.dim_type.set, 0, isl.dim_type.param, pos, 1)
        try:
            lo, hi = t.lexmin(), t.lexmax()
            if lo.is_empty():
                return None
            a = val_int(lo.sample_point().get_coordinate_val(isl.dim_type.set, 0))
            b = val_int(hi.sample_point().get_coordinate_val(isl.dim_type.set, 0))
        except Exception:  # unbounded or too hard: fall back to the generic piece
            return None
        mid = (a + b) // 2
        point[names[pos]] = mid
        s = s.fix_val(isl.dim_type.param, pos, isl.Val.read_from_str(ctx, str(mid)))
    return point


def outer_as_params(domain: isl.Set, n_outer: int) -> isl.Set:
    """Move the first `n_outer` set dimensions of `domain` into the parameters."""
    n_param = domain.dim(isl.dim_type.param)
    return domain.move_dims(isl.dim_type.param, n_param, isl.dim_type.set, 0, n_outer)


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Fill in statement counts and loop trip counts of one nest (within `budget`; None: no bound)."""
    nest = result.nest
    diags = result.diagnostics
    # statements first: their counts are the main result, and they get the time first
    for stmt in nest.statements:
        if stmt.domain is None:
            result.statements.append(StatementResult(stmt, Count(note="count unknown (refused)")))
            continue
        c = count_set(stmt.domain, nest, options, f"statement {stmt.id}", stmt.span, diags, budget)
        result.statements.append(StatementResult(stmt, c))
    for loop in nest.loops:
        if loop.domain is None:
            result.loops.append(LoopResult(loop, Count(note="trip count unknown (refused)")))
            continue
        trips = count_set(loop.domain, nest, options, f"loop '{loop.var}'", loop.span, diags, budget)
        per_entry = None
        if loop.depth > 0:
            local = outer_as_params(loop.domain, loop.depth)
            # the outer iterations that reach this loop: conditions they imply go unsaid
            reach = local.params()
            ctx = context_for(local, nest.context)
            reach = reach if ctx is None else reach.intersect(ctx)
            try:
                limits = limits_of(options, budget)
                if limits.time_s < MIN_FORMULA_S:
                    raise TimeLimit("no time left")
                pw = engine.count(local, reach.coalesce(), limits)
                per_entry = Count(value=None, formula=pw)
                per_entry.locate(middle_point(reach, loop.depth, options))
            except engine.EngineLimit:
                per_entry = None
        else:
            per_entry = Count(value=trips.value, formula=trips.formula)
        result.loops.append(LoopResult(loop, trips, per_entry))
    if options.verify:
        verify(result, options, budget)


def verification_points(formula: engine.Piecewise, s: isl.Set, limit: int = 40) -> list[dict[str, int]]:
    """Parameter points to check a formula at: a small grid, plus in every piece
    a sample point and its lexicographic extremes within a box (points on the
    boundaries between pieces, where a misprinted condition shows)."""
    names = params_of(s)
    if not names:
        return [{}]
    grid = [-1, 0, 1, 2, 3, 5, 8]
    points = [dict(zip(names, combo, strict=True))
              for combo in itertools.islice(itertools.product(grid, repeat=len(names)), limit)]
    for piece in formula.pieces:
        try:
            dom = piece.domain
            ctx = dom.get_ctx()
            box = isl.Set.universe(dom.get_space())
            for i in range(len(names)):
                box = box.lower_bound_val(isl.dim_type.param, i, isl.Val.read_from_str(ctx, "-4"))
                box = box.upper_bound_val(isl.dim_type.param, i, isl.Val.read_from_str(ctx, "24"))
            inside = dom.intersect(box)
            if inside.is_empty():
                continue
            as_set = inside.move_dims(isl.dim_type.set, 0, isl.dim_type.param, 0, len(names))
            for pt in (inside.sample_point(), as_set.lexmin().sample_point(),
                       as_set.lexmax().sample_point()):
                if pt.is_void():
                    continue
                kind = isl.dim_type.param if pt.get_space().dim(isl.dim_type.set) == 0 else isl.dim_type.set
                points.append({n: val_int(pt.get_coordinate_val(kind, i))
                               for i, n in enumerate(names)})
        except Exception:  # a piece without a small sample is covered by the grid
            continue
    return points


def printed_value(formula: engine.Piecewise, point: Mapping[str, int]) -> Fraction:
    """The value of the formula as printed (JSON pieces and text report alike),
    read back with the formula reader under C semantics."""
    pieces = [{"when": p.when, "expr": p.poly.to_expr()} for p in formula.pieces]
    return piecewise_value(pieces, point)


def _check_formula(formula: engine.Piecewise, dom: isl.Set, context: isl.Set,
                   budget: Budget | None = None) -> tuple[str, Any, Any, dict] | None:
    """First disagreement of the formula (evaluated, and as printed) with
    enumeration: (which, got, want, point), or None. Only points where the
    formula is claimed count: the assumptions, and for trips per entry the
    outer iterations that reach the loop (the formula's own context)."""
    for pt in verification_points(formula, dom):
        if not in_context(context, pt):
            continue
        if formula.context is not None and not in_context(formula.context, pt):
            continue
        want = engine.enumerate_count(dom, pt, budget)
        got = formula.evaluate(pt)
        if got != want:
            return "formula", got, want, pt
        try:
            shown = printed_value(formula, pt)
        except (ValueError, KeyError, ZeroDivisionError) as exc:
            return f"printed formula ({exc})", None, want, pt
        if shown != want:
            return "printed formula", shown, want, pt
    return None


def verify(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Compare every formula of the nest, and its printed text read back, with
    enumeration (a diagnostic per mismatch)."""
    nest = result.nest
    checked = 0
    npoints = 0
    before = len(result.diagnostics)
    items = [(f"loop '{lr.loop.var}'", lr.loop.domain, lr.trips, lr.loop.span) for lr in result.loops]
    items += [
        (f"loop '{lr.loop.var}' per entry", outer_as_params(lr.loop.domain, lr.loop.depth),
         lr.per_entry, lr.loop.span)
        for lr in result.loops
        if lr.loop.depth > 0 and lr.loop.domain is not None and lr.per_entry is not None
    ]
    items += [(f"statement {sr.stmt.id}", sr.stmt.domain, sr.count, sr.stmt.span) for sr in result.statements]
    for what, dom, cnt, span in items:
        if dom is None or cnt is None or cnt.formula is None:
            continue
        checked += 1
        npoints += len(verification_points(cnt.formula, dom))
        bad = _check_formula(cnt.formula, dom, nest.context, budget)
        if bad is not None:
            which, got, want, pt = bad
            result.diagnostics.append(VerifyMismatch(
                span, what=f"{what} ({which})", got=got, want=want, point=point_text(pt)))
    mismatches = len(result.diagnostics) - before
    if checked and not mismatches:
        result.diagnostics.append(VerifyPassed(nest.span, n=checked, points=npoints))


def in_context(context: isl.Set, pt: Mapping[str, int]) -> bool:
    """True when the parameter values `pt` satisfy `context` (names it lacks are free)."""
    s = context
    for i in range(s.dim(isl.dim_type.param)):
        name = s.get_dim_name(isl.dim_type.param, i)
        if name in pt:
            s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(pt[name])))
    return not s.is_empty()


def point_text(pt: Mapping[str, int]) -> str:
    """'N=3, M=0' text of a parameter point."""
    return ", ".join(f"{k}={v}" for k, v in pt.items()) or "(no parameters)"
