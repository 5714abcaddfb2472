# Analysis: --verify for the work figures (flops by kind and by call, loads,
# stores), run after every other analysis; then the working sets
# (verify_memory) and the per-thread balance (verify_threads) by brute-force
# enumeration, summed up in one TC306 note (a mismatch there is TC305).
#
# Each of these is a sum over statements of a weight per execution times the
# statement's execution count. At every verification point the printed
# formula (read back with tripcount.formula, as --verify does for the counts)
# and its value at the --at sizes must equal that sum with each execution
# count enumerated exactly (isl), not taken from the count formulas: a slip
# in scaling, summing or printing shows as a TC302 mismatch.

from __future__ import annotations

import itertools
from collections.abc import Mapping
from fractions import Fraction
from typing import Any

from tripcount import engine
from tripcount.analysis import verify_memory, verify_threads
from tripcount.analysis.counts import (
    in_context,
    point_text,
    printed_value,
    verification_points,
)
from tripcount.analysis.results import Count, NestResult
from tripcount.analysis.verify_enum import Tally, budget_for
from tripcount.budget import Budget
from tripcount.diagnostics.engine import FiguresVerified, VerifyMismatch, WorkVerified
from tripcount.options import Options

MAX_POINTS = 60


def _figures(result: NestResult) -> list[tuple[str, Count, dict[int, int]]]:
    """(name, printed count, weight per execution of each statement) of every work figure."""
    out: list[tuple[str, Count, dict[int, int]]] = []
    nest_weights: dict[str, dict[int, int]] = {}
    for k, sr in enumerate(result.statements):
        f = sr.extras.get("flops")
        if f is None:
            continue
        parts: list[tuple[str, Any, int]] = [("flops", f.total, f.per_execution)]
        parts += [(f"flops {kind}", wc, wc.per_execution or 0) for kind, wc in f.kinds.items()]
        parts += [(f"calls to {name}", wc, wc.per_execution or 0) for name, wc in f.calls.items()]
        for key in ("loads", "stores"):
            wc = sr.extras.get(key)
            if wc is not None:
                parts.append((key, wc, wc.per_execution or 0))
        for name, wc, weight in parts:
            out.append((f"{name} of {sr.stmt.id}", wc.count, {k: weight}))
            nest_weights.setdefault(name, {})[k] = weight
    totals = {"flops": result.extras.get("flops"), "loads": result.extras.get("loads"),
              "stores": result.extras.get("stores")}
    flops = totals["flops"]
    if flops is not None:
        out.append(("flops of the nest", flops.total.count, nest_weights.get("flops", {})))
        out += [(f"flops {kind} of the nest", wc.count, nest_weights.get(f"flops {kind}", {}))
                for kind, wc in flops.kinds.items()]
        out += [(f"calls to {name} in the nest", wc.count, nest_weights.get(f"calls to {name}", {}))
                for name, wc in flops.calls.items()]
    for key in ("loads", "stores"):
        if totals[key] is not None:
            out.append((f"{key} of the nest", totals[key].count, nest_weights.get(key, {})))
    return out


def _points(result: NestResult) -> list[dict[str, int]]:
    seen: set[tuple] = set()
    out: list[dict[str, int]] = []
    for sr in result.statements:
        if sr.stmt.domain is None or sr.count.formula is None:
            continue
        for pt in verification_points(sr.count.formula, sr.stmt.domain):
            key = tuple(sorted(pt.items()))
            if key not in seen and in_context(result.nest.context, pt):
                seen.add(key)
                out.append(pt)
    return out[:MAX_POINTS]


def _counts_at(result: NestResult, pt: Mapping[str, int], budget: Budget | None = None) -> dict[int, int] | None:
    out = {}
    for k, sr in enumerate(result.statements):
        if sr.stmt.domain is None:
            return None
        out[k] = int(engine.enumerate_count(sr.stmt.domain, dict(pt), budget))
    return out


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """With --verify: check every work figure against weights times enumerated counts (enumerations
    within `budget`; None: no bound), then the working sets and the per-thread balance against
    brute-force enumeration."""
    if not options.verify or not result.statements:
        return
    _work(result, options, budget)
    _figures_by_enumeration(result, options)


def _figures_by_enumeration(result: NestResult, options: Options) -> None:
    """Working sets (verify_memory) and per-thread work (verify_threads), with one summary note."""
    budget = budget_for(options.time_limit)
    tally = Tally()
    # the values at the --at sizes first: they are what people act on
    verify_memory.verify_at(result, options, budget, tally)
    verify_threads.verify_at(result, options, budget, tally)
    verify_memory.verify_formulas(result, options, budget, tally)
    verify_threads.verify_formulas(result, options, budget, tally)
    verify_memory.verify_thresholds(result, options, budget, tally)
    if not tally.checked and not tally.skipped:
        return
    parts = []
    if tally.checked:
        parts.append(f"verified {len(tally.figures)} working-set and per-thread figures of this nest, values "
                     f"and formulas as printed, against brute-force enumeration of the touched elements and "
                     f"lines and of each thread's iterations ({tally.checked} comparisons at "
                     f"{len(tally.points)} size point{'s' if len(tally.points) != 1 else ''})")
        if tally.mismatches:
            parts[-1] += f" ({tally.mismatches} mismatch{'es' if tally.mismatches != 1 else ''}, above)"
    if tally.skipped:
        parts.append("not checked: " + "; ".join(tally.skipped))
    result.diagnostics.append(FiguresVerified(result.nest.span, message="; ".join(parts)))


def _work(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Flops by kind and by call, loads and stores, against weights times enumerated counts."""
    figures = _figures(result)
    if not figures:
        return
    nest = result.nest
    points = _points(result)
    at = options.sizes(nest.params)
    enumerated = [(pt, _counts_at(result, pt, budget)) for pt in itertools.chain(points, [at] if at else [])]
    bad = 0
    for what, count, weights in figures:
        for idx, (pt, counts) in enumerate(enumerated):
            if counts is None:
                break
            want = Fraction(sum(w * counts[k] for k, w in weights.items()))
            is_at = at is not None and idx == len(enumerated) - 1
            got: Any = None
            if is_at and count.value is not None:
                got = count.value
            elif count.formula is not None and not is_at:
                got = count.formula.evaluate(pt)
                if got == want:
                    try:
                        got = printed_value(count.formula, pt)
                    except (ValueError, KeyError, ZeroDivisionError) as exc:
                        got = f"an unreadable text ({exc})"
            if got is not None and got != want:
                result.diagnostics.append(VerifyMismatch(nest.span, what=what, got=got, want=want,
                                                         point=point_text(pt)))
                bad += 1
                break
    if not bad:
        result.diagnostics.append(WorkVerified(nest.span, n=len(figures), points=len(enumerated)))
