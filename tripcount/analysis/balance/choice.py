# Balance: the what-if comparison of other schedules and of source rewrites
# on the same work profile, and the choice of a recommendation.

from __future__ import annotations

from fractions import Fraction

from tripcount.analysis import schedules as sch
from tripcount.analysis.balance.profiles import Profiles
from tripcount.analysis.balance.results import PAIR, REVERSE, Alternative

CHUNKS = (1, 4, 16, 64)  # chunk sizes of the what-if comparison


def alternatives(prof: Profiles, threads: int, current: tuple[str, int | None]) -> list[Alternative]:
    """The what-if comparison: other schedules (and the pairing rewrite) on the same work."""
    cands: list[tuple[str, int | None]] = [("static", None)] + [("static", c) for c in CHUNKS]
    cands += [("dynamic", 1), ("guided", 1)]
    if current not in cands:
        cands.insert(0, current)
    out = []
    for schedule, chunk in cands:
        o = sch.outcome(schedule, chunk, prof.entries, threads)
        out.append(Alternative(schedule, chunk, o.imbalance, estimate=schedule != "static" or prof.blocked))
    if not prof.constant and any(p.n > 1 for _, p in prof.entries):
        o = sch.outcome("static", None, prof.entries, threads, pair=True)
        out.append(Alternative("static", None, o.imbalance, estimate=prof.blocked, rewrite=PAIR))
        if not prof.blocked and _heavier_last(prof):
            o = sch.outcome("dynamic", 1, prof.entries, threads, reverse=True)
            out.append(Alternative("dynamic", 1, o.imbalance, estimate=True, rewrite=REVERSE))
    return out





def _heavier_last(prof: Profiles) -> bool:
    """Do the later iterations of the entries weigh more than the earlier ones?"""
    early = late = 0
    for times, p in prof.entries:
        half = p.n // 2
        early += times * p.range_sum(0, half)
        late += times * p.range_sum(p.n - half, p.n)
    return late > early


_PREFERENCE = {"static": 0, "guided": 2, "dynamic": 3}


def _pick(alts: list[Alternative], current: tuple[str, int | None]) -> Alternative | None:
    """Least imbalance; near ties (0.5%) go to the current schedule, then static (no chunk,
    then larger chunks: fewer cache lines shared between threads), then guided, dynamic
    (more runtime overhead)."""
    if not alts:
        return None
    best = min(a.imbalance for a in alts)
    near = [a for a in alts if a.imbalance <= best * Fraction(1005, 1000)]

    def key(a: Alternative) -> tuple[int, int, int]:
        is_current = (a.schedule, a.chunk) == current and not a.rewrite
        return (0 if is_current else 1, _PREFERENCE.get(a.schedule, 4), -(a.chunk or 10**9))

    return min(near, key=key)


def choose(alts: list[Alternative], current: tuple[str, int | None]) -> Alternative | None:
    """The recommended alternative: a schedule clause alone when it comes within 2% of the
    best, else the best source rewrite."""
    if not alts:
        return None
    best = min(a.imbalance for a in alts)
    clause = _pick([a for a in alts if not a.rewrite], current)
    if clause is not None and clause.imbalance <= best * Fraction(102, 100):
        return clause
    return _pick([a for a in alts if a.rewrite], current) or clause

