# Footprint: the analysis of one nest -- every loop level's working set and
# per-iteration footprint, the nest's compulsory footprint, cache fit and
# arithmetic intensity (from the flops analysis' totals), attached to the nest
# result as extras.

from __future__ import annotations

import islpy as isl

from tripcount.analysis import flops as flops_mod
from tripcount.analysis.footprint.fit import cache_fit, flag
from tripcount.analysis.footprint.intensity import intensity
from tripcount.analysis.footprint.results import (
    CACHE_ASSUMPTIONS,
    LAYOUT_NOTE,
    NestFootprint,
    WorkingSet,
)
from tripcount.analysis.footprint.scopes import Analyzer
from tripcount.analysis.results import LoopResult, NestResult
from tripcount.budget import Budget
from tripcount.diagnostics import Phrase
from tripcount.diagnostics.memory import ElementSizeUnknown, FootprintLimit, FootprintRefused
from tripcount.model import Loop, Nest
from tripcount.options import Options


def _element_size_unknown(nest: Nest, unknown: list[str]) -> ElementSizeUnknown:
    """TC403, saying why: arrays never declared, or declared with a type whose size is not known here
    (a template parameter such as `std::vector<T>`, or a type from a header that was not read)."""
    types: dict[str, str] = {}
    for s in nest.statements:
        for a in s.accesses:
            if a.array in unknown and a.elem_type and a.array not in types:
                types[a.array] = a.elem_type
    arrays = ", ".join(f"'{a}'" for a in unknown)
    if not types:
        return ElementSizeUnknown(nest.span, arrays=arrays, why="",
                                  remedy="declare the arrays or give --elem-size BYTES")
    named = sorted(set(types.values()))
    why = (f" (declared with element type {', '.join(repr(t) for t in named)}, whose size is not known: a "
           "template parameter, or a type from a header that was not read)")
    return ElementSizeUnknown(nest.span, arrays=arrays, why=why,
                              remedy="give --elem-size BYTES, or -I DIR for the header that defines the type")


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Footprints of every loop level and of the nest, cache fit and intensity of one nest,
    within `budget` (None: no bound). The flops come from the flops analysis (run here
    when the nest has none yet)."""
    nest = result.nest
    total_flops = result.extras.get("flops")
    if total_flops is None:
        total_flops = flops_mod.analyze(result, options)
    an = Analyzer(result, options, budget)
    diags = result.diagnostics
    unknown = sorted(a.name for a in an.arrays.values() if not a.elem)
    if unknown:
        diags.append(_element_size_unknown(nest, unknown))
    for name, (first, other) in sorted(an.mixed.items()):
        k, m = first.map.dim(isl.dim_type.out), other.map.dim(isl.dim_type.out)
        diags.append(FootprintRefused(
            other.span, what=f"array '{name}'",
            reason=Phrase((f"it is used with {m} subscript{'s' if m != 1 else ''} here and with {k} "
                           f"subscript{'s' if k != 1 else ''} at ", first.span, ", so its elements have no single "
                           "index space; its references are left out and the working sets that contain them are "
                           "lower bounds"))))
    assumptions = LAYOUT_NOTE + "; cache fit: " + CACHE_ASSUMPTIONS
    levels: list[WorkingSet] = []
    by_index: dict[int, LoopResult] = {lr.loop.index: lr for lr in result.loops}
    refused_stmts = [s for s in nest.statements if s.domain is None]
    refused_loops: list[Loop] = []
    # the gate (options.detail == "gate") holds only innermost working sets against budgets
    has_inner = {lp.parent for lp in nest.loops if lp.parent is not None} if options.gate else set()
    for loop in nest.loops:
        if loop.index in has_inner:
            continue
        stmts = an.statements_in(loop)
        if loop.domain is None or any(s.domain is None for s in stmts):
            refused_loops.append(loop)
            continue
        chain = an.chain(loop)
        fixed = tuple(lp.var for lp in chain[:-1])
        parent = nest.loops[loop.parent] if loop.parent is not None else None
        whole_label = (f"all iterations of loop '{loop.var}', with {', '.join(fixed)} fixed" if fixed
                       else f"all iterations of loop '{loop.var}' (the whole nest)")
        whole = an.scope(stmts, fixed, parent.domain if parent else None, whole_label)
        it_label = (f"one iteration of loop '{loop.var}' (its body for one value of {loop.var}"
                    + (f", with {', '.join(fixed)} fixed)" if fixed else ")"))
        per_it = None if options.gate else an.scope(stmts, fixed + (loop.var,), loop.domain, it_label,
                                                    line_formulas=False)
        reuse = (an.reuse(stmts, an.statements_in(parent), parent.depth, parent.step or 1)
                 if parent is not None else None)
        ws = WorkingSet(loop, whole, per_it, reuse, assumptions=assumptions,
                        outer_var=parent.var if parent is not None else None)
        if an.has_at and not whole.lower_bound and getattr(whole.lines, "formula_assumes", None):  # formula, value differ
            ws.exact_lines = an.exact_lines(stmts, fixed, parent.domain if parent else None)
        cache_fit(an, ws)
        if loop.index in by_index:
            by_index[loop.index].extras["working_set"] = ws
        levels.append(ws)
        flag(ws, an, diags)
    if refused_loops:
        first = refused_loops[0]
        names = ", ".join("'for (;;)'" if lp.display == "?" else f"'{lp.var}'" for lp in refused_loops)
        diags.append(FootprintRefused(first.header, what=f"loop{'s' if len(refused_loops) > 1 else ''} {names}",
                                      reason="statements inside could not be modelled"))
    # whole nest: every statement, nothing fixed
    good = [s for s in nest.statements if s.domain is not None]
    nest_fp = an.scope(good, (), None, "the whole nest (compulsory footprint)")
    if refused_stmts:
        an._mark_lower_bound(nest_fp, "statements that could not be modelled are left out ("
                             + ", ".join(s.id for s in refused_stmts) + ")")
    limit_notes: list[str] = []
    timed = False
    for fp in [nest_fp] + [w.whole for w in levels] + [w.per_iteration for w in levels if w.per_iteration]:
        timed = timed or fp.time_limited
        for note in fp.notes:
            if note.startswith("formula not available") and note not in limit_notes:
                limit_notes.append(note)
    if limit_notes and nest.params:  # without size parameters the values are the counts themselves
        missing = [p for p in nest.params if p not in an.at]
        if an.has_at:
            fallback = "the values at the --at sizes are exact enumerations"
        else:
            fallback = f"give --at sizes (for {', '.join(missing)}) for exact values"
        reason = limit_notes[0][len("formula not available ("):].rsplit("):", 1)[0]
        diags.append(FootprintLimit(nest.span, what="some working sets of this nest", reason=reason,
                                    fallback=fallback, time_bound=timed))
    nf = NestFootprint(nest_fp, levels, an.caches, dict(an.at) if an.has_at else {}, total_flops,
                       sized=an.has_at or not nest.params)
    nf.intensity = intensity(total_flops, nest_fp, nest, options)
    result.extras["footprint"] = nf
    result.extras["intensity"] = nf.intensity

