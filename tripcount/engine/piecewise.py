# Piecewise quasi-polynomials: disjoint parameter domains, each with a QPoly.
#
# The summation core returns overlapping terms; `build` makes them disjoint
# (the formula of a region is the sum of the terms covering it), then
# simplifies: drops zero regions, absorbs small bounded regions into a piece
# whose formula also holds there (checked point by point), merges pieces whose
# formulas are identical (proven by evaluation, see qpoly_identical), gists the
# domains under the context, and puts the generic piece (the one that holds for
# large, spread-out parameter values) first.

from __future__ import annotations

import random
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from itertools import product
from math import comb, lcm

import islpy as isl

from tripcount.budget import Budget, count_points
from tripcount.engine.fmt import format_conditions
from tripcount.engine.islconv import bset_constraints, exceeds, lin_isl, params_set, val_int
from tripcount.engine.memo import Memo
from tripcount.engine.qpoly import Floor, Lin, QPoly, atom_period, atom_value, compile_conditions
from tripcount.engine.summation import EngineLimit, _State

_dt = isl.dim_type


class _Cond:
    """A parameter domain as DNF of our own constraints, for fast exact membership."""

    def __init__(self, s: isl.Set) -> None:
        self.dnf = [bset_constraints(b) for b in s.compute_divs().get_basic_sets()]
        self._test = None
        self._uses = 0

    def contains(self, env: Mapping[str, int]) -> bool:
        # compiled once used often: some pieces are tested thousands of times
        # (values, footprint maxima), and integer code is many times cheaper
        # than Fractions; most are tested a few times, cheaper than compiling
        test = self._test
        if test is not None:
            return test(env)
        self._uses += 1
        if self._uses > _COMPILE_AFTER:
            self._test = compile_conditions(self.dnf)
        cache: dict = {}
        for conj in self.dnf:
            ok = True
            for lin, eq in conj:
                v = _lin_value(lin, env, cache)
                if (v != 0) if eq else (v < 0):
                    ok = False
                    break
            if ok:
                return True
        return False


_COMPILE_AFTER = 16


def _lin_value(lin: Lin, env: Mapping[str, int], cache: dict) -> Fraction:
    s = lin[1]
    for a, c in lin[0].items():
        s += c * atom_value(a, env, cache)
    return s


@dataclass(frozen=True)
class Piece:
    """One piece: on parameter set `domain`, the count is `poly`; `when` is C text."""

    domain: isl.Set
    poly: QPoly
    when: str
    _cond: _Cond | None = field(default=None, compare=False, repr=False)

    def contains(self, values: Mapping[str, int]) -> bool:
        cond = self._cond
        if cond is None:
            cond = _Cond(self.domain)
            object.__setattr__(self, "_cond", cond)
        return cond.contains(values)


# sums already built, by the identity of their operands (see _built_sum)
_SUMS: Memo[tuple, Piecewise] = Memo(1024)


def add_all(formulas: list[Piecewise]) -> Piecewise:
    """The sum of many formulas, built once from all their pieces (adding them one
    by one would rebuild the growing sum each time)."""
    if not formulas:
        raise ValueError("add_all needs at least one formula")
    if len(formulas) <= 2:
        return formulas[0] if len(formulas) == 1 else formulas[0] + formulas[1]
    return _built_sum(tuple(formulas))


def _built_sum(formulas: tuple[Piecewise, ...]) -> Piecewise:
    """build() over all the pieces of `formulas`, remembered by the operands' identity
    (engine results are shared between equal sets, so the same sums recur)."""
    found = _SUMS.get(formulas)
    if found is None:
        params = tuple(dict.fromkeys(p for f in formulas for p in f.params))
        ctx = None
        for f in formulas:
            if f.context is not None:
                ctx = f.context if ctx is None else ctx.intersect(f.context)
        found = _SUMS.keep(formulas, build([t for f in formulas for t in f._terms()], params, ctx))
    return found


class PieceList:
    """Evaluation and JSON shared by piecewise formulas: `pieces` hold `poly`,
    `when` and `contains(values)`; disjoint, generic piece first, 0 outside."""

    pieces: list

    def evaluate(self, values: Mapping[str, int]) -> Fraction:
        """Exact value at integer parameter values (0 outside all pieces)."""
        for p in self.pieces:
            if p.contains(values):
                return p.poly.evaluate(values)
        return Fraction(0)

    def degree(self) -> int:
        """Degree of growth of the generic piece (QPoly.growth_degree): terms of floors that cancel for
        large sizes do not count (32*f1 + n*f1 - 32*f1^2 - n*f0 + 32*f0^2 + 32*f0, with f0 = floor(n/64)
        and f1 = floor((n + 63)/64), is n: degree 1, not 2)."""
        if not self.pieces:
            return 0
        poly = self.pieces[0].poly
        # Per-thread shares (balance) are not QPolys; their own degree is already one of growth.
        growth = getattr(poly, "growth_degree", None)
        return growth() if growth is not None else poly.degree()

    def leading(self) -> str:
        """Leading homogeneous part of the generic piece."""
        return self.pieces[0].poly.leading() if self.pieces else "0"

    def is_zero(self) -> bool:
        """True without pieces."""
        return not self.pieces

    def to_json(self) -> dict:
        """pieces (when, expr), degree, leading."""
        return {
            "pieces": [{"when": p.when, "expr": p.poly.to_expr()} for p in self.pieces],
            "degree": self.degree(),
            "leading": self.leading(),
        }


class Piecewise(PieceList):
    """Disjoint pieces; the value is 0 outside all of them. Generic piece first."""

    def __init__(
        self,
        pieces: list[Piece],
        params: tuple[str, ...],
        context: isl.Set | None = None,
    ) -> None:
        self.pieces = pieces
        self.params = tuple(params)
        self.context = context

    def __repr__(self) -> str:
        return "Piecewise(" + "; ".join(f"{p.when}: {p.poly.to_expr()}" for p in self.pieces) + ")"

    def _terms(self) -> list[tuple[isl.Set, QPoly]]:
        return [(p.domain, p.poly) for p in self.pieces]

    def __add__(self, other: Piecewise) -> Piecewise:
        if not isinstance(other, Piecewise):
            return NotImplemented
        params = tuple(dict.fromkeys(self.params + other.params))
        # adding nothing (an array a scope does not touch): no new pieces to build
        if not other.pieces and params == self.params:
            return self
        if not self.pieces and params == other.params:
            return other
        return _built_sum((self, other))

    def scale(self, c: int | Fraction) -> Piecewise:
        """The piecewise multiplied by a constant."""
        c = Fraction(c)
        if not c:
            return Piecewise([], self.params, self.context)
        return Piecewise(
            [Piece(p.domain, p.poly * c, p.when) for p in self.pieces], self.params, self.context
        )

    def scaled(self, t_name: str = "t", base: Mapping[str, int] | None = None) -> QPoly:
        """Generic piece with every parameter p replaced by base[p]*t (base defaults to 1)."""
        if not self.pieces:
            return QPoly()
        base = base or {}
        t = QPoly.var(t_name)
        return self.pieces[0].poly.subs({p: t * base.get(p, 1) for p in self.params})

    def ehrhart_numerator(self, param: str | None = None, period: int | None = None) -> list[Fraction]:
        """Numerator h*(z) of the series sum_{t>=0} L(t) z^t = h*(z)/(1 - z^p)^(d+1).

        For one parameter t (other parameters must be absent). p is the period
        of the generic piece (1 for a lattice polytope), d its degree; L(t) is
        this piecewise's exact value, so small-t pieces count too.
        """
        if param is None:
            if len(self.params) != 1:
                raise ValueError("ehrhart_numerator needs a one-parameter count")
            param = self.params[0]
        if not self.pieces:
            return []
        poly = self.pieces[0].poly
        d = poly.degree()
        if period is None:
            period = 1
            for f in poly.floors():
                period = lcm(period, atom_period(f, param)[0])
        n = period * (d + 1)
        vals = [self.evaluate({param: t}) for t in range(n)]
        # (1 - z^p)^(d+1) = sum_j (-1)^j C(d+1, j) z^(p j)
        h = []
        for i in range(n):
            s = Fraction(0)
            for j in range(d + 2):
                if period * j > i:
                    break
                s += (-1) ** j * comb(d + 1, j) * vals[i - period * j]
            h.append(s)
        while h and h[-1] == 0:
            h.pop()
        return h


# ---------------------------------------------------------------------------
# building and simplification


# up to this many distinct term domains, the pairwise overlay is used
PAIRWISE_MAX = 24


def _sample_env(d: isl.Set) -> dict[str, int] | None:
    """One parameter point of d (None if d is empty)."""
    if d.is_empty():
        return None
    pt = d.sample_point()
    sp = d.get_space()
    return {sp.get_dim_name(_dt.param, i): val_int(pt.get_coordinate_val(_dt.param, i))
            for i in range(d.dim(_dt.param))}


_FEW_TERMS = 6


def _combine(terms: list[tuple[isl.Set, QPoly]], st: _State | None) -> list[list]:
    """Disjoint regions [set, poly]; the poly of a region is the sum of the terms covering it."""
    # identical domains first: add their polys. Equal sets contain the same
    # points, so isl's equality test (costly on sets with existentials, and
    # quadratic in the number of terms) runs only on domains that agree on one
    # sample point of every term (compiled membership tests, microseconds each).
    terms = [(d.coalesce(), f) for d, f in terms]
    few = len(terms) <= _FEW_TERMS  # then the few isl tests are cheaper than the probes
    probes = [] if few else [e for e in (_sample_env(d) for d, _ in terms) if e is not None]
    grouped: list[list] = []
    sigs: list[tuple] = []
    for d, f in terms:
        cond = None if few else _Cond(d)
        sig = () if cond is None else tuple(cond.contains(e) for e in probes)
        for g, sg in zip(grouped, sigs, strict=True):
            if sg == sig and g[0].is_equal(d):
                g[1] = g[1] + f
                break
        else:
            grouped.append([d, f])
            sigs.append(sig)
    if not grouped:
        return []
    limit = st.limits.max_pieces * 8 if st is not None else 4096
    if len(grouped) <= PAIRWISE_MAX:
        return _overlay_pairwise(grouped, st, limit)
    # explicit divs instead of existentials (projected loop variables): the
    # overlay below is several times cheaper on them
    grouped = [[d.compute_divs().coalesce(), f] for d, f in grouped]
    # The overlay is computed by isl in one pass over quasi-affine tags: term i
    # carries the constant 2^i, and isl's union_add sums the tags where domains
    # overlap, so the tag of a region is the bit set of the terms covering it
    # (exact: integer constants never cancel). Much cheaper than subtracting
    # the sets pairwise here.
    ctx = grouped[0][0].get_ctx()
    # pairwise in a balanced tree: each union_add meets operands of similar
    # size, instead of every term meeting the ever larger accumulated overlay
    level = [isl.PwAff.val_on_domain(d, isl.Val.read_from_str(ctx, str(1 << i)))
             for i, (d, _f) in enumerate(grouped)]
    while len(level) > 1:
        nxt = []
        for i in range(0, len(level) - 1, 2):
            if st is not None:
                st.check("combining pieces")
            nxt.append(level[i].union_add(level[i + 1]).coalesce())
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    acc = level[0]
    by_mask: dict[int, isl.Set] = {}
    for dom, aff in acc.get_pieces():
        mask = val_int(aff.get_constant_val())
        if mask in by_mask:
            by_mask[mask] = by_mask[mask].union(dom)
        else:
            by_mask[mask] = dom
    if st is not None:
        st.check("combining pieces")
    regions: list[list] = []
    # term order (lowest covering term first), as the pairwise overlay produced it
    for mask, dom in sorted(by_mask.items(), key=lambda kv: ((kv[0] & -kv[0]).bit_length(), kv[0])):
        poly = QPoly()
        i = 0
        while mask:
            if mask & 1:
                poly = poly + grouped[i][1]
            mask >>= 1
            i += 1
        regions.append([dom.coalesce(), poly])
    regions = _merge_equal(regions)
    if len(regions) > limit:
        raise EngineLimit(f"more than {limit} pieces while combining terms")
    return regions


def _spare(st: _State | None, frac: float) -> bool:
    """True when more than `frac` of the time budget is left. The merging and
    readability passes are optional (the pieces are exact without them): they
    stop early instead of turning a finished count into a give-up."""
    if st is None or st.deadline - time.monotonic() > frac * st.limits.time_s:
        return True
    st.hurry()
    return False


def _overlay_pairwise(grouped: list[list], st: _State | None, limit: int) -> list[list]:
    """The overlay by pairwise intersection and subtraction (few terms: cheap, and
    its regions coalesce into the most readable pieces)."""
    regions: list[list] = []
    for d, f in grouped:
        if st is not None:
            st.check("combining pieces")
        new: list[list] = []
        rest = d
        for r, g in regions:
            if st is not None:
                st.check("combining pieces")
            if rest.is_empty():
                new.append([r, g])
                continue
            inter = r.intersect(rest)
            if inter.is_empty():
                new.append([r, g])
                continue
            rm = r.subtract(rest)
            if not rm.is_empty():
                new.append([rm.coalesce(), g])
            new.append([inter.coalesce(), g + f])
            rest = rest.subtract(r).coalesce()
        if not rest.is_empty():
            new.append([rest, f])
        regions = _merge_equal(new)
        if len(regions) > limit:
            raise EngineLimit(f"more than {limit} pieces while combining terms")
    return regions


def _merge_equal(regions: list[list]) -> list[list]:
    """Union the domains of regions with structurally equal formulas; drop zero formulas."""
    by: dict[QPoly, isl.Set] = {}
    for r, g in regions:
        if g.is_zero():
            continue
        if g in by:
            by[g] = by[g].union(r).coalesce()
        else:
            by[g] = r
    return [[r, g] for g, r in by.items()]


def _param_points(r: isl.Set, limit: int, budget: Budget | None) -> list[dict[str, int]] | None:
    """All points of a bounded parameter set with at most `limit` points, else None."""
    n = r.dim(_dt.param)
    names = [r.get_space().get_dim_name(_dt.param, i) for i in range(n)]
    s = r.move_dims(_dt.set, 0, _dt.param, 0, n)
    if not s.is_bounded():
        return None
    if count_points(s, budget) > limit:
        return None
    pts: list[dict[str, int]] = []

    def cb(p):
        pts.append({nm: val_int(p.get_coordinate_val(_dt.set, i)) for i, nm in enumerate(names)})

    s.foreach_point(cb)
    return pts


_PROBES: list[int] = []


def _probe_values(n: int) -> list[int]:
    """The first n draws of a fixed random sequence (the same every run)."""
    if len(_PROBES) < n:
        rng = random.Random(1234)
        _PROBES[:] = [rng.randint(-50, 50) for _ in range(max(n, 2 * len(_PROBES), 64))]
    return _PROBES


def qpoly_identical(f: QPoly, g: QPoly, budget: int = 20000) -> bool:
    """Prove f == g for all integer values (True), or give up / refute (False).

    h = f - g: on each residue class of the variables modulo their periods P_v
    every floor is affine in the class index k, so h is a polynomial in k of
    degree <= deg_v(h) in each k_v; vanishing on a (deg_v + 1)-point grid per
    class (tensor-product interpolation) proves h == 0.
    """
    if f == g:
        return True
    # refute first on the operands themselves: their compiled evaluators are
    # kept on them, while h below would be compiled anew for every pair
    vs = sorted(f.variables() | g.variables())
    n = len(vs)
    seq = _probe_values(6 * n)
    for r in range(6):
        env = {v: seq[r * n + j] for j, v in enumerate(vs)}
        if f.evaluate(env) != g.evaluate(env):
            return False
    h = f - g
    vs = sorted(h.variables())
    periods = {}
    fl = h.floors()
    for v in vs:
        p = 1
        for a in fl:
            if v in a.variables():
                p = lcm(p, atom_period(a, v)[0])
        periods[v] = p
    degs = {v: h.degree_in(v) for v in vs}
    total = 1
    for v in vs:
        total *= periods[v] * (degs[v] + 1)
    if total > budget:
        return False
    for res in product(*[range(periods[v]) for v in vs]):
        for ks in product(*[range(degs[v] + 1) for v in vs]):
            env = {v: periods[v] * k + r for v, r, k in zip(vs, res, ks, strict=True)}
            if h.evaluate(env) != 0:
                return False
    return True


# the bundled corpus needs at most 8 basic sets and 20 existentials here
_FLAT_MAX_BASIC = 16
_FLAT_MAX_DIVS = 48


def _flat_substitution(r: isl.Set) -> dict[str, QPoly] | None:
    """If r lies in a hyperplane p = e (unit coefficient on a parameter p, no divs), {p: e}.

    Not tried on a region past _FLAT_MAX_BASIC basic sets or _FLAT_MAX_DIVS
    existentials: the hull of such a union (one seen in fuzzing: 118 basic sets,
    929 existentials) is one isl call of minutes that no limit can interrupt,
    and the merge it serves only saves a piece.
    """
    if exceeds(r, _FLAT_MAX_BASIC, _FLAT_MAX_DIVS):
        return None
    hull = r.compute_divs().affine_hull()
    if hull.dim(_dt.div):
        return None
    for lin, eq in bset_constraints(hull):
        if not eq:
            continue
        for a, c in lin[0].items():
            if isinstance(a, str) and abs(c) == 1:
                rest = ({b: v for b, v in lin[0].items() if b != a}, lin[1])
                if any(isinstance(b, Floor) for b in rest[0]):
                    continue
                img = QPoly.from_lin(rest) * (-c)
                return {a: img}
    return None


def _absorb_flat(regions: list[list], st: _State | None) -> list[list]:
    """Merge a region lying in a hyperplane into a piece whose formula agrees on that hyperplane."""
    out = list(regions)
    changed = True
    while changed and len(out) > 1:
        changed = False
        for i, reg in enumerate(out):
            sub = _flat_substitution(reg[0])
            if sub is None:
                continue
            mine = reg[1].subs(sub)
            for j, other in enumerate(out):
                if j == i:
                    continue
                if not _spare(st, 0.25):
                    return out
                if qpoly_identical(other[1].subs(sub), mine):
                    other[0] = other[0].union(reg[0]).coalesce()
                    del out[i]
                    changed = True
                    break
            if changed:
                break
    return out


def _simplify_on_residues(r: isl.Set, f: QPoly, params: tuple[str, ...]) -> QPoly:
    """Evaluate the floors of f that are fixed on r because r lies in a residue class
    p = m*k + c of a parameter (e.g. 2*N - 2*floor(N/2) - 1 is N on odd N)."""
    fl = f.floors()
    if not fl:
        return f
    for p in params:
        period = 1
        for a in fl:
            if p in a.variables():
                period = lcm(period, atom_period(a, p)[0])
        if period == 1 or period > 64:
            continue
        # only the class of one point of r can contain all of r
        if r.is_empty():
            return f
        pt = r.sample_point()
        c = val_int(pt.get_coordinate_val(_dt.param, params.index(p))) % period
        cls = params_set(r.get_ctx(), params, f"exists q : {p} = {period}*q + {c}")
        if r.is_subset(cls):
            k = QPoly.var("_k_")
            g = f.subs({p: k * period + c}).subs({"_k_": (QPoly.var(p) - c) / period})
            if g.n_terms() < f.n_terms() or len(g.floors()) < len(fl):
                f, fl = g, g.floors()
    return f


def _fix_constant_floors(r: isl.Set, f: QPoly, params: tuple[str, ...], st: _State | None) -> QPoly:
    """Replace the floors of f that are constant on r by their value (on 1 <= H <= 31,
    floor(H/32) is 0), so that edge pieces read simply and merge with their neighbours.

    Optional (presentation and merging only): skipped when less than half of the
    time budget is left, so that it never turns a count into a give-up."""
    fl = [a for a in f.atoms() if isinstance(a, Floor) and all(isinstance(b, str) for b, _ in a.terms)]
    if not fl:
        return f
    if not _spare(st, 0.5):
        return f
    if r.is_empty():
        return f
    pt = r.sample_point()
    env = {p: val_int(pt.get_coordinate_val(_dt.param, i)) for i, p in enumerate(params)}
    fixed: dict = {}
    for a in fl:
        q = atom_value(a, env, {})
        expr = lin_isl((dict(a.terms), a.const))
        band = params_set(r.get_ctx(), params, f"{q * a.den} <= {expr} <= {q * a.den + a.den - 1}")
        if r.is_subset(band):
            fixed[a] = q
    if not fixed:
        return f
    out: dict = {}
    for m, c in f.terms.items():
        rest = []
        for a, e in m:
            if a in fixed:
                c = c * Fraction(fixed[a]) ** e
            else:
                rest.append((a, e))
        if c:
            key = tuple(rest)
            out[key] = out.get(key, Fraction(0)) + c
    return QPoly({m: c for m, c in out.items() if c})


def _generic_points(params: tuple[str, ...]) -> list[dict[str, int]]:
    n = len(params)
    pts = []
    for j in range(4):
        pts.append({p: 10**6 + 1009 * i + 7 * j for i, p in enumerate(params)})
        pts.append({p: 10**6 + 1009 * (n - 1 - i) + 7 * j + 1 for i, p in enumerate(params)})
    return pts


def _nonneg_checker(ctx_set: isl.Set, conj_sets: list[isl.Set], params: tuple[str, ...]):
    cache: dict = {}

    def nonneg(lin: Lin, k: int) -> bool:
        key = (tuple(sorted((str(a), c) for a, c in lin[0].items())), lin[1], k)
        if key in cache:
            return cache[key]
        base = ctx_set if k < 0 else conj_sets[k]
        expr = " + ".join(f"{int(c)}*{a}" for a, c in lin[0].items() if isinstance(a, str))
        if any(isinstance(a, Floor) for a in lin[0]):
            cache[key] = False
            return False
        neg = params_set(base.get_ctx(), params, f"{expr} + {int(lin[1])} < 0")
        res = base.intersect(neg).is_empty()
        cache[key] = res
        return res

    return nonneg


def _floor_free(b: isl.BasicSet) -> isl.BasicSet:
    """The constraints of `b` that involve no existential (floor) variable."""
    n = b.dim(isl.dim_type.div)
    if not n:
        return b
    return b.drop_constraints_involving_dims(isl.dim_type.div, 0, n).remove_divs()


def when_text(domain: isl.Set, context: isl.Set | None, params: tuple[str, ...]) -> str:
    """C condition for a parameter domain, simplified under the context."""
    d = domain
    if context is not None:
        d = d.gist(context)
    d = d.coalesce().remove_redundancies().compute_divs()
    bsets = d.get_basic_sets()
    dnf = [bset_constraints(b) for b in bsets]
    ctx_set = context if context is not None else isl.Set.universe(domain.get_space())
    # A % is printed only where its operand is >= 0 on the conjunction's
    # constraints without floors (and the context): testing it on the whole
    # conjunction would be circular, since a C reader evaluates the printed
    # % constraint itself at points outside the conjunction.
    conj_sets = [
        isl.Set.from_basic_set(_floor_free(b)).intersect(ctx_set) for b in bsets
    ]
    return format_conditions(dnf, _nonneg_checker(ctx_set, conj_sets, params))


def build(
    terms: list[tuple[isl.Set, QPoly]],
    params: tuple[str, ...],
    context: isl.Set | None = None,
    st: _State | None = None,
    support: isl.Set | None = None,
) -> Piecewise:
    """Disjoint, simplified Piecewise from overlapping (domain, poly) terms.

    `support` (optional): parameter set outside of which the sum is known to be
    0 (the projection of the summed set); regions are clipped to it.
    """
    if context is not None:
        terms = [(d.intersect_params(context), f) for d, f in terms]
    terms = [(d, f) for d, f in terms if not f.is_zero() and not d.is_empty()]
    regions = _combine(terms, st)
    if support is not None:
        regions = [[r.intersect(support).compute_divs().coalesce(), g] for r, g in regions]
        regions = [reg for reg in regions if not reg[0].is_empty()]
    # zero regions and small bounded regions
    small: list[tuple[list, list[dict[str, int]]]] = []
    big: list[list] = []
    for reg in regions:
        pts = _param_points(reg[0], 64, st.limits.budget if st is not None else None) if _spare(st, 0.3) else None
        if pts is None:
            big.append(reg)
            continue
        if all(reg[1].evaluate(p) == 0 for p in pts):
            continue
        small.append((reg, pts))
    keep: list[list] = big[:]
    for reg, pts in small:
        for other in keep:
            if other[1] is reg[1] or other[1] == reg[1]:
                continue
            if all(other[1].evaluate(p) == reg[1].evaluate(p) for p in pts):
                other[0] = other[0].union(reg[0]).coalesce()
                break
        else:
            keep.append(reg)
    regions = [[r, _fix_constant_floors(r, g, params, st)] for r, g in keep]
    regions = _merge_equal(regions)
    regions = _absorb_flat(regions, st)
    # merge pieces with identical formulas (proof by evaluation); being proven
    # equal is an equivalence, so one pass against a representative per class
    classes: list[list] = []  # [poly, [domains]]
    for idx, (r, g) in enumerate(regions):
        if not _spare(st, 0.2):
            classes.extend([g2, [r2]] for r2, g2 in regions[idx:])
            break
        for cl in classes:
            if qpoly_identical(cl[0], g):
                cl[1].append(r)
                if g.n_terms() < cl[0].n_terms():
                    cl[0] = g
                break
        else:
            classes.append([g, [r]])
    regions = []
    for g, doms in classes:
        d = doms[0]
        for r in doms[1:]:
            d = d.union(r)
        regions.append([d.coalesce() if len(doms) > 1 else d, g])
    regions = [[r, _simplify_on_residues(r, g, params) if _spare(st, 0.1) else g] for r, g in regions]
    if st is not None and len(regions) > st.limits.max_pieces:
        raise EngineLimit(f"more than {st.limits.max_pieces} pieces (max_pieces)")
    # generic piece first
    pts = _generic_points(params)
    conds = [_Cond(r[0]) for r in regions]
    hits = [sum(1 for p in pts if c.contains(p)) for c in conds]
    order = sorted(range(len(regions)), key=lambda i: -hits[i])
    pieces = [
        Piece(regions[i][0], regions[i][1], when_text(regions[i][0], context, params), conds[i])
        for i in order
    ]
    return Piecewise(pieces, params, context)
