# Balance: work profiles of a parallel loop at fixed sizes -- the work of each
# iteration (or of blocks of iterations when there are too many), and each
# thread's exact work under schedule(static) by counting its slice.

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction

import islpy as isl

from tripcount.analysis import schedules as sch
from tripcount.analysis.balance.space import (
    PARAM,
    SET,
    Space,
    _depends,
    _fix,
    _on_stmt,
    _points,
    _sample,
    chunked_slice,
    counter,
    static_slice,
)
from tripcount.budget import Budget, count_points

POINT_CAP = 20_000  # iterations weighed one by one per loop (about 17 us each with isl)
ENTRY_CAP = 4_096  # entries of an inner parallel loop enumerated one by one
BLOCKS = 256  # blocks of a profile too long to weigh iteration by iteration


# --------------------------------------------------------------------------
# Work profiles at fixed sizes


@dataclass
class Profiles:
    """The entries of a parallel loop at fixed sizes, each with its work profile."""

    entries: list[tuple[int, sch.Profile]]
    n_entries: int
    blocked: bool = False  # some profile is known per block only (estimates)
    constant: bool = False  # every iteration weighs the same within an entry


WorkFn = Callable[[tuple[int, ...]], int | Fraction]


def _work_at(sp: Space, point: tuple[int, ...], budget: Budget | None = None) -> int | Fraction:
    """Work of one iteration (outer and collapsed variables fixed) by enumeration within `budget`."""
    total: int | Fraction = 0
    for s, w in sp.stmts:
        total += w * count_points(_fix(s, point), budget)
    return total


def profiles(sp: Space, cap: int = POINT_CAP, work: WorkFn | None = None,
             budget: Budget | None = None) -> tuple[Profiles | None, str]:
    """Work profiles of every entry at fixed sizes (`sp` parameter-free).

    Entries that cannot differ (the loop space and the statements do not
    depend on the outer variables) are weighed once. `work` gives the work of
    one iteration (default: enumeration; every enumeration within `budget`). Returns (None, reason) when the
    space is too large to weigh.
    """
    weigh = work or (lambda p: _work_at(sp, p, budget))
    d, c = sp.depth, sp.width
    dom = sp.domain
    const = not any(_depends(s, dom, d, c) for s, _ in sp.stmts)
    if d == 0:
        entries: list[tuple[int, tuple[int, ...]]] = [(1, ())]
        n_entries = 1
    else:
        outer = dom.project_out(SET, d, c)
        n_entries = count_points(outer, budget)
        same = not _depends(dom, dom, 0, d) and not any(_depends(s, dom, 0, d) for s, _ in sp.stmts)
        if n_entries == 0:
            entries = []
        elif same:
            entries = [(n_entries, _sample(outer) or ())]
        elif n_entries > ENTRY_CAP:
            return None, f"{n_entries:,} entries with different work are too many to weigh one by one"
        else:
            entries = [(1, o) for o in sorted(_points(outer))]
    left = cap  # iterations still to weigh one by one
    out: list[tuple[int, sch.Profile]] = []
    blocked = False
    kn = None
    for times, o in entries:
        v = _fix(dom, o)
        n = count_points(v, budget)
        if n == 0:
            continue
        if const:
            pt = _sample(v)
            out.append((times, sch.ConstProfile(n, weigh(pt) if pt else 0)))
            continue
        if n <= left:
            left -= n
            pts = _points(v)
            signs = [1 if st > 0 else -1 for st in sp.steps]
            pts.sort(key=lambda p: tuple(x * sg for x, sg in zip(p[d:], signs, strict=True)))
            out.append((times, sch.VectorProfile([weigh(p) for p in pts])))
            continue
        if kn is None:
            kn = counter(sp)
            if kn is None:
                return None, f"{n:,} iterations per entry are too many to weigh one by one"
        out.append((times, _block_profile(sp, kn[0], o, n, budget)))
        blocked = True
    return Profiles(out, n_entries, blocked, const), ""


def _block_profile(sp: Space, k: isl.PwAff, o: tuple[int, ...], n: int, budget: Budget | None) -> sch.BlockProfile:
    size = -(-n // BLOCKS)
    work: list[int | Fraction] = []
    dom = k.domain()
    for a in range(0, n, size):
        lo = isl.PwAff.val_on_domain(dom, isl.Val(a))
        hi = isl.PwAff.val_on_domain(dom, isl.Val(min(n, a + size)))
        sl = _fix(k.ge_set(lo).intersect(k.lt_set(hi)), o)
        total: int | Fraction = 0
        for s, w in sp.stmts:
            total += w * count_points(_on_stmt(sl, s, sp.depth + sp.width), budget)
        work.append(total)
    return sch.BlockProfile(n, size, work)


def static_per_thread_exact(sp: Space, threads: int, chunk: int | None,
                            budget: Budget | None = None) -> list[int | Fraction] | None:
    """Each thread's work under a static schedule by counting its slice (fixed sizes, within `budget`)."""
    kn = counter(sp)
    if kn is None:
        return None
    k, n = kn
    prefix = sp.depth + sp.width
    out: list[int | Fraction] = []
    chunked = None if chunk is None else chunked_slice(k, threads, chunk, "t")
    for t in range(threads):
        if chunked is None:
            sl = static_slice(k, n, sp.depth, sp.width, threads, t)
        else:
            sl = chunked.fix_val(PARAM, chunked.find_dim_by_name(PARAM, "t"), isl.Val(t))
            sl = sl.project_out(PARAM, 0, sl.dim(PARAM))
        total: int | Fraction = 0
        for s, w in sp.stmts:
            total += w * count_points(_on_stmt(sl, s, prefix), budget)
        out.append(total)
    return out


