# Affine stage: the affine language. Lin (integer linear combinations of
# loop variables, size parameters and exact non-linear atoms: C truncating
# division, floor division, min/max, selections) and Cond (boolean
# combinations of `e >= 0`, `e == 0`, `e != 0`), with constructors that keep
# them canonical, substitution, and monotonicity in one variable.

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

# --------------------------------------------------------------------------
# The affine language.
#
# A Lin is `const + sum(coef * atom)`. Atoms are variables or exact
# non-linear pieces. Keys of variables say what they stand for:
#   ("loop", index)          the variable of loop `index` of the nest
#   ("param", c_name)        a size parameter named in the source
#   ("sym", c_text, base)    a loop-invariant expression treated as a parameter


@dataclass(frozen=True)
class Var:
    """A loop variable or a size parameter."""

    key: tuple[Any, ...]
    display: str


@dataclass(frozen=True)
class CDiv:
    """C division `arg / d` (truncates toward zero), d > 0."""

    arg: Lin
    d: int


@dataclass(frozen=True)
class CMod:
    """C remainder `arg % d` (sign of the dividend), d > 0."""

    arg: Lin
    d: int


@dataclass(frozen=True)
class FDiv:
    """Floor division floor(arg / d), d > 0 (arithmetic `>>`)."""

    arg: Lin
    d: int


@dataclass(frozen=True)
class FMod:
    """Non-negative remainder arg - d*floor(arg/d), d > 0 (`& (2^k-1)` in two's complement)."""

    arg: Lin
    d: int


@dataclass(frozen=True)
class Extremum:
    """min or max of several values."""

    op: str  # "min" or "max"
    args: tuple[Lin, ...]


@dataclass(frozen=True)
class Select:
    """`cond ? then : other`."""

    cond: Cond
    then: Lin
    other: Lin


Atom = Var | CDiv | CMod | FDiv | FMod | Extremum | Select


@dataclass(frozen=True)
class Lin:
    """const + sum(coef * atom); terms in a canonical order, no zero coefficients."""

    terms: tuple[tuple[Atom, int], ...] = ()
    const: int = 0

    @property
    def is_const(self) -> bool:
        """True when no variable or atom occurs."""
        return not self.terms


@dataclass(frozen=True)
class Rel:
    """`expr >= 0` (kind "ge"), `expr == 0` ("eq") or `expr != 0` ("ne")."""

    kind: str
    expr: Lin


@dataclass(frozen=True)
class BoolConst:
    """true or false."""

    value: bool


@dataclass(frozen=True)
class And:
    """Conjunction."""

    args: tuple[Cond, ...]


@dataclass(frozen=True)
class Or:
    """Disjunction."""

    args: tuple[Cond, ...]


Cond = Rel | BoolConst | And | Or

TRUE = BoolConst(True)
FALSE = BoolConst(False)


def c_div(a: int, b: int) -> int:
    """C99 integer division: the quotient truncated toward zero (ISO C99 6.5.5)."""
    q = abs(a) // abs(b)
    return q if (a >= 0) == (b > 0) else -q


def c_mod(a: int, b: int) -> int:
    """C99 remainder: a - b*(a/b), so it has the sign of the dividend (ISO C99 6.5.5)."""
    return a - b * c_div(a, b)


def const(value: int) -> Lin:
    """The constant `value`."""
    return Lin((), value)


def atom(a: Atom, coef: int = 1) -> Lin:
    """`coef * a`."""
    return Lin(((a, coef),), 0) if coef else Lin()


def var(key: tuple[Any, ...], display: str) -> Lin:
    """A variable as a Lin."""
    return atom(Var(key, display))


def _canon(terms: dict[Atom, int], c: int) -> Lin:
    items = [(a, k) for a, k in terms.items() if k]
    items.sort(key=lambda t: repr(t[0]))
    return Lin(tuple(items), c)


def add(*xs: Lin) -> Lin:
    """Sum."""
    terms: dict[Atom, int] = {}
    c = 0
    for x in xs:
        c += x.const
        for a, k in x.terms:
            terms[a] = terms.get(a, 0) + k
    return _canon(terms, c)


def scale(x: Lin, k: int) -> Lin:
    """k * x."""
    if k == 0:
        return Lin()
    return Lin(tuple((a, c * k) for a, c in x.terms), x.const * k)


def sub(a: Lin, b: Lin) -> Lin:
    """a - b."""
    return add(a, scale(b, -1))


def _divisible(x: Lin, d: int) -> bool:
    return x.const % d == 0 and all(k % d == 0 for _, k in x.terms)


def _exact_div(x: Lin, d: int) -> Lin:
    return Lin(tuple((a, k // d) for a, k in x.terms), x.const // d)


def cdiv(x: Lin, d: int) -> Lin:
    """C `x / d` for a constant d != 0."""
    if d < 0:
        return scale(cdiv(x, -d), -1)
    if x.is_const:
        return const(c_div(x.const, d))
    if d == 1:
        return x
    if _divisible(x, d):  # an exact multiple: truncation changes nothing
        return _exact_div(x, d)
    return atom(CDiv(x, d))


def cmod(x: Lin, d: int) -> Lin:
    """C `x % d` for a constant d != 0 (the sign of d does not matter in C)."""
    d = abs(d)
    if x.is_const:
        return const(c_mod(x.const, d))
    if d == 1 or _divisible(x, d):
        return Lin()
    return atom(CMod(x, d))


def fdiv(x: Lin, d: int) -> Lin:
    """floor(x / d), d > 0."""
    if x.is_const:
        return const(x.const // d)
    if d == 1:
        return x
    if _divisible(x, d):
        return _exact_div(x, d)
    return atom(FDiv(x, d))


def fmod(x: Lin, d: int) -> Lin:
    """x mod d (non-negative), d > 0."""
    if x.is_const:
        return const(x.const % d)
    if d == 1 or _divisible(x, d):
        return Lin()
    return atom(FMod(x, d))


def extremum(op: str, args: list[Lin]) -> Lin:
    """min or max of args (nested ones of the same kind are flattened)."""
    flat: list[Lin] = []
    for a in args:
        if len(a.terms) == 1 and a.const == 0 and a.terms[0][1] == 1:
            inner = a.terms[0][0]
            if isinstance(inner, Extremum) and inner.op == op:
                flat.extend(inner.args)
                continue
        flat.append(a)
    consts = [a.const for a in flat if a.is_const]
    rest: list[Lin] = []
    for a in flat:
        if not a.is_const and a not in rest:
            rest.append(a)
    if consts:
        rest.append(const(min(consts) if op == "min" else max(consts)))
    if len(rest) == 1:
        return rest[0]
    rest.sort(key=repr)
    return atom(Extremum(op, tuple(rest)))


def select(c: Cond, then: Lin, other: Lin) -> Lin:
    """`c ? then : other`."""
    if isinstance(c, BoolConst):
        return then if c.value else other
    if then == other:
        return then
    return atom(Select(c, then, other))


def rel(kind: str, e: Lin) -> Cond:
    """`e >= 0` / `e == 0` / `e != 0`, folded when constant."""
    if e.is_const:
        v = e.const
        return BoolConst(v >= 0 if kind == "ge" else (v == 0 if kind == "eq" else v != 0))
    return Rel(kind, e)


def ge(a: Lin, b: Lin) -> Cond:
    """a >= b."""
    return rel("ge", sub(a, b))


def gt(a: Lin, b: Lin) -> Cond:
    """a > b (integers: a - b - 1 >= 0)."""
    return rel("ge", add(sub(a, b), const(-1)))


def eq(a: Lin, b: Lin) -> Cond:
    """a == b."""
    return rel("eq", sub(a, b))


def ne(a: Lin, b: Lin) -> Cond:
    """a != b."""
    return rel("ne", sub(a, b))


def conj(args: list[Cond] | tuple[Cond, ...]) -> Cond:
    """Conjunction (flattened, constants folded)."""
    out: list[Cond] = []
    for a in args:
        if isinstance(a, BoolConst):
            if not a.value:
                return FALSE
            continue
        for b in a.args if isinstance(a, And) else (a,):
            if b not in out:
                out.append(b)
    if not out:
        return TRUE
    return out[0] if len(out) == 1 else And(tuple(out))


def disj(args: list[Cond] | tuple[Cond, ...]) -> Cond:
    """Disjunction (flattened, constants folded)."""
    out: list[Cond] = []
    for a in args:
        if isinstance(a, BoolConst):
            if a.value:
                return TRUE
            continue
        for b in a.args if isinstance(a, Or) else (a,):
            if b not in out:
                out.append(b)
    if not out:
        return FALSE
    return out[0] if len(out) == 1 else Or(tuple(out))


def negate(c: Cond) -> Cond:
    """Logical negation, pushed down to the relations."""
    if isinstance(c, BoolConst):
        return BoolConst(not c.value)
    if isinstance(c, And):
        return disj([negate(a) for a in c.args])
    if isinstance(c, Or):
        return conj([negate(a) for a in c.args])
    if c.kind == "ge":  # !(e >= 0) <=> -e - 1 >= 0 over the integers
        return rel("ge", add(scale(c.expr, -1), const(-1)))
    return rel("ne" if c.kind == "eq" else "eq", c.expr)


# ---- traversal helpers over the affine language


def atom_children(a: Atom) -> tuple[list[Lin], list[Cond]]:
    """The Lin and Cond operands of an atom."""
    if isinstance(a, Var):
        return [], []
    if isinstance(a, Extremum):
        return list(a.args), []
    if isinstance(a, Select):
        return [a.then, a.other], [a.cond]
    return [a.arg], []


def cond_lins(c: Cond) -> list[Lin]:
    """The Lin operands of a condition."""
    if isinstance(c, BoolConst):
        return []
    if isinstance(c, Rel):
        return [c.expr]
    out: list[Lin] = []
    for a in c.args:
        out.extend(cond_lins(a))
    return out


def lin_vars(x: Lin, out: set[Var] | None = None) -> set[Var]:
    """All variables occurring in x (inside atoms too)."""
    out = set() if out is None else out
    for a, _ in x.terms:
        if isinstance(a, Var):
            out.add(a)
            continue
        lins, conds = atom_children(a)
        for y in lins:
            lin_vars(y, out)
        for c in conds:
            for y in cond_lins(c):
                lin_vars(y, out)
    return out


def cond_vars(c: Cond) -> set[Var]:
    """All variables occurring in c."""
    out: set[Var] = set()
    for y in cond_lins(c):
        lin_vars(y, out)
    return out


def mentions(x: Lin | Cond, key: tuple[Any, ...]) -> bool:
    """True when the variable `key` occurs in x."""
    vs = lin_vars(x) if isinstance(x, Lin) else cond_vars(x)
    return any(v.key == key for v in vs)


def subst(x: Lin, key: tuple[Any, ...], value: Lin) -> Lin:
    """x with the variable `key` replaced by `value`."""
    parts: list[Lin] = [const(x.const)]
    for a, k in x.terms:
        if isinstance(a, Var):
            parts.append(scale(value, k) if a.key == key else atom(a, k))
        elif isinstance(a, CDiv):
            parts.append(scale(cdiv(subst(a.arg, key, value), a.d), k))
        elif isinstance(a, CMod):
            parts.append(scale(cmod(subst(a.arg, key, value), a.d), k))
        elif isinstance(a, FDiv):
            parts.append(scale(fdiv(subst(a.arg, key, value), a.d), k))
        elif isinstance(a, FMod):
            parts.append(scale(fmod(subst(a.arg, key, value), a.d), k))
        elif isinstance(a, Extremum):
            parts.append(scale(extremum(a.op, [subst(y, key, value) for y in a.args]), k))
        else:
            parts.append(
                scale(
                    select(
                        subst_cond(a.cond, key, value),
                        subst(a.then, key, value),
                        subst(a.other, key, value),
                    ),
                    k,
                )
            )
    return add(*parts)


def subst_cond(c: Cond, key: tuple[Any, ...], value: Lin) -> Cond:
    """c with the variable `key` replaced by `value`."""
    if isinstance(c, BoolConst):
        return c
    if isinstance(c, Rel):
        return rel(c.kind, subst(c.expr, key, value))
    args = [subst_cond(a, key, value) for a in c.args]
    return conj(args) if isinstance(c, And) else disj(args)


# ---- monotonicity: how a value or a truth set changes with one variable

_FLIP = {"const": "const", "inc": "dec", "dec": "inc", None: None}


def _join(a: str | None, b: str | None) -> str | None:
    if a == "const":
        return b
    if b == "const":
        return a
    return a if a == b else None


def monotone(x: Lin, key: tuple[Any, ...]) -> str | None:
    """'const', 'inc' (non-decreasing), 'dec' (non-increasing) in variable `key`, or None."""
    res: str | None = "const"
    for a, k in x.terms:
        if isinstance(a, Var):
            m = "inc" if a.key == key else "const"
        elif isinstance(a, (CDiv, FDiv)):
            m = monotone(a.arg, key)  # truncating and floor division are monotone
        elif isinstance(a, (CMod, FMod)):
            m = "const" if not mentions(a.arg, key) else None
        elif isinstance(a, Extremum):
            m = "const"
            for y in a.args:
                m = _join(m, monotone(y, key))
        else:
            if mentions(a.cond, key):
                m = None
            else:
                m = _join(monotone(a.then, key), monotone(a.other, key))
        if k < 0:
            m = _FLIP[m]
        res = _join(res, m)
        if res is None:
            return None
    return res


def closure(c: Cond, key: tuple[Any, ...]) -> str | None:
    """Shape of the truth set of c in variable `key` (others fixed).

    'const' (does not depend on it), 'down' (true at v implies true at every
    smaller v), 'up' (true at v implies true at every larger v), or None.
    """
    if isinstance(c, BoolConst):
        return "const"
    if isinstance(c, Rel):
        m = monotone(c.expr, key)
        if m == "const":
            return "const"
        if c.kind != "ge" or m is None:
            return None
        return "down" if m == "dec" else "up"
    res: str | None = "const"
    for a in c.args:
        res = _join(res, closure(a, key))
        if res is None:
            return None
    return res
