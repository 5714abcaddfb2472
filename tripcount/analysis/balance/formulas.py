# Balance: per-thread work as formulas in the sizes and the thread id (engine).

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount import engine
from tripcount.analysis.balance.space import (
    IN,
    PARAM,
    SET,
    Space,
    _depends,
    _on_stmt,
    _with_param,
    counter,
    counters,
    sizes_of,
)
from tripcount.analysis.results import Count
from tripcount.budget import Budget
from tripcount.engine import PieceList
from tripcount.engine.piecewise import when_text
from tripcount.model import Nest
from tripcount.options import Options

FORMULA_MAX_THREADS = 16  # per-thread formula of schedule(static): one piece per thread


# --------------------------------------------------------------------------
# Formulas (engine)
#
# Counting each thread's slice directly makes the engine split on the residue
# of n modulo P for every thread, which is slow and gives dozens of pieces.
# Instead one cheap count gives the prefix work F(E) of the iterations with
# counter k < E; a thread's work is then F(end) - F(start) with its share's
# bounds substituted: t*q + min(t, r) with q = floor(n/P), r = n - P*q for
# schedule(static), and a sum over the thread's chunks for schedule(static, c).


def _limits(engine: Any, options: Options, budget: Budget | None) -> Any:
    # the nest's budget caps every call at the time it has left
    return engine.Limits(time_s=options.time_limit, max_pieces=options.max_pieces, budget=budget)


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
                    options: Options, budget: Budget | None = None) -> Any:
    """Engine count of sum(weight * |set|)."""
    sets = [(s, w) for s, w in sets if w]
    if not sets:
        return engine.count(isl.Set.empty(context.get_space()), context, _limits(engine, options, budget))
    if all(isinstance(w, int) or Fraction(w).denominator == 1 for _, w in sets):
        return engine.count(_padded_union([(s, int(w)) for s, w in sets]), context, _limits(engine, options, budget))
    total = None
    for s, w in sets:
        pw = engine.count(s, context, _limits(engine, options, budget)).scale(w)
        total = pw if total is None else total + pw
    return total


def work_formula(nest: Nest, sp: Space, options: Options, names: str, budget: Budget | None = None) -> Count:
    """Work of one iteration as a formula in the parameters and the loop variable(s)."""
    prefix = sp.depth + sp.width
    sets = [(s.move_dims(PARAM, s.dim(PARAM), SET, 0, prefix), w) for s, w in sp.stmts]
    try:
        pw = _count_weighted(engine, sets, nest.context, options, budget)
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
                          chunk: int | None, tname: str, budget: Budget | None = None) -> Count | None:
    """Per-thread formula when every iteration of an entry weighs the same (rectangular bodies):
    the work of the entries' first iterations times the thread's number of iterations.
    Works for collapsed loops too, whose linearized index is not affine."""
    d, c = sp.depth, sp.width
    if any(_depends(s, sp.domain, d, c) for s, _ in sp.stmts):
        return None
    lim = _limits(engine, options, budget)
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
    w1 = _count_weighted(engine, [(_on_stmt(first, s, d + c), w) for s, w in sp.stmts], nest.context, options, budget)
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
                   tname: str, budget: Budget | None = None) -> Count:
    """Each thread's work under a static schedule as a formula in the parameters and the thread id."""
    try:
        const = _const_thread_formula(engine, nest, sp, options, threads, chunk, tname, budget)
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
                              nest.context, options, budget)
        loops_only = sp.domain.project_out(SET, 0, d) if d else sp.domain
        npw = engine.count(loops_only, nest.context, _limits(engine, options, budget))
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
            pw = _chunked_formula(engine, nest, n0, npw, valid, at, tname, ctx_t, threads, chunk, options, budget)
    except Exception as exc:  # engine limit or an unexpected shape: the values still hold
        return Count(note=f"formula not available: {exc}")
    return Count(formula=pw, note=f"work of thread {tname} (0 <= {tname} < {threads}) with {threads} threads")


def _chunked_formula(engine: Any, nest: Nest, n0: isl.PwAff, npw: Any, valid: isl.Set, at: Any,
                     tname: str, ctx_t: isl.Set, threads: int, chunk: int, options: Options,
                     budget: Budget | None = None) -> Any:
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
        pw = engine.sum_over(part, weight, ctx_t, _limits(engine, options, budget))
        total = pw if total is None else total + pw
    return total


