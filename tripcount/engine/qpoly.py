# Quasi-polynomials of the counting engine.
#
# A quasi-polynomial is a polynomial with exact rational coefficients whose
# "atoms" are integer-valued: variables (parameter or loop-variable names) and
# floors of affine expressions of atoms, floor((a_1*t_1 + ... + c)/m), possibly
# nested. Floors are kept in a canonical form (integer parts pulled out, gcd
# reduced, first coefficient at most m/2) so that equal atoms compare equal and
# the engine's arithmetic stays exact and small. No sympy here: this module is
# on the hot path of every count.

from __future__ import annotations

from collections.abc import Iterable, Mapping
from fractions import Fraction
from math import gcd, lcm
from typing import Union

Atom = Union[str, "Floor"]
Mono = tuple  # tuple[tuple[Atom, int], ...], sorted by atom key
Lin = tuple  # (dict[Atom, Fraction], Fraction): an affine expression in atoms

_ZERO = Fraction(0)
_ONE = Fraction(1)


def atom_key(a: Atom) -> tuple:
    """Total order on atoms: variables by name, then floors structurally."""
    if isinstance(a, str):
        return (0, a)
    return a.key


class Floor:
    """floor((sum c*atom + const) / den), integer c, den >= 2, canonical (see floor_of)."""

    __slots__ = ("terms", "const", "den", "key", "_hash", "_vars")

    def __init__(self, terms: tuple, const: int, den: int) -> None:
        self.terms = terms
        self.const = const
        self.den = den
        self.key = (1, den, const, tuple((atom_key(a), c) for a, c in terms))
        self._hash = hash(self.key)
        vs: set[str] = set()
        for a, _ in terms:
            if isinstance(a, str):
                vs.add(a)
            else:
                vs |= a._vars
        self._vars = frozenset(vs)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Floor) and self.key == other.key

    def __hash__(self) -> int:
        return self._hash

    def __repr__(self) -> str:
        return f"Floor({self.terms!r}, {self.const}, {self.den})"

    def variables(self) -> frozenset[str]:
        return self._vars

    def value(self, env: Mapping[str, int], cache: dict) -> int:
        v = cache.get(self)
        if v is None:
            s = self.const
            for a, c in self.terms:
                s += c * atom_value(a, env, cache)
            v = s // self.den
            cache[self] = v
        return v


def atom_value(a: Atom, env: Mapping[str, int], cache: dict) -> int:
    if isinstance(a, str):
        return env[a]
    return a.value(env, cache)


def atom_code(a: Atom) -> str:
    """Python integer expression of an atom over a mapping V of variable values (floors by //)."""
    if isinstance(a, str):
        return f"V[{a!r}]"
    parts = [f"({c})*{atom_code(b)}" for b, c in a.terms]
    return f"(({' + '.join(parts)} + ({a.const})) // {a.den})"


def compile_conditions(dnf: list[list[tuple[Lin, bool]]]):
    """fn(V) -> bool: some conjunction holds, each (lin, eq) meaning lin == 0 (eq) or lin >= 0.

    Integer-only code (each constraint scaled by the lcm of its denominators),
    so membership tests cost no Fraction arithmetic; evaluation short-circuits
    as a loop over the constraints would."""
    disj = []
    for conj in dnf:
        tests = []
        for (terms, const), eq in conj:
            den = lcm(Fraction(const).denominator, *(Fraction(c).denominator for c in terms.values()))
            parts = [f"({int(c * den)})*{atom_code(a)}" for a, c in terms.items() if c]
            parts.append(f"({int(const * den)})")
            tests.append(f"({' + '.join(parts)}) {'==' if eq else '>='} 0")
        disj.append("(" + (" and ".join(tests) or "True") + ")")
    src = f"def _f(V):\n    return bool({' or '.join(disj) or 'False'})\n"
    ns: dict = {}
    exec(src, ns)  # noqa: S102 - generated from our own integer data only
    return ns["_f"]


def atom_vars(a: Atom) -> frozenset[str]:
    return frozenset((a,)) if isinstance(a, str) else a._vars


# ---------------------------------------------------------------------------
# affine expressions (Lin) and the canonical floor


def lin_add(x: Lin, y: Lin, scale: Fraction = _ONE) -> Lin:
    d = dict(x[0])
    for a, c in y[0].items():
        v = d.get(a, _ZERO) + c * scale
        if v:
            d[a] = v
        else:
            d.pop(a, None)
    return d, x[1] + y[1] * scale


def lin_scale(x: Lin, c: Fraction) -> Lin:
    if not c:
        return {}, _ZERO
    return {a: v * c for a, v in x[0].items()}, x[1] * c


def floor_of(terms: Mapping[Atom, Fraction], const: Fraction, den: int = 1) -> Lin:
    """Affine expression equal to floor((terms + const)/den) for integer atoms.

    Canonical form: floor((sum r_i t_i + r0)/m) with 0 <= r_i < m, 0 <= r0 < m,
    gcd(r_1..r_n, m) = 1 and the first coefficient (atom order) <= m/2; the
    integer parts go to the affine part of the result.
    """
    s = 1
    for c in terms.values():
        s = lcm(s, Fraction(c).denominator)
    s = lcm(s, Fraction(const).denominator)
    m = den * s
    ints = {a: int(c * s) for a, c in terms.items() if c}
    c0 = int(const * s)
    out: dict[Atom, Fraction] = {}
    if m == 1:
        return {a: Fraction(c) for a, c in ints.items()}, Fraction(c0)
    rem: dict[Atom, int] = {}
    for a, c in ints.items():
        q, r = divmod(c, m)
        if q:
            out[a] = Fraction(q)
        if r:
            rem[a] = r
    q0, r0 = divmod(c0, m)
    if not rem:
        return out, Fraction(q0)
    g = m
    for r in rem.values():
        g = gcd(g, r)
    if g > 1:
        rem = {a: r // g for a, r in rem.items()}
        r0 //= g
        m //= g
    items = sorted(rem.items(), key=lambda it: atom_key(it[0]))
    if 2 * items[0][1] > m:
        # floor(n/m) = -floor((-n + m - 1)/m): flip so the first coefficient is small
        for a, _r in items:
            out[a] = out.get(a, _ZERO) + 1
        items = [(a, m - r) for a, r in items]
        f = Floor(tuple(items), m - 1 - r0, m)
        out[f] = out.get(f, _ZERO) - 1
    elif m == 2 and r0 == 1:
        # floor((R + 1)/2) = R - floor(R/2): one atom per parity, not two
        for a, _r in items:
            out[a] = out.get(a, _ZERO) + 1
        f = Floor(tuple(items), 0, 2)
        out[f] = out.get(f, _ZERO) - 1
    else:
        f = Floor(tuple(items), r0, m)
        out[f] = out.get(f, _ZERO) + 1
    out = {a: c for a, c in out.items() if c}
    return out, Fraction(q0)


# ---------------------------------------------------------------------------
# monomials


def _mono_mul(a: Mono, b: Mono) -> Mono:
    if not a:
        return b
    if not b:
        return a
    d = dict(a)
    for at, e in b:
        d[at] = d.get(at, 0) + e
    return tuple(sorted(d.items(), key=lambda it: atom_key(it[0])))


def _mono_degree(m: Mono) -> int:
    return sum(e for _, e in m)


class QPoly:
    """An immutable quasi-polynomial with Fraction coefficients."""

    __slots__ = ("terms", "_hash", "_compiled", "_text", "_vars")

    def __init__(self, terms: Mapping[Mono, Fraction] | None = None) -> None:
        self.terms: dict[Mono, Fraction] = dict(terms) if terms else {}
        self._hash = None
        self._compiled = None
        self._text = None
        self._vars = None

    # -- construction -------------------------------------------------------
    @staticmethod
    def const(c: int | Fraction) -> QPoly:
        """The constant c."""
        c = Fraction(c)
        return QPoly({(): c} if c else {})

    @staticmethod
    def var(name: str) -> QPoly:
        """The variable `name`."""
        return QPoly({((name, 1),): _ONE})

    @staticmethod
    def atom(a: Atom) -> QPoly:
        return QPoly({((a, 1),): _ONE})

    @staticmethod
    def from_lin(lin: Lin) -> QPoly:
        """The QPoly of an affine expression (dict atom->coef, const)."""
        t: dict[Mono, Fraction] = {((a, 1),): Fraction(c) for a, c in lin[0].items() if c}
        if lin[1]:
            t[()] = Fraction(lin[1])
        return QPoly(t)

    @staticmethod
    def floor(p: QPoly | int, den: int = 1) -> QPoly:
        """floor(p/den) for an affine p (canonicalized)."""
        p = _lift(p)
        lin = p.as_lin()
        if lin is None:
            raise ValueError("floor() of a non-affine quasi-polynomial")
        return QPoly.from_lin(floor_of(lin[0], lin[1], den))

    def as_lin(self) -> Lin | None:
        """(dict atom->coef, const) if the polynomial is affine in its atoms, else None."""
        d: dict[Atom, Fraction] = {}
        c = _ZERO
        for m, v in self.terms.items():
            if not m:
                c = v
            elif len(m) == 1 and m[0][1] == 1:
                d[m[0][0]] = v
            else:
                return None
        return d, c

    # -- basic protocol -----------------------------------------------------
    def __eq__(self, other: object) -> bool:
        if isinstance(other, (int, Fraction)):
            other = QPoly.const(other)
        return isinstance(other, QPoly) and self.terms == other.terms

    def __hash__(self) -> int:
        if self._hash is None:
            self._hash = hash(frozenset(self.terms.items()))
        return self._hash

    def __repr__(self) -> str:
        return f"QPoly({self.to_expr()!r})"

    def __str__(self) -> str:
        return self.to_expr()

    def is_zero(self) -> bool:
        return not self.terms

    def is_const(self) -> bool:
        return not self.terms or (len(self.terms) == 1 and () in self.terms)

    def const_value(self) -> Fraction:
        return self.terms.get((), _ZERO)

    def n_terms(self) -> int:
        return len(self.terms)

    # -- arithmetic ---------------------------------------------------------
    def __add__(self, other: QPoly | int | Fraction) -> QPoly:
        other = _lift(other)
        if not other.terms:
            return self
        if not self.terms:
            return other
        t = dict(self.terms)
        for m, c in other.terms.items():
            v = t.get(m, _ZERO) + c
            if v:
                t[m] = v
            else:
                del t[m]
        return QPoly(t)

    __radd__ = __add__

    def __neg__(self) -> QPoly:
        return QPoly({m: -c for m, c in self.terms.items()})

    def __sub__(self, other: QPoly | int | Fraction) -> QPoly:
        return self + (-_lift(other))

    def __rsub__(self, other: QPoly | int | Fraction) -> QPoly:
        return _lift(other) + (-self)

    def __mul__(self, other: QPoly | int | Fraction) -> QPoly:
        if isinstance(other, (int, Fraction)):
            c = Fraction(other)
            if not c:
                return QPoly()
            return QPoly({m: v * c for m, v in self.terms.items()})
        t: dict[Mono, Fraction] = {}
        for m1, c1 in self.terms.items():
            for m2, c2 in other.terms.items():
                m = _mono_mul(m1, m2)
                v = t.get(m, _ZERO) + c1 * c2
                if v:
                    t[m] = v
                else:
                    t.pop(m, None)
        return QPoly(t)

    __rmul__ = __mul__

    def __truediv__(self, c: int | Fraction) -> QPoly:
        return self * (1 / Fraction(c))

    def __pow__(self, e: int) -> QPoly:
        r = QPoly.const(1)
        b = self
        while e:
            if e & 1:
                r = r * b
            e >>= 1
            if e:
                b = b * b
        return r

    # -- structure ----------------------------------------------------------
    def degree(self) -> int:
        """Total degree; every atom (a floor too) counts as degree 1. Zero has degree 0."""
        return max((_mono_degree(m) for m in self.terms), default=0)

    def atoms(self) -> set[Atom]:
        return {a for m in self.terms for a, _ in m}

    def variables(self) -> set[str]:
        """All variable names, including those inside floors."""
        vs = self._vars
        if vs is None:
            out: set[str] = set()
            for a in self.atoms():
                out |= atom_vars(a)
            vs = self._vars = frozenset(out)
        return set(vs)

    def floors(self) -> set[Floor]:
        """All floor atoms, nested ones included."""
        out: set[Floor] = set()
        todo = [a for a in self.atoms() if isinstance(a, Floor)]
        while todo:
            f = todo.pop()
            if f in out:
                continue
            out.add(f)
            todo.extend(a for a, _ in f.terms if isinstance(a, Floor))
        return out

    def degree_in(self, name: str) -> int:
        """Degree counting only atoms that involve `name`."""
        best = 0
        for m in self.terms:
            best = max(best, sum(e for a, e in m if name in atom_vars(a)))
        return best

    def coeffs_in(self, name: str) -> dict[int, QPoly]:
        """Write the polynomial as sum_k c_k * name^k; `name` must not occur inside a floor."""
        out: dict[int, dict[Mono, Fraction]] = {}
        for m, c in self.terms.items():
            k = 0
            rest = []
            for a, e in m:
                if a == name:
                    k = e
                elif not isinstance(a, str) and name in a._vars:
                    raise ValueError(f"{name} occurs inside a floor")
                else:
                    rest.append((a, e))
            out.setdefault(k, {})[tuple(rest)] = c
        return {k: QPoly(t) for k, t in out.items()}

    def coeffs_in_atom(self, atom: Atom) -> dict[int, QPoly]:
        """Formal decomposition in one atom (other atoms are treated as independent symbols)."""
        out: dict[int, dict[Mono, Fraction]] = {}
        for m, c in self.terms.items():
            k = 0
            rest = []
            for a, e in m:
                if a == atom:
                    k = e
                else:
                    rest.append((a, e))
            out.setdefault(k, {})[tuple(rest)] = c
        return {k: QPoly(t) for k, t in out.items()}

    # -- evaluation and substitution ---------------------------------------
    def evaluate(self, values: Mapping[str, int]) -> Fraction:
        """Exact value at integer values of all variables."""
        fn = self._compiled
        if fn is None:
            fn = self._compiled = _compile(self)
        num, den = fn(values)
        return Fraction(num, den)

    def substitute(self, name: str, value: int | Fraction | QPoly) -> QPoly:
        """Replace variable `name` by an integer (partial evaluation) or an affine QPoly."""
        return self.subs({name: _lift(value)})

    def subs(self, mapping: Mapping[str, QPoly]) -> QPoly:
        """Simultaneous substitution of variables; images inside floors must be affine."""
        if not mapping:
            return self
        names = set(mapping)
        if not (self.variables() & names):
            return self
        cache: dict[Atom, QPoly] = {}
        lcache: dict[Atom, Lin] = {}
        out = QPoly()
        acc: dict[Mono, Fraction] = {}
        for m, c in self.terms.items():
            if not any(atom_vars(a) & names for a, _ in m):
                acc[m] = acc.get(m, _ZERO) + c
                continue
            p = QPoly.const(c)
            for a, e in m:
                img = _subs_atom(a, mapping, names, cache, lcache)
                p = p * (img**e if e > 1 else img)
            out = out + p
        if acc:
            out = out + QPoly({m: c for m, c in acc.items() if c})
        return out

    def rename(self, mapping: Mapping[str, str]) -> QPoly:
        return self.subs({a: QPoly.var(b) for a, b in mapping.items()})

    # -- presentation -------------------------------------------------------
    def to_expr(self) -> str:
        """Plain-arithmetic expression (sympy-parsable with ^ as power), factored where cheap.

        The most readable of the forms proven equal to this one (readable.py),
        e.g. floor((N + 1)/2) for N - floor(N/2); computed once per object
        (inside readable.plain_forms() without the search, and not kept).
        """
        if self._text is None:
            text = _PRINTER.readable(self)
            if not _PRINTER.searching():
                return text
            self._text = text
        return self._text

    def to_expanded(self) -> str:
        """Expanded form, terms by decreasing degree."""
        return _PRINTER.expanded(self)

    def linear_part(self) -> QPoly:
        """Replace every floor(e/m) by its linear part (e without constant)/m, recursively."""
        return self._floors_replaced(None)

    def growth_degree(self) -> int:
        """Degree of growth for large values: every floor(e/m) is its linear part plus a bounded
        remainder (a fresh symbol of degree 0), and the largest total degree left in the sizes counts.
        Terms of floors that cancel (floor(n/64)*n - floor((n + 63)/64)*n + ...) do not raise it."""
        rest: set[str] = set()
        out = self._floors_replaced(rest)
        return max((sum(e for a, e in m if a not in rest) for m in out.terms), default=0)

    def _floors_replaced(self, rest: set[str] | None) -> QPoly:
        """Every floor replaced by its linear part, plus (when `rest` is given) a fresh symbol for the
        bounded remainder, whose names are added to `rest`."""
        mapping: dict[Atom, QPoly] = {}

        def lp(a: Atom) -> QPoly:
            if isinstance(a, str):
                return QPoly.var(a)
            r = mapping.get(a)
            if r is None:
                r = QPoly()
                for b, c in a.terms:
                    r = r + lp(b) * Fraction(c, a.den)
                r = r - r.const_value()  # drop constants of inner levels too
                if rest is not None:
                    z = f"\0rest{len(rest)}"  # not a C name: cannot clash with a size
                    rest.add(z)
                    r = r + QPoly.var(z)
                mapping[a] = r
            return r

        out = QPoly()
        for m, c in self.terms.items():
            p = QPoly.const(c)
            for a, e in m:
                p = p * lp(a) ** e
            out = out + p
        return out

    def leading_poly(self) -> QPoly:
        """Top-degree homogeneous part of the linear-part polynomial."""
        p = self.linear_part()
        d = p.degree()
        return QPoly({m: c for m, c in p.terms.items() if _mono_degree(m) == d})

    def leading(self) -> str:
        """Leading homogeneous part (floors replaced by their linear part) as an expression."""
        return self.leading_poly().to_expr()


class Printer:
    """The text forms of a QPoly. The printer modules (fmt.py, readable.py) import
    this one, so they hand their functions in (set_printer, done when the engine
    package is loaded) instead of being imported here: no import cycle."""

    def readable(self, p: QPoly) -> str:
        raise RuntimeError("no printer registered (import tripcount.engine)")

    def expanded(self, p: QPoly) -> str:
        raise RuntimeError("no printer registered (import tripcount.engine)")

    def searching(self) -> bool:
        return False


_PRINTER = Printer()


def set_printer(printer: Printer) -> None:
    """Make `printer` the one QPoly.to_expr and to_expanded use."""
    global _PRINTER
    _PRINTER = printer


def _lift(x: QPoly | int | Fraction) -> QPoly:
    if isinstance(x, QPoly):
        return x
    return QPoly.const(x)


def _subs_lin(a: Atom, mapping, names, cache, lcache) -> Lin:
    """Affine image of an atom under the substitution."""
    r = lcache.get(a)
    if r is not None:
        return r
    if isinstance(a, str):
        img = mapping.get(a)
        if img is None:
            r = ({a: _ONE}, _ZERO)
        else:
            r = img.as_lin()
            if r is None:
                raise ValueError(f"non-affine image for {a} inside a floor")
    elif not (a._vars & names):
        r = ({a: _ONE}, _ZERO)
    else:
        acc: Lin = ({}, Fraction(a.const))
        for b, c in a.terms:
            acc = lin_add(acc, _subs_lin(b, mapping, names, cache, lcache), Fraction(c))
        r = floor_of(acc[0], acc[1], a.den)
    lcache[a] = r
    return r


def _subs_atom(a: Atom, mapping, names, cache, lcache) -> QPoly:
    r = cache.get(a)
    if r is not None:
        return r
    if isinstance(a, str):
        r = mapping.get(a)
        if r is None:
            r = QPoly.var(a)
    elif not (a._vars & names):
        r = QPoly.atom(a)
    else:
        r = QPoly.from_lin(_subs_lin(a, mapping, names, cache, lcache))
    cache[a] = r
    return r


# ---------------------------------------------------------------------------
# fast exact evaluation: the polynomial times the lcm of its denominators has
# integer coefficients, so it compiles to integer-only Python code.


def _compile(p: QPoly):
    den = 1
    for c in p.terms.values():
        den = lcm(den, c.denominator)
    names: dict[Atom, str] = {}
    lines: list[str] = []
    order: list[Floor] = []

    def visit(a: Atom) -> str:
        if a in names:
            return names[a]
        if isinstance(a, str):
            nm = f"v{len(names)}"
            names[a] = nm
            lines.append(f"    {nm} = V[{a!r}]")
            return nm
        parts = [f"({c})*{visit(b)}" for b, c in a.terms]
        nm = f"f{len(names)}"
        names[a] = nm
        lines.append(f"    {nm} = ({' + '.join(parts)} + ({a.const})) // {a.den}")
        order.append(a)
        return nm

    terms = []
    for m, c in p.terms.items():
        factors = [str(int(c * den))]
        for a, e in m:
            v = visit(a)
            factors.append(v if e == 1 else f"{v}**{e}")
        terms.append("*".join(factors))
    body = "\n".join(lines)
    src = f"def _f(V):\n{body}\n    return ({' + '.join(terms) or '0'}), {den}\n"
    ns: dict = {}
    exec(src, ns)  # noqa: S102 - generated from our own integer data only
    return ns["_f"]


def sum_polys(ps: Iterable[QPoly]) -> QPoly:
    acc: dict[Mono, Fraction] = {}
    for p in ps:
        for m, c in p.terms.items():
            acc[m] = acc.get(m, _ZERO) + c
    return QPoly({m: c for m, c in acc.items() if c})


# ---------------------------------------------------------------------------
# periods: how the floors of an expression behave under x -> x + L


def atom_period(a: Atom, x: str, cache: dict | None = None) -> tuple[int, Fraction]:
    """(L, inc): the smallest L > 0 with a(x + L) = a(x) + inc for every value of x.

    For a variable: x itself has (1, 1), any other (1, 0). For floor(A/m): with
    L0 = lcm of the periods of the atoms of A, A grows by delta over L0 steps;
    the floor then shifts by an integer after k = m/gcd(delta, m) blocks.
    """
    if isinstance(a, str):
        return (1, _ONE if a == x else _ZERO)
    if x not in a._vars:
        return (1, _ZERO)
    if cache is not None and a in cache:
        return cache[a]
    subs = [(atom_period(b, x, cache), c) for b, c in a.terms]
    L0 = 1
    for (lb, _), _ in subs:
        L0 = lcm(L0, lb)
    delta = sum((Fraction(c) * inc * (L0 // lb) for (lb, inc), c in subs), _ZERO)
    assert delta.denominator == 1
    d = int(delta)
    k = a.den // gcd(d, a.den)
    res = (L0 * k, Fraction(d * k, a.den))
    if cache is not None:
        cache[a] = res
    return res


def poly_period(p: QPoly, x: str) -> int:
    """lcm of the periods in x of all floor atoms of p."""
    L = 1
    cache: dict = {}
    for a in p.atoms():
        if isinstance(a, Floor) and x in a._vars:
            L = lcm(L, atom_period(a, x, cache)[0])
    return L
