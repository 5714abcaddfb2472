# Analysis: --verify for the per-thread balance of parallel loops -- each
# thread's work, the imbalance, the iteration figures and the per-thread and
# per-iteration formulas, against the iterations of each thread enumerated
# one by one.
#
# At fixed sizes the iterations of the parallel loop (all the collapsed loops)
# are listed for every entry (value of the enclosing loop variables), in the
# order the loop runs them, and every statement instance inside adds its
# weight (1, or its flops with --work flops) to its iteration. The iterations
# are then dealt to the threads as the schedule says:
#   * schedule(static, c): chunks of c consecutive iterations, chunk k to
#     thread k mod T (OpenMP 5.2, 11.5.3: round-robin in thread order);
#   * schedule(static) without a chunk: the split of the GNU runtime (libgomp,
#     from memory of its static iterator): with n iterations and T threads,
#     q = n // T and r = n % T, thread t < r gets q + 1 consecutive
#     iterations starting at t*(q + 1), the others q starting at t*q + r.
# Each entry ends with a barrier, so the imbalance is the sum over entries of
# the busiest thread's work, times T, over the total. Dynamic and guided
# schedules are model estimates (they depend on timing) and are not checked.

from __future__ import annotations

from collections.abc import Mapping
from fractions import Fraction
from typing import Any

from tripcount.analysis.results import NestResult
from tripcount.analysis.verify_enum import (
    Budget,
    OverBudget,
    Tally,
    afford,
    as_number,
    compare,
    compare_formula,
    fix_sizes,
    point_label,
    scan,
    size_points,
)
from tripcount.model import Loop, Nest
from tripcount.options import Options

MAX_ITERATIONS = 60  # iterations at which the per-iteration formula is checked per size point


def static_share(n: int, threads: int, chunk: int | None) -> list[int]:
    """The thread of each of `n` iterations (in execution order) under schedule(static[, chunk])."""
    if chunk is not None:
        return [(k // chunk) % threads for k in range(n)]
    q, r = divmod(n, threads)
    out: list[int] = []
    for t in range(threads):
        out += [t] * (q + (1 if t < r else 0))
    return out


def _chain(nest: Nest, loop: Loop, collapse: int) -> list[Loop]:
    out = [loop]
    for _ in range(collapse - 1):
        if len(out[-1].children) != 1:
            break
        out.append(nest.loops[out[-1].children[0]])
    return out


class _Run:
    """The work of every iteration of one parallel loop at fixed sizes, entry by entry."""

    def __init__(self, result: NestResult, loop: Loop, bal: Any, sizes: Mapping[str, int], budget: Budget) -> None:
        nest = result.nest
        chain = _chain(nest, loop, bal.collapse)
        depth, width = loop.depth, len(chain)
        dom = fix_sizes(chain[-1].domain, sizes)
        if dom is None:
            raise KeyError("a size is missing")
        inside = [fix_sizes(st.domain, sizes) for st in nest.statements
                  if loop.index in st.loops and st.domain is not None]
        afford([dom] + [d for d in inside if d is not None], budget)
        signs = [1 if (lp.step or 1) > 0 else -1 for lp in chain]
        work: dict[tuple[int, ...], int | Fraction] = {}
        for pt in scan(dom, budget):
            work[pt[:depth + width]] = 0
        weights = {sr.stmt.id: _weight(sr, bal.work) for sr in result.statements}
        for st in nest.statements:
            if loop.index not in st.loops or st.domain is None:
                continue
            sd = fix_sizes(st.domain, sizes)
            w = weights.get(st.id, 1)
            for pt in scan(sd, budget):
                key = pt[:depth + width]
                work[key] = work.get(key, 0) + w
        self.entries: dict[tuple[int, ...], list[tuple[tuple[int, ...], int | Fraction]]] = {}
        for key in sorted(work, key=lambda k: k[:depth] + tuple(s * v for s, v in zip(signs, k[depth:], strict=True))):
            self.entries.setdefault(key[:depth], []).append((key, work[key]))
        self.work = work

    def deal(self, threads: int, chunk: int | None) -> tuple[list[int | Fraction], int | Fraction, int | Fraction]:
        """(per-thread work summed over entries, sum of each entry's busiest thread, total)."""
        per: list[int | Fraction] = [0] * threads
        critical: int | Fraction = 0
        for its in self.entries.values():
            mine: list[int | Fraction] = [0] * threads
            for t, (_, w) in zip(static_share(len(its), threads, chunk), its, strict=True):
                mine[t] += w
            critical += max(mine, default=0)
            per = [a + b for a, b in zip(per, mine, strict=True)]
        return per, critical, sum(per)


def _weight(sr: Any, work: str) -> int | Fraction:
    if work != "flops":
        return 1
    f = sr.extras.get("flops")
    v = getattr(f, "per_execution", None)
    return v if isinstance(v, int | Fraction) else 1


def _check_at(result: NestResult, bal: Any, run: _Run, at: Mapping[str, int], tally: Tally, label: str) -> None:
    per, critical, total = run.deal(bal.threads, bal.chunk)
    if bal.per_thread is not None:
        got = [as_number(v) for v in bal.per_thread]
        if len(got) != len(per):
            compare(result, tally, f"number of threads with work of {label}", len(got), len(per), at)
        for t, (g, w) in enumerate(zip(got, per, strict=False)):
            if not compare(result, tally, f"work of thread {t} of {label}", g, w, at):
                break
    if bal.imbalance is not None and not bal.estimate:
        want = Fraction(1) if not total else Fraction(critical) * bal.threads / Fraction(total)
        compare(result, tally, f"imbalance of {label}", bal.imbalance, want, at)
    if bal.entries is not None:
        compare(result, tally, f"entries of {label}", bal.entries, len(run.entries), at)
    sizes = {len(v) for v in run.entries.values()}
    if bal.iterations is not None and len(sizes) == 1:
        compare(result, tally, f"iterations per entry of {label}", bal.iterations, sizes.pop(), at)
    blocked = any(n.startswith("iterations weighed in blocks") for n in bal.notes)
    if bal.iteration_work is not None and run.work and not blocked:
        lo, hi, mean = bal.iteration_work
        vals = list(run.work.values())
        compare(result, tally, f"least work of one iteration of {label}", lo, min(vals), at)
        compare(result, tally, f"most work of one iteration of {label}", hi, max(vals), at)
        compare(result, tally, f"mean work of one iteration of {label}", mean, Fraction(sum(vals)) / len(vals), at)


def _check_formulas(result: NestResult, loop: Loop, bal: Any, run: _Run, pt: Mapping[str, int],
                    tally: Tally, label: str) -> None:
    pf = bal.per_thread_formula
    if pf is not None and pf.formula is not None:
        per, _, _ = run.deal(bal.threads, bal.chunk)
        for t, w in enumerate(per):
            if not compare_formula(result, tally, f"the work of thread {t} of {label}", pf.formula,
                                   {**pt, bal.thread_param: t}, w):
                break
    wf = bal.work_per_iteration
    if wf is not None and wf.formula is not None:
        chain = _chain(result.nest, loop, bal.collapse)
        names = [lp.var for lp in _outer(result.nest, loop)] + [lp.var for lp in chain]
        keys = sorted(run.work)
        step = max(1, len(keys) // MAX_ITERATIONS)
        for key in keys[::step]:
            if not compare_formula(result, tally, f"the work of one iteration of {label}", wf.formula,
                                   {**pt, **dict(zip(names, key, strict=True))}, run.work[key]):
                break


def _outer(nest: Nest, loop: Loop) -> list[Loop]:
    out: list[Loop] = []
    p = loop.parent
    while p is not None:
        out.insert(0, nest.loops[p])
        p = nest.loops[p].parent
    return out


def _loops(result: NestResult, tally: Tally) -> list[tuple[Loop, Any, str]]:
    out = []
    for lr in result.loops:
        bal = lr.extras.get("parallel")
        if bal is None:
            continue
        loop = lr.loop
        label = f"parallel loop '{loop.var}' (line {loop.header.line})"
        if bal.schedule != "static":
            tally.skip(f"per-thread work of {label} (schedule({bal.schedule}) is a model estimate)")
            continue
        out.append((loop, bal, label))
    return out


def verify_at(result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
    """Check the per-thread figures of every parallel loop at the --at sizes against enumeration."""
    nest = result.nest
    at = options.sizes(nest.params) if nest.params else {}
    for loop, bal, label in _loops(result, tally):
        if at is None or (bal.per_thread is None and bal.imbalance is None):
            continue
        try:
            _check_at(result, bal, _Run(result, loop, bal, at, budget), at, tally, label)
            tally.points.add(tuple(sorted(at.items())))
        except OverBudget:
            tally.skip(f"the per-thread work of {label} at {point_label(at)} (more iterations than the "
                       "enumeration budget)")


def verify_formulas(result: NestResult, options: Options, budget: Budget, tally: Tally) -> None:
    """Check the per-thread and per-iteration work formulas at a few small sizes."""
    nest = result.nest
    for loop, bal, label in _loops(result, Tally()):
        for pt in size_points(nest, options.sizes(nest.params) if nest.params else {}):
            try:
                _check_formulas(result, loop, bal, _Run(result, loop, bal, pt, budget), pt, tally, label)
                tally.points.add(tuple(sorted(pt.items())))
            except OverBudget:
                tally.skip(f"the work formulas of {label} at {point_label(pt)} (enumeration budget spent)")
