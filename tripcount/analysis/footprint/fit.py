# Footprint: cache fit. A loop's worst-case working set, in whole cache lines
# times the line size, is compared with each data cache level of the host; the
# largest size that still fits is found by exact evaluation (doubling, then
# bisection). TC401 is raised only when the enclosing loop touches the same
# lines again in a later iteration: without such reuse, exceeding a cache
# costs nothing beyond the compulsory misses. An estimate from a model
# (CACHE_ASSUMPTIONS), not a simulation.

from __future__ import annotations

from collections.abc import Callable, Mapping
from fractions import Fraction
from typing import TYPE_CHECKING

from tripcount.analysis.caches import fmt_bytes
from tripcount.analysis.footprint.isets import _context_min, _in_context
from tripcount.analysis.footprint.results import (
    CACHE_MODEL_SHORT,
    Threshold,
    WorkingSet,
)
from tripcount.analysis.footprint.table import _fmt_at, _sources
from tripcount.budget import Budget
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.memory import WorkingSetExceedsCache

if TYPE_CHECKING:
    from tripcount.analysis.footprint.scopes import Analyzer

SEARCH_MAX = 1 << 40  # largest size the threshold search looks at
SEARCH_STEPS = 48  # evaluations of the exact count in one threshold search, per phase
THRESHOLD_TIME_S = 0.2  # per threshold search (evaluation without a formula enumerates)


# --- cache fit
def cache_fit(an: Analyzer, ws: WorkingSet) -> None:
    """Fit of the loop's worst-case working set (in whole lines) with each cache level."""
    fp = ws.whole
    if fp.fixed:
        if fp.worst is None:
            return
        worst = fp.worst

        def lines_at(values: Mapping[str, int]) -> int | Fraction | None:
            return worst.value("lines", values)
        safe = worst.bound
        q = fp.quantities.get("lines") if not worst.bound else None
        has_formula = (q is not None and q.formula is not None) if not worst.bound else (
            worst.counts is not None and worst.counts["lines"].formula is not None)
    else:
        q = fp.quantities.get("lines")
        if q is None:
            return

        def lines_at(values: Mapping[str, int]) -> int | Fraction | None:
            return q.at(values)
        safe = False
        has_formula = q.formula is not None
    value = fp.lines.value
    if fp.lower_bound and (fp.lines.bound or (fp.worst is not None and fp.worst.bound)):
        return  # an upper bound of a footprint that misses references bounds nothing
    if value is not None:
        ws.occupancy = int(value) * an.line
        upper = bool(getattr(fp.lines, "bound", False))
        for lv in an.caches.levels:
            if upper:  # an upper bound proves only that a cache holds it
                if ws.occupancy <= lv.size:
                    ws.fits[lv.name] = True
            elif not fp.lower_bound:
                ws.fits[lv.name] = ws.occupancy <= lv.size
            elif ws.occupancy > lv.size:  # a lower bound proves only that a cache is exceeded
                ws.fits[lv.name] = False
    if not has_formula or fp.lower_bound:  # a search by enumeration would count ever larger sets;
        return  # a threshold of a lower bound is no threshold of the working set
    if an.options.gate:  # the gate holds occupancies against budgets; thresholds are for reading
        return
    ws.lines_at, ws.line_size = lines_at, an.line
    param = _solve_param(an, lines_at)
    if param is None:
        return
    others = {p: v for p, v in an.at.items() if p != param}
    if any(p not in others for p in an.nest.params if p != param):
        return
    for lv in an.caches.levels:
        t = _threshold(an, lines_at, param, others, lv.size // an.line)
        if t is not None:
            t.safe = safe
            if t.largest is not None and t.largest >= 1 and not t.unbounded:
                t = _checked(an, ws, t, lv.size // an.line)
            if t is not None:
                ws.thresholds[lv.name] = t


def _checked(an: Analyzer, ws: WorkingSet, t: Threshold, capacity_lines: int) -> Threshold | None:
    """The threshold checked with the exact count (packed layout) at it and one past it; where the exact
    count disagrees (the formula's layout assumption moved it), the exact threshold is searched for near
    it with the exact count; None when that search does not settle within the limits; marked as resting
    on the formula's layout assumption when the exact count cannot be had at all."""
    if ws.exact_lines is None or t.largest is None:
        return t
    exact = ws.exact_lines

    def fits(v: int) -> bool | None:
        got = exact({**t.fixed, t.param: v})
        return None if got is None else got <= capacity_lines

    here = fits(t.largest)
    past = fits(t.largest + 1) if here is not None else None
    if here is None or past is None:  # not checked within the limits: it holds for the formula's layout
        t.assumes = "rows aligned"
        return t
    if here and not past:
        t.checked = True
        return t
    found = _exact_threshold(fits, t.largest, here)
    if found is None:
        return None
    t.largest, t.checked = found, True
    return t


def _exact_threshold(fits: Callable[[int], bool | None], start: int, fits_start: bool) -> int | None:
    """Largest v with fits(v) and not fits(v + 1), searched from `start` (the formula's threshold, a
    few percent off at most): steps doubling away from it until the answer changes, then bisection.
    None when an evaluation is not had within the limits, the size would go below 1, or the search
    runs long."""
    lo: int | None = start if fits_start else None  # fits at lo
    hi: int | None = None if fits_start else start  # not at hi
    step = 1
    for _ in range(SEARCH_STEPS):
        v = start + step if fits_start else start - step
        if v < 1:
            return None
        ok = fits(v)
        if ok is None:
            return None
        if ok == fits_start:  # same answer: step further away
            lo, hi = (v, hi) if ok else (lo, v)
            step *= 2
            continue
        lo, hi = (lo, v) if fits_start else (v, hi)
        break
    if lo is None or hi is None:
        return None
    for _ in range(SEARCH_STEPS):
        if hi - lo <= 1:
            break
        mid = (lo + hi) // 2
        ok = fits(mid)
        if ok is None:
            return None
        lo, hi = (mid, hi) if ok else (lo, mid)
    if hi - lo != 1:
        return None
    return lo


def _solve_param(an: Analyzer, f: Callable[[Mapping[str, int]], int | Fraction | None]) -> str | None:
    """--solve-for, the only parameter, or the one the working set grows fastest in at the --at sizes."""
    params = list(an.nest.params)
    if not params:
        return None
    if an.options.solve_for in params:
        return an.options.solve_for
    if len(params) == 1:
        return params[0]
    if not an.has_at:
        return None
    base = f(an.at)
    best, best_ratio = None, None
    for p in params:
        v = f({**an.at, p: 2 * an.at[p] + 1})
        if v is None or base is None:
            continue
        ratio = Fraction(v) / Fraction(base) if base else Fraction(v)
        if best_ratio is None or ratio > best_ratio:
            best, best_ratio = p, ratio
    return best

def _threshold(an: Analyzer, f: Callable[[Mapping[str, int]], int | Fraction | None], param: str,
               others: dict[str, int], capacity_lines: int) -> Threshold | None:
    """Largest `param` with f <= capacity: exact evaluation, doubling then bisection.

    Working sets grow with the sizes in practice; the answer's neighbours
    are checked (and a few smaller sizes), otherwise no threshold is given.
    None also when the search runs out of time (evaluation without a formula
    enumerates) or leaves the parameter assumptions.
    """
    share = an.limit.sub(THRESHOLD_TIME_S) if an.limit is not None else Budget.start(THRESHOLD_TIME_S)

    class _Stop(Exception):
        pass

    def fits(x: int) -> bool | None:
        """True/False; None outside the parameter assumptions."""
        pt = {**others, param: x}
        if not _in_context(an.nest.context, pt):
            return None
        if share.expired():
            raise _Stop
        v = f(pt)
        if v is None:
            raise _Stop
        return v <= capacity_lines

    try:
        lo = _context_min(an.nest.context, param, others)
        lo = 0 if lo is None else lo
        if fits(lo) is not True:
            return Threshold(param, None, fixed=others) if fits(lo) is False else None
        hi = max(2 * lo, lo + 1)
        while True:
            ok = fits(hi)
            if ok is None:  # the assumptions end before the cache fills
                return Threshold(param, None, unbounded=True, fixed=others)
            if not ok:
                break
            lo = hi
            if hi >= SEARCH_MAX:
                return Threshold(param, None, unbounded=True, fixed=others)
            hi *= 2
        while hi - lo > 1:  # fits(lo) and not fits(hi)
            mid = (lo + hi) // 2
            if fits(mid):
                lo = mid
            else:
                hi = mid
        for x in (lo - 1, lo // 2):  # a dip below the answer would make it meaningless
            if x >= 0 and fits(x) is False:
                return None
        if not f({**others, param: lo}):  # it fits only where the loop does not run: say nothing
            return None
    except _Stop:
        return None
    return Threshold(param, lo, fixed=others)


def flag(ws: WorkingSet, an: Analyzer, diags: list[Diagnostic]) -> None:
    """TC401 when the loop's working set exceeds a cache level at the --at sizes and the enclosing loop
    reuses its lines."""
    if not ws.fits or ws.occupancy is None or not ws.reuse:
        return
    exceeded = [lv for lv in an.caches.levels if not ws.fits.get(lv.name, True)]
    if not exceeded:
        return
    largest = exceeded[-1]
    fitting = [lv for lv in an.caches.levels if ws.fits.get(lv.name)]
    fits_text = f"; it fits {fitting[0].name} ({fmt_bytes(fitting[0].size)})" if fitting else ""
    parts = []
    others: dict[str, int] = {}
    for lv in exceeded:
        t = ws.thresholds.get(lv.name)
        if t is None:
            continue
        others = t.fixed
        if t.largest is None or t.largest < 1:
            parts.append(f"it cannot fit {lv.name} for any {t.param} >= 1")
        else:
            cond = f"{t.param} <= {t.largest}"  # t.text() without its short layout mark: said in full here
            parts.append(f"it would fit {lv.name} {'at least ' if t.safe else ''}while {cond}"
                         + (" (if every row started on a cache-line boundary)" if t.assumes else ""))
    threshold = ("; " + "; ".join(parts) + (f" ({_fmt_at(others)} fixed)" if others else "")) if parts else ""
    fp = ws.whole
    at = _fmt_at(an.at)
    if fp.fixed:
        at += " (largest over " + ", ".join(fp.fixed) + ")"
    diags.append(WorkingSetExceedsCache(
        ws.loop.header, var=ws.loop.var, loop_at=ws.loop.span,
        size=("at least " if fp.lower_bound else "") + fmt_bytes(ws.occupancy), at=at,
        level=largest.name, capacity=fmt_bytes(largest.size), outer=ws.outer_var, fits=fits_text, threshold=threshold,
        assumptions=CACHE_MODEL_SHORT + f", whole {an.caches.line_size} B lines; cache sizes {_sources(an.caches)}"))
