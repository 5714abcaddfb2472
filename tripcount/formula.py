# Reader of tripcount's formula notation: the `expr` and `when` texts of every
# count (JSON `pieces`, the text report, hover, the gate).
#
# The notation is plain arithmetic and C conditions over the size parameters:
# integers, names, + - * / ^ (power), floor(...), %, comparisons, && || !,
# true/false and parentheses. `--verify` reads back exactly what was printed
# with this module, so a printing mistake (a missing parenthesis, a % applied
# to a negative operand) is caught as a mismatch with enumeration.
#
# Semantics (the README's "Notation"): values are exact rationals. `/` is exact
# division, except in a condition outside floor(...) where it is C's integer
# division of two integers (truncation toward zero), since conditions are C
# syntax. `%` is C's remainder (ISO C99 6.5.5: the sign of the dividend).
# floor(x) is the mathematical floor. `^` is power (right-associative, binding
# tighter than unary minus: -N^2 is -(N^2)); it never appears in a condition.
# Precedence otherwise follows C.

from __future__ import annotations

import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from functools import lru_cache
from typing import Any

__all__ = ["Formula", "FormulaError", "parse", "parse_condition", "parse_expr", "piecewise_value"]

Value = Fraction | bool


class FormulaError(ValueError):
    """A text that is not in the formula notation (with its 1-based column)."""

    def __init__(self, message: str, text: str, column: int) -> None:
        super().__init__(f"column {column}: {message} in {text!r}")
        self.column = column


_TOKEN = re.compile(
    r"\s*(?:(?P<num>\d+)|(?P<name>[A-Za-z_][A-Za-z0-9_]*)"
    r"|(?P<op>&&|\|\||==|!=|<=|>=|[-+*/%^()<>!,]))"
)


def _tokens(text: str) -> list[tuple[str, str, int]]:
    out = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None or m.end() == pos:
            if text[pos:].strip() == "":
                break
            col = pos + len(text[pos:]) - len(text[pos:].lstrip()) + 1
            raise FormulaError(f"unexpected {text[col - 1]!r}", text, col)
        kind = m.lastgroup
        out.append((kind, m.group(kind), m.start(kind) + 1))
        pos = m.end()
    out.append(("end", "", len(text) + 1))
    return out


# A node is a closure over the parameter values; building closures once makes
# evaluating one formula at thousands of points cheap.
Node = Callable[[Mapping[str, int]], Any]


def _c_div(a: Fraction, b: Fraction) -> Fraction:
    q = abs(a.numerator) // abs(b.numerator)
    return Fraction(q if (a >= 0) == (b > 0) else -q)


def _c_rem(a: Fraction, b: Fraction) -> Fraction:
    return a - b * _c_div(a, b)


def _floor(x: Fraction) -> Fraction:
    return Fraction(x.numerator // x.denominator)


def _int_operands(op: str, a: Fraction, b: Fraction) -> None:
    if a.denominator != 1 or b.denominator != 1:
        raise ZeroDivisionError(f"'{op}' of non-integers {a} and {b}")
    if b == 0:
        raise ZeroDivisionError(f"'{op}' by zero")


class _Parser:
    """Precedence climbing over the token list; linear in the text length."""

    _BINARY = {
        "||": 1, "&&": 2, "==": 3, "!=": 3, "<": 4, "<=": 4, ">": 4, ">=": 4,
        "+": 5, "-": 5, "*": 6, "/": 6, "%": 6,
    }

    def __init__(self, text: str, condition: bool) -> None:
        self.text = text
        self.toks = _tokens(text)
        self.i = 0
        self.names: set[str] = set()
        self.c_div = condition  # C integer division for '/' outside floor()
        self.max_depth = 200

    def peek(self) -> tuple[str, str, int]:
        return self.toks[self.i]

    def take(self, value: str | None = None) -> tuple[str, str, int]:
        tok = self.toks[self.i]
        if value is not None and tok[1] != value:
            want = "end of text" if value == "" else repr(value)
            raise FormulaError(f"expected {want}, found {tok[1] or 'end of text'!r}", self.text, tok[2])
        self.i += 1
        return tok

    def parse(self) -> tuple:
        node = self.binary(1, 0)
        self.take("")
        return node

    def binary(self, level: int, depth: int) -> tuple:
        if depth > self.max_depth:
            raise FormulaError("nesting too deep", self.text, self.peek()[2])
        left = self.unary(depth + 1)
        while True:
            kind, op, _ = self.peek()
            prec = self._BINARY.get(op) if kind == "op" else None
            if prec is None or prec < level:
                return left
            self.take()
            right = self.binary(prec + 1, depth + 1)
            left = self.combine(op, left, right)

    def combine(self, op: str, a: tuple, b: tuple) -> tuple:
        if op == "/" and self.c_div:
            op = "cdiv"
        return ("bin", op, a, b)

    def unary(self, depth: int) -> tuple:
        kind, tok, col = self.peek()
        if kind == "op" and tok in "-+!":
            self.take()
            inner = self.unary(depth + 1)
            if tok == "-":
                return ("neg", inner)
            if tok == "!":
                return ("not", inner)
            return inner
        return self.power(depth)

    def power(self, depth: int) -> tuple:
        base = self.atom(depth)
        if self.peek()[1] == "^":
            self.take()
            return ("pow", base, self.unary(depth + 1))  # right-associative
        return base

    def atom(self, depth: int) -> tuple:
        kind, tok, col = self.take()
        if kind == "num":
            return ("num", Fraction(int(tok)))
        if kind == "name":
            if tok in ("true", "false"):
                return ("bool", tok == "true")
            if tok in ("floor", "min", "max") and self.peek()[1] == "(":
                return self.call(tok, depth, col)
            self.names.add(tok)
            return ("name", tok)
        if tok == "(":
            inner = self.binary(1, depth + 1)
            self.take(")")
            return inner
        raise FormulaError(f"unexpected {tok or 'end of text'!r}", self.text, col)

    def call(self, fn: str, depth: int, col: int) -> tuple:
        self.take("(")
        saved = self.c_div
        if fn == "floor":
            self.c_div = False
        args = [self.binary(1, depth + 1)]
        while self.peek()[1] == ",":
            self.take()
            args.append(self.binary(1, depth + 1))
        self.c_div = saved
        self.take(")")
        if fn == "floor" and len(args) != 1:
            raise FormulaError("floor takes one argument", self.text, col)
        return ("call", fn, tuple(args))


_COMPARE = {
    "==": lambda x, y: x == y, "!=": lambda x, y: x != y,
    "<": lambda x, y: x < y, "<=": lambda x, y: x <= y,
    ">": lambda x, y: x > y, ">=": lambda x, y: x >= y,
}


def _compile(t: tuple) -> Node:
    """Closures for a syntax tree: built once, evaluated at many points."""
    tag = t[0]
    if tag in ("num", "bool"):
        c = t[1]
        return lambda v: c
    if tag == "name":
        n = t[1]
        return lambda v: Fraction(v[n])
    if tag == "neg":
        a = _compile(t[1])
        return lambda v: -a(v)
    if tag == "not":
        a = _compile(t[1])
        return lambda v: not a(v)
    if tag == "pow":
        a, e = _compile(t[1]), _compile(t[2])

        def pw(v):
            k = e(v)
            if k.denominator != 1:
                raise ZeroDivisionError(f"non-integer power {k}")
            return a(v) ** int(k)
        return pw
    if tag == "call":
        args = [_compile(x) for x in t[2]]
        if t[1] == "floor":
            x = args[0]
            return lambda v: _floor(x(v))
        pick = min if t[1] == "min" else max
        return lambda v: pick(f(v) for f in args)
    op, a, b = t[1], _compile(t[2]), _compile(t[3])
    if op == "||":
        return lambda v: bool(a(v)) or bool(b(v))
    if op == "&&":
        return lambda v: bool(a(v)) and bool(b(v))
    if op in _COMPARE:
        f = _COMPARE[op]
        return lambda v: f(a(v), b(v))
    if op == "+":
        return lambda v: a(v) + b(v)
    if op == "-":
        return lambda v: a(v) - b(v)
    if op == "*":
        return lambda v: a(v) * b(v)
    if op == "/":
        return lambda v: a(v) / b(v)
    g = _c_rem if op == "%" else _c_div

    def integer_op(v):
        x, y = a(v), b(v)
        _int_operands("%" if op == "%" else "/", x, y)
        return g(x, y)
    return integer_op


def _to_sympy(t: tuple, symbols: Mapping[str, Any]) -> Any:
    import sympy

    tag = t[0]
    if tag == "num":
        return sympy.Integer(int(t[1]))
    if tag == "name":
        return symbols[t[1]]
    if tag == "neg":
        return -_to_sympy(t[1], symbols)
    if tag == "pow":
        return _to_sympy(t[1], symbols) ** _to_sympy(t[2], symbols)
    if tag == "call":
        args = [_to_sympy(x, symbols) for x in t[2]]
        fn = {"floor": sympy.floor, "min": sympy.Min, "max": sympy.Max}[t[1]]
        return fn(*args)
    if tag == "bin" and t[1] in "+-*/":
        a, b = _to_sympy(t[2], symbols), _to_sympy(t[3], symbols)
        return {"+": a + b, "-": a - b, "*": a * b, "/": a / b}[t[1]]
    raise ValueError("only expressions (no conditions, %, or C division) convert to sympy")


@dataclass(frozen=True)
class Formula:
    """A parsed expression or condition; `names` are its parameters."""

    text: str
    condition: bool
    names: frozenset[str]
    tree: tuple
    _node: Node = field(repr=False, compare=False)

    def evaluate(self, values: Mapping[str, int]) -> Value:
        """Exact value at integer parameter values (a bool for a condition).

        Raises KeyError for a parameter without a value and ZeroDivisionError
        for a division by zero or a % of non-integers.
        """
        return self._node(values)

    def to_sympy(self) -> Any:
        """The expression as a sympy object, every name a sympy Symbol (also
        N, S, Q, I, E, which sympy's own parser reads as its constants)."""
        import sympy

        symbols = {n: sympy.Symbol(n) for n in self.names}
        return _to_sympy(self.tree, symbols)


@lru_cache(maxsize=4096)
def parse_expr(text: str) -> Formula:
    """Read an `expr` text: exact arithmetic, '/' is exact division."""
    p = _Parser(text, condition=False)
    tree = p.parse()
    return Formula(text, False, frozenset(p.names), tree, _compile(tree))


@lru_cache(maxsize=4096)
def parse_condition(text: str) -> Formula:
    """Read a `when` text: C conditions; '/' outside floor() is C integer division."""
    p = _Parser(text, condition=True)
    tree = p.parse()
    return Formula(text, True, frozenset(p.names), tree, _compile(tree))


def parse(text: str) -> Formula:
    """Read a formula or condition: a condition when it has a comparison,
    && || ! or is true/false, else an expression."""
    toks = _tokens(text)
    is_cond = any(
        k == "op" and t in ("&&", "||", "==", "!=", "<", "<=", ">", ">=", "!") or t in ("true", "false")
        for k, t, _ in toks
    )
    return parse_condition(text) if is_cond else parse_expr(text)


def piecewise_value(pieces: Sequence[Mapping[str, str]], values: Mapping[str, int]) -> Fraction:
    """Value of a printed piecewise count ([{'when', 'expr'}, ...], 0 outside
    every piece) at `values`. Raises ValueError when two pieces that hold give
    different values (the pieces are printed as disjoint)."""
    found: Fraction | None = None
    for p in pieces:
        when = p.get("when") or "true"
        if when == "true" or parse_condition(when).evaluate(values):
            v = parse_expr(p["expr"]).evaluate(values)
            if found is not None and v != found:
                raise ValueError(f"two pieces hold with values {found} and {v}")
            found = v
    return Fraction(0) if found is None else found
