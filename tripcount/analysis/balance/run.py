# Balance: the analysis of one nest -- for every parallel loop, the work per
# iteration and per thread, the imbalance at the --at sizes, and, past the
# threshold, the recommendation.

from __future__ import annotations

import os
from collections.abc import Mapping
from fractions import Fraction
from typing import Any

from tripcount import ir
from tripcount.analysis import schedules as sch
from tripcount.analysis.balance.choice import _pick, alternatives, choose
from tripcount.analysis.balance.formulas import thread_formula, thread_name, work_formula
from tripcount.analysis.balance.profiles import (
    BLOCKS,
    Profiles,
    WorkFn,
    _work_at,
    profiles,
    static_per_thread_exact,
)
from tripcount.analysis.balance.results import (
    ASSUMPTIONS,
    PAIR,
    Alternative,
    ParallelBalance,
    schedule_text,
)
from tripcount.analysis.balance.space import (
    Space,
    _ancestors,
    _param_names,
    _sample,
    const_value,
    sizes_of,
    space_at,
    targets,
)
from tripcount.analysis.results import Count, NestResult
from tripcount.budget import Budget
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.balance import (
    BalanceNotModelled,
    BalancePartial,
    FlopsUnavailable,
    LoadImbalance,
    NestedParallel,
)
from tripcount.diagnostics.internal import InternalError
from tripcount.model import Loop, Nest
from tripcount.options import Options

# --------------------------------------------------------------------------
# The analysis


def _flop_weight(extra: Any) -> int | Fraction | None:
    """Flops per execution of a statement from the flops analysis' extra, if it says."""
    if extra is None:
        return None
    if isinstance(extra, int | Fraction) and not isinstance(extra, bool):
        return extra
    for key in ("per_instance", "per_execution", "flops_per_instance", "weight"):
        v = extra.get(key) if isinstance(extra, dict) else getattr(extra, key, None)
        if isinstance(v, int | Fraction) and not isinstance(v, bool):
            return v
    return None



def _threads(omp: ir.OmpClauses, options: Options, at: Mapping[str, int]) -> tuple[int, str]:
    if omp.num_threads is not None:
        v = const_value(omp.num_threads, at)
        if v is not None and v > 0:
            return v, "num_threads"
    if options.threads:
        return int(options.threads), "--threads"
    return max(1, os.cpu_count() or 1), "host cores"


def _schedule(omp: ir.OmpClauses) -> tuple[str, ir.Expr | None, str | None]:
    """(modelled schedule, chunk expression, note)."""
    s = omp.schedule
    if s is None:
        return "static", None, "no schedule clause: libgomp's default is schedule(static)"
    if s == "auto":
        return "static", None, "schedule(auto): libgomp runs it as schedule(static)"
    if s == "runtime":
        return "dynamic", ir.IntLit(omp.span, 1), (
            "schedule(runtime): modelled as libgomp's default with OMP_SCHEDULE unset, schedule(dynamic, 1)")
    return s, omp.chunk, None


def _fmt_at(at: Mapping[str, int], names: list[str]) -> str:
    return ", ".join(f"{n}={at[n]}" for n in names if n in at)


def _space(nest: Nest, loop: Loop, collapse: int, weights: Mapping[str, int | Fraction]) -> tuple[Space | None, str]:
    chain = [loop]
    for _ in range(collapse - 1):
        cur = chain[-1]
        if len(cur.children) != 1 or any(st.loops and st.loops[-1] == cur.index for st in nest.statements):
            return None, f"collapse({collapse}) needs {collapse} perfectly nested loops"
        chain.append(nest.loops[cur.children[0]])
    if any(lp.domain is None for lp in chain):
        return None, "the iteration domain of the loop was refused"
    stmts = [st for st in nest.statements if loop.index in st.loops]
    if any(st.domain is None for st in stmts):
        return None, "a statement inside the loop has no exact domain"
    if any(chain[-1].index not in st.loops for st in stmts):
        return None, f"collapse({collapse}) needs {collapse} perfectly nested loops"
    return Space(
        depth=loop.depth,
        steps=tuple(lp.step or 1 for lp in chain),
        domains=tuple(lp.domain.reset_tuple_id() for lp in chain),  # type: ignore[union-attr]
        stmts=tuple((st.domain.reset_tuple_id(), weights.get(st.id, 1)) for st in stmts),  # type: ignore[union-attr]
    ), ""




def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Fill in the "parallel" extra of every parallel loop of the nest (within `budget`; None: no bound)."""
    nest = result.nest
    loops = {lr.loop.index: lr for lr in result.loops}
    found = targets(nest, options)
    chosen = {lp.index for lp, _, _ in found}
    covered: set[int] = set()
    for loop, omp, origin in found:
        if loop.index in covered:
            continue
        outer = next((a for a in _ancestors(nest, loop) if a.index in chosen), None)
        if outer is not None:
            result.diagnostics.append(NestedParallel(loop.span, var=loop.var, outer=outer.var,
                                                     outer_at=outer.header))
            continue
        cur = loop
        for _ in range(max(1, omp.collapse) - 1):
            if len(cur.children) != 1:
                break
            cur = nest.loops[cur.children[0]]
            covered.add(cur.index)
        before = len(result.diagnostics)
        try:
            bal = analyze_loop(result, loop, omp, origin, options, budget)
        except Exception as exc:  # one loop must not take the other loops' balance down
            result.diagnostics.append(InternalError(loop.span, what=f"balance of loop '{loop.var}': "
                                                    f"{type(exc).__name__}: {exc}"))
            continue
        if bal is not None and ({loop.index} | covered) & _sequential(result):
            # iterations that depend on each other (TC507): a schedule cannot fix that
            bal.recommendation = "no schedule advice: the loop carries a dependence (TC507)"
            bal.alternatives, bal.best = [], None
            result.diagnostics[before:] = [d for d in result.diagnostics[before:] if d.code != LoadImbalance.code]
        if bal is not None and loop.index in loops:
            loops[loop.index].extras["parallel"] = bal


def _sequential(result: NestResult) -> set[int]:
    """Loops the dependence analysis (run before this one) found sequential."""
    deps = result.extras.get("dependences")
    return {v.loop for v in getattr(deps, "loops", ()) if v.verdict == "sequential"}


def analyze_loop(result: NestResult, loop: Loop, omp: ir.OmpClauses, origin: str,
                 options: Options, budget: Budget | None = None) -> ParallelBalance | None:
    """The balance of one parallel loop (diagnostics go to the nest result)."""
    nest = result.nest
    diags = result.diagnostics
    at = sizes_of(options, nest)
    schedule, chunk_expr, sched_note = _schedule(omp)
    threads, threads_from = _threads(omp, options, at)
    chunk = None
    if chunk_expr is not None:
        chunk = const_value(chunk_expr, at)
        if chunk is None:
            diags.append(BalanceNotModelled(loop.span, var=loop.var,
                                            reason="the chunk size is not a constant (give --at sizes)"))
            return None
        chunk = max(1, chunk)  # libgomp treats a chunk size below 1 as 1
    collapse = max(1, omp.collapse)
    bal = ParallelBalance(var=loop.var, line=loop.header.line, schedule=schedule, chunk=chunk,
                          threads=threads, threads_from=threads_from, schedule_written=omp.schedule,
                          origin=origin, collapse=collapse, thread_param=thread_name(nest))
    if sched_note:
        bal.notes.append(sched_note)

    # The work measure: statement instances, or flops when the flops analysis weighed them.
    weights: dict[str, int | Fraction] = {}
    if options.work == "flops":
        for sr in result.statements:
            w = _flop_weight(sr.extras.get("flops"))
            if w is not None:
                weights[sr.stmt.id] = w
        inside = [st.id for st in nest.statements if loop.index in st.loops]
        lacking = [s for s in inside if s not in weights]
        if lacking or not inside or not any(weights[s] for s in inside):
            what = ("statement(s) " + ", ".join(lacking) if lacking
                    else "this loop (it has no floating-point operations)")
            weights = {}
            diags.append(FlopsUnavailable(loop.span, var=loop.var, what=what))
            bal.notes.append("work measured in statement instances: no flop counts")
        else:
            bal.work = "flops"
    sp, why = _space(nest, loop, collapse, weights)
    if sp is None:
        diags.append(BalanceNotModelled(loop.span, var=loop.var, reason=why))
        return None
    var_names = [a.var for a in reversed(_ancestors(nest, loop))] + _collapsed_vars(nest, loop, collapse)
    bal.work_per_iteration = work_formula(nest, sp, options, " and ".join(var_names[loop.depth:]), budget)
    if schedule == "static":
        if (chunk_expr is not None and const_value(chunk_expr, {}) is None) or (
                threads_from == "num_threads" and const_value(omp.num_threads, {}) is None):
            bal.per_thread_formula = Count(note="formula not available: the chunk size or the number "
                                                "of threads depends on the sizes")
        else:
            bal.per_thread_formula = thread_formula(nest, sp, options, threads, chunk, bal.thread_param, budget)
    bal.estimate = schedule != "static"

    used = sorted({n for s in sp.domains for n in _param_names(s)} | {n for s, _ in sp.stmts for n in _param_names(s)})
    fixed = space_at(sp, at)
    if fixed is None:
        missing_sizes = [n for n in used if n not in at]
        bal.recommendation = "give --at " + ",".join(f"{n}=..." for n in missing_sizes) + " for per-thread values"
        return bal
    bal.at = _fmt_at(at, used) or "these sizes"
    weigh, check_note = _formula_work(bal.work_per_iteration, fixed, at, var_names)
    if check_note:
        bal.notes.append(check_note)
    prof, why = profiles(fixed, work=weigh, budget=budget)
    current = (schedule, chunk)
    if prof is None:
        # Too large to weigh iteration by iteration: static shares are still exact by counting.
        exact = static_per_thread_exact(fixed, threads, chunk, budget) if schedule == "static" else None
        if exact is None:
            diags.append(BalancePartial(loop.span, var=loop.var, what=f"no per-thread values at {bal.at}: {why}"))
            bal.recommendation = f"no per-thread values at {bal.at}: {why}"
            return bal
        bal.per_thread = exact
        o = sch.Outcome(threads)
        o.add(exact)
        bal.imbalance = o.imbalance
        bal.notes.append(f"imbalance from the per-thread totals ({why}; barriers between entries not modelled)")
        bal.alternatives = []
        _finish(bal, loop, options, diags, None)
        return bal
    bal.entries = prof.n_entries
    if prof.entries:
        ns = {p.n for _, p in prof.entries}
        bal.iterations = ns.pop() if len(ns) == 1 else None
        bal.iteration_work = _work_range(prof)
    o = sch.outcome(schedule, chunk, prof.entries, threads)
    bal.per_thread = o.per_thread
    bal.imbalance = o.imbalance
    exact_values = schedule == "static" and not prof.blocked
    if prof.blocked:
        bal.notes.append(f"iterations weighed in blocks of {BLOCKS} per entry for the schedule comparison")
        bal.estimate = True
        if schedule == "static":
            exact = static_per_thread_exact(fixed, threads, chunk, budget)
            if exact is not None:
                bal.per_thread = exact
                if len(prof.entries) == 1:  # one entry, or identical ones: the totals give the imbalance
                    o2 = sch.Outcome(threads)
                    o2.add(exact)
                    bal.imbalance = o2.imbalance
                    bal.estimate = False
                exact_values = True
    if exact_values:
        _check_thread_formula(bal, at)
    if bal.entries and bal.entries > 1:
        bal.notes.append(f"the loop is entered {bal.entries:,} times; each entry ends with a barrier, so the "
                         "imbalance is the sum of each entry's busiest thread over the mean")
    alts = None
    if bal.imbalance is not None and bal.imbalance > Fraction(str(options.imbalance_threshold)):
        alts = alternatives(prof, threads, current)
    _finish(bal, loop, options, diags, alts)
    return bal


def _formula_work(work: Count | None, fixed: Space, at: Mapping[str, int],
                  names: list[str]) -> tuple[WorkFn | None, str]:
    """Work of one iteration from the formula (fast), checked once against enumeration."""
    if work is None or work.formula is None:
        return None, ""
    formula = work.formula
    base = dict(at)

    def weigh(point: tuple[int, ...]) -> int | Fraction:
        values = dict(base)
        values.update(zip(names, point, strict=False))
        v = Fraction(formula.evaluate(values))
        return int(v) if v.denominator == 1 else v

    pt = _sample(fixed.domain)
    if pt is not None:
        try:
            ok = weigh(pt) == _work_at(fixed, pt)
        except Exception:  # a formula that cannot be evaluated here: enumerate instead
            ok = False
        if not ok:
            return None, "work per iteration weighed by enumeration (the formula disagreed at a sample point)"
    return weigh, ""


def _check_thread_formula(bal: ParallelBalance, at: Mapping[str, int]) -> None:
    """Drop a per-thread formula that disagrees with the exact values (never expected)."""
    c = bal.per_thread_formula
    if c is None or c.formula is None or bal.per_thread is None:
        return
    names = [p for p in c.formula.params if p != bal.thread_param]
    if any(p not in at for p in names):
        return
    try:
        got = [c.formula.evaluate({**{p: at[p] for p in names}, bal.thread_param: t})
               for t in range(bal.threads)]
    except Exception as exc:  # evaluation failure: keep the values, drop the formula
        got = [f"error {exc}"]
    if got != [Fraction(v) for v in bal.per_thread]:
        bal.per_thread_formula = Count(note="formula withheld: it disagreed with the exact per-thread "
                                            "values at the --at sizes (please report)")
        bal.notes.append("per-thread formula withheld after a failed check")


def _collapsed_vars(nest: Nest, loop: Loop, collapse: int) -> list[str]:
    out = [loop.var]
    cur = loop
    for _ in range(collapse - 1):
        if len(cur.children) != 1:
            break
        cur = nest.loops[cur.children[0]]
        out.append(cur.var)
    return out


def _work_range(prof: Profiles) -> tuple[int | Fraction, int | Fraction, Fraction] | None:
    lo: int | Fraction | None = None
    hi: int | Fraction | None = None
    total: int | Fraction = 0
    count = 0
    for times, p in prof.entries:
        if isinstance(p, sch.ConstProfile):
            vals = [p.w]
        elif isinstance(p, sch.VectorProfile):
            vals = p.work
        else:
            return None
        lo = min([*vals] + ([lo] if lo is not None else []))
        hi = max([*vals] + ([hi] if hi is not None else []))
        total += times * p.range_sum(0, p.n)
        count += times * p.n
    if lo is None or hi is None or not count:
        return None
    return lo, hi, Fraction(total) / count


def _finish(bal: ParallelBalance, loop: Loop, options: Options, diags: list[Diagnostic],
            alts: list[Alternative] | None) -> None:
    """Flag, recommendation and diagnostic."""
    threshold = Fraction(str(options.imbalance_threshold))
    imb = bal.imbalance
    if imb is None:
        return
    current = (bal.schedule, bal.chunk)
    how = schedule_text(bal.schedule, bal.chunk)
    bal.flagged = imb > threshold
    bal.alternatives = alts if alts is not None else []
    if not bal.flagged:
        bal.recommendation = ""
        return
    best = choose(alts or [], current)
    bal.best = best
    state = (f"{'model estimate: ' if bal.estimate else ''}{how} gives {bal.threads} threads imbalance "
             f"{float(imb):.2f} (efficiency {float(1 / imb):.0%}) at {bal.at}")
    if best is None or best.imbalance >= imb or ((best.schedule, best.chunk) == current and not best.rewrite):
        advice = "no schedule in the comparison does better (model estimate)" if alts else ""
        bal.recommendation = advice
    else:
        gain = f"imbalance {float(best.imbalance):.2f} (efficiency {float(1 / best.imbalance):.0%})"
        advice = ("" if bal.estimate else "model estimate: ") + f"{best.label} gives {float(best.imbalance):.2f}"
        if best.rewrite == PAIR:
            what = (f"rewrite '{bal.var}' as a loop over the first half of its iterations, each doing "
                    f"iteration k and its mirror n-1-k (the middle one alone when n is odd), with "
                    f"{schedule_text(best.schedule, best.chunk)}")
        elif best.rewrite:
            what = f"run '{bal.var}' backwards with {schedule_text(best.schedule, best.chunk)}"
        else:
            what = f"use {best.label}"
        bal.recommendation = f"model estimate ({ASSUMPTIONS}): {what}: {gain}"
        clause = _pick([a for a in alts or [] if not a.rewrite], current)
        if best.rewrite and clause is not None and clause.imbalance < imb:
            bal.recommendation += (f"; without a rewrite, {clause.label} gives {float(clause.imbalance):.2f}")
    diags.append(LoadImbalance(loop.span, var=bal.var, loop_at=loop.header, state=state,
                               advice="; " + advice if advice else ""))

