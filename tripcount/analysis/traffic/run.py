# Traffic: the analysis of one nest -- lines and bytes brought into each
# cache level under the cache model (model.py), attached to the nest result
# as the extra `traffic`. Computed in full detail only: the gate does not
# read it.

from __future__ import annotations

from fractions import Fraction

import islpy as isl

from tripcount.analysis.footprint.results import NestFootprint
from tripcount.analysis.footprint.scopes import Analyzer
from tripcount.analysis.results import NestResult
from tripcount.analysis.traffic.model import LevelCount, TrafficModel
from tripcount.analysis.traffic.results import (
    KNOWN_WRONG,
    METHOD,
    MODEL,
    LevelTraffic,
    NestTraffic,
    TrafficCount,
)
from tripcount.budget import Budget
from tripcount.options import Options


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Traffic into each cache level of one nest, from its footprint's per-iteration working sets."""
    if options.gate:
        return
    fp = result.extras.get("footprint")
    if not isinstance(fp, NestFootprint):
        return
    per_it: dict[int, tuple[int | Fraction | None, bool]] = {}
    for ws in fp.levels:
        c = ws.per_iteration.lines if ws.per_iteration is not None else None
        # a value that leaves out unmodelled references still decides the fit of what is modelled (the
        # counts then say they are lower bounds); only an upper bound leaves the decision open
        if c is None or c.value is None:
            per_it[ws.loop.index] = (None, False)
        else:
            per_it[ws.loop.index] = (c.value, getattr(c, "value_bound", None) == "upper"
                                     or (bool(getattr(c, "bound", False)) and not getattr(c, "value_bound", None)))
    an = Analyzer(result, options, budget)
    model = TrafficModel(an, options, budget, per_it)
    line = fp.caches.line_size
    layout: tuple[str, ...] = ()
    aligned = sorted(n for n, a in fp.footprint.by_array.items() if a.layout != "linear")
    if aligned and an.has_at:
        layout = ((f"array{'s' if len(aligned) > 1 else ''} {', '.join(aligned)}: lines counted with every row "
                   "starting on a line boundary (the packed row length is not known); too many lines where rows "
                   "are shorter than a line"),)
    levels = []
    for lv in fp.caches.levels:
        try:
            cnt = model.level(max(1, lv.size // line))
        except isl.Error:  # a set the integer-set library refuses: no figure rather than a wrong one
            cnt = LevelCount(None, None, ["not computed: the integer-set library refused a set of this nest"])
        notes = tuple(cnt.notes) + layout
        lines = TrafficCount(value=cnt.value, formula=cnt.formula, exact=False, bound=cnt.bound,
                             note=None if cnt.formula is not None else
                             "no formula in the sizes (only the value at the --at sizes)")
        if cnt.formula is not None:
            lines.note = ("formula: the terms of the regime at the --at sizes (which loop levels fit), every row "
                          "starting on a line boundary") if an.has_at else (
                          "formula: every loop level's iteration assumed not to fit (give --at sizes for the "
                          "regime that holds there)")
            if an.has_at:
                lines.locate(dict(an.at))
        levels.append(LevelTraffic.of_lines(lv.name, line, lines, (MODEL, METHOD, KNOWN_WRONG) + notes))
    flops = None
    total = result.extras.get("flops")
    if total is not None and an.has_at:
        flops = getattr(getattr(total, "count", None), "value", None)
    result.extras["traffic"] = NestTraffic(tuple(levels), (MODEL, METHOD, KNOWN_WRONG), flops)
