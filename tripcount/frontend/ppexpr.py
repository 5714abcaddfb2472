# Front end: the integer expressions of #if and #elif, evaluated as C does.

from __future__ import annotations


class CondEvalError(Exception):
    """An #if condition outside what the evaluator reads."""


class CondEvaluator:
    """Integer evaluation of an #if condition (C precedence, values already numbers)."""

    _BINARY = [
        ("||",), ("&&",), ("|",), ("^",), ("&",), ("==", "!="), ("<", ">", "<=", ">="),
        ("<<", ">>"), ("+", "-"), ("*", "/", "%"),
    ]

    def __init__(self, values: list[int | str]) -> None:
        self.values = values
        self.pos = 0

    def _peek(self) -> int | str | None:
        return self.values[self.pos] if self.pos < len(self.values) else None

    def ternary(self) -> int:
        c = self.binary(0)
        if self._peek() == "?":
            self.pos += 1
            a = self.ternary()
            if self._peek() != ":":
                raise CondEvalError("'?' without ':'")
            self.pos += 1
            b = self.ternary()
            return a if c else b
        return c

    def binary(self, level: int) -> int:
        if level == len(self._BINARY):
            return self.unary()
        ops = self._BINARY[level]
        left = self.binary(level + 1)
        while True:
            op = self._peek()
            if not isinstance(op, str) or op not in ops:
                return left
            self.pos += 1
            right = self.binary(level + 1)
            left = _apply(op, left, right)

    def unary(self) -> int:
        v = self._peek()
        if v is None:
            raise CondEvalError("the condition ends too early")
        self.pos += 1
        if isinstance(v, int):
            return v
        if v == "(":
            r = self.ternary()
            if self._peek() != ")":
                raise CondEvalError("unbalanced parentheses")
            self.pos += 1
            return r
        if v in ("-", "+", "!", "~"):
            x = self.unary()
            return {"-": -x, "+": x, "!": int(not x), "~": ~x}[v]
        raise CondEvalError(f"unexpected '{v}'")


_OPS = {
    "|": lambda a, b: a | b, "^": lambda a, b: a ^ b, "&": lambda a, b: a & b,
    "==": lambda a, b: int(a == b), "!=": lambda a, b: int(a != b),
    "<": lambda a, b: int(a < b), ">": lambda a, b: int(a > b),
    "<=": lambda a, b: int(a <= b), ">=": lambda a, b: int(a >= b),
    "<<": lambda a, b: a << b, ">>": lambda a, b: a >> b,
    "+": lambda a, b: a + b, "-": lambda a, b: a - b, "*": lambda a, b: a * b,
}


def _apply(op: str, a: int, b: int) -> int:
    if op == "||":
        return int(bool(a or b))
    if op == "&&":
        return int(bool(a and b))
    if op == "/":
        q = abs(a) // abs(b)
        return q if (a >= 0) == (b >= 0) else -q  # C truncates toward zero
    if op == "%":
        return a - b * _apply("/", a, b)
    if op in ("<<", ">>") and not 0 <= b <= 64:
        raise CondEvalError("shift out of range")
    r = _OPS[op](a, b)
    if abs(r) >= 1 << 128:
        raise CondEvalError("the value is too large")  # C's integers are 64 bits at most
    return r
