# Affine stage: conversion of IR expressions to the affine language (or NotAffine, with the reason).

from __future__ import annotations

import re
from typing import Any

from tripcount import ir
from tripcount.affine.lin import (
    Cond,
    Lin,
    Rel,
    add,
    cdiv,
    cmod,
    conj,
    const,
    disj,
    eq,
    extremum,
    fdiv,
    fmod,
    ge,
    gt,
    ne,
    negate,
    scale,
    select,
    sub,
)
from tripcount.ctable import ABS_CALLS, is_floating_type, is_integer_type, type_size
from tripcount.ir import c_text

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
ABS = ABS_CALLS | {"ABS"}  # the library functions and the common macro
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
            if is_integer_type(e.ctype):
                return self.lin(e.operand)
            if is_floating_type(e.ctype):
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
        if isinstance(e, ir.Cast) and is_integer_type(e.ctype):
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
