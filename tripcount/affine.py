# Stage 3 of the pipeline: from the IR to affine loop nests.
#
# For every outermost `for` of every function this stage decides what can be
# modelled exactly and writes it down in a small affine language of its own
# (Lin: integer linear combinations of loop variables, size parameters and a
# few exact non-linear atoms such as C truncating division, min/max and
# selections; Cond: boolean combinations of `e >= 0`, `e == 0`, `e != 0`).
# It knows C's rules (truncating `/` and `%`, loop termination, `continue`,
# scoping of loop variables) and nothing about isl: `tripcount.model` turns
# the result into integer sets.
#
# What cannot be modelled exactly is refused at the smallest scope that keeps
# the rest exact, with one diagnostic (TC2xx) per reason: a data-dependent
# `break` makes one loop unknown, a `return` the whole nest, a non-affine `if`
# the statements under it. Loop-invariant values that are not affine (a call
# `len(s)`, a member `s->n`) become named size parameters with a note.

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from typing import Any

from tripcount import ir
from tripcount.diagnostics import Diagnostic, InternalError
from tripcount.frontend.diagnostics import NestingTooDeep
from tripcount.ir import Span, c_text

# --------------------------------------------------------------------------
# Diagnostics of this stage (TC2xx). Refusals are warnings: the file is fine,
# the tool only declines to count that part. Notes explain modelling choices.


class NonConstantStep(Diagnostic):
    """The loop variable does not advance by an integer constant."""

    code = "TC201"
    severity = "warning"
    title = "non-constant-step"
    template = "{loop}: the step '{step}' is not a constant increment of '{var}' ({detail}); the loop is not counted"


class ArrayDependentBound(Diagnostic):
    """A loop bound reads array contents (e.g. CSR row pointers)."""

    code = "TC202"
    severity = "warning"
    title = "array-dependent-bound"
    template = "{loop}: the {part} depends on array contents ('{text}'), so its iteration count is data-dependent and not counted"


class WrittenValueBound(Diagnostic):
    """A loop bound uses a variable that is assigned inside the nest."""

    code = "TC203"
    severity = "warning"
    title = "loop-varying-bound"
    template = "{loop}: the {part} depends on '{name}', which is assigned inside the loop nest; the loop is not counted"


class EarlyBreak(Diagnostic):
    """`break` leaves a loop after a data-dependent number of iterations."""

    code = "TC204"
    severity = "warning"
    title = "break-in-loop"
    template = "'break' at {pos} can leave {loop} early; that loop's iteration count is data-dependent and its statements are not counted"


class JumpInNest(Diagnostic):
    """`return` or `goto` inside a nest: nothing after it is certain."""

    code = "TC205"
    severity = "warning"
    title = "jump-in-nest"
    template = "'{kind}' at {pos} inside the nest of {loop}: no statement of this nest can be counted exactly"


class WhileInNest(Diagnostic):
    """A `while`/`do` loop inside a nest: its trip count is data-dependent."""

    code = "TC206"
    severity = "warning"
    title = "while-in-nest"
    template = "'{kind}' loop at {pos} in {loop}: its iteration count is data-dependent; the statements inside it are not counted"


class LoopVarModified(Diagnostic):
    """The body assigns the loop variable."""

    code = "TC207"
    severity = "warning"
    title = "loop-variable-modified"
    template = "{loop}: the loop variable '{var}' is modified in the body at {pos}; the loop is not counted"


class UnboundedLoop(Diagnostic):
    """The loop condition need not become false."""

    code = "TC208"
    severity = "warning"
    title = "unbounded-loop"
    template = "{loop}: {detail}; the loop may not terminate, so it is not counted"


class NonAffineBound(Diagnostic):
    """A loop bound is not an affine expression (e.g. `i*j`)."""

    code = "TC209"
    severity = "warning"
    title = "non-affine-bound"
    template = "{loop}: the {part} '{text}' is not affine ({detail}); the loop is not counted"


class NonAffineGuard(Diagnostic):
    """An `if` condition is not affine (e.g. `A[i] > 0`)."""

    code = "TC210"
    severity = "warning"
    title = "non-affine-guard"
    template = "the condition '{text}' at {pos} is not affine ({detail}); the statements under it are not counted"


class NonMonotoneCondition(Diagnostic):
    """The loop condition does not switch from true to false only once."""

    code = "TC211"
    severity = "warning"
    title = "non-monotone-condition"
    template = "{loop}: the condition '{text}' does not change monotonically as '{var}' advances; the loop is not counted"


class UnsupportedLoopForm(Diagnostic):
    """A `for` header outside the modelled forms (several variables, no step, ...)."""

    code = "TC212"
    severity = "warning"
    title = "unsupported-loop-form"
    template = "{loop}: {detail}; the loop is not counted"


class UnmodelledContinue(Diagnostic):
    """`continue` under a condition that is not modelled."""

    code = "TC213"
    severity = "warning"
    title = "unmodelled-continue"
    template = "'continue' at {pos} depends on a condition that is not modelled; the statements after it in {loop} are not counted"


class SwitchInNest(Diagnostic):
    """A `switch` inside a nest: which case runs is not modelled."""

    code = "TC214"
    severity = "warning"
    title = "switch-in-nest"
    template = "'switch' at {pos}: which case runs is not modelled; the statements inside it are not counted"


class UnreadStatement(Diagnostic):
    """The front end could not read a statement inside a nest."""

    code = "TC215"
    severity = "note"
    title = "unread-statement"
    template = "the statement at {pos} could not be read{reason}; it is counted as one statement without array accesses"


class SymbolicParameter(Diagnostic):
    """A loop-invariant value that is not affine becomes a size parameter."""

    code = "TC216"
    severity = "note"
    title = "symbolic-parameter"
    template = "'{text}' does not change inside the nest and is treated as a size parameter '{name}'"


class NonAffineSubscript(Diagnostic):
    """An array subscript that is not affine: the count is fine, the footprint misses it."""

    code = "TC217"
    severity = "note"
    title = "non-affine-subscript"
    template = "the subscript of '{text}' at {pos} is not affine ({detail}); this access is left out of the footprint"


class BadAssumption(Diagnostic):
    """An `--assume` text that cannot be read."""

    code = "TC218"
    severity = "error"
    title = "bad-assumption"
    template = "cannot read the assumption '{text}': {reason}"


class FloatingLoop(Diagnostic):
    """A loop over a floating-point variable."""

    code = "TC219"
    severity = "warning"
    title = "floating-loop"
    template = "{loop}: the loop variable '{var}' has the floating type '{type}'; only integer loops are counted"


class ExpressionTooDeep(Diagnostic):
    """An expression nested beyond what the analysis follows; its statement (and nest) is skipped."""

    code = "TC220"
    severity = "warning"
    title = "expression-too-deep"
    template = ("the expression at {pos} is nested more than {limit} levels deep (with its statements); "
                "the statement holding it is skipped{effect}")


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


# --------------------------------------------------------------------------
# C text of IR expressions and statements (messages, display, hashing)

def stmt_text(s: ir.Stmt | None, indent: int = 0) -> str:
    """C text of an IR statement (canonical layout)."""
    pad = "  " * indent
    if s is None:
        return ""
    if isinstance(s, ir.ExprStmt):
        return f"{pad}{c_text(s.expr)};"
    if isinstance(s, ir.Decl):
        return pad + _decl_text(s) + ";"
    if isinstance(s, ir.Block):
        inner = "\n".join(stmt_text(b, indent + 1) for b in s.body)
        return f"{pad}{{\n{inner}\n{pad}}}" if inner else f"{pad}{{}}"
    if isinstance(s, ir.For):
        init = _decl_text(s.init) if isinstance(s.init, ir.Decl) else c_text(getattr(s.init, "expr", None))
        omp = f"{pad}#pragma omp {s.omp.directive}\n" if s.omp else ""
        return f"{omp}{pad}for ({init}; {c_text(s.cond)}; {c_text(s.step)})\n{stmt_text(s.body, indent + 1)}"
    if isinstance(s, ir.If):
        out = f"{pad}if ({c_text(s.cond)})\n{stmt_text(s.then, indent + 1)}"
        if s.other is not None:
            out += f"\n{pad}else\n{stmt_text(s.other, indent + 1)}"
        return out
    if isinstance(s, ir.While):
        return f"{pad}while ({c_text(s.cond)})\n{stmt_text(s.body, indent + 1)}"
    if isinstance(s, ir.DoWhile):
        return f"{pad}do\n{stmt_text(s.body, indent + 1)}\n{pad}while ({c_text(s.cond)});"
    if isinstance(s, ir.Jump):
        tail = f" {c_text(s.value)}" if s.value is not None else (f" {s.label}" if s.label else "")
        return f"{pad}{s.kind}{tail};"
    if isinstance(s, ir.Labeled):
        return f"{pad}{s.label}:\n{stmt_text(s.stmt, indent)}"
    if isinstance(s, ir.Switch):
        return f"{pad}switch ({c_text(s.value)})\n{stmt_text(s.body, indent + 1)}"
    if isinstance(s, ir.Unparsed):
        return pad + s.text
    return pad + ";"


def _decl_text(d: ir.Decl) -> str:
    parts = []
    for x in d.declarators:
        t = "*" * x.pointer + x.name + "".join(f"[{c_text(e)}]" for e in x.dims)
        if x.init is not None:
            t += f" = {c_text(x.init, 2)}"
        parts.append(t)
    return f"{d.type_name} {', '.join(parts)}"


def _pos(span: Span) -> str:
    return f"{span.line}:{span.column}"


def loop_label(var: str, header: Span) -> str:
    """How messages name a loop: "loop 'for (i ...)' at 12:5"."""
    if var == "?":
        return f"loop 'for (...)' at {_pos(header)}"
    return f"loop 'for ({var} ...)' at {_pos(header)}"


# --------------------------------------------------------------------------
# Names: isl needs plain ASCII identifiers that are not words of its own
# notation; C allows more (universal character names, `$`). Mangling is
# deterministic so that the same source always gives the same names.

_RESERVED = {
    "and", "or", "not", "implies", "exists", "mod", "floor", "ceil", "floord", "ceild", "min", "max",
    "infty", "nan", "rat", "true", "false", "div",
}  # fmt: skip - isl reads these words in any letter case (MAX, Floor, ...)
_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")


def mangle(name: str) -> str:
    """A valid, unreserved ASCII identifier for a C name (identity for ordinary names)."""
    out = []
    for ch in name:
        if ch.isascii() and (ch.isalnum() or ch == "_"):
            out.append(ch)
        else:
            out.append(f"_u{ord(ch):x}_")
    s = "".join(out) or "_"
    if s[0].isdigit():
        s = "_" + s
    if s.lower() in _RESERVED:
        s += "_"
    return s


def symbol_base(text: str) -> str:
    """A parameter name for a loop-invariant C expression: `len(s)` -> `len_s`, `s->n` -> `s_n`."""
    words = re.findall(r"[A-Za-z_][A-Za-z0-9_]*|\d+", text)
    base = "_".join(words) or "value"
    if text.lstrip().startswith("*"):
        base += "_val"
    return mangle(base)


# --------------------------------------------------------------------------
# C types

_QUALIFIERS = {
    "const", "volatile", "restrict", "__restrict", "__restrict__", "static", "extern",
    "register", "inline", "auto", "_Atomic", "__const",
}  # fmt: skip
_SIZES = {
    "char": 1, "signed char": 1, "unsigned char": 1, "_Bool": 1, "bool": 1,
    "short": 2, "unsigned short": 2,
    "int": 4, "unsigned": 4, "float": 4,
    "long": 8, "unsigned long": 8, "long long": 8, "unsigned long long": 8,
    "double": 8, "long double": 16,
    "size_t": 8, "ssize_t": 8, "ptrdiff_t": 8, "intptr_t": 8, "uintptr_t": 8,
    "int8_t": 1, "uint8_t": 1, "int16_t": 2, "uint16_t": 2, "int32_t": 4, "uint32_t": 4,
    "int64_t": 8, "uint64_t": 8,
    "float _Complex": 8, "double _Complex": 16, "long double _Complex": 32,
    "float complex": 8, "double complex": 16,
}  # fmt: skip
_INT_WORDS = {"char", "short", "int", "long", "signed", "unsigned", "_Bool", "bool"}
_INT_TYPEDEFS = re.compile(r"u?int(8|16|32|64|ptr|max)?_t\Z|s?size_t\Z|ptrdiff_t\Z|u?int_(fast|least)\d+_t\Z")
_FLOAT_WORDS = {"float", "double", "_Complex", "complex", "_Float16", "_Float32", "_Float64", "__float128"}


def base_type(type_name: str) -> str:
    """The type without qualifiers and storage classes, words normalized ("long int" -> "long")."""
    words = [w for w in type_name.replace("*", " ").split() if w not in _QUALIFIERS]
    if any(w in ("short", "long", "unsigned", "signed") for w in words) and "int" in words:
        words = [w for w in words if w != "int"]
    if "signed" in words and len(words) > 1 and "char" not in words:
        words = [w for w in words if w != "signed"]
    if words == ["signed"]:
        words = ["int"]
    if words and words[0] == "long" and words[1:] == ["long"]:
        return "long long"
    return " ".join(words)


def type_size(type_name: str) -> int | None:
    """Size in bytes of a scalar C type on the usual 64-bit ABIs (LP64, common practice), or None."""
    return _SIZES.get(base_type(type_name))


def is_integer_type(type_name: str) -> bool:
    """True for the integer types (a cast to them is transparent to the model)."""
    if "*" in type_name:
        return False
    words = base_type(type_name).split()
    if not words:
        return False
    return all(w in _INT_WORDS for w in words) or (len(words) == 1 and bool(_INT_TYPEDEFS.match(words[0])))


def is_floating_type(type_name: str) -> bool:
    """True for float, double, long double and complex types (not pointers to them)."""
    return "*" not in type_name and any(w in _FLOAT_WORDS for w in type_name.split())


# --------------------------------------------------------------------------
# Affine nests: the output of this stage


@dataclass
class AAccess:
    """One array reference; subscripts None when not affine."""

    array: str
    kind: str
    subscripts: tuple[Lin, ...] | None
    texts: tuple[str, ...]
    span: Span
    elem_type: str | None
    elem_size: int | None
    extents: tuple[str | None, ...] = ()


@dataclass
class ALoop:
    """A `for` loop: its iteration constraint over the enclosing variables and its own."""

    index: int
    display: str
    depth: int
    parent: int | None
    span: Span
    header: Span
    omp: ir.OmpClauses | None
    guard: Cond = TRUE  # conditions between the parent's body and this loop
    constraint: Cond | None = None  # own iterations; None when refused
    step: int = 1
    refusal: Diagnostic | None = None  # why this loop (or an enclosing construct) is not counted
    children: list[int] = field(default_factory=list)
    uses_ne: bool = False  # the condition used `!=` (termination must be checked)
    unbounded_detail: str = ""  # set when no part of the condition limits the variable
    cond_text: str = ""

    @property
    def key(self) -> tuple[Any, ...]:
        """The variable key of this loop."""
        return ("loop", self.index)


@dataclass
class AStmt:
    """A statement with the guard that leads to it from its innermost loop's body."""

    id: str
    node: ir.Stmt
    span: Span
    text: str
    loops: tuple[int, ...]
    guard: Cond = TRUE
    refusal: Diagnostic | None = None
    accesses: list[AAccess] = field(default_factory=list)


@dataclass
class ANest:
    """One outermost loop with everything inside, in the affine language."""

    path: str
    function: str
    span: Span
    loops: list[ALoop]
    stmts: list[AStmt]
    diagnostics: list[Diagnostic]
    names: dict[tuple[Any, ...], str]  # variable key -> isl name
    params: tuple[str, ...]  # isl names of the size parameters, sorted
    symbolic: dict[str, str]  # isl name -> C text it stands for (symbols and mangled names)
    source: str = ""
    scalar_types: dict[str, str] = field(default_factory=dict)  # C types of scalars visible at the nest


# --------------------------------------------------------------------------
# Conversion of IR expressions


class NotAffine(Exception):
    """An expression outside the affine language; `kind` drives the diagnostic."""

    def __init__(self, kind: str, node: ir.Node | None, detail: str, name: str = "") -> None:
        super().__init__(detail)
        self.kind = kind  # array | written | product | call | float | side-effect | other
        self.node = node
        self.detail = detail
        self.name = name


MINMAX = {"min": "min", "max": "max", "MIN": "min", "MAX": "max", "Min": "min", "Max": "max",
          "imin": "min", "imax": "max"}  # fmt: skip
ABS = {"abs", "labs", "llabs", "ABS"}
_SIZEOF = re.compile(r"sizeof\s*\(\s*([A-Za-z_][A-Za-z0-9_ ]*?)\s*\)\Z")
_COMPARE = {"<", "<=", ">", ">=", "==", "!="}


class Converter:
    """Turns IR expressions into Lin/Cond; name lookup is delegated to `resolver`.

    The resolver provides `name(node) -> Lin`, `opaque(node, text) -> Lin`
    (a loop-invariant expression used as a parameter) and may raise NotAffine.
    """

    def __init__(self, resolver: Any) -> None:
        self.resolver = resolver

    def lin(self, e: ir.Expr) -> Lin:
        """The affine value of e, or NotAffine."""
        if isinstance(e, ir.IntLit):
            return const(e.value)
        if isinstance(e, ir.FloatLit):
            raise NotAffine("float", e, "floating-point value")
        if isinstance(e, ir.Name):
            return self.resolver.name(e)
        if isinstance(e, ir.Unary):
            if e.op == "-":
                return scale(self.lin(e.operand), -1)
            if e.op == "+":
                return self.lin(e.operand)
            if e.op == "~":  # two's complement: ~x == -x - 1
                return add(scale(self.lin(e.operand), -1), const(-1))
            if e.op == "!":
                return select(self.cond(e), const(1), const(0))
            if e.op == "*":
                return self.resolver.opaque(e, c_text(e))
            raise NotAffine("other", e, f"'{e.op}' is not arithmetic")
        if isinstance(e, ir.Binary):
            return self._binary(e)
        if isinstance(e, ir.Ternary):
            c = self.cond(e.cond)
            a, b = self.lin(e.then), self.lin(e.other)
            mm = _as_minmax(c, a, b)
            return mm if mm is not None else select(c, a, b)
        if isinstance(e, ir.Call):
            if e.func in MINMAX and len(e.args) >= 2:
                return extremum(MINMAX[e.func], [self.lin(a) for a in e.args])
            if e.func in ABS and len(e.args) == 1:
                x = self.lin(e.args[0])
                return extremum("max", [x, scale(x, -1)])
            return self.resolver.opaque(e, c_text(e))
        if isinstance(e, ir.ArrayRef):
            raise NotAffine("array", e, "array element")
        if isinstance(e, ir.Cast):
            if is_integer_type(e.type_name):
                return self.lin(e.operand)
            if is_floating_type(e.type_name):
                raise NotAffine("float", e, f"cast to {e.type_name}")
            raise NotAffine("other", e, f"cast to {e.type_name}")
        if isinstance(e, (ir.Assign, ir.IncDec)):
            raise NotAffine("side-effect", e, "assignment inside an expression")
        if isinstance(e, ir.Opaque):
            m = _SIZEOF.match(e.text.strip())
            if m and type_size(m.group(1)) is not None:
                return const(type_size(m.group(1)) or 0)
            return self.resolver.opaque(e, e.text)
        raise NotAffine("other", e, f"unsupported expression {type(e).__name__}")

    def _binary(self, e: ir.Binary) -> Lin:
        op = e.op
        if op in _COMPARE or op in ("&&", "||"):
            return select(self.cond(e), const(1), const(0))
        if op == ",":
            raise NotAffine("side-effect", e, "comma operator")
        a = self.lin(e.left)
        b = self.lin(e.right)
        if op == "+":
            return add(a, b)
        if op == "-":
            return sub(a, b)
        if op == "*":
            if a.is_const:
                return scale(b, a.const)
            if b.is_const:
                return scale(a, b.const)
            raise NotAffine("product", e, "product of two variables")
        if op in ("/", "%"):
            if not b.is_const:
                raise NotAffine("product", e, "division by a variable")
            if b.const == 0:
                raise NotAffine("other", e, "division by zero")
            return cdiv(a, b.const) if op == "/" else cmod(a, b.const)
        if op in ("<<", ">>"):
            if not b.is_const or b.const < 0 or b.const > 62:
                raise NotAffine("product", e, "shift by a variable amount")
            if op == "<<":
                return scale(a, 1 << b.const)
            # Right shift of a negative value is implementation-defined; every
            # mainstream compiler shifts arithmetically, i.e. floors (common practice).
            return fdiv(a, 1 << b.const)
        if op in ("&", "|", "^"):
            if a.is_const and b.is_const:
                x, y = a.const, b.const
                return const(x & y if op == "&" else (x | y if op == "|" else x ^ y))
            if op == "&":
                mask, other = (a.const, b) if a.is_const else (b.const, a) if b.is_const else (None, a)
                if mask is not None and mask > 0 and (mask + 1) & mask == 0:
                    return fmod(other, mask + 1)  # x & (2^k - 1) == x mod 2^k
                if mask is not None and mask < 0 and (-mask) & (-mask - 1) == 0:
                    return scale(fdiv(other, -mask), -mask)  # x & ~(2^k - 1) == 2^k floor(x / 2^k)
            raise NotAffine("product", e, f"bitwise '{op}' of a variable")
        raise NotAffine("other", e, f"operator '{op}'")

    def cond(self, e: ir.Expr) -> Cond:
        """The affine truth condition of e (C: non-zero is true), or NotAffine."""
        if isinstance(e, ir.Binary):
            if e.op == "&&":
                return conj([self.cond(e.left), self.cond(e.right)])
            if e.op == "||":
                return disj([self.cond(e.left), self.cond(e.right)])
            if e.op in _COMPARE:
                a, b = self.lin(e.left), self.lin(e.right)
                if e.op == "<":
                    return gt(b, a)
                if e.op == "<=":
                    return ge(b, a)
                if e.op == ">":
                    return gt(a, b)
                if e.op == ">=":
                    return ge(a, b)
                if e.op == "==":
                    return eq(a, b)
                return ne(a, b)
        if isinstance(e, ir.Unary) and e.op == "!":
            return negate(self.cond(e.operand))
        if isinstance(e, ir.Ternary):
            c = self.cond(e.cond)
            return disj([conj([c, self.cond(e.then)]), conj([negate(c), self.cond(e.other)])])
        if isinstance(e, ir.Cast) and is_integer_type(e.type_name):
            return self.cond(e.operand)
        return ne(self.lin(e), const(0))


def _as_minmax(c: Cond, a: Lin, b: Lin) -> Lin | None:
    """Recognize `x < y ? x : y` (what MIN/MAX macros expand to) as min/max."""
    if not isinstance(c, Rel) or c.kind != "ge":
        return None
    d = sub(a, b)
    # c is `e >= 0`; for `x <= y`, e = y - x and for `x < y`, e = y - x - 1.
    for e_minus_d, op in ((scale(d, -1), "min"), (d, "max")):
        diff = sub(c.expr, e_minus_d)
        if diff.is_const and diff.const in (0, -1):
            return extremum(op, [a, b])
    return None


# --------------------------------------------------------------------------
# Scanning helpers over the IR


def walk_exprs(node: ir.Node):
    """All expression nodes under `node` (statements and expressions), pre-order."""
    stack = [node]
    while stack:
        n = stack.pop()
        if isinstance(n, ir.Expr):
            yield n
        stack.extend(reversed(ir.children(n)))


def _write_target(e: ir.Expr) -> str | None:
    while isinstance(e, ir.Cast):
        e = e.operand
    return e.name if isinstance(e, ir.Name) else None


def _array_target(e: ir.Expr) -> str | None:
    while isinstance(e, ir.Cast):
        e = e.operand
    if isinstance(e, ir.ArrayRef):
        return e.array
    if isinstance(e, ir.Unary) and e.op == "*":
        inner = e.operand
        while isinstance(inner, (ir.Binary, ir.Cast)):
            inner = inner.left if isinstance(inner, ir.Binary) else inner.operand
        if isinstance(inner, ir.Name):
            return inner.name
    return None


_ASSIGN_TEXT = r"(?<![=!<>+\-*/%&|^])\b{name}\s*(?:[-+*/%&|^]|<<|>>)?=(?!=)|\b{name}\s*(?:\+\+|--)|(?:\+\+|--)\s*{name}\b|&\s*{name}\b"


def unparsed_writes(text: str, name: str) -> bool:
    """Whether unread source text may assign `name` (conservative; code cut for its depth may assign anything)."""
    if text == DEEP_TEXT:
        return True
    return re.search(_ASSIGN_TEXT.format(name=re.escape(name)), text) is not None


@dataclass
class Writes:
    """Assignments found in a region of code."""

    scalars: dict[str, list[Span]] = field(default_factory=dict)
    arrays: set[str] = field(default_factory=set)
    passed: set[str] = field(default_factory=set)  # arrays handed to calls in statements
    unparsed: list[str] = field(default_factory=list)
    unparsed_at: list[Span] = field(default_factory=list)  # where each unparsed text is

    def writes(self, name: str) -> bool:
        """Whether the region assigns the scalar `name`."""
        return name in self.scalars or any(unparsed_writes(t, name) for t in self.unparsed)

    def add(self, name: str, span: Span) -> None:
        """Record one assignment."""
        self.scalars.setdefault(name, []).append(span)


def collect_writes(node: ir.Node) -> Writes:
    """Scalars and arrays assigned anywhere under node (declarations excluded)."""
    w = Writes()
    stack: list[tuple[ir.Node, bool]] = [(node, False)]
    while stack:
        n, in_header = stack.pop()
        if isinstance(n, ir.Unparsed):
            w.unparsed.append(n.text)
            w.unparsed_at.append(n.span)
        if isinstance(n, (ir.Assign, ir.IncDec)):
            t = n.target
            name = _write_target(t)
            if name:
                w.add(name, n.span)
            arr = _array_target(t)
            if arr:
                w.arrays.add(arr)
        elif isinstance(n, ir.Unary) and n.op == "&":
            name = _write_target(n.operand)
            if name:  # its address escapes: it may be written
                w.add(name, n.span)
            elif isinstance(n.operand, ir.ArrayRef):
                w.arrays.add(n.operand.array)
        elif isinstance(n, ir.Call) and not in_header:
            for a in n.args:  # an array passed to a function in a statement may be written by it
                if isinstance(a, ir.Name):
                    w.passed.add(a.name)
        if isinstance(n, ir.For):
            stack.extend((c, c is not n.body or in_header) for c in ir.children(n))
        else:
            stack.extend((c, in_header) for c in ir.children(n))
    return w


def collect_outer_writes(node: ir.Node) -> Writes:
    """Like collect_writes, but only writes to variables declared outside `node`.

    A `for (int k ...)` or a block-level declaration inside `node` starts a new
    variable; assignments to it do not change the outer variable of that name.
    """
    w = Writes()

    def go(n: ir.Node, shadow: frozenset[str]) -> None:
        if isinstance(n, ir.Unparsed):
            w.unparsed.append(n.text)
            w.unparsed_at.append(n.span)
        if isinstance(n, ir.For) and isinstance(n.init, ir.Decl):
            inner = shadow | {d.name for d in n.init.declarators}
            for c in ir.children(n):
                go(c, inner)
            return
        if isinstance(n, ir.Block):
            sh = shadow
            for x in n.body:
                if isinstance(x, ir.Decl):
                    for d in x.declarators:
                        if d.init is not None:
                            go(d.init, sh)
                    sh = sh | {d.name for d in x.declarators}
                else:
                    go(x, sh)
            return
        name = None
        if isinstance(n, (ir.Assign, ir.IncDec)):
            name = _write_target(n.target)
        elif isinstance(n, ir.Unary) and n.op == "&":
            name = _write_target(n.operand)
        if name and name not in shadow:
            w.add(name, n.span)
        for c in ir.children(n):
            go(c, shadow)

    go(node, frozenset())
    return w


def _find_jumps(node: ir.Node, kinds: set[str], into_loops: bool) -> list[ir.Node]:
    """Jump statements of the given kinds; `into_loops=False` stops at nested loops/switches."""
    out: list[ir.Node] = []

    def go(n: ir.Node) -> None:
        if isinstance(n, ir.Jump) and n.kind in kinds:
            out.append(n)
            return
        if isinstance(n, ir.Unparsed):
            for k in kinds:
                if re.search(rf"\b{k}\b", n.text):
                    out.append(n)
                    return
        if not into_loops and isinstance(n, (ir.For, ir.While, ir.DoWhile, ir.Switch)):
            if not (isinstance(n, ir.Switch) and "break" not in kinds):
                return
        if isinstance(n, ir.Expr):
            return
        for c in ir.children(n):
            go(c)

    for c in ir.children(node) if isinstance(node, ir.For) else [node]:
        if isinstance(node, ir.For) and c is not node.body:
            continue
        go(c)
    return out


def _find_var_write(body: ir.Stmt, name: str) -> Span | None:
    """Where the body assigns the variable `name` (respecting `for (int name ...)` shadowing)."""

    def go(n: ir.Node) -> Span | None:
        if isinstance(n, ir.For) and isinstance(n.init, ir.Decl):
            if any(d.name == name for d in n.init.declarators):
                return None
        if isinstance(n, ir.Block):
            for s in n.body:
                if isinstance(s, ir.Decl) and any(d.name == name for d in s.declarators):
                    for d in s.declarators:
                        if d.init is not None:
                            r = go(d.init)
                            if r:
                                return r
                    return None  # shadowed from here on
                r = go(s)
                if r:
                    return r
            return None
        if isinstance(n, ir.Unparsed) and unparsed_writes(n.text, name):
            return n.span
        if isinstance(n, (ir.Assign, ir.IncDec)) and _write_target(n.target) == name:
            return n.span
        if isinstance(n, ir.Unary) and n.op == "&" and _write_target(n.operand) == name:
            return n.span
        for c in ir.children(n):
            r = go(c)
            if r:
                return r
        return None

    return go(body)


# --------------------------------------------------------------------------
# Nesting depth
#
# The front end builds statements and expressions of any depth without
# recursion; the visitors of this stage and of the later ones recurse, two or
# three Python frames per level. So before anything looks at a function, code
# nested too deeply is cut: a statement more than MAX_DEPTH levels below the
# function body, or a statement holding an expression node more than
# MAX_EXPR_LEVEL levels below it, becomes an ir.Unparsed with DEEP_TEXT. What
# the cut code does (assign a bound, jump out of a loop) is unknown, so it
# counts as writing every variable, and a nest holding it is not counted.

MAX_DEPTH = 200  # statement levels below the function body (its statements are level 1)
MAX_EXPR_LEVEL = 240  # levels of an expression node, its statements included
DEEP_TEXT = "/* nested too deeply: not read */"
DEEP_REASON = "nested too deeply"


@dataclass
class DeepCut:
    """A statement replaced because of its depth: the replacement, and what went too deep."""

    node: ir.Unparsed
    kind: str  # "statement" or "expression"
    at: Span  # the statement past MAX_DEPTH, or the expression node past MAX_EXPR_LEVEL

    def diagnostic(self, path: str | None, in_nest: bool) -> Diagnostic:
        """TC112 for statements, TC220 for an expression."""
        if self.kind == "statement":
            return NestingTooDeep(self.at, path=path, where=_pos(self.at), limit=MAX_DEPTH)
        effect = "; the nest around it is not counted" if in_nest else ""
        return ExpressionTooDeep(self.at, path=path, pos=_pos(self.at), limit=MAX_EXPR_LEVEL, effect=effect)


def is_deep_cut(n: ir.Node) -> bool:
    """An ir.Unparsed that stands for code cut because of its depth."""
    return isinstance(n, ir.Unparsed) and n.reason == DEEP_REASON and n.text == DEEP_TEXT


class _DepthCut:
    """Rebuilds IR with the too-deep parts cut (two frames per statement level, at most MAX_DEPTH + 1)."""

    def __init__(self) -> None:
        self.cuts: list[DeepCut] = []

    def _cut(self, s: ir.Stmt, kind: str, at: Span) -> ir.Unparsed:
        u = ir.Unparsed(s.span, DEEP_TEXT, DEEP_REASON)
        self.cuts.append(DeepCut(u, kind, at))
        return u

    def stmt(self, s: ir.Stmt, level: int) -> ir.Stmt:
        """`s` (at `level`) with its too-deep parts cut; `s` itself when nothing is."""
        if level > MAX_DEPTH:
            return self._cut(s, "statement", s.span)
        changed: dict[str, Any] = {}
        for name in s.__dataclass_fields__:
            if name in ("span", "header"):
                continue
            v = getattr(s, name)
            nv = self.field(v, level + 1)
            if isinstance(nv, Span):  # an expression below `s` is too deep
                return self._cut(s, "expression", nv)
            if nv is not v:
                changed[name] = nv
        return replace(s, **changed) if changed else s

    def field(self, v: Any, level: int) -> Any:
        """A field value with its statements rebuilt; the Span of a too-deep expression node instead."""
        if isinstance(v, ir.Stmt):
            return self.stmt(v, level)
        if isinstance(v, ir.Node):
            deep = _too_deep(v, level, MAX_EXPR_LEVEL)
            return v if deep is None else deep.span
        if isinstance(v, tuple):
            out = []
            changed = False
            for x in v:
                nx = self.stmt(x, level) if isinstance(x, ir.Stmt) else self.field(x, level)
                if isinstance(nx, Span):
                    return nx
                changed = changed or nx is not x
                out.append(nx)
            return tuple(out) if changed else v
        return v


def _too_deep(node: ir.Node, level: int, limit: int) -> ir.Node | None:
    """The first node under `node` (at `level`) more than `limit` levels deep, found without recursion."""
    stack = [(node, level)]
    while stack:
        n, k = stack.pop()
        if k > limit:
            return n
        stack.extend((c, k + 1) for c in reversed(ir.children(n)))
    return None


def cut_deep_function(fn: ir.Function) -> tuple[ir.Function, list[DeepCut]]:
    """`fn` with code nested too deeply cut (the body's statements are level 1), and the cuts."""
    dc = _DepthCut()
    body = fn.body
    items = tuple(dc.stmt(x, 1) for x in body.body)
    if any(a is not b for a, b in zip(items, body.body, strict=True)):
        body = replace(body, body=items)
    params = []
    for p in fn.params:  # array extents written as absurdly deep expressions: read as `[]`
        deep = _too_deep(p, 1, MAX_EXPR_LEVEL)
        if deep is not None:
            dc.cuts.append(DeepCut(ir.Unparsed(p.span, DEEP_TEXT, DEEP_REASON), "expression", deep.span))
            p = replace(p, dims=tuple(None for _ in p.dims))
        params.append(p)
    if body is fn.body and all(a is b for a, b in zip(params, fn.params, strict=True)):
        return fn, dc.cuts
    return replace(fn, body=body, params=tuple(params)), dc.cuts


def cut_deep_globals(globals_: tuple[ir.Decl, ...]) -> tuple[tuple[ir.Decl, ...], list[DeepCut]]:
    """Global declarations without the ones nested too deeply (those are dropped), and the cuts."""
    dc = _DepthCut()
    kept = []
    for g in globals_:
        ng = dc.stmt(g, 1)
        if isinstance(ng, ir.Decl):
            kept.append(ng)
    return tuple(kept), dc.cuts


# --------------------------------------------------------------------------
# Declarations visible to a function


@dataclass(frozen=True)
class VarDecl:
    """A declared name: scalar, array or pointer."""

    name: str
    type_name: str
    pointer: int
    dims: tuple[ir.Expr | None, ...]
    init: ir.Expr | None
    scope: str  # "global", "param" or "local"
    span: Span

    @property
    def is_array(self) -> bool:
        """Arrays and pointers (subscriptable)."""
        return bool(self.dims) or self.pointer > 0

    @property
    def is_const(self) -> bool:
        """Declared `const`."""
        return "const" in self.type_name.split()


def _before(a: Span, b: Span) -> bool:
    return (a.line, a.column) < (b.line, b.column)


class FunctionInfo:
    """Declarations and assignments of one function (plus the globals)."""

    def __init__(self, fn: ir.Function, globals_: list[VarDecl], cuts: list[DeepCut] | None = None) -> None:
        self.fn = fn
        self.globals = {g.name: g for g in globals_}
        self.cuts = {id(c.node): c for c in cuts or ()}  # code cut for its depth, by its ir.Unparsed
        self.cuts_reported: set[int] = set()
        self.params = {
            p.name: VarDecl(p.name, p.type_name, p.pointer, p.dims, None, "param", p.span)
            for p in fn.params
        }
        # (declaration, span of the block or `for` it is visible in)
        self.locals: list[tuple[VarDecl, Span]] = []
        for n in _all_nodes(fn.body):
            scope = n.span
            decls: list[ir.Decl] = []
            if isinstance(n, ir.Block):
                decls = [x for x in n.body if isinstance(x, ir.Decl)]
            elif isinstance(n, ir.For) and isinstance(n.init, ir.Decl):
                decls = [n.init]
            for x in decls:
                for d in x.declarators:
                    self.locals.append((VarDecl(d.name, x.type_name, d.pointer, d.dims, d.init, "local", d.span), scope))
        self.locals.sort(key=lambda t: (t[0].span.line, t[0].span.column))
        self.writes = collect_writes(fn.body)

    def lookup(self, name: str, at: Span) -> VarDecl | None:
        """The declaration of `name` visible at `at` (latest local before it, else parameter, else global)."""
        best = None
        for d, scope in self.locals:
            if d.name == name and _before(d.span, at) and _inside(at, scope):
                best = d
        if best is not None:
            return best
        return self.params.get(name) or self.globals.get(name)

    def scalar_types(self, at: Span) -> dict[str, str]:
        """C types of the scalars (not arrays or pointers) visible at `at`."""
        out: dict[str, str] = {}
        for d in list(self.globals.values()) + list(self.params.values()):
            if not d.is_array:
                out[d.name] = d.type_name
        for d, scope in self.locals:
            if not d.is_array and _before(d.span, at) and _inside(at, scope):
                out[d.name] = d.type_name
        return out

    def written_between(self, name: str, start: Span, end: Span) -> bool:
        """Whether `name` is (or may be, in unread code) assigned in the function between two positions."""
        stop = Span.point(end.end_line, end.end_column)
        for s in self.writes.scalars.get(name, ()):
            if _before(start, s) and _before(s, stop):
                return True
        for text, at in zip(self.writes.unparsed, self.writes.unparsed_at, strict=True):
            if _before(start, at) and _before(at, stop) and unparsed_writes(text, name):
                return True
        return False


def _inside(at: Span, scope: Span) -> bool:
    return not _before(at, scope) and _before(Span.point(at.line, at.column), Span.point(scope.end_line, scope.end_column))


def _all_nodes(node: ir.Node):
    stack = [node]
    while stack:
        n = stack.pop()
        yield n
        stack.extend(reversed(ir.children(n)))


def global_decls(unit: ir.TranslationUnit) -> list[VarDecl]:
    """Global declarations of a translation unit."""
    out = []
    for g in unit.globals:
        for d in g.declarators:
            out.append(VarDecl(d.name, g.type_name, d.pointer, d.dims, d.init, "global", d.span))
    return out


# --------------------------------------------------------------------------
# Building one nest


@dataclass
class _Body:
    """State of one loop body during the walk: conditions of `continue`s seen so far."""

    kills: list[Cond] = field(default_factory=list)
    dead: Diagnostic | None = None
    loop: int | None = None
    foreign: bool = False  # the body of a while/do loop: its `continue`s are not ours


@dataclass
class _Ctx:
    loops: tuple[int, ...]
    guards: tuple[Cond, ...]
    unknown: Diagnostic | None
    env: dict[str, tuple[Any, ...]]
    body: _Body


class _Resolver:
    """Name lookup for conversions inside a nest (or before it, for invariant locals)."""

    def __init__(self, builder: _NestBuilder, env: dict[str, tuple[Any, ...]] | None, loop_ok: bool = True) -> None:
        self.b = builder
        self.env = env or {}
        self.loop_ok = loop_ok

    def name(self, node: ir.Name) -> Lin:
        n = node.name
        entry = self.env.get(n)
        b = self.b
        if entry is not None:
            if entry[0] == "loop":
                return var(("loop", entry[1]), n)
            if b.nest_writes.writes(n):
                raise NotAffine("written", node, f"'{n}' is assigned in the nest", name=n)
            if entry[0] == "subst":
                return entry[1]
            if entry[0] == "error":
                raise entry[1]
            if entry[0] == "array":
                raise NotAffine("array", node, f"array '{n}' used as a value")
            raise NotAffine("other", node, f"'{n}' has no known value here", name=n)
        if b.outer_writes.writes(n):
            raise NotAffine("written", node, f"'{n}' is assigned in the nest", name=n)
        return b.outer_name(node)

    def opaque(self, node: ir.Expr, text: str) -> Lin:
        return self.b.symbol(node, text, self)


class _NestBuilder:
    def __init__(self, info: FunctionInfo, node: ir.For, path: str) -> None:
        self.info = info
        self.node = node
        self.path = path
        self.loops: list[ALoop] = []
        self.stmts: list[AStmt] = []
        self.diags: list[Diagnostic] = []
        self.nest_writes = collect_writes(node)  # by name, for variables declared in the nest
        self.outer_writes = collect_outer_writes(node)  # variables from outside the nest
        self.symbols_noted: set[tuple[Any, ...]] = set()
        self.outer_cache: dict[str, Lin] = {}
        self.outer_busy: set[str] = set()
        self.local_texts: dict[str, str] = {}  # invariant local -> its non-affine initializer
        self.cut_refused = False  # the nest holds code cut for its depth (see build)

    # ---- diagnostics

    def diag(self, cls: type[Diagnostic], span: Span, **args: Any) -> Diagnostic:
        d = cls(span, path=self.path, **args)
        self.diags.append(d)
        return d

    # ---- names outside the nest

    def outer_name(self, node: ir.Name) -> Lin:
        """A name not bound inside the nest: invariant local, constant global or parameter."""
        n = node.name
        if n in self.outer_cache:
            return self.outer_cache[n]
        d = self.info.lookup(n, self.node.span)
        value = var(("param", n), n)
        if d is not None:
            if d.is_array:
                raise NotAffine("array", node, f"array '{n}' used as a value")
            if is_floating_type(d.type_name):
                raise NotAffine("float", node, f"'{n}' is a floating-point variable")
            substitutable = (
                d.init is not None
                and n not in self.outer_busy
                and (
                    (d.scope == "local" and not self.info.written_between(n, d.span, self.node.span))
                    or (d.scope == "global" and d.is_const)
                )
            )
            if substitutable and d.init is not None:
                # The initializer's names must keep their values until the nest starts.
                names = {x.name for x in walk_exprs(d.init) if isinstance(x, ir.Name)}
                if d.scope == "local" and any(
                    self.info.written_between(m, d.span, self.node.span) for m in names
                ):
                    substitutable = False
            if substitutable and d.init is not None:
                self.outer_busy.add(n)
                try:
                    value = Converter(_Resolver(self, None)).lin(d.init)
                    if d.scope == "global" and not value.is_const:
                        value = var(("param", n), n)
                except NotAffine:
                    # invariant but not affine: its value is a parameter standing for the initializer
                    value = var(("param", n), n)
                    if d.scope == "local":
                        self.local_texts[n] = c_text(d.init)
                finally:
                    self.outer_busy.discard(n)
        self.outer_cache[n] = value
        return value

    def _passed(self, name: str) -> bool:
        """An array handed to a call inside the nest, unless declared const (then it is read-only)."""
        if name not in self.nest_writes.passed:
            return False
        d = self.info.lookup(name, self.node.span)
        return d is None or not d.is_const

    def symbol(self, node: ir.Expr, text: str, res: _Resolver) -> Lin:
        """A loop-invariant non-affine expression as a named parameter."""
        names = {x.name for x in walk_exprs(node) if isinstance(x, ir.Name)}
        names |= {x.array for x in walk_exprs(node) if isinstance(x, ir.ArrayRef)}
        if isinstance(node, ir.Opaque):
            names |= set(re.findall(r"[A-Za-z_][A-Za-z0-9_]*", node.text))
        for n in sorted(names):
            entry = res.env.get(n)
            if entry is not None and entry[0] == "loop":
                raise NotAffine("call", node, f"'{text}' changes with the loop variable '{n}'", name=n)
            if entry is not None and entry[0] in ("subst", "error", "plain"):
                raise NotAffine("call", node, f"'{text}' depends on '{n}', which is computed inside the nest", name=n)
            if self.outer_writes.writes(n) or n in self.nest_writes.arrays or self._passed(n):
                raise NotAffine("written", node, f"'{text}' depends on '{n}', which is assigned in the nest", name=n)
        key = ("sym", text, symbol_base(text))
        if key not in self.symbols_noted:
            self.symbols_noted.add(key)
            self._pending_symbols.append((key, node.span))
        return var(key, text)

    # ---- the walk

    def build(self) -> ANest:
        """Walk the nest and name its variables."""
        self._pending_symbols: list[tuple[tuple[Any, ...], Span]] = []
        unknown = None
        first = self.node
        # Code cut for its depth may do anything (assign a bound, jump out): nothing in the nest is certain.
        # One diagnostic, at the first cut, says so.
        cuts = self.info.cuts
        for n in _all_nodes(first) if cuts else ():
            if is_deep_cut(n) and id(n) in cuts:
                self.info.cuts_reported.add(id(n))
                if unknown is None:
                    unknown = cuts[id(n)].diagnostic(self.path, in_nest=True)
                    self.diags.append(unknown)
        self.cut_refused = unknown is not None
        if unknown is not None:  # refused already: "may write anything" would only add noise to the walk
            for w in (self.nest_writes, self.outer_writes):
                keep = [k for k, t in enumerate(w.unparsed) if t != DEEP_TEXT]
                w.unparsed = [w.unparsed[k] for k in keep]
                w.unparsed_at = [w.unparsed_at[k] for k in keep]
        # After a return or goto nothing later in the nest is certain: all of it is unknown.
        jumps = _find_jumps(first, {"return", "goto"}, into_loops=True)
        if jumps and unknown is None:
            j = jumps[0]
            if isinstance(j, ir.Jump):
                kind = j.kind
            else:
                kind = "return" if re.search(r"\breturn\b", getattr(j, "text", "")) else "goto"
            label = loop_label(_loop_var_guess(first), first.header)
            unknown = self.diag(JumpInNest, j.span, kind=kind, pos=_pos(j.span), loop=label)
        self.walk(first, _Ctx((), (), unknown, {}, _Body()))
        return self.finish()

    def walk(self, s: ir.Stmt, ctx: _Ctx) -> None:
        if isinstance(s, ir.Block):
            inner = _Ctx(ctx.loops, ctx.guards, ctx.unknown, dict(ctx.env), ctx.body)
            for x in s.body:
                self.walk(x, inner)
        elif isinstance(s, ir.For):
            self.walk_for(s, ctx)
        elif isinstance(s, ir.If):
            self.walk_if(s, ctx)
        elif isinstance(s, (ir.While, ir.DoWhile)):
            kind = "while" if isinstance(s, ir.While) else "do"
            d = ctx.unknown
            if d is None:
                d = self.diag(WhileInNest, s.span, kind=kind, pos=_pos(s.span), loop=self.loop_name(ctx))
            # break/continue inside belong to this loop, not to ours
            inner = _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), _Body(foreign=True))
            self.walk(s.body, inner)
        elif isinstance(s, ir.Switch):
            d = ctx.unknown or ctx.body.dead
            if d is None:
                d = self.diag(SwitchInNest, s.span, pos=_pos(s.span))
            if ctx.body.dead is None and _find_jumps(s.body, {"continue"}, into_loops=False):
                ctx.body.dead = self.diag(
                    UnmodelledContinue, s.span, pos=_pos(s.span), loop=self.loop_name(ctx)
                )
            self.walk(s.body, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
        elif isinstance(s, ir.Labeled):
            self.walk(s.stmt, ctx)
        elif isinstance(s, ir.Jump):
            if s.kind == "continue" and not ctx.body.foreign:
                if ctx.unknown is not None:
                    if ctx.body.dead is None:
                        ctx.body.dead = self.diag(
                            UnmodelledContinue, s.span, pos=_pos(s.span), loop=self.loop_name(ctx)
                        )
                else:
                    ctx.body.kills.append(conj(list(ctx.guards)))
        elif isinstance(s, ir.Empty):
            return
        elif is_deep_cut(s):  # reported where it was cut; the nest is refused (see build)
            self.add_stmt(s, ctx, s.text, accesses=False)
        elif isinstance(s, ir.Unparsed):
            reason = f" ({s.reason})" if s.reason else ""
            self.diag(UnreadStatement, s.span, pos=_pos(s.span), reason=reason)
            if re.search(r"\bcontinue\b", s.text) and ctx.body.dead is None:
                ctx.body.dead = self.diag(UnmodelledContinue, s.span, pos=_pos(s.span), loop=self.loop_name(ctx))
            self.add_stmt(s, ctx, s.text, accesses=False)
        elif isinstance(s, ir.Decl):
            for d in s.declarators:
                if d.dims or d.pointer:
                    ctx.env[d.name] = ("array",)
                elif d.init is None:
                    ctx.env[d.name] = ("plain",)
                elif is_floating_type(s.type_name):
                    ctx.env[d.name] = ("error", NotAffine("float", d, f"'{d.name}' is a floating-point variable"))
                else:
                    try:
                        ctx.env[d.name] = ("subst", Converter(_Resolver(self, ctx.env)).lin(d.init))
                    except NotAffine as err:
                        ctx.env[d.name] = ("error", err)
            if any(d.init is not None for d in s.declarators):
                self.add_stmt(s, ctx, s.text or stmt_text(s))
        elif isinstance(s, ir.ExprStmt):
            self.add_stmt(s, ctx, s.text or c_text(s.expr))
        else:
            self.add_stmt(s, ctx, stmt_text(s))

    def loop_name(self, ctx: _Ctx) -> str:
        if not ctx.loops:
            return "the nest"
        lp = self.loops[ctx.loops[-1]]
        return loop_label(lp.display, lp.header)

    def current_guard(self, ctx: _Ctx) -> Cond:
        return conj(list(ctx.guards) + [negate(k) for k in ctx.body.kills])

    def walk_if(self, s: ir.If, ctx: _Ctx) -> None:
        try:
            c = Converter(_Resolver(self, ctx.env)).cond(s.cond)
        except NotAffine as err:
            d = ctx.unknown
            if d is None:
                d = self.diag(
                    NonAffineGuard,
                    s.cond.span,
                    text=c_text(s.cond),
                    pos=_pos(s.cond.span),
                    detail=_detail(err),
                )
            self.walk(s.then, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
            if s.other is not None:
                self.walk(s.other, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
            return
        self.walk(s.then, _Ctx(ctx.loops, ctx.guards + (c,), ctx.unknown, dict(ctx.env), ctx.body))
        if s.other is not None:
            self.walk(s.other, _Ctx(ctx.loops, ctx.guards + (negate(c),), ctx.unknown, dict(ctx.env), ctx.body))

    def add_stmt(self, s: ir.Stmt, ctx: _Ctx, text: str, accesses: bool = True) -> None:
        sid = f"S{len(self.stmts) + 1}"
        st = AStmt(
            id=sid,
            node=s,
            span=s.span,
            text=text.strip(),
            loops=ctx.loops,
            guard=self.current_guard(ctx),
            refusal=ctx.unknown or ctx.body.dead,
        )
        if accesses:
            st.accesses = self.accesses(s, ctx)
        self.stmts.append(st)

    # ---- loops

    def walk_for(self, s: ir.For, ctx: _Ctx) -> None:
        idx = len(self.loops)
        parent = ctx.loops[-1] if ctx.loops else None
        lp = ALoop(
            index=idx,
            display=_loop_var_guess(s),
            depth=len(ctx.loops),
            parent=parent,
            span=s.span,
            header=s.header,
            omp=s.omp,
            guard=self.current_guard(ctx),
        )
        self.loops.append(lp)
        if parent is not None:
            self.loops[parent].children.append(idx)
        env = dict(ctx.env)
        own = self.loop_header(s, lp, ctx, env)
        if own is not None and lp.display != "?":
            env[lp.display] = ("loop", idx)  # the body still refers to this loop's variable
        label = loop_label(lp.display, lp.header)
        if own is None:
            brk = _find_jumps(s, {"break"}, into_loops=False)
            if brk:
                own = self.diag(EarlyBreak, brk[0].span, pos=_pos(brk[0].span), loop=label)
        if own is None and not self.cut_refused:  # cut code "writes" every variable: no news there
            w = _find_var_write(s.body, lp.display)
            if w is not None:
                own = self.diag(LoopVarModified, w, loop=label, var=lp.display, pos=_pos(w))
        if own is not None:
            lp.constraint = None
        lp.refusal = ctx.unknown or ctx.body.dead or own
        body = _Body(loop=idx)
        self.walk(s.body, _Ctx(ctx.loops + (idx,), (), lp.refusal, env, body))

    def loop_header(self, s: ir.For, lp: ALoop, ctx: _Ctx, env: dict[str, tuple[Any, ...]]) -> Diagnostic | None:
        """Fill lp.constraint/step from the header; returns the refusal, if any."""
        label = loop_label(lp.display, lp.header)
        hdr = s.header
        if s.cond is None:
            return self.diag(UnboundedLoop, hdr, loop=label, detail="it has no condition")
        # -- init
        init_var: str | None = None
        init_expr: ir.Expr | None = None
        var_type: str | None = None
        if isinstance(s.init, ir.Decl):
            ds = s.init.declarators
            if len(ds) != 1:
                return self.diag(UnsupportedLoopForm, hdr, loop=label, detail="it declares several variables")
            if ds[0].init is None:
                return self.diag(UnsupportedLoopForm, hdr, loop=label, detail="its variable has no start value")
            init_var, init_expr, var_type = ds[0].name, ds[0].init, s.init.type_name
        elif isinstance(s.init, ir.ExprStmt):
            e = s.init.expr
            if isinstance(e, ir.Assign) and e.op == "=" and _write_target(e.target):
                init_var, init_expr = _write_target(e.target), e.value
            else:
                return self.diag(
                    UnsupportedLoopForm, hdr, loop=label,
                    detail=f"the initialization '{c_text(e)}' is not a single assignment",
                )  # fmt: skip
        elif s.init is not None:
            return self.diag(UnsupportedLoopForm, hdr, loop=label, detail="unsupported initialization")
        # -- step
        if s.step is None:
            return self.diag(UnsupportedLoopForm, hdr, loop=label, detail="it has no step")
        st = _parse_step(s.step)
        if isinstance(st, str):
            if st == "several":
                return self.diag(
                    UnsupportedLoopForm, s.step.span, loop=label,
                    detail=f"the step '{c_text(s.step)}' advances several variables",
                )  # fmt: skip
            return self.diag(
                NonConstantStep, s.step.span, loop=label, step=c_text(s.step),
                var=init_var or lp.display, detail=st,
            )  # fmt: skip
        step_var, sign, amount = st
        if init_var is not None and step_var != init_var:
            return self.diag(
                UnsupportedLoopForm, hdr, loop=label,
                detail=f"it initializes '{init_var}' but steps '{step_var}'",
            )  # fmt: skip
        v = step_var
        lp.display = v
        label = loop_label(v, lp.header)
        if var_type is None:
            d = self.info.lookup(v, s.span)
            var_type = d.type_name if d is not None else None
        if var_type is not None and is_floating_type(var_type):
            return self.diag(FloatingLoop, hdr, loop=label, var=v, type=var_type)
        conv_outer = Converter(_Resolver(self, ctx.env))
        # -- start value (evaluated before the variable is bound)
        if init_expr is None:
            if lp.depth > 0:
                return self.diag(
                    UnsupportedLoopForm, hdr, loop=label,
                    detail="it has no initialization, so its start value depends on earlier iterations",
                )  # fmt: skip
            text = f"{v} (value before the loop)"
            key = ("sym", text, mangle(v + "_start"))
            start = var(key, text)
            self.symbols_noted.add(key)
            self._pending_symbols.append((key, hdr))
        else:
            try:
                start = conv_outer.lin(init_expr)
            except NotAffine as err:
                return self.bound_diag(err, label, "start value", init_expr)
        env[v] = ("loop", lp.index)
        conv = Converter(_Resolver(self, env))
        key = lp.key
        # -- step amount
        try:
            amt = conv.lin(amount) if amount is not None else const(1)
        except NotAffine as err:
            return self.diag(
                NonConstantStep, s.step.span, loop=label, step=c_text(s.step), var=v, detail=_detail(err)
            )
        if not amt.is_const:
            return self.diag(
                NonConstantStep, s.step.span, loop=label, step=c_text(s.step), var=v,
                detail="the increment is not a constant",
            )  # fmt: skip
        step = sign * amt.const
        if step == 0:
            return self.diag(UnboundedLoop, s.step.span, loop=label, detail="its step is zero")
        lp.step = step
        # -- condition
        lp.cond_text = c_text(s.cond)
        try:
            cond = conv.cond(s.cond)
        except NotAffine as err:
            return self.bound_diag(err, label, "condition", s.cond)
        up = step > 0
        stride = abs(step)
        i = var(key, v)
        parts: list[Cond] = [ge(i, start) if up else ge(start, i)]
        if stride > 1:
            parts.append(eq(cmod(sub(i, start), stride), const(0)))
        bounded = False
        unsigned_note = ""
        for c in cond.args if isinstance(cond, And) else (cond,):
            shape = closure(c, key)
            if shape == "const":
                parts.append(c)
                continue
            target = _ne_target(c, key)
            if target is not None:
                # `i != e` stops exactly when i reaches e; e may be skipped (past the start,
                # or off the stride), then nothing stops it: termination is checked later.
                lp.uses_ne = True
                bounded = True
                if up:
                    parts.append(disj([gt(target, i), gt(start, target), ne(cmod(sub(target, start), stride), const(0))]))
                else:
                    parts.append(disj([gt(i, target), gt(target, start), ne(cmod(sub(start, target), stride), const(0))]))
                continue
            if shape is None:
                return self.diag(NonMonotoneCondition, s.cond.span, loop=label, text=lp.cond_text, var=v)
            if (shape == "down") == up:
                if not up and _unsigned_floor(c, key, var_type):
                    # always true: an unsigned variable wraps around instead of going below 0
                    unsigned_note = f"'{v}' is unsigned, so '{lp.cond_text}' is always true"
                    continue
                parts.append(c)  # becomes false once and stays false: a bound
                bounded = True
            else:
                parts.append(subst_cond(c, key, start))  # once true stays true: only the start matters
        if not bounded:
            # Nothing stops the variable; the loop is still fine when the condition is
            # false from the start (e.g. under an assumption). tripcount.model decides.
            lp.unbounded_detail = (
                unsigned_note or f"the condition '{lp.cond_text}' does not limit '{v}' in the direction it moves"
            )
        lp.constraint = conj(parts)
        return None

    def bound_diag(self, err: NotAffine, label: str, part: str, whole: ir.Expr) -> Diagnostic:
        node = err.node if isinstance(err.node, ir.Expr) else whole
        span = err.node.span if err.node is not None else whole.span
        if err.kind == "array":
            return self.diag(ArrayDependentBound, span, loop=label, part=part, text=c_text(node))
        if err.kind == "written":
            return self.diag(WrittenValueBound, span, loop=label, part=part, name=err.name or c_text(node))
        if err.kind == "float":
            return self.diag(NonAffineBound, span, loop=label, part=part, text=c_text(whole), detail=err.detail)
        return self.diag(NonAffineBound, span, loop=label, part=part, text=c_text(whole), detail=_detail(err))

    # ---- accesses

    def accesses(self, s: ir.Stmt, ctx: _Ctx) -> list[AAccess]:
        refs: list[tuple[ir.ArrayRef, str]] = []

        def visit(e: ir.Expr | None) -> None:
            if e is None:
                return
            if isinstance(e, ir.Assign):
                target(e.target, ("write",) if e.op == "=" else ("read", "write"))
                visit(e.value)
            elif isinstance(e, ir.IncDec):
                target(e.target, ("read", "write"))
            elif isinstance(e, ir.ArrayRef):
                refs.append((e, "read"))
                for x in e.indices:
                    visit(x)
            elif isinstance(e, ir.Unary) and e.op == "&" and isinstance(e.operand, ir.ArrayRef):
                for x in e.operand.indices:  # address only: no access
                    visit(x)
            else:
                for c in ir.children(e):
                    if isinstance(c, ir.Expr):
                        visit(c)

        def target(t: ir.Expr, kinds: tuple[str, ...]) -> None:
            while isinstance(t, ir.Cast):
                t = t.operand
            if isinstance(t, ir.ArrayRef):
                for k in kinds:
                    refs.append((t, k))
                for x in t.indices:
                    visit(x)
            elif not isinstance(t, ir.Name):
                visit(t)

        if isinstance(s, ir.ExprStmt):
            visit(s.expr)
        elif isinstance(s, ir.Decl):
            for d in s.declarators:
                visit(d.init)
        out: list[AAccess] = []
        conv = Converter(_Resolver(self, ctx.env))
        for ref, kind in refs:
            texts = tuple(c_text(x) for x in ref.indices)
            subs: tuple[Lin, ...] | None
            try:
                subs = tuple(conv.lin(x) for x in ref.indices)
            except NotAffine as err:
                subs = None
                if kind != "write" or not any(r is ref and k == "read" for r, k in refs):
                    self.diag(NonAffineSubscript, ref.span, text=c_text(ref), pos=_pos(ref.span), detail=_detail(err))
            etype, esize, extents = self.elem_info(ref, ctx)
            out.append(AAccess(ref.array, kind, subs, texts, ref.span, etype, esize, extents))
        return out

    def elem_info(self, ref: ir.ArrayRef, ctx: _Ctx) -> tuple[str | None, int | None, tuple[str | None, ...]]:
        d = self.info.lookup(ref.array, ref.span)
        if d is None or not d.is_array:
            return None, None, ()
        extents = tuple(None for _ in range(d.pointer)) + tuple(
            c_text(x) if x is not None else None for x in d.dims
        )
        if len(ref.indices) != d.pointer + len(d.dims):
            return None, None, extents
        bt = base_type(d.type_name)
        return bt or None, type_size(d.type_name), extents

    # ---- final naming

    def finish(self) -> ANest:
        used: set[Var] = set()
        for lp in self.loops:
            used |= cond_vars(lp.guard)
            if lp.constraint is not None:
                used |= cond_vars(lp.constraint)
        for st in self.stmts:
            used |= cond_vars(st.guard)
            for a in st.accesses:
                for x in a.subscripts or ():
                    used |= lin_vars(x)
        names: dict[tuple[Any, ...], str] = {}
        symbolic: dict[str, str] = {}
        taken: set[str] = set()
        pkeys = sorted({v.key for v in used if v.key[0] == "param"}, key=lambda k: k[1])
        skeys = sorted({v.key for v in used if v.key[0] == "sym"}, key=lambda k: k[1])
        for k in pkeys + skeys:
            base = mangle(k[1]) if k[0] == "param" else k[2]
            name, n = base, 1
            while name in taken:
                n += 1
                name = f"{base}_{n}"
            taken.add(name)
            names[k] = name
            if k[0] == "sym" or name != k[1]:
                symbolic[name] = k[1]
            elif k[1] in self.local_texts:
                symbolic[name] = self.local_texts[k[1]]
        used_keys = {v.key for v in used}
        for key, span in self._pending_symbols:
            if key in used_keys:
                self.diags.append(SymbolicParameter(span, path=self.path, text=key[1], name=names[key]))
        params = set(taken)
        for lp in self.loops:
            base = mangle(lp.display)
            anc = set()
            p = lp.parent
            while p is not None:
                anc.add(names[("loop", p)])
                p = self.loops[p].parent
            name, n = base, 0
            while name in params or name in anc:
                n += 1
                name = f"{base}_{n}"
            names[("loop", lp.index)] = name
        return ANest(
            path=self.path,
            function=self.info.fn.name,
            span=self.node.span,
            loops=self.loops,
            stmts=self.stmts,
            diagnostics=self.diags,
            names=names,
            params=tuple(sorted(taken)),
            symbolic=symbolic,
            source=stmt_text(self.node),
            scalar_types=self.info.scalar_types(self.node.span),
        )


def _detail(err: NotAffine) -> str:
    return err.detail


def _loop_var_guess(s: ir.For) -> str:
    """The loop variable's name as written (for messages), before the header is checked."""
    if isinstance(s.init, ir.Decl) and s.init.declarators:
        return s.init.declarators[0].name
    if isinstance(s.init, ir.ExprStmt) and isinstance(s.init.expr, ir.Assign):
        n = _write_target(s.init.expr.target)
        if n:
            return n
    st = _parse_step(s.step) if s.step is not None else None
    if isinstance(st, tuple):
        return st[0]
    return "?"


def _parse_step(e: ir.Expr) -> tuple[str, int, ir.Expr | None] | str:
    """(variable, sign, amount expression or None for 1), or a reason string ("several" for commas)."""
    if isinstance(e, ir.Binary) and e.op == ",":
        return "several"
    if isinstance(e, ir.IncDec):
        n = _write_target(e.target)
        if n:
            return (n, 1 if e.op == "++" else -1, None)
        return "it does not advance a variable"
    if isinstance(e, ir.Assign):
        n = _write_target(e.target)
        if not n:
            return "it does not advance a variable"
        if e.op == "+=":
            return (n, 1, e.value)
        if e.op == "-=":
            return (n, -1, e.value)
        if e.op == "=" and isinstance(e.value, ir.Binary):
            b = e.value
            if b.op == "+" and _write_target(b.left) == n:
                return (n, 1, b.right)
            if b.op == "+" and _write_target(b.right) == n:
                return (n, 1, b.left)
            if b.op == "-" and _write_target(b.left) == n:
                return (n, -1, b.right)
        return "only additions of a constant are counted"
    return "it is not an increment"


def _unsigned_floor(c: Cond, key: tuple[Any, ...], var_type: str | None) -> bool:
    """`v >= k` with k <= 0 for an unsigned v: always true in C (v wraps around instead)."""
    if var_type is None:
        return False
    bt = base_type(var_type)
    if not (bt.startswith("unsigned") or bt in ("size_t", "uintptr_t") or re.fullmatch(r"uint\d+_t", bt)):
        return False
    if not isinstance(c, Rel) or c.kind != "ge" or len(c.expr.terms) != 1:
        return False
    a, k = c.expr.terms[0]
    return isinstance(a, Var) and a.key == key and k == 1 and c.expr.const >= 0


def _ne_target(c: Cond, key: tuple[Any, ...]) -> Lin | None:
    """For `v != e` (e free of v) return e."""
    if not isinstance(c, Rel) or c.kind != "ne":
        return None
    for a, k in c.expr.terms:
        if isinstance(a, Var) and a.key == key and k in (1, -1):
            rest = sub(c.expr, atom(a, k))
            if mentions(rest, key):
                return None
            return scale(rest, -k)  # k*v + rest != 0  <=>  v != -rest/k
    return None


# --------------------------------------------------------------------------
# Entry point


def outermost_fors(s: ir.Stmt) -> list[ir.For]:
    """`for` statements not inside another `for` (they may sit in ifs, blocks, whiles)."""
    out: list[ir.For] = []

    def go(n: ir.Node) -> None:
        if isinstance(n, ir.For):
            out.append(n)
            return
        if isinstance(n, ir.Expr):
            return
        for c in ir.children(n):
            go(c)

    go(s)
    return out


def extract_nests(unit: ir.TranslationUnit, path: str | None = None) -> tuple[list[ANest], list[Diagnostic]]:
    """Affine nests of every outermost `for` of every function, in source order.

    Never raises on any IR: a failure inside one nest becomes an InternalError
    diagnostic of that (empty) nest.
    """
    path = path or unit.path
    nests: list[ANest] = []
    file_diags: list[Diagnostic] = []
    try:
        kept, cuts = cut_deep_globals(unit.globals)
        file_diags.extend(c.diagnostic(path, in_nest=False) for c in cuts)
        globs = global_decls(replace(unit, globals=kept))
    except Exception as exc:  # pragma: no cover - defensive
        globs = []
        file_diags.append(InternalError(unit.span, path=path, what=f"globals: {type(exc).__name__}: {exc}"))
    for fn in unit.functions:
        try:
            fn, cuts = cut_deep_function(fn)
            info = FunctionInfo(fn, globs, cuts)
            fors = outermost_fors(fn.body)
        except Exception as exc:
            file_diags.append(InternalError(fn.span, path=path, what=f"function {fn.name}: {type(exc).__name__}: {exc}"))
            continue
        for f in fors:
            try:
                nests.append(_NestBuilder(info, f, path).build())
            except Exception as exc:
                err = InternalError(f.span, path=path, what=f"{type(exc).__name__}: {exc}")
                nests.append(ANest(path, fn.name, f.span, [], [], [err], {}, (), {}, ""))
        # cuts outside every nest: the first one of the function is reported for the file
        outside = [c for c in cuts if id(c.node) not in info.cuts_reported]
        if outside:
            file_diags.append(outside[0].diagnostic(path, in_nest=False))
    return nests, file_diags
