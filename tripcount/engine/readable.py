# Presentation of quasi-polynomials: choose the most readable of equal forms.
#
# The engine's canonical floors keep arithmetic exact and small, but printed
# formulas can be needlessly long: a parameter N and its floor floor(N/2) often
# combine into one atom (N - floor(N/2) is floor((N + 1)/2)), or a long
# expanded sum is a short product of atoms (floor(N/2)*floor((N + 1)/2) + 1).
#
# Method, one parameter v at a time: with m the period of the floors of v,
# substitute v = m*k + r for each residue r; every floor of v becomes affine in
# k, so the formula is a polynomial P_r(k) whose coefficients are quasi-
# polynomials in the other parameters. A candidate basis of one or two atoms
# of v (v itself, floor((v + c)/d) for d | m, 0 <= c < d) is affine in k on
# each class too, so "the formula is a polynomial in these atoms" is a linear
# system over the rationals (numeric matrix, quasi-polynomial right-hand
# sides), solved exactly. Every candidate is then proven equal to the original
# by the same substitution (structural equality of P_r for every residue r), so
# the rewriting can never change a value. The cheapest form wins (see cost);
# the original is kept when nothing is cheaper.
#
# The rewritten forms may use non-canonical floors such as floor((N + 1)/2):
# they are for printing only (QPoly.to_expr); the engine computes with the
# canonical form.

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from fractions import Fraction
from itertools import combinations
from math import lcm

from tripcount.engine.fmt import (
    PRIME,
    eval_mod,
    format_expanded,
    format_qpoly,
    probe_point,
)
from tripcount.engine.memo import Memo
from tripcount.engine.qpoly import Floor, Printer, QPoly, atom_key, atom_period, set_printer

_K = "_rk_"
_ZERO = Fraction(0)

# keep the search small: periods and degrees beyond these are printed as they are
_MAX_PERIOD = 64
_MAX_DEGREE = 6
_MAX_TERMS = 60
# Formulas with more distinct floors than this (long per-level footprints of
# strided loops) are printed as they are: the search grows with the square of
# their number and rarely finds much.
_MAX_FLOORS = 8
# Work per formula, counted in candidate bases tried (deterministic, so the
# printed form never depends on machine speed): most formulas settle within a
# dozen; long per-level footprints of strided loops would try hundreds.
_MAX_BASES = 20
# Grouping tries two printings per atom: past this many terms it costs tens of
# milliseconds per formula (long footprints of strided nests) for a text that
# stays long anyway.
_GROUP_MAX_TERMS = 24
# Texts already chosen, by formula: reports print the same counts many times
# (bytes and lines of each array, per level, in text and JSON).
_MEMO: Memo[QPoly, str] = Memo(20_000)
_PLAIN_MEMO: Memo[QPoly, str] = Memo(20_000)  # texts printed inside plain_forms()
# inside plain_forms(), formulas up to this many terms are still factored (cheap
# for them; a count such as N*(N + 1)/2 reads better so); longer ones are expanded
_PLAIN_FACTOR_TERMS = 12


def text_cost(text: str) -> tuple[int, int]:
    """(weighted token count, length) of an expression text; smaller reads better.

    Outside floors: each name, integer and + or - counts 1, each floor 2, plus 1
    per distinct floor: 'floor((N + 1)/2)' (3) beats 'N - floor(N/2)' (5), and
    'floor(N/2)*floor((N + 1)/2) + 1' (8) beats '(N^2 + 2*floor(N/2) - N + 4)/4'
    (12). The length breaks ties.
    """
    occ = 0
    floors: set[str] = set()
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if text.startswith("floor(", i):
            depth, j = 0, i + 5
            while j < n:
                if text[j] == "(":
                    depth += 1
                elif text[j] == ")":
                    depth -= 1
                    if depth == 0:
                        break
                j += 1
            floors.add(text[i : j + 1])
            occ += 2
            i = j + 1
            continue
        if ch.isalnum() or ch == "_":
            j = i
            while j < n and (text[j].isalnum() or text[j] == "_"):
                j += 1
            occ += 1
            i = j
            continue
        if ch in "+-":
            occ += 1
        i += 1
    return occ + len(floors), len(text)


def _simple_floors_of(p: QPoly, v: str) -> list[Floor] | None:
    """Floors of p that involve v; None if one also involves another name or nests."""
    out = []
    for f in p.floors():
        if v not in f.variables():
            continue
        if f.variables() != {v} or len(f.terms) != 1 or not isinstance(f.terms[0][0], str):
            return None
        out.append(f)
    return out


def _affine_on_class(atom, v: str, m: int, r: int) -> tuple[int, int]:
    """(a, b) with atom(v = m*k + r) = a*k + b for every integer k (atom has period | m)."""
    if atom == v:
        return m, r
    (_, c), = atom.terms
    # floor((c*(m*k + r) + c0)/d) with d | c*m
    assert (c * m) % atom.den == 0
    return c * m // atom.den, (c * r + atom.const) // atom.den


def _monomials(n_atoms: int, d: int) -> list[tuple[int, ...]]:
    out = []
    if n_atoms == 1:
        return [(e,) for e in range(d + 1)]
    for e0 in range(d + 1):
        for e1 in range(d + 1 - e0):
            out.append((e0, e1))
    return out


def _poly_k(a: int, b: int, e: int) -> list[int]:
    """Coefficients of (a*k + b)^e in k (integers: the system's matrix is integral)."""
    out = [1]
    for _ in range(e):
        nxt = [0] * (len(out) + 1)
        for j, c in enumerate(out):
            nxt[j] += c * b
            nxt[j + 1] += c * a
        out = nxt
    return out


def _rref(rows: list[list[Fraction]], rhs: list[QPoly]):
    """Reduced row echelon form of rows * x = rhs: (pivots [(row, col)], rows, rhs), or None
    if inconsistent (the formula is not a polynomial in this basis)."""
    rows = [[Fraction(x) for x in r] for r in rows]
    rhs = list(rhs)
    piv: list[tuple[int, int]] = []
    used = [False] * len(rows)
    for col in range(len(rows[0]) if rows else 0):
        pr = next((i for i in range(len(rows)) if not used[i] and rows[i][col]), None)
        if pr is None:
            continue
        used[pr] = True
        inv = 1 / rows[pr][col]
        rows[pr] = [x * inv for x in rows[pr]]
        rhs[pr] = rhs[pr] * inv
        for i in range(len(rows)):
            if i != pr and rows[i][col]:
                f = rows[i][col]
                rows[i] = [x - f * y for x, y in zip(rows[i], rows[pr], strict=True)]
                rhs[i] = rhs[i] - rhs[pr] * f
        piv.append((pr, col))
    for i in range(len(rows)):
        if not used[i] and not rhs[i].is_zero():
            return None
    return piv, rows, rhs


def _rhs_mod(rhs: list[QPoly]) -> list[int]:
    """The right-hand sides at one point of their atoms, modulo a large prime."""
    atoms = sorted({a for q in rhs for a in q.atoms()}, key=atom_key)
    point = probe_point(atoms)
    return [eval_mod(q, point) for q in rhs]


def _independent_rows(rows: list[list[int]], rhs_mod: list[int]) -> list[int] | None:
    """None when rows * x = rhs has no solution at one point of the other atoms,
    modulo a large prime (rhs_mod: see _rhs_mod): then it has none as
    quasi-polynomials either, and the exact elimination (QPoly right-hand sides)
    is not worth running. Else the indices of rows independent modulo the prime,
    which span the row space: the exact elimination needs only them (its reduced
    form, so its solutions, depend only on the row space). (A wrong answer, with
    chance about 2^-61, only costs a less readable form: every form found is
    proven equal before it is used.)"""
    mat = [[x % PRIME for x in r] + [q] for r, q in zip(rows, rhs_mod, strict=True)]
    order = list(range(len(mat)))
    n = len(mat[0]) - 1 if mat else 0
    rank = 0
    for col in range(n):
        pr = next((i for i in range(rank, len(mat)) if mat[i][col]), None)
        if pr is None:
            continue
        mat[rank], mat[pr] = mat[pr], mat[rank]
        order[rank], order[pr] = order[pr], order[rank]
        inv = pow(mat[rank][col], -1, PRIME)
        piv = [x * inv % PRIME for x in mat[rank]]
        mat[rank] = piv
        for i in range(len(mat)):
            if i != rank and mat[i][col]:
                f = mat[i][col]
                mat[i] = [(x - f * y) % PRIME for x, y in zip(mat[i], piv, strict=True)]
        rank += 1
    if any(r[n] for r in mat[rank:]):
        return None
    return sorted(order[:rank])


def _solutions(rows: list[list[Fraction]], rhs: list[QPoly], n: int) -> list[list[QPoly]]:
    """Sparse solutions of rows * x = rhs: the particular one, then for each choice of
    as many unknowns as the nullity, the solution that makes them 0 (if unique)."""
    red = _rref(rows, rhs)
    if red is None:
        return []
    piv, rrows, rrhs = red
    pcols = {c for _, c in piv}
    free = [j for j in range(n) if j not in pcols]
    x0 = [QPoly() for _ in range(n)]
    for pr, col in piv:
        x0[col] = rrhs[pr]
    out = [x0]
    if not free:
        return out
    # null vectors: free unknown f = 1, others free 0
    null = []
    for f in free:
        v = [_ZERO] * n
        v[f] = Fraction(1)
        for pr, col in piv:
            v[col] = -rrows[pr][f]
        null.append(v)
    support = [j for j in range(n) if any(v[j] for v in null)]
    for zeros in list(combinations(support, len(free)))[:40]:
        mat = [[v[j] for v in null] for j in zeros]
        sub = _rref(mat, [-x0[j] for j in zeros])
        if sub is None or len(sub[0]) < len(free):
            continue
        t = [QPoly() for _ in free]
        for pr, col in sub[0]:
            t[col] = sub[2][pr]
        x = list(x0)
        for tf, v in zip(t, null, strict=True):
            if tf.is_zero():
                continue
            for j in range(n):
                if v[j]:
                    x[j] = x[j] + tf * v[j]
        out.append(x)
    return out


def _system_rhs(classes: list[dict[int, QPoly]], d: int) -> list[QPoly]:
    """Right-hand sides of the systems of _rewrite_in (the same for every basis):
    coefficient j of k on class r, for j up to max(degree, d)."""
    rhs: list[QPoly] = []
    for cls in classes:
        top = max(max(cls, default=0), d)
        rhs.extend(cls.get(j, QPoly()) for j in range(top + 1))
    return rhs


def _rewrite_in(p: QPoly, v: str, basis: list, m: int, classes: list[dict[int, QPoly]],
                d: int, rhs: list[QPoly], rhs_mod: list[int]) -> list[QPoly]:
    """Forms of p as a polynomial in `basis` (atoms of v), coefficients free of v.
    rhs, rhs_mod: _system_rhs(classes, d) and _rhs_mod of it."""
    monos = _monomials(len(basis), d)
    rows: list[list[int]] = []
    for r, cls in enumerate(classes):
        aff = [_affine_on_class(a, v, m, r) for a in basis]
        cols = []
        for mono in monos:
            poly = [1]
            for (a, b), e in zip(aff, mono, strict=True):
                if not e:
                    continue
                q = _poly_k(a, b, e)
                nxt = [0] * (len(poly) + len(q) - 1)
                for i, x in enumerate(poly):
                    for j, y in enumerate(q):
                        nxt[i + j] += x * y
                poly = nxt
            cols.append(poly)
        top = max(max(cls, default=0), d)
        for j in range(top + 1):
            rows.append([c[j] if j < len(c) else 0 for c in cols])
    keep = _independent_rows(rows, rhs_mod)
    if keep is None:
        return []
    rows = [rows[i] for i in keep]
    rhs = [rhs[i] for i in keep]
    out = []
    seen = set()
    for x in _solutions(rows, rhs, len(monos)):
        q = QPoly()
        for mono, c in zip(monos, x, strict=True):
            if c.is_zero():
                continue
            t = c
            for a, e in zip(basis, mono, strict=True):
                if e:
                    t = t * QPoly.atom(a) ** e
            q = q + t
        if q not in seen:
            seen.add(q)
            out.append(q)
    return out


def _proven(q: QPoly, v: str, m: int, classes: list[QPoly]) -> bool:
    """q == p for all integers: equal on every residue class v = m*k + r (structurally)."""
    k = QPoly.var(_K)
    return all(q.subs({v: k * m + r}) == cls for r, cls in enumerate(classes))


def _candidate_atoms(fl: list[Floor], v: str, m: int) -> list:
    """v, the floors present, and floor((v + c)/d) for small d | m (unit coefficient)."""
    out: list = [v]
    seen = set()
    for f in fl:
        if f not in seen:
            seen.add(f)
            out.append(f)
    dens = {f.den for f in fl if f.terms[0][1] == 1}
    for d in sorted(dens):
        cs = range(d) if d <= 4 else sorted({0, d - 1} | {f.const for f in fl if f.den == d})
        for c in cs:
            a = Floor(((v, 1),), c, d)
            if a not in seen:
                seen.add(a)
                out.append(a)
    return out


class _Budget:
    __slots__ = ("left",)

    def __init__(self, n: int) -> None:
        self.left = n


def _rewrite_variable(p: QPoly, v: str, cost, budget: _Budget) -> QPoly:
    fl = _simple_floors_of(p, v)
    if not fl:
        return p
    m = 1
    for f in fl:
        m = lcm(m, atom_period(f, v)[0])
    d = p.degree_in(v)
    if m > _MAX_PERIOD or d > _MAX_DEGREE:
        return p
    k = QPoly.var(_K)
    classes = [p.subs({v: k * m + r}) for r in range(m)]
    if any(_K in a.variables() for c in classes for a in c.floors()):
        return p
    coeffs = [c.coeffs_in(_K) for c in classes]
    rhs = _system_rhs(coeffs, d)
    rhs_mod = _rhs_mod(rhs)
    atoms = _candidate_atoms(fl, v, m)
    bases: list[list] = [[a] for a in atoms]
    if d >= 1:
        bases += [list(pair) for pair in combinations(atoms, 2)]
    best, best_cost = p, cost(p)
    for basis in bases:
        if budget.left <= 0:
            break
        budget.left -= 1
        for q in _rewrite_in(p, v, basis, m, coeffs, d, rhs, rhs_mod):
            if q == best or len(q.terms) > _MAX_TERMS:
                continue
            qc = cost(q)
            if qc < best_cost and _proven(q, v, m, classes):
                best, best_cost = q, qc
    return best


_PLAIN: ContextVar[bool] = ContextVar("tripcount_plain_forms", default=False)


@contextmanager
def plain_forms() -> Iterator[None]:
    """Within: readable() prints one form without the search: factored when short, else expanded.

    For reports whose formulas nobody reads first (the gate compares values and
    degrees): the same exact formula, without the search's cost (most of a
    strided nest's report). A text found earlier is still used.
    """
    token = _PLAIN.set(True)
    try:
        yield
    finally:
        _PLAIN.reset(token)


def searching() -> bool:
    """False inside plain_forms()."""
    return not _PLAIN.get()


def readable(p: QPoly, fmt=None) -> str:
    """Cheapest text (see text_cost) among forms of p proven equal to it; fmt prints one
    form (default: the factored printer, grouped; only that one is memoized).
    Inside plain_forms() the default form is printed without the search."""
    if fmt is not None:
        return _readable(p, fmt)
    text = _MEMO.get(p)
    if text is None and _PLAIN.get():
        text = _PLAIN_MEMO.get(p)
        if text is None:
            small = len(p.terms) <= _PLAIN_FACTOR_TERMS
            text = _PLAIN_MEMO.keep(p, format_grouped(p, format_qpoly) if small else format_expanded(p))
        return text
    if text is None:
        text = _readable(p, lambda q: format_grouped(q, format_qpoly))
        _MEMO.keep(p, text)
    return text


def _readable(p: QPoly, fmt) -> str:
    memo: dict[QPoly, tuple] = {}

    def cost(q: QPoly) -> tuple:
        c = memo.get(q)
        if c is None:
            t = fmt(q)
            c = memo[q] = (*text_cost(t), t)
        return c[:2]

    base = fmt(p)
    if not p.floors() or len(p.terms) > _MAX_TERMS or len(p.floors()) > _MAX_FLOORS:
        return base
    memo[p] = (*text_cost(base), base)
    q = p
    names = sorted({v for f in p.floors() for v in f.variables()})
    budget = _Budget(_MAX_BASES)
    for _ in range(2):  # a second pass lets one parameter profit from another's rewriting
        before = q
        for v in names:
            q = _rewrite_variable(q, v, cost, budget)
        if q is before:
            break
    if q is p:
        return base
    cost(q)
    return memo[q][2]


def _join(a: str, b: str) -> str:
    return f"{a} - {b[1:]}" if b.startswith("-") else f"{a} + {b}"


def format_grouped(p: QPoly, fmt) -> str:
    """fmt(p), or a sum of two factored groups when that reads better:
    'floor(M/2)*floor(N/2) + floor((M + 1)/2)*floor((N + 1)/2)' - the terms
    containing one atom are printed (and factored) apart from the rest."""
    best = fmt(p)
    if len(p.terms) < 3 or len(p.terms) > _GROUP_MAX_TERMS:
        return best
    if len(p.floors()) > _MAX_FLOORS:
        # as in the search: two printings per atom of a formula with many floors
        # (guarded sweeps, strided footprints) cost more than the rest of its
        # report, for a text that stays long anyway
        return best
    best_cost = text_cost(best)
    for a in sorted(p.atoms(), key=lambda at: (isinstance(at, Floor), str(at))):
        part = QPoly({m: c for m, c in p.terms.items() if any(b == a for b, _ in m)})
        rest = p - part
        if rest.is_zero() or len(part.terms) < 2:
            continue
        ta, tb = fmt(part), fmt(rest)
        if _has_division(ta) or _has_division(tb) or tb.startswith("-("):
            continue  # 'N*(N - 5)/2 + floor(N/2)' reads worse than one fraction
        t = _join(ta, tb)
        tc = text_cost(t)
        if tc < best_cost:
            best, best_cost = t, tc
    return best


def _has_division(text: str) -> bool:
    """A '/' outside floor(...)."""
    depth = 0
    i = 0
    while i < len(text):
        if text.startswith("floor(", i):
            depth += 1
            i += 6
            continue
        ch = text[i]
        if ch == "(" and depth:
            depth += 1
        elif ch == ")" and depth:
            depth -= 1
        elif ch == "/" and not depth:
            return True
        i += 1
    return False


class _ReadablePrinter(Printer):
    """QPoly.to_expr prints through readable(); to_expanded through fmt.format_expanded."""

    def readable(self, p: QPoly) -> str:
        return readable(p)

    def expanded(self, p: QPoly) -> str:
        return format_expanded(p)

    def searching(self) -> bool:
        return searching()


set_printer(_ReadablePrinter())
