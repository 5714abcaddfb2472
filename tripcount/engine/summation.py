# The summation core: sum a quasi-polynomial over the integer points of a set.
#
# Method (variable elimination, innermost set dimension first):
#   * the set is made disjoint and handled one basic set at a time;
#   * an equality x = e (unit coefficient) substitutes x away; an equality
#     x = e + b*floor(...) (a stride) reparametrizes x by the stride counter;
#   * otherwise, with L the lcm of the periods in x of every floor of the summand
#     and of every div of the basic set, x is split by residue, x = L*x' + r;
#     then no floor involves x' and, for fixed outer variables, the x'-fiber is
#     an integer interval [lo, hi];
#   * lo and hi come from isl (dim_min/dim_max with the outer variables as
#     parameters: pieces are the chambers); the upper bounds are relaxed by one
#     first, so that each piece also covers the outer points where the fiber is
#     empty with lo = hi + 1 (the Faulhaber sum is 0 there) - fewer, larger pieces;
#   * the polynomial summand is summed over [lo, hi] with Faulhaber's formula,
#     and each piece recurses on the remaining variables.
# Every step removes one set dimension, so the recursion terminates. The result
# is a list of (parameter set, QPoly) terms whose sum is the answer; the domains
# may overlap (piecewise.py makes them disjoint).

from __future__ import annotations

import time
from dataclasses import dataclass
from fractions import Fraction
from math import lcm

import islpy as isl

from tripcount.budget import Budget, LimitReached, TimeLimit
from tripcount.engine.faulhaber import antidifference, sum_interval
from tripcount.engine.islconv import aff_to_lin, bset_constraints, bset_divs, val_frac
from tripcount.engine.qpoly import Floor, QPoly, atom_period, lin_scale, poly_period

_dt = isl.dim_type


# Raised when a limit (time, pieces, terms) is hit or the count is not finite.
# One class with the budget's give-ups (an enumeration refused by
# budget.count_points inside the engine is a give-up of the count), so that a
# caller handles every give-up of a count with one `except EngineLimit`.
EngineLimit = LimitReached


@dataclass
class Limits:
    """Budgets of one engine call."""

    time_s: float = 20.0  # per call wall-clock budget
    max_pieces: int = 256  # pieces/terms cap
    budget: Budget | None = None  # the caller's budget: no deadline past its own, and bounded enumeration


class _State:
    def __init__(self, limits: Limits) -> None:
        self.limits = limits
        self.deadline = time.monotonic() + limits.time_s
        if limits.budget is not None:
            self.deadline = min(self.deadline, limits.budget.deadline)
        self.n_terms = 0
        # intermediate terms may exceed the final piece count; residue splits of
        # a modulus up to 64 in two variables should still pass
        self.max_terms = 64 * limits.max_pieces
        # an optional pass was skipped for lack of time: the pieces are exact, but their
        # form may differ on a less busy run (not memoized; the caller's result is cut by time)
        self.hurried = False

    def hurry(self) -> None:
        """Record that the clock decided something of this count (see `hurried`)."""
        self.hurried = True
        if self.limits.budget is not None:
            self.limits.budget.mark_time_cut()

    def check(self, what: str) -> None:
        if time.monotonic() > self.deadline:
            self.hurry()
            raise TimeLimit(f"time limit of {self.limits.time_s} s exceeded ({what})")


def _names(s) -> list[str]:
    sp = s.get_space()
    return [sp.get_dim_name(_dt.set, i) for i in range(s.dim(_dt.set))]


def _param_names(s) -> list[str]:
    sp = s.get_space()
    return [sp.get_dim_name(_dt.param, i) for i in range(s.dim(_dt.param))]


def _lin_str(lin) -> str:
    """isl syntax for an integer affine expression without floors."""
    parts = [f"{int(c)}*{a}" for a, c in lin[0].items()]
    parts.append(f"{int(lin[1])}")
    return " + ".join(parts)


def _multi_aff(ctx, params, names, last_expr: str) -> isl.MultiAff:
    outs = names[:-1] + [last_expr]
    return isl.MultiAff.read_from_str(
        ctx, f"[{', '.join(params)}] -> {{ [{', '.join(names)}] -> [{', '.join(outs)}] }}"
    )


def sum_set(s: isl.Set, f: QPoly, st: _State) -> list[tuple[isl.Set, QPoly]]:
    """Terms (parameter set, QPoly) whose sum is sum_{points of s} f."""
    if f.is_zero() or s.is_empty():
        return []
    if s.dim(_dt.set) == 0:
        st.n_terms += 1
        if st.n_terms > st.max_terms:
            raise EngineLimit(
                f"more than {st.max_terms} intermediate terms (max_pieces={st.limits.max_pieces})"
            )
        return [(s.params(), f)]
    st.check("summing")
    out: list[tuple[isl.Set, QPoly]] = []
    for b in s.compute_divs().make_disjoint().get_basic_sets():
        st.check("summing")
        out.extend(_sum_bset(b, f, st, allow_stride=True))
    return out


def _raw_stride(b: isl.BasicSet, k: int):
    """An equality  cx*x + sum a*y + c0 + b*d = 0  with cx = +-1, one div d involving x
    and otherwise no divs: returns (cx, b, {name: a}, c0) on isl's own coefficients."""
    names = _names(b)
    params = _param_names(b)
    ls = b.get_local_space()
    nd = b.dim(_dt.div)
    involves = []
    for j in range(nd):
        inner = ls.get_div(j)
        involves.append(
            not inner.get_coefficient_val(_dt.in_, k - 1).is_zero()
            or any(not inner.get_coefficient_val(_dt.div, t).is_zero() for t in range(inner.dim(_dt.div)))
        )
    for c in b.get_constraints():
        if not c.is_equality():
            continue
        cx = val_frac(c.get_coefficient_val(_dt.set, k - 1))
        if abs(cx) != 1:
            continue
        used = [j for j in range(nd) if not c.get_coefficient_val(_dt.div, j).is_zero()]
        if len(used) != 1 or not involves[used[0]]:
            continue
        coef = val_frac(c.get_coefficient_val(_dt.div, used[0]))
        rest: dict[str, Fraction] = {}
        for t, nms in ((_dt.param, params), (_dt.set, names[:-1])):
            for i, nm in enumerate(nms):
                v = c.get_coefficient_val(t, i)
                if not v.is_zero():
                    rest[nm] = val_frac(v)
        return cx, coef, rest, val_frac(c.get_constant_val())
    return None


def _sum_bset(b: isl.BasicSet, f: QPoly, st: _State, allow_stride: bool) -> list:
    k = b.dim(_dt.set)
    names = _names(b)
    x = names[-1]
    params = _param_names(b)
    divs = bset_divs(b)
    cons = bset_constraints(b, divs)

    for lin, eq in cons:
        if not eq:
            continue
        cx = lin[0].get(x)
        if cx is None or abs(cx) != 1:
            continue
        rest = ({a: c for a, c in lin[0].items() if a != x}, lin[1])
        if not any(isinstance(a, Floor) and x in a.variables() for a in rest[0]):
            # x is a function of the outer variables: substitute, project exactly
            img = QPoly.from_lin(lin_scale(rest, -cx))
            b2 = isl.Set.from_basic_set(b.project_out(_dt.set, k - 1, 1))
            return sum_set(b2, f.subs({x: img}), st)
    if allow_stride:
        stride = _raw_stride(b, k)
        if stride is not None:
            # cx*x + rest + coef*d = 0: x = -cx*(coef*t + rest), the stride counter t replaces x
            cx, coef, rest, c0 = stride
            img_lin = lin_scale(({x: coef, **rest}, c0), -cx)
            ma = _multi_aff(b.get_ctx(), params, names, _lin_str(img_lin))
            b2 = b.preimage_multi_aff(ma)
            f2 = f.subs({x: QPoly.from_lin(img_lin)})
            out = []
            for bb in isl.Set.from_basic_set(b2).compute_divs().make_disjoint().get_basic_sets():
                out.extend(_sum_bset(bb, f2, st, allow_stride=False))
            return out

    L = 1
    pcache: dict = {}
    for dv in divs:
        for a in dv[0]:
            if isinstance(a, Floor) and x in a.variables():
                L = lcm(L, atom_period(a, x, pcache)[0])
    if L == 1:
        block = _block_summer(f, x)
        if block is not None:
            return _sum_interval(b, f, st, cons, divs, block)
    L = lcm(L, poly_period(f, x))
    if L == 1:
        return _sum_interval(b, f, st, cons, divs)
    out = []
    ctx = b.get_ctx()
    for r in range(L):
        st.check("residue split")
        ma = _multi_aff(ctx, params, names, f"{L}*{x} + {r}")
        br = b.preimage_multi_aff(ma)
        if br.is_empty():
            continue
        fr = f.subs({x: QPoly.var(x) * L + r})
        for bb in isl.Set.from_basic_set(br).compute_divs().make_disjoint().get_basic_sets():
            out.extend(_sum_interval(bb, fr, st, None, None, relax=RELAX_RESIDUES))
    return out


# residue branches: relaxing their upper bounds tends to give domains with
# extra floors, which are expensive to make disjoint later
RELAX_RESIDUES = False

_Y, _Q, _R, _S = "_y_", "_q_", "_r_", "_s_"


def _block_summer(f: QPoly, x: str):
    """Summation over [lo, hi] by whole periods, when the only floor involving x is
    A = floor((x + e)/m) (unit coefficient, e free of x).

    With y = x + e and P(y, q) = f(y - e) with A -> q, an antidifference of
    P(y, floor(y/m)) valid for all integers n is H(n) = V(Q) + U(Q, R), Q = floor(n/m),
    R = n - m*Q, V(Q) = sum_{q<Q} sum_{s<m} P(mq + s, q), U(Q, R) = sum_{s<=R} P(mQ + s, Q)
    (H(n) - H(n-1) = P(n, floor(n/m)) holds on both residue cases). The sum is then
    H(hi + e) - H(lo + e - 1): two floor atoms instead of m residue branches.
    """
    xa = [a for a in f.atoms() if isinstance(a, Floor) and x in a.variables()]
    if len(xa) != 1:
        return None
    a = xa[0]
    coef = dict(a.terms).get(x)
    if coef != 1 or any(isinstance(t, Floor) and x in t.variables() for t, _ in a.terms):
        return None
    m = a.den
    e = QPoly.from_lin(({t: c for t, c in a.terms if t != x}, a.const))
    xv = QPoly.var(_Y) - e
    p = QPoly()
    for kk, ck in f.coeffs_in_atom(a).items():
        p = p + ck.subs({x: xv}) * QPoly.var(_Q) ** kk
    # T(q) = sum_{s=0}^{m-1} P(m q + s, q)
    ps = p.subs({_Y: QPoly.var(_Q) * m + QPoly.var(_S)})
    t = sum_interval(ps.coeffs_in(_S), QPoly.const(0), QPoly.const(m - 1))
    v = sum_interval(t.coeffs_in(_Q), QPoly.const(0), QPoly.var(_Q) - 1)
    u = sum_interval(ps.coeffs_in(_S), QPoly.const(0), QPoly.var(_R))
    h = v + u

    memo: dict[QPoly, QPoly] = {}

    def hh(n: QPoly) -> QPoly:
        got = memo.get(n)
        if got is None:
            q = QPoly.floor(n, m)
            got = memo[n] = h.subs({_Q: q, _R: n - q * m})
        return got

    def summer(lo: QPoly, hi: QPoly) -> QPoly:
        return hh(hi + e) - hh(lo + e - 1)

    return summer


def _relaxed(b: isl.BasicSet, x: str, cons) -> isl.BasicSet | None:
    """b with every upper bound on x loosened by one (x <= U becomes x <= U + 1)."""
    k = b.dim(_dt.set)
    res = isl.BasicSet.universe(b.get_space())
    ctx = b.get_ctx()
    for c, (lin, eq) in zip(b.get_constraints(), cons, strict=True):
        a = lin[0].get(x, 0)
        if not a:
            res = res.add_constraint(c)
            continue
        if a.denominator != 1:
            return None
        a = int(a)
        if eq:
            aff = c.get_aff()
            lower, upper = (aff, aff.neg()) if a > 0 else (aff.neg(), aff)
            res = res.add_constraint(isl.Constraint.inequality_from_aff(lower))
            upper = upper.add_constant_val(isl.Val.read_from_str(ctx, str(abs(a))))
            res = res.add_constraint(isl.Constraint.inequality_from_aff(upper))
        elif a > 0:
            res = res.add_constraint(c)
        else:
            aff = c.get_aff().add_constant_val(isl.Val.read_from_str(ctx, str(-a)))
            res = res.add_constraint(isl.Constraint.inequality_from_aff(aff))
    del k
    return res


def _sum_interval(
    b: isl.BasicSet, f: QPoly, st: _State, cons, divs, summer=None, relax: bool = True
) -> list:
    """Sum f over the x-fibers of b (x = last dim), which are intervals."""
    k = b.dim(_dt.set)
    nparam = b.dim(_dt.param)
    x = _names(b)[-1]
    if divs is None:
        divs = bset_divs(b)
        cons = bset_constraints(b, divs)
    if summer is None:
        big_g = antidifference(f.coeffs_in(x))

        def summer(lo: QPoly, hi: QPoly) -> QPoly:
            return big_g(hi) - big_g(lo - 1)

    relax = relax and not any(
        isinstance(a, Floor) and x in a.variables() for dv in divs for a in dv[0]
    )
    c = _relaxed(b, x, cons) if relax else None
    shift = 1
    if c is None:
        c, shift = b, 0
    t = isl.Set.from_basic_set(c).move_dims(_dt.param, nparam, _dt.set, 0, k - 1)
    try:
        lo = t.dim_min(0)
        hi = t.dim_max(0)
    except isl.Error as e:
        if "unbounded" in str(e):
            raise EngineLimit("the set is unbounded: the count is not finite") from e
        raise
    lo_p = [(d, aff_to_lin(a)) for d, a in lo.get_pieces()]
    hi_p = [(d, aff_to_lin(a)) for d, a in hi.get_pieces()]
    out = []
    for d1, l1 in lo_p:
        lo_q = QPoly.from_lin(l1)
        for d2, l2 in hi_p:
            # one check per isl call: a long chamber list must not overrun the budget
            st.check("summing chambers")
            d = d1.intersect(d2)
            if d.is_empty():
                continue
            hi_q = QPoly.from_lin(l2) - shift
            if lo_q == hi_q:
                g = f.subs({x: lo_q})
            else:
                g = summer(lo_q, hi_q)
            if g.is_zero():
                continue
            back = d.move_dims(_dt.set, 0, _dt.param, nparam, k - 1)
            out.extend(sum_set(back, g, st))
    return out
