# Analysis: work balance of parallel loops.
#
# For every loop marked `#pragma omp parallel for` / `omp for` (and every loop
# named with --parallel LINE) this works out how much work each thread of the
# team gets:
#   * the work of one iteration, as a formula in the parameters and the loop
#     variable(s) (the engine counts the statement domains with the loop's
#     outer variables and its own variable moved into the parameters);
#   * for static schedules, each thread's exact work as a formula in the
#     parameters and the thread id, by counting the statement instances whose
#     normalized iteration counter falls in that thread's share (the split of
#     the GNU OpenMP runtime, libgomp, which gcc links);
#   * at the --at sizes, each thread's exact work, the imbalance (critical
#     path over the mean) and, for loops above the threshold, a what-if
#     comparison of other schedules and of a pairing rewrite.
# Dynamic and guided schedules, and all alternatives, are a model estimate:
# equal cost per unit of work, no scheduling overhead (tripcount/analysis/
# schedules.py deals the iterations out).

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount import ir
from tripcount.analysis import schedules as sch
from tripcount.analysis.results import Count, NestResult
from tripcount.diagnostics import Diagnostic, InternalError
from tripcount.engine import PieceList
from tripcount.model import Loop, Nest
from tripcount.options import Options

PARAM, SET, IN = isl.dim_type.param, isl.dim_type.set, isl.dim_type.in_

POINT_CAP = 20_000  # iterations weighed one by one per loop (about 17 us each with isl)
ENTRY_CAP = 4_096  # entries of an inner parallel loop enumerated one by one
BLOCKS = 256  # blocks of a profile too long to weigh iteration by iteration
FORMULA_MAX_THREADS = 16  # per-thread formula of schedule(static): one piece per thread
CHUNKS = (1, 4, 16, 64)  # chunk sizes of the what-if comparison
ASSUMPTIONS = "equal cost per unit of work, no scheduling overhead"


# --------------------------------------------------------------------------
# Diagnostics (TC5xx)


class LoadImbalance(Diagnostic):
    """A parallel loop whose threads get unequal work at the given sizes."""

    code = "TC501"
    severity = "warning"
    title = "load-imbalance"
    template = "{message}"


class FlopsUnavailable(Diagnostic):
    """--work flops asked for, but there are no flop counts for these statements."""

    code = "TC502"
    severity = "note"
    title = "balance-work-fallback"
    template = "parallel loop '{var}': no flop counts for {what}; balancing statement instances instead"


class BalanceNotModelled(Diagnostic):
    """A parallel loop whose balance could not be modelled (the reason is given)."""

    code = "TC503"
    severity = "note"
    title = "balance-not-modelled"
    template = "balance of parallel loop '{var}' not modelled: {reason}"


class NestedParallel(Diagnostic):
    """A parallel loop inside another one (nested parallelism is off by default)."""

    code = "TC504"
    severity = "note"
    title = "nested-parallel-loop"
    template = ("parallel loop '{var}' is inside parallel loop '{outer}' (line {line}); with nested "
                "parallelism off (the default) it runs on the thread of the enclosing iteration, so "
                "only the outer loop's balance is modelled")


class BalancePartial(Diagnostic):
    """Part of the balance result is missing or approximate (the reason is given)."""

    code = "TC505"
    severity = "note"
    title = "balance-partial"
    template = "parallel loop '{var}': {what}"


# --------------------------------------------------------------------------
# Results


def schedule_text(schedule: str, chunk: int | None) -> str:
    """C spelling of a schedule clause."""
    return f"schedule({schedule}" + (f", {chunk}" if chunk is not None else "") + ")"


def _round(v: Fraction | None, digits: int = 4) -> float | None:
    return None if v is None else round(float(v), digits)


def _exact(v: Fraction | None) -> str | None:
    if v is None:
        return None
    return str(v.numerator) if v.denominator == 1 else f"{v.numerator}/{v.denominator}"


def _json_int(v: Any) -> Any:
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


@dataclass
class Alternative:
    """One schedule (or rewrite) of the what-if comparison."""

    schedule: str
    chunk: int | None
    imbalance: Fraction
    estimate: bool
    rewrite: str | None = None

    @property
    def label(self) -> str:
        """How the alternative reads in text."""
        base = schedule_text(self.schedule, self.chunk)
        if self.rewrite == PAIR:
            return f"the pairing rewrite with {base}"
        if self.rewrite:
            return f"{base} on the loop run backwards"
        return base

    def to_json(self) -> dict[str, Any]:
        """JSON form: schedule, chunk, imbalance (and efficiency, estimate, rewrite)."""
        out: dict[str, Any] = {"schedule": self.schedule, "chunk": self.chunk,
                               "imbalance": _round(self.imbalance),
                               "efficiency": _round(1 / self.imbalance), "estimate": self.estimate}
        if self.rewrite:
            out["rewrite"] = self.rewrite
        return out


@dataclass
class ParallelBalance:
    """The balance result of one parallel loop (the loop extra named "parallel")."""

    var: str
    line: int
    schedule: str
    chunk: int | None
    threads: int
    threads_from: str
    work: str = "statements"
    schedule_written: str | None = None
    origin: str = "pragma"  # or "--parallel"
    collapse: int = 1
    at: str = ""
    per_thread: list[int | Fraction] | None = None
    imbalance: Fraction | None = None
    estimate: bool = False
    work_per_iteration: Count | None = None
    per_thread_formula: Count | None = None
    thread_param: str = "t"
    alternatives: list[Alternative] | None = None
    best: Alternative | None = None
    recommendation: str = ""
    flagged: bool = False
    iterations: int | None = None
    entries: int | None = None
    iteration_work: tuple[int | Fraction, int | Fraction, Fraction] | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def efficiency(self) -> Fraction | None:
        """Mean thread work over the critical path."""
        return None if self.imbalance is None else 1 / self.imbalance

    def to_json(self) -> dict[str, Any]:
        """Fields merged into the loop's `parallel` object."""
        rng = None
        if self.iteration_work is not None:
            lo, hi, mean = self.iteration_work
            rng = {"min": _json_int(lo), "max": _json_int(hi), "mean": _round(mean)}
        return {
            "schedule": self.schedule,
            # `chunk` is text in the pragma part of the object (the clause as written); here the
            # chunk size that was modelled, as text too, and as a number in `chunk_size`.
            "chunk": None if self.chunk is None else str(self.chunk),
            "chunk_size": self.chunk,
            "schedule_written": self.schedule_written,
            "origin": self.origin,
            "threads": self.threads,
            "threads_from": self.threads_from,
            "work": self.work,
            "per_thread": None if self.per_thread is None else [_json_int(v) for v in self.per_thread],
            "imbalance": _round(self.imbalance),
            "imbalance_exact": _exact(self.imbalance),
            "efficiency": _round(self.efficiency),
            "estimate": self.estimate,
            "flagged": self.flagged,
            "iterations": self.iterations,
            "entries": self.entries,
            "iteration_work": rng,
            "work_per_iteration": None if self.work_per_iteration is None else self.work_per_iteration.to_json(),
            "thread_param": self.thread_param,
            "per_thread_formula": None if self.per_thread_formula is None else self.per_thread_formula.to_json(),
            "alternatives": None if self.alternatives is None else [a.to_json() for a in self.alternatives],
            "recommendation": self.recommendation,
            "notes": list(self.notes),
        }

    def text_lines(self) -> list[str]:
        """A summary line; for flagged loops a bar per thread and the recommendation."""
        how = schedule_text(self.schedule, self.chunk)
        est = ", model estimate" if self.estimate else ""
        if self.per_thread is None or self.imbalance is None:
            lines = [f"balance: {how}, {self.threads} threads: {self.recommendation or 'no values'}"]
            f = self.per_thread_formula
            if f is not None and f.formula is not None and f.formula.pieces:
                p = f.formula.pieces[0]
                text = f"work of thread {self.thread_param}: {p.poly.to_expr()}" + (
                    f"   when {p.when}" if p.when != "true" else "")
                more = len(f.formula.pieces) - 1
                if len(text) <= 110:
                    lines.append(text + (f" ({more} more case{'s' if more > 1 else ''} in the JSON report)"
                                         if more else ""))
            return lines
        unit = "flops" if self.work == "flops" else "statement instances"
        head = (f"balance: {how}, {self.threads} threads at {self.at or 'these sizes'}: imbalance "
                f"{float(self.imbalance):.2f}, efficiency {float(self.efficiency):.0%} (work in {unit}{est})")
        lines = [head]
        if self.flagged:
            lines.extend(bar_chart(self.per_thread))
        if self.recommendation:
            lines.append(self.recommendation)
        return lines


BLOCK_CHARS = " ▏▎▍▌▋▊▉█"


def bar_chart(values: list[int | Fraction], width: int = 32, max_rows: int = 32) -> list[str]:
    """One bar per thread, scaled to the largest, with the exact work."""
    top = max(values, default=0)
    if len(values) > max_rows:
        lo = min(values)
        return [f"  threads 0..{len(values) - 1}: least {lo:,} , most {top:,}"]
    digits = len(str(len(values) - 1))
    out = []
    for t, v in enumerate(values):
        eighths = 0 if not top else round(Fraction(v) * width * 8 / top)
        full, part = divmod(eighths, 8)
        bar = "█" * full + (BLOCK_CHARS[part] if part else "")
        num = f"{int(v):,}" if Fraction(v).denominator == 1 else f"{float(v):,.1f}"
        out.append(f"  thread {t:>{digits}} {bar:<{width}} {num}")
    return out


# --------------------------------------------------------------------------
# Which loops


def _is_worksharing(omp: ir.OmpClauses | None) -> bool:
    return omp is not None and "for" in omp.directive.split()


def targets(nest: Nest, options: Options) -> list[tuple[Loop, ir.OmpClauses, str]]:
    """Parallel loops of the nest: pragma'd ones and those named by --parallel LINE."""
    out = []
    for loop in nest.loops:
        if _is_worksharing(loop.omp):
            out.append((loop, loop.omp, "pragma"))
        elif loop.header.line in options.parallel_lines or loop.span.line in options.parallel_lines:
            out.append((loop, ir.OmpClauses(loop.header, directive="parallel for",
                                            text="--parallel"), "--parallel"))
    return out


def _ancestors(nest: Nest, loop: Loop) -> list[Loop]:
    out = []
    p = loop.parent
    while p is not None:
        out.append(nest.loops[p])
        p = nest.loops[p].parent
    return out


# --------------------------------------------------------------------------
# Constant expressions of pragma clauses


def const_value(e: ir.Expr | None, at: Mapping[str, int]) -> int | None:
    """Integer value of a clause expression (C semantics), names from `at`; None if unknown."""
    if e is None:
        return None
    if isinstance(e, ir.IntLit):
        return e.value
    if isinstance(e, ir.Name):
        return at.get(e.name)
    if isinstance(e, ir.Cast):
        return const_value(e.operand, at)
    if isinstance(e, ir.Unary) and e.op in "+-":
        v = const_value(e.operand, at)
        return None if v is None else (v if e.op == "+" else -v)
    if isinstance(e, ir.Binary):
        a, b = const_value(e.left, at), const_value(e.right, at)
        if a is None or b is None:
            return None
        if e.op == "+":
            return a + b
        if e.op == "-":
            return a - b
        if e.op == "*":
            return a * b
        if e.op in ("/", "%") and b != 0:
            q = abs(a) // abs(b) * (1 if (a >= 0) == (b > 0) else -1)  # C truncates toward zero
            return q if e.op == "/" else a - b * q
    if isinstance(e, ir.Ternary):
        c = const_value(e.cond, at)
        if c is None:
            return None
        return const_value(e.then if c else e.other, at)
    return None


# --------------------------------------------------------------------------
# The iteration space of a parallel loop


@dataclass
class Space:
    """The collapsed loops of a parallel loop and the statements inside.

    Sets have anonymous tuples; dims are the `depth` outer loop variables, then
    the `width` collapsed loop variables, then (statements) the inner ones.
    """

    depth: int
    steps: tuple[int, ...]
    domains: tuple[isl.Set, ...]  # domain of each collapsed loop
    stmts: tuple[tuple[isl.Set, int | Fraction], ...]  # (domain, work weight)

    @property
    def width(self) -> int:
        """Number of collapsed loops."""
        return len(self.steps)

    @property
    def domain(self) -> isl.Set:
        """The iterations: domain of the innermost collapsed loop."""
        return self.domains[-1]


def _param_names(s: isl.Set) -> list[str]:
    return [s.get_dim_name(PARAM, i) for i in range(s.dim(PARAM))]


def fix_params(s: isl.Set, at: Mapping[str, int]) -> isl.Set | None:
    """`s` with every parameter replaced by its value (None if one is not given)."""
    for name in _param_names(s):
        if name not in at:
            return None
        s = s.fix_val(PARAM, s.find_dim_by_name(PARAM, name), isl.Val(str(at[name])))
    return s.project_out(PARAM, 0, s.dim(PARAM))


def space_at(sp: Space, at: Mapping[str, int]) -> Space | None:
    """The space at fixed sizes (parameter-free sets), or None if a size is missing."""
    doms = [fix_params(d, at) for d in sp.domains]
    stmts = [(fix_params(s, at), w) for s, w in sp.stmts]
    if any(d is None for d in doms) or any(s is None for s, _ in stmts):
        return None
    return Space(sp.depth, sp.steps, tuple(doms), tuple(stmts))  # type: ignore[arg-type]


def _lift(pa: isl.PwAff, pos: int, n: int) -> isl.PwAff:
    return pa.insert_dims(IN, pos, n) if n else pa


def counters(sp: Space) -> tuple[list[isl.PwAff], list[isl.PwAff]] | None:
    """Per collapsed loop j: its counter k_j = (v_j - first)/step on the loop space, and its
    trip count n_j on the space of the outer (non-collapsed) variables.

    None when an inner collapsed loop's bounds depend on the outer collapsed
    variables (a non-rectangular collapse).
    """
    d, c = sp.depth, sp.width
    ks: list[isl.PwAff] = []
    ns: list[isl.PwAff] = []
    for j in range(c):
        dom = sp.domains[j]
        npar = dom.dim(PARAM)
        local = dom.move_dims(PARAM, npar, SET, 0, d + j)
        lo = local.dim_min(0).move_dims(IN, 0, PARAM, npar, d + j)
        hi = local.dim_max(0).move_dims(IN, 0, PARAM, npar, d + j)
        if d and not j:
            # An inner parallel loop whose extent does not depend on the outer loops: its
            # bounds' domains still do (where the outer loops run); drop that part.
            outer = dom.project_out(SET, d, 1)
            lo_g, hi_g = lo.gist(outer), hi.gist(outer)
            if not lo_g.involves_dims(IN, 0, d) and not hi_g.involves_dims(IN, 0, d):
                lo = lo_g.intersect_params(outer.params())
                hi = hi_g.intersect_params(outer.params())
        if j:
            # Bounds of an inner collapsed loop must not depend on the outer collapsed
            # variables; their domains always do (where the outer loops run), hence the gist.
            outer = dom.project_out(SET, d + j, 1)
            lo, hi = lo.gist(outer), hi.gist(outer)
            if lo.involves_dims(IN, d, j) or hi.involves_dims(IN, d, j):
                return None
        step = abs(sp.steps[j])
        nj = hi.sub(lo).scale_down_val(isl.Val(str(step))).floor()
        nj = nj.add(isl.PwAff.val_on_domain(nj.domain(), isl.Val(1)))
        var = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(sp.domain.get_space()), SET, d + j)
        lo_l, hi_l = _lift(lo, d + j, c - j), _lift(hi, d + j, c - j)
        kj = var.sub(lo_l) if sp.steps[j] > 0 else hi_l.sub(var)
        ks.append(kj.scale_down_val(isl.Val(str(step))).floor())
        ns.append(nj.drop_dims(IN, d, j) if j else nj)
    return ks, ns


def counter(sp: Space) -> tuple[isl.PwAff, isl.PwAff] | None:
    """The normalized iteration counter k (on the loop space) and the trip count n per entry.

    k numbers the iterations of one entry in execution order, 0 .. n-1; for
    collapsed loops it is the linearized index k_0*n_1*...+k_1*n_2*...+... .
    None when that is not affine: collapsed loops whose inner extents depend on
    the outer collapsed variables (non-rectangular), or on the parameters.
    """
    kn = counters(sp)
    if kn is None:
        return None
    ks, ns = kn
    d, c = sp.depth, sp.width
    try:
        k = ks[-1]
        n = ns[0]
        scale: isl.PwAff | None = None
        for j in range(c - 2, -1, -1):
            inner = _lift(ns[j + 1], d, c)
            scale = inner if scale is None else scale.mul(inner)
            k = k.add(ks[j].mul(scale))
        for j in range(1, c):
            n = n.mul(ns[j])
    except isl.Error:  # a product of two non-constant extents: not affine
        return None
    return k, n


def static_slice(k: isl.PwAff, n: isl.PwAff, depth: int, width: int, threads: int, t: int) -> isl.Set:
    """Iterations (on the loop space) that thread t runs under schedule(static)."""
    nl = _lift(n, depth, width)
    q = nl.scale_down_val(isl.Val(str(threads))).floor()
    r = nl.mod_val(isl.Val(str(threads)))

    def start(u: int) -> isl.PwAff:
        cu = isl.PwAff.val_on_domain(nl.domain(), isl.Val(str(u)))
        return q.scale_val(isl.Val(str(u))).add(r.min(cu))

    return k.ge_set(start(t)).intersect(k.lt_set(start(t + 1)))


def _with_param(s: isl.Set, name: str) -> tuple[isl.Set, int]:
    pos = s.dim(PARAM)
    return s.insert_dims(PARAM, pos, 1).set_dim_name(PARAM, pos, name), pos


def chunked_slice(k: isl.PwAff, threads: int, chunk: int, tname: str) -> isl.Set:
    """Iterations thread `tname` (a parameter, 0 <= t < P) runs under schedule(static, chunk)."""
    dom, pos = _with_param(k.domain(), tname)
    kt = k.align_params(dom.get_space().params())
    tv = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(dom.get_space()), PARAM, pos)
    sl = kt.scale_down_val(isl.Val(str(chunk))).floor().mod_val(isl.Val(str(threads))).eq_set(tv)
    return (sl.lower_bound_val(PARAM, sl.find_dim_by_name(PARAM, tname), isl.Val(0))
            .upper_bound_val(PARAM, sl.find_dim_by_name(PARAM, tname), isl.Val(threads - 1)))


def _on_stmt(sl: isl.Set, stmt: isl.Set, prefix: int) -> isl.Set:
    """The statement instances whose first `prefix` dims lie in `sl`."""
    extra = stmt.dim(SET) - prefix
    lifted = sl.insert_dims(SET, prefix, extra) if extra else sl
    return stmt.intersect(lifted)


def _fix(s: isl.Set, values: tuple[int, ...], offset: int = 0) -> isl.Set:
    for i, x in enumerate(values):
        s = s.fix_val(SET, offset + i, isl.Val(x))
    return s


def _points(s: isl.Set) -> list[tuple[int, ...]]:
    n = s.dim(SET)
    out: list[tuple[int, ...]] = []
    s.foreach_point(lambda p: out.append(tuple(p.get_coordinate_val(SET, i).to_python() for i in range(n))))
    return out


def _sample(s: isl.Set) -> tuple[int, ...] | None:
    p = s.sample_point()
    if p.is_void():
        return None
    return tuple(p.get_coordinate_val(SET, i).to_python() for i in range(s.dim(SET)))


def _depends(s: isl.Set, context: isl.Set, first: int, count: int) -> bool:
    """Does `s` (parameter-free) depend on dims first..first+count-1 within `context`?

    The dims 0..first+count-1 become parameters; constraints implied by the
    context (the loop space) are dropped before looking.
    """
    m = first + count
    sp = s.move_dims(PARAM, 0, SET, 0, m)
    ctx = context.move_dims(PARAM, 0, SET, 0, m).params()
    return bool(sp.gist_params(ctx).involves_dims(PARAM, first, count))


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


def _work_at(sp: Space, point: tuple[int, ...]) -> int | Fraction:
    """Work of one iteration (outer and collapsed variables fixed) by enumeration."""
    total: int | Fraction = 0
    for s, w in sp.stmts:
        total += w * _fix(s, point).count_val().to_python()
    return total


def profiles(sp: Space, cap: int = POINT_CAP, work: WorkFn | None = None) -> tuple[Profiles | None, str]:
    """Work profiles of every entry at fixed sizes (`sp` parameter-free).

    Entries that cannot differ (the loop space and the statements do not
    depend on the outer variables) are weighed once. `work` gives the work of
    one iteration (default: enumeration). Returns (None, reason) when the
    space is too large to weigh.
    """
    weigh = work or (lambda p: _work_at(sp, p))
    d, c = sp.depth, sp.width
    dom = sp.domain
    const = not any(_depends(s, dom, d, c) for s, _ in sp.stmts)
    if d == 0:
        entries: list[tuple[int, tuple[int, ...]]] = [(1, ())]
        n_entries = 1
    else:
        outer = dom.project_out(SET, d, c)
        n_entries = int(outer.count_val().to_python())
        same = not _depends(dom, dom, 0, d) and not any(_depends(s, dom, 0, d) for s, _ in sp.stmts)
        if n_entries == 0:
            entries = []
        elif same:
            entries = [(n_entries, _sample(outer) or ())]
        elif n_entries > ENTRY_CAP:
            return None, f"{n_entries:,} entries with different work are too many to weigh one by one"
        else:
            entries = [(1, o) for o in sorted(_points(outer))]
    budget = cap
    out: list[tuple[int, sch.Profile]] = []
    blocked = False
    kn = None
    for times, o in entries:
        v = _fix(dom, o)
        n = int(v.count_val().to_python())
        if n == 0:
            continue
        if const:
            pt = _sample(v)
            out.append((times, sch.ConstProfile(n, weigh(pt) if pt else 0)))
            continue
        if n <= budget:
            budget -= n
            pts = _points(v)
            signs = [1 if st > 0 else -1 for st in sp.steps]
            pts.sort(key=lambda p: tuple(x * sg for x, sg in zip(p[d:], signs, strict=True)))
            out.append((times, sch.VectorProfile([weigh(p) for p in pts])))
            continue
        if kn is None:
            kn = counter(sp)
            if kn is None:
                return None, f"{n:,} iterations per entry are too many to weigh one by one"
        out.append((times, _block_profile(sp, kn[0], o, n)))
        blocked = True
    return Profiles(out, n_entries, blocked, const), ""


def _block_profile(sp: Space, k: isl.PwAff, o: tuple[int, ...], n: int) -> sch.BlockProfile:
    size = -(-n // BLOCKS)
    work: list[int | Fraction] = []
    dom = k.domain()
    for a in range(0, n, size):
        lo = isl.PwAff.val_on_domain(dom, isl.Val(a))
        hi = isl.PwAff.val_on_domain(dom, isl.Val(min(n, a + size)))
        sl = _fix(k.ge_set(lo).intersect(k.lt_set(hi)), o)
        total: int | Fraction = 0
        for s, w in sp.stmts:
            total += w * _on_stmt(sl, s, sp.depth + sp.width).count_val().to_python()
        work.append(total)
    return sch.BlockProfile(n, size, work)


def static_per_thread_exact(sp: Space, threads: int, chunk: int | None) -> list[int | Fraction] | None:
    """Each thread's work under a static schedule by counting its slice (fixed sizes)."""
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
            total += w * _on_stmt(sl, s, prefix).count_val().to_python()
        out.append(total)
    return out


# --------------------------------------------------------------------------
# Formulas (engine)
#
# Counting each thread's slice directly makes the engine split on the residue
# of n modulo P for every thread, which is slow and gives dozens of pieces.
# Instead one cheap count gives the prefix work F(E) of the iterations with
# counter k < E; a thread's work is then F(end) - F(start) with its share's
# bounds substituted: t*q + min(t, r) with q = floor(n/P), r = n - P*q for
# schedule(static), and a sum over the thread's chunks for schedule(static, c).


def _engine() -> Any:
    try:
        from tripcount import engine
    except ImportError:
        return None
    return engine if hasattr(engine, "count") else None


def _limits(engine: Any, options: Options) -> Any:
    return engine.Limits(time_s=options.time_limit, max_pieces=options.max_pieces)


def _padded_union(sets: list[tuple[isl.Set, int]]) -> isl.Set:
    """One set whose point count is sum(weight * count): each set padded to a common
    dimension, tagged by its index and repeated `weight` times along a copy dimension.
    (One engine call instead of one per statement plus the sums of the formulas.)"""
    width = max(s.dim(SET) for s, _ in sets) + 2
    out = None
    for tag, (s, w) in enumerate(sets):
        m = s.dim(SET)
        s = s.reset_tuple_id().insert_dims(SET, m, width - m)
        for pos in range(m, width - 2):
            s = s.fix_val(SET, pos, isl.Val(0))
        s = s.fix_val(SET, width - 2, isl.Val(tag))
        s = s.lower_bound_val(SET, width - 1, isl.Val(0)).upper_bound_val(SET, width - 1, isl.Val(w - 1))
        out = s if out is None else out.union(s)
    return out


def _count_weighted(engine: Any, sets: list[tuple[isl.Set, int | Fraction]], context: isl.Set,
                    options: Options) -> Any:
    """Engine count of sum(weight * |set|)."""
    sets = [(s, w) for s, w in sets if w]
    if not sets:
        return engine.count(isl.Set.empty(context.get_space()), context, _limits(engine, options))
    if all(isinstance(w, int) or Fraction(w).denominator == 1 for _, w in sets):
        return engine.count(_padded_union([(s, int(w)) for s, w in sets]), context, _limits(engine, options))
    total = None
    for s, w in sets:
        pw = engine.count(s, context, _limits(engine, options)).scale(w)
        total = pw if total is None else total + pw
    return total


def work_formula(nest: Nest, sp: Space, options: Options, names: str) -> Count:
    """Work of one iteration as a formula in the parameters and the loop variable(s)."""
    engine = _engine()
    if engine is None:
        return Count(note="formula not available: no counting engine")
    prefix = sp.depth + sp.width
    sets = [(s.move_dims(PARAM, s.dim(PARAM), SET, 0, prefix), w) for s, w in sp.stmts]
    try:
        pw = _count_weighted(engine, sets, nest.context, options)
    except Exception as exc:  # engine limit or refusal: the values at sizes still hold
        return Count(note=f"formula not available: {exc}")
    return Count(formula=pw, note=f"work of one iteration, in the parameters and {names}")


def fresh_name(nest: Nest, prefs: tuple[str, ...]) -> str:
    """A name that collides with no parameter or loop variable."""
    taken = set(nest.params) | {lp.var for lp in nest.loops}
    for cand in prefs:
        if cand not in taken:
            return cand
    k = 0
    while f"{prefs[0]}{k}" in taken:
        k += 1
    return f"{prefs[0]}{k}"


def thread_name(nest: Nest) -> str:
    """The name of the thread id in per-thread formulas."""
    return fresh_name(nest, ("t", "tid", "thread"))


def _params_var(space_set: isl.Set, name: str) -> tuple[isl.Set, isl.PwAff]:
    """`space_set` (a parameter set) with parameter `name` added, and that parameter as a PwAff."""
    if space_set.find_dim_by_name(PARAM, name) < 0:
        space_set, _ = _with_param(space_set, name)
    pos = space_set.find_dim_by_name(PARAM, name)
    var = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(space_set.get_space()), PARAM, pos)
    return space_set, var


def _contains(params_set: isl.Set, at: Mapping[str, int]) -> bool:
    """Is the --at point in a parameter set (False when a size is missing)?"""
    s = params_set
    for i in range(s.dim(PARAM)):
        name = s.get_dim_name(PARAM, i)
        if name not in at:
            return False
        s = s.fix_val(PARAM, i, isl.Val(str(at[name])))
    return not s.is_empty()


def _as_params(s: isl.Set) -> isl.Set:
    """A parameter set (comparisons of parameter-domain PwAffs give 0-dim sets)."""
    return s if s.is_params() else s.params()


def _const_on(pa: isl.PwAff, c: int) -> isl.PwAff:
    return isl.PwAff.val_on_domain(pa.domain(), isl.Val(c))


def _when_text(domain: isl.Set, params: tuple[str, ...]) -> str:
    try:
        from tripcount.engine.piecewise import when_text

        return when_text(domain, None, params)
    except Exception:  # the condition is an aid to reading; the domain is exact anyway
        return "true"


def _and(*parts: str) -> str:
    """C conjunction of conditions, without repeats ("true" when empty)."""
    keep: list[str] = []
    for p in parts:
        subs = [p] if "||" in p else p.split(" && ")
        for s in subs:
            s = s.strip()
            if s and s != "true" and s not in keep:
                keep.append(s)
    if not keep:
        return "true"
    return " && ".join(f"({p})" if "||" in p else p for p in keep)


def _paren(expr: str) -> str:
    """`expr` in parentheses when it has a top-level + or - (so that * / % bind right)."""
    depth = 0
    for i, ch in enumerate(expr):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        elif ch in "+-" and depth == 0 and i > 0 and expr[i - 1] not in "*/%(^":
            return f"({expr})"
    return expr


class ShareExpr:
    """A per-thread expression: weight * share(n), evaluated exactly in Python.

    `weight` and `n` are engine quasi-polynomials; the share (a thread's number of
    iterations) takes floors of n, which may be non-affine (n = N*M for collapsed
    loops), hence this small class rather than an engine quasi-polynomial.
    """

    def __init__(self, weight: Any, n: Any, share: Callable[[int], int], text: str, threads: int) -> None:
        self.weight, self.n, self.share, self.text, self.threads = weight, n, share, text, threads

    def evaluate(self, values: Mapping[str, int]) -> Fraction:
        """Exact value at a parameter point."""
        return Fraction(self.weight.evaluate(values)) * self.share(int(self.n.evaluate(values)))

    def to_expr(self) -> str:
        """C-like text in our notation."""
        w = self.weight.to_expr()
        return self.text if w == "1" else f"{_paren(w)}*{_paren(self.text)}"

    def degree(self) -> int:
        """Degree (floors count as their argument)."""
        return self.weight.degree() + self.n.degree()

    def leading(self) -> str:
        """Leading part: the share is about n/P."""
        return (self.weight * self.n / self.threads).leading()


@dataclass(frozen=True)
class ThreadPiece:
    """A piece of a per-thread formula: an isl parameter domain plus a condition on the
    thread id that need not be affine (e.g. t < (N*M) % 8)."""

    domain: isl.Set
    poly: ShareExpr
    when: str
    test: Callable[[int, int], bool]  # (t, n) -> bool
    tname: str
    _piece: Any = None  # engine Piece over `domain`, for its fast membership test

    def contains(self, values: Mapping[str, int]) -> bool:
        """Is the parameter point in this piece?"""
        if self._piece is not None and not self._piece.contains(values):
            return False
        return self.test(values[self.tname], int(self.poly.n.evaluate(values)))


class ThreadPiecewise(PieceList):
    """A per-thread formula whose pieces may carry non-affine conditions (same JSON as the engine's)."""

    def __init__(self, pieces: list[ThreadPiece], params: tuple[str, ...]) -> None:
        self.pieces = pieces
        self.params = params


def _iteration_shares(ntext: str, tname: str, threads: int, chunk: int | None
                      ) -> list[tuple[Callable[[int], int], Callable[[int, int], bool], str, str]]:
    """Iterations of thread t out of n under libgomp's static split:
    (share(n), test(t, n), share text, condition text)."""
    if chunk is None:
        p = threads
        return [(lambda n: n // p + 1, lambda t, n: t < n % p, f"floor({ntext}/{p}) + 1", f"{tname} < {ntext} % {p}"),
                (lambda n: n // p, lambda t, n: t >= n % p, f"floor({ntext}/{p})", f"{tname} >= {ntext} % {p}")]
    c, span = chunk, chunk * threads
    cut = f"{ntext} % {span} / {c}"
    return [(lambda n: c * (n // span) + c, lambda t, n: t < n % span // c,
             f"{c}*floor({ntext}/{span}) + {c}", f"{tname} < {cut}"),
            (lambda n: c * (n // span) + n % c, lambda t, n: t == n % span // c,
             f"{c}*floor({ntext}/{span}) + {ntext} - {c}*floor({ntext}/{c})", f"{tname} == {cut}"),
            (lambda n: c * (n // span), lambda t, n: t > n % span // c,
             f"{c}*floor({ntext}/{span})", f"{tname} > {cut}")]


def _const_thread_formula(engine: Any, nest: Nest, sp: Space, options: Options, threads: int,
                          chunk: int | None, tname: str) -> Count | None:
    """Per-thread formula when every iteration of an entry weighs the same (rectangular bodies):
    the work of the entries' first iterations times the thread's number of iterations.
    Works for collapsed loops too, whose linearized index is not affine."""
    d, c = sp.depth, sp.width
    if any(_depends(s, sp.domain, d, c) for s, _ in sp.stmts):
        return None
    lim = _limits(engine, options)
    kn = counters(sp)
    if kn is not None:
        ks, ns = kn
        if d and any(nj.involves_dims(IN, 0, d) for nj in ns):
            return None
        first = ks[0].eq_set(_const_on(ks[0], 0))
        for kj in ks[1:]:
            first = first.intersect(kj.eq_set(_const_on(kj, 0)))
        extents = [engine.count(sp.domains[j].project_out(SET, 0, d + j), nest.context, lim) for j in range(c)]
    else:
        # Non-rectangular collapse: n is the number of points of an entry; the first
        # iteration is the lexicographic minimum (upward loops only).
        if any(step < 0 for step in sp.steps) or (d and _depends(sp.domain, sp.domain, 0, d)):
            return None
        npar = sp.domain.dim(PARAM)
        first = sp.domain.move_dims(PARAM, npar, SET, 0, d).lexmin().move_dims(SET, 0, PARAM, npar, d)
        extents = [engine.count(sp.domain.project_out(SET, 0, d) if d else sp.domain, nest.context, lim)]
    w1 = _count_weighted(engine, [(_on_stmt(first, s, d + c), w) for s, w in sp.stmts], nest.context, options)
    # Cross products of the pieces: (domain, poly, when) with the trip count of an entry.
    prods: list[tuple[isl.Set, Any, str]] = [(nest.context, engine.QPoly.const(1), "true")]
    for ext in extents:
        prods = [(_pmeet(dom, p.domain), poly * p.poly, _and(when, p.when))
                 for dom, poly, when in prods for p in ext.pieces]
    ctx_t, _ = _params_var(nest.context, tname)
    pos = ctx_t.find_dim_by_name(PARAM, tname)
    ctx_t = ctx_t.lower_bound_val(PARAM, pos, isl.Val(0)).upper_bound_val(PARAM, pos, isl.Val(threads - 1))
    pieces = []
    for wp in w1.pieces:
        for dom, npoly, nwhen in prods:
            base = _pmeet(_pmeet(_as_params(wp.domain), dom), ctx_t)
            if base.is_empty():
                continue
            ntext = _paren(npoly.to_expr())
            for share, test, stext, ctext in _iteration_shares(ntext, tname, threads, chunk):
                expr = ShareExpr(wp.poly, npoly, share, stext, threads)
                when = _and(wp.when, nwhen, ctext)
                pieces.append(ThreadPiece(base, expr, when, test, tname,
                                          engine.Piece(base, engine.QPoly.const(0), when)))
    names = tuple(dict.fromkeys(tuple(w1.params) + tuple(p for e in extents for p in e.params) + (tname,)))
    return Count(formula=ThreadPiecewise(pieces, names),
                 note=f"work of thread {tname} (0 <= {tname} < {threads}) with {threads} threads")


def _pmeet(a: isl.Set, b: isl.Set) -> isl.Set:
    """Intersection of two parameter sets with possibly different parameters."""
    a, b = _as_params(a), _as_params(b)
    return a.align_params(b.get_space()).intersect(b.align_params(a.get_space()))


def thread_formula(nest: Nest, sp: Space, options: Options, threads: int, chunk: int | None,
                   tname: str) -> Count:
    """Each thread's work under a static schedule as a formula in the parameters and the thread id."""
    engine = _engine()
    if engine is None:
        return Count(note="formula not available: no counting engine")
    try:
        const = _const_thread_formula(engine, nest, sp, options, threads, chunk, tname)
    except Exception as exc:  # engine limit: the values at the sizes still come from the profiles
        return Count(note=f"formula not available: {exc}")
    if const is not None:
        return const
    kn = counter(sp)
    if kn is None:
        return Count(note="formula not available: the linearized index of the collapsed loops is "
                          "not affine in the parameters (the values at the --at sizes are exact)")
    k, n = kn
    d, prefix = sp.depth, sp.depth + sp.width
    if d and n.involves_dims(IN, 0, d):
        return Count(note="formula not available: the trip count of each entry depends on the outer "
                          "loops (the values at the --at sizes are exact)")
    n0 = n.drop_dims(IN, 0, d) if d else n
    ename = fresh_name(nest, ("E_", "E__"))
    try:
        # F(E): work of the iterations with counter k < E, summed over all entries.
        dom_e, ev = _params_var(k.domain(), ename)
        pre = k.align_params(dom_e.get_space().params()).lt_set(ev.intersect_domain(dom_e))
        fpw = _count_weighted(engine, [(_on_stmt(pre, s, prefix), w) for s, w in sp.stmts],
                              nest.context, options)
        loops_only = sp.domain.project_out(SET, 0, d) if d else sp.domain
        npw = engine.count(loops_only, nest.context, _limits(engine, options))
    except Exception as exc:  # engine limit: the values at the sizes still come from the profiles
        return Count(note=f"formula not available: {exc}")
    names = tuple(p for p in fpw.params if p != ename) + (tname,)
    if fpw.is_zero() or npw.is_zero():
        return Count(formula=engine.Piecewise([], names), note="no work")
    # A piece of F that holds for every E in 1..n (F(0) = 0 by the same polynomial), and
    # the parameters where it does; prefer the piece that holds at the --at sizes.
    pset, evar = _params_var(n0.domain(), ename)
    n_e = n0.align_params(pset.get_space())
    interval = _as_params(evar.ge_set(_const_on(evar, 1)).intersect(evar.le_set(n_e)))
    ndom = _as_params(n0.domain())
    ctx = nest.context.align_params(ndom.get_space())
    choice = None
    for piece in fpw.pieces:
        bad = interval.subtract(_as_params(piece.domain).align_params(interval.get_space()))
        bad = bad.project_out(PARAM, bad.find_dim_by_name(PARAM, ename), 1)
        valid = ndom.subtract(bad.align_params(ndom.get_space())).intersect(ctx)
        if valid.is_empty():
            continue
        if choice is None or _contains(valid, sizes_of(options, nest)):
            choice = (piece, valid)
            if _contains(valid, sizes_of(options, nest)):
                break
    if choice is None:
        return Count(note="formula not available: the work of the first iterations has no single formula")
    f0, valid = choice
    fpoly = f0.poly
    tq = engine.QPoly.var(tname)
    ctx_t, _ = _params_var(nest.context, tname)
    ctx_t = ctx_t.lower_bound_val(PARAM, ctx_t.find_dim_by_name(PARAM, tname), isl.Val(0))
    ctx_t = ctx_t.upper_bound_val(PARAM, ctx_t.find_dim_by_name(PARAM, tname), isl.Val(threads - 1))

    def at(e: Any) -> Any:
        return fpoly.substitute(ename, e)

    try:
        if chunk is None:
            pieces = []
            for npiece in npw.pieces:
                nq = npiece.poly
                q = engine.QPoly.floor(nq, threads)
                r = nq - q * threads
                big = at((tq + 1) * (q + 1)) - at(tq * (q + 1))
                small = at((tq + 1) * q + r) - at(tq * q + r)
                base = valid.intersect(_as_params(npiece.domain).align_params(valid.get_space()))
                base = base.align_params(ctx_t.get_space()).intersect(ctx_t)
                n_t = n0.align_params(base.get_space())
                zero_dim = isl.Set.from_params(base)
                tv = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(zero_dim.get_space()), PARAM,
                                             base.find_dim_by_name(PARAM, tname))
                few = _as_params(n_t.mod_val(isl.Val(str(threads))).gt_set(tv))
                few = few.align_params(base.get_space())
                vtext = _when_text(valid, tuple(fpw.params))
                nexpr = nq.to_expr()
                rtext = f"{_paren(nexpr)} % {threads}" if threads > 1 else "0"
                for dom, poly, rel in ((base.intersect(few), big, "<"), (base.subtract(few), small, ">=")):
                    if dom.is_empty():
                        continue
                    when = _and(vtext, npiece.when, f"{tname} {rel} {rtext}")
                    pieces.append(engine.Piece(dom, poly, when))
            pw = engine.Piecewise(pieces, names, nest.context)
        else:
            pw = _chunked_formula(engine, nest, n0, npw, valid, at, tname, ctx_t, threads, chunk, options)
    except Exception as exc:  # engine limit or an unexpected shape: the values still hold
        return Count(note=f"formula not available: {exc}")
    return Count(formula=pw, note=f"work of thread {tname} (0 <= {tname} < {threads}) with {threads} threads")


def _chunked_formula(engine: Any, nest: Nest, n0: isl.PwAff, npw: Any, valid: isl.Set, at: Any,
                     tname: str, ctx_t: isl.Set, threads: int, chunk: int, options: Options) -> Any:
    """Sum over the thread's chunks m (chunk m*P + t): F(end) - F(start), the last one cut at n."""
    mname, fname = fresh_name(nest, ("m_", "m__")), fresh_name(nest, ("f_", "f__"))
    base = isl.Set.from_params(valid.align_params(ctx_t.get_space()).intersect(ctx_t)).insert_dims(SET, 0, 2)
    base = base.set_dim_name(SET, 0, mname).set_dim_name(SET, 1, fname)
    ls = isl.LocalSpace.from_space(base.get_space())
    mv = isl.PwAff.var_on_domain(ls, SET, 0)
    fv = isl.PwAff.var_on_domain(ls, SET, 1)
    tv = isl.PwAff.var_on_domain(ls, PARAM, base.find_dim_by_name(PARAM, tname))
    nv = n0.align_params(base.get_space()).insert_dims(IN, 0, 2)
    nv = nv.intersect_domain(base)
    zero, one = _const_on(mv, 0), _const_on(mv, 1)
    start = mv.scale_val(isl.Val(str(chunk * threads))).add(tv.scale_val(isl.Val(str(chunk))))
    end = start.add(_const_on(mv, chunk))
    common = mv.ge_set(zero).intersect(base)
    full = common.intersect(fv.eq_set(zero)).intersect(end.le_set(nv))
    cut = common.intersect(fv.eq_set(one)).intersect(start.lt_set(nv)).intersect(end.gt_set(nv))
    chunks = full.union(cut)
    m = engine.QPoly.var(mname)
    f = engine.QPoly.var(fname)
    t = engine.QPoly.var(tname)
    s_poly = (m * threads + t) * chunk
    total = None
    for npiece in npw.pieces:
        weight = at(s_poly + chunk) * (1 - f) + at(npiece.poly) * f - at(s_poly)
        part = chunks.intersect_params(npiece.domain.align_params(chunks.get_space()))
        pw = engine.sum_over(part, weight, ctx_t, _limits(engine, options))
        total = pw if total is None else total + pw
    return total


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


def sizes_of(options: Options, nest: Nest) -> dict[str, int]:
    """The --at sizes by name, the default `*=V` applied to every parameter of the nest."""
    full = options.sizes(nest.params)
    return {**{k: v for k, v in options.at.items() if k != "*"}, **(full or {})}


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


PAIR = "pair iteration k with iteration n-1-k"
REVERSE = "run the loop backwards (heaviest iterations first)"


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


def analyze(result: NestResult, options: Options) -> None:
    """Fill in the "parallel" extra of every parallel loop of the nest."""
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
                                                     line=outer.header.line))
            continue
        cur = loop
        for _ in range(max(1, omp.collapse) - 1):
            if len(cur.children) != 1:
                break
            cur = nest.loops[cur.children[0]]
            covered.add(cur.index)
        try:
            bal = analyze_loop(result, loop, omp, origin, options)
        except Exception as exc:  # one loop must not take the other loops' balance down
            result.diagnostics.append(InternalError(loop.span, what=f"balance of loop '{loop.var}': "
                                                    f"{type(exc).__name__}: {exc}"))
            continue
        if bal is not None and loop.index in loops:
            loops[loop.index].extras["parallel"] = bal


def analyze_loop(result: NestResult, loop: Loop, omp: ir.OmpClauses, origin: str,
                 options: Options) -> ParallelBalance | None:
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
    bal.work_per_iteration = work_formula(nest, sp, options, " and ".join(var_names[loop.depth:]))
    if schedule == "static":
        if (chunk_expr is not None and const_value(chunk_expr, {}) is None) or (
                threads_from == "num_threads" and const_value(omp.num_threads, {}) is None):
            bal.per_thread_formula = Count(note="formula not available: the chunk size or the number "
                                                "of threads depends on the sizes")
        else:
            bal.per_thread_formula = thread_formula(nest, sp, options, threads, chunk, bal.thread_param)
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
    prof, why = profiles(fixed, work=weigh)
    current = (schedule, chunk)
    if prof is None:
        # Too large to weigh iteration by iteration: static shares are still exact by counting.
        exact = static_per_thread_exact(fixed, threads, chunk) if schedule == "static" else None
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
            exact = static_per_thread_exact(fixed, threads, chunk)
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
    lead = f"parallel loop '{bal.var}' (line {bal.line}): "
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
    diags.append(LoadImbalance(loop.span, message=lead + state + ("; " + advice if advice else "")))
