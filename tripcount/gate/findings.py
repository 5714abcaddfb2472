# Findings of the gate for one file: each nest's budgets (degree, innermost
# working set, imbalance) and, against a baseline, its regressions, less
# what suppression comments allow. `findings_for` is the one entry, shared by
# `tripcount check` and the language server.

from __future__ import annotations

from collections.abc import Sequence
from fractions import Fraction
from typing import Any

from tripcount.analysis.caches import fmt_bytes
from tripcount.analysis.summary import (
    EXACT,
    LOWER,
    UPPER,
    LoopSummary,
    NestSummary,
    WorkingSetSummary,
)
from tripcount.config import ConfigError, parse_bytes
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.gate import (
    BudgetUnchecked,
    DegreeBudget,
    DegreeRegression,
    ImbalanceBudget,
    LeadingGrowth,
    UnknownSuppression,
    WorkingSetBudget,
    WorkingSetRegression,
)
from tripcount.gate.budgets import Budgets, is_level, level_of, level_rank
from tripcount.gate.readings import has_working_sets, leading_ratio, worst_innermost
from tripcount.gate.suppress import KINDS as SUPPRESSION_KINDS
from tripcount.gate.suppress import Suppressions, loop_span
from tripcount.ir import Span


def outer_loop(nest: NestSummary) -> LoopSummary | NestSummary:
    """The outermost loop, or the nest itself (its span) when it has none."""
    return nest.outer_loop() or nest


def at_text(at: dict[str, int]) -> str:
    return ", ".join(f"{k}={v}" for k, v in at.items()) or "the given sizes"


def _capacity(limit: str | int, levels: dict[str, int]) -> tuple[int, str]:
    """Bytes of a `max_working_set` budget and how to name it."""
    if isinstance(limit, str) and is_level(limit):
        if limit not in levels:
            raise ConfigError(f"max_working_set = '{limit}': no cache level {limit} "
                              f"(known: {', '.join(sorted(levels)) or 'none'}; set `caches`)")
        return levels[limit], f"{limit} ({fmt_bytes(levels[limit])})"
    cap = parse_bytes(limit)
    return cap, fmt_bytes(cap)


def _bound_text(lp: LoopSummary, ws: WorkingSetSummary, cap_text: str) -> str:
    """Why a working set bound cannot be held against the budget."""
    size = fmt_bytes(ws.occupancy or 0)
    if ws.estimate == LOWER:
        return (f"the working set of loop '{lp.var}' is only known as a lower bound "
                f"({size}: {ws.reason or 'references that are not modelled are left out'})")
    return (f"the working set of loop '{lp.var}' is only known as an upper bound "
            f"(at most {size}, more than {cap_text}: {ws.reason or 'the exact value was not computed'})")


def working_set_findings(nest: NestSummary, limit: str | int, options: Any, lines: list[str],
                         levels: dict[str, int], where: str) -> list[Diagnostic]:
    """TC602 for an innermost working set proven larger than the budget; TC604 when none can be held.

    A bound proves something only on one side: a lower bound above the
    budget, or an upper bound within it. Anything else is not checked.
    """
    nest_span = loop_span(outer_loop(nest), lines)
    cap, cap_text = _capacity(limit, levels)
    readings = [(lp, lp.working_set) for lp in nest.innermost_loops()
                if lp.working_set is not None and lp.working_set.occupancy is not None]
    if not readings:
        at = options.at or {}
        missing = [] if "*" in at else [p for p in nest.parameters if p not in at]
        if has_working_sets(nest) and missing:
            reason = (f"no value without sizes for {', '.join(missing)}: give them with `at` in "
                      "[tool.tripcount] (or --at)")
        else:
            reason = "no working set computed for its innermost loops"
        return [BudgetUnchecked(nest_span, budget="max_working_set", reason=reason)]
    readings.sort(key=lambda r: -(r[1].occupancy or 0))
    over = [(lp, ws) for lp, ws in readings if ws.proves_above(cap)]
    if over:
        lp, ws = over[0]
        size = ws.occupancy or 0
        return [WorkingSetBudget(loop_span(lp, lines), var=lp.var,
                                 size=("at least " if ws.estimate == LOWER else "") + fmt_bytes(size),
                                 at=at_text(options.at), level=level_of(size, levels), budget=cap_text, source=where)]
    unproven = [(lp, ws) for lp, ws in readings if not ws.proves_within(cap)]
    if unproven:
        lp, ws = unproven[0]
        return [BudgetUnchecked(nest_span, budget="max_working_set", reason=_bound_text(lp, ws, cap_text))]
    return []


def budget_findings(nest: NestSummary, budgets: Budgets, options: Any, lines: list[str],
                    levels: dict[str, int]) -> list[Diagnostic]:
    """Budget diagnostics of one nest (before suppressions)."""
    out: list[Diagnostic] = []
    nest_span = loop_span(outer_loop(nest), lines)
    where = budgets.source
    if budgets.max_degree is not None:
        work = nest.work()
        if work.degree is None:
            if nest.statements:
                out.append(BudgetUnchecked(nest_span, budget="max_degree", reason="no formula for its counts"))
        elif work.degree > budgets.max_degree:
            out.append(DegreeBudget(nest_span, degree=work.degree, what=work.who,
                                    leading=" + ".join(work.leading) or "?", budget=budgets.max_degree, source=where))
    if budgets.max_working_set is not None and nest.loops:
        out += working_set_findings(nest, budgets.max_working_set, options, lines, levels, where)
    if budgets.max_imbalance is not None:
        threads = getattr(options, "threads", None)
        for lp in nest.loops:
            bal = lp.balance
            if bal is None or bal.imbalance is None or bal.imbalance <= Fraction(budgets.max_imbalance):
                continue
            t = bal.threads or threads
            out.append(ImbalanceBudget(loop_span(lp, lines), var=lp.var, imbalance=f"{float(bal.imbalance):.3g}",
                                       threads=f" with {t} threads" if t else "",
                                       budget=f"{budgets.max_imbalance:g}", source=where))
    return out


def regression_findings(old: NestSummary, new: NestSummary, budgets: Budgets, options: Any,
                        lines: list[str], levels: dict[str, int], rev: str) -> list[Diagnostic]:
    """Baseline diagnostics of one matched pair of nests.

    A working set regression needs proof on both sides: the new value exact
    or a lower bound, the old one exact or an upper bound.
    """
    out: list[Diagnostic] = []
    span = loop_span(outer_loop(new), lines)
    w_old, w_new = old.work(), new.work()
    l_old, l_new = list(w_old.leading), list(w_new.leading)
    if w_old.degree is not None and w_new.degree is not None:
        if w_new.degree > w_old.degree:
            out.append(DegreeRegression(span, old=w_old.degree, new=w_new.degree, rev=rev,
                                        old_leading=" + ".join(l_old) or "?", new_leading=" + ".join(l_new) or "?"))
        elif w_new.degree == w_old.degree and w_new.degree > 0:
            r = leading_ratio(l_old, l_new, options.at)
            if r is not None and r > budgets.max_leading_growth + 1e-12:
                out.append(LeadingGrowth(span, ratio=f"{r:.3g}", rev=rev, old_leading=" + ".join(l_old),
                                         new_leading=" + ".join(l_new), allowed=f"{budgets.max_leading_growth:g}",
                                         source=budgets.source))
    wo, wn = worst_innermost(old), worst_innermost(new)
    if wo is not None and wn is not None and wo[1].estimate in (EXACT, UPPER) and wn[1].estimate in (EXACT, LOWER):
        so, sn = wo[1].occupancy or 0, wn[1].occupancy or 0
        a, b = level_of(so, levels), level_of(sn, levels)
        if level_rank(b, levels) > level_rank(a, levels):
            out.append(WorkingSetRegression(loop_span(wn[0], lines), var=wn[0].var, new_level=b,
                                            new_size=fmt_bytes(sn), old_level=a, old_size=fmt_bytes(so),
                                            rev=rev, at=at_text(options.at)))
    return out




def findings_for(nests: Sequence[NestSummary], text: str, budgets: Budgets, options: Any, levels: dict[str, int],
                 baseline: Sequence[tuple[NestSummary, NestSummary]] = (), rev: str = "") -> list[Diagnostic]:
    """Every finding of one file, less those its `tripcount: allow` comments suppress.

    Unknown kinds in suppression comments (TC620), each nest's budget
    findings, and the regressions of each (baseline nest, current nest) pair
    against revision `rev`. A comment applies to a finding when it sits on
    the header of the finding's loop or of the nest's outermost loop, or in
    the block of comment lines right above one of them.
    """
    lines = text.split("\n")
    sup = Suppressions.scan(text)
    out: list[Diagnostic] = [UnknownSuppression(Span(line, col, line, col + len(kind)), kind=kind,
                                                known=", ".join(SUPPRESSION_KINDS))
                             for line, col, kind in sup.unknown]
    raw = [(n, d) for n in nests for d in budget_findings(n, budgets, options, lines, levels)]
    raw += [(new, d) for old, new in baseline
            for d in regression_findings(old, new, budgets, options, lines, levels, rev)]
    for n, d in raw:
        outer = loop_span(outer_loop(n), lines)
        where = sup.lines_for(outer.line, outer.end_line) + sup.lines_for(d.span.line, d.span.end_line)
        if not sup.allows(d.code, where):
            out.append(d)
    return out
