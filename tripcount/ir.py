# Stage 2 of the pipeline: the intermediate representation.
#
# The lark Transformer (frontend/build.py) turns a parse tree into these small
# frozen dataclasses and does nothing else. Every node carries the source span
# it came from, in the coordinates of the user's original file (macro
# expansions take the span of the macro invocation), so that every later
# diagnostic can point at the right place.
#
# Positions are 1-based lines and columns, like compilers. `end_line` and
# `end_column` point one past the last character of the node (exclusive end),
# which is what editors expect for ranges.

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True, order=True)
class Span:
    """A source range: 1-based line/column of the first character, exclusive end."""

    line: int
    column: int
    end_line: int
    end_column: int

    @staticmethod
    def point(line: int, column: int) -> Span:
        """A zero-width span at one position."""
        return Span(line, column, line, column)

    def cover(self, other: Span) -> Span:
        """Smallest span containing both spans."""
        a = min((self.line, self.column), (other.line, other.column))
        b = max((self.end_line, self.end_column), (other.end_line, other.end_column))
        return Span(a[0], a[1], b[0], b[1])


NO_SPAN = Span(1, 1, 1, 1)


@dataclass(frozen=True)
class Node:
    """Base of all IR nodes."""

    span: Span


# --------------------------------------------------------------------------
# Expressions


@dataclass(frozen=True)
class Expr(Node):
    """Base of expressions."""


@dataclass(frozen=True)
class IntLit(Expr):
    """Integer constant (suffixes such as U, L stripped; value exact)."""

    value: int


@dataclass(frozen=True)
class FloatLit(Expr):
    """Floating constant; `text` is the spelling in the source."""

    text: str


@dataclass(frozen=True)
class Name(Expr):
    """An identifier used as a value."""

    name: str


@dataclass(frozen=True)
class Unary(Expr):
    """Prefix operator: one of - + ! ~ * & (dereference/address-of kept as text ops)."""

    op: str
    operand: Expr


@dataclass(frozen=True)
class Binary(Expr):
    """Binary operator: + - * / % << >> & | ^ < <= > >= == != && || and the comma ','."""

    op: str
    left: Expr
    right: Expr


@dataclass(frozen=True)
class Ternary(Expr):
    """`cond ? then : other` (this is what MIN/MAX macros usually expand to)."""

    cond: Expr
    then: Expr
    other: Expr


@dataclass(frozen=True)
class Call(Expr):
    """Call of a named function, e.g. sqrt(x), min(a, b), len(s)."""

    func: str
    args: tuple[Expr, ...]


@dataclass(frozen=True)
class ArrayRef(Expr):
    """Subscripted access `A[i][j]` (also pointer style `p[i]`): array name and subscripts."""

    array: str
    indices: tuple[Expr, ...]


@dataclass(frozen=True)
class Cast(Expr):
    """`(type) operand`."""

    type_name: str
    operand: Expr
    resolved: str = ""  # type_name with typedef names replaced by their types ("" when none)

    @property
    def ctype(self) -> str:
        """The C type as the compiler sees it (typedef names resolved)."""
        return self.resolved or self.type_name


@dataclass(frozen=True)
class Assign(Expr):
    """Assignment or compound assignment: op is '=', '+=', '-=', '*=', '/=', '%=', ..."""

    op: str
    target: Expr
    value: Expr


@dataclass(frozen=True)
class IncDec(Expr):
    """`++x`, `x++`, `--x`, `x--`: op is '++' or '--'."""

    op: str
    prefix: bool
    target: Expr


@dataclass(frozen=True)
class Opaque(Expr):
    """An expression the IR does not model (member access, sizeof, ...), kept as source text."""

    text: str


# --------------------------------------------------------------------------
# Statements


@dataclass(frozen=True)
class Stmt(Node):
    """Base of statements."""


@dataclass(frozen=True)
class ExprStmt(Stmt):
    """An expression statement `expr;`; `text` is its source text without the ';'."""

    expr: Expr
    text: str


@dataclass(frozen=True)
class Declarator(Node):
    """One declared name: `*p`, `A[N][M]`, `x = 3`. `dims` holds None for `[]`."""

    name: str
    pointer: int = 0
    dims: tuple[Expr | None, ...] = ()
    init: Expr | None = None


@dataclass(frozen=True)
class Decl(Stmt):
    """A declaration `const double x = 1, A[N];` (local or global).

    `type_name` is the base type with qualifiers, e.g. "const double", "unsigned int".
    """

    type_name: str
    declarators: tuple[Declarator, ...]
    text: str = ""
    resolved: str = ""  # type_name with typedef names replaced by their types ("" when none)

    @property
    def ctype(self) -> str:
        """The C type as the compiler sees it (typedef names resolved)."""
        return self.resolved or self.type_name


@dataclass(frozen=True)
class Block(Stmt):
    """`{ ... }`."""

    body: tuple[Stmt, ...]


@dataclass(frozen=True)
class OmpClauses(Node):
    """An OpenMP work-sharing pragma attached to the `for` that follows it.

    directive: "parallel for" or "for" (also "parallel for simd", "for simd" spelled out).
    schedule: "static", "dynamic", "guided", "auto", "runtime" or None when absent.
    chunk: chunk-size expression or None. collapse: 1 when absent.
    num_threads: expression or None. text: the pragma line as written.
    """

    directive: str
    schedule: str | None = None
    chunk: Expr | None = None
    collapse: int = 1
    num_threads: Expr | None = None
    text: str = ""


@dataclass(frozen=True)
class For(Stmt):
    """`for (init; cond; step) body`.

    init is a Decl, an ExprStmt or None; cond and step are expressions or None.
    `span` starts at the `for` keyword and ends after the body; `header` covers
    `for (...)`. `omp` is the OpenMP pragma right before the loop, if any.
    """

    init: Stmt | None
    cond: Expr | None
    step: Expr | None
    body: Stmt
    header: Span
    omp: OmpClauses | None = None


@dataclass(frozen=True)
class If(Stmt):
    """`if (cond) then [else other]`."""

    cond: Expr
    then: Stmt
    other: Stmt | None = None


@dataclass(frozen=True)
class While(Stmt):
    """`while (cond) body`."""

    cond: Expr
    body: Stmt


@dataclass(frozen=True)
class DoWhile(Stmt):
    """`do body while (cond);`."""

    body: Stmt
    cond: Expr


@dataclass(frozen=True)
class Jump(Stmt):
    """`break;`, `continue;`, `return [value];`, `goto label;` (kind is the keyword)."""

    kind: str
    value: Expr | None = None
    label: str | None = None


@dataclass(frozen=True)
class Labeled(Stmt):
    """`label: stmt` (also `case X:` / `default:`, with label 'case'/'default')."""

    label: str
    stmt: Stmt


@dataclass(frozen=True)
class Switch(Stmt):
    """`switch (value) body`."""

    value: Expr
    body: Stmt


@dataclass(frozen=True)
class Empty(Stmt):
    """The empty statement `;`."""


@dataclass(frozen=True)
class Unparsed(Stmt):
    """Source the grammar could not read as a statement; skipped with a note.

    `reason` says why (it becomes a diagnostic when the text lies inside a loop nest):
    text, or a diagnostics Phrase when it names a position (rendered late).
    """

    text: str
    reason: Any = ""


# --------------------------------------------------------------------------
# Top level


@dataclass(frozen=True)
class Param(Node):
    """A function parameter: `double A[restrict N][M]`, `const float *x`, `int n`."""

    name: str
    type_name: str
    pointer: int = 0
    dims: tuple[Expr | None, ...] = ()
    resolved: str = ""  # type_name with typedef names replaced by their types ("" when none)

    @property
    def ctype(self) -> str:
        """The C type as the compiler sees it (typedef names resolved)."""
        return self.resolved or self.type_name


@dataclass(frozen=True)
class Function(Node):
    """A function definition; `span` covers the whole definition."""

    name: str
    return_type: str
    params: tuple[Param, ...]
    body: Block


@dataclass(frozen=True)
class Macro(Node):
    """`#define NAME body` or `#define NAME(a, b) body` (params None for object-like)."""

    name: str
    params: tuple[str, ...] | None
    body: str


@dataclass(frozen=True)
class ParseProblem(Node):
    """Something the front end could not read; it is reported and skipped."""

    message: str


@dataclass(frozen=True)
class TranslationUnit(Node):
    """One source file: its functions, global declarations and macros, in source order."""

    path: str
    functions: tuple[Function, ...]
    globals: tuple[Decl, ...] = ()
    macros: tuple[Macro, ...] = ()
    problems: tuple[ParseProblem, ...] = ()


# --------------------------------------------------------------------------
# Traversal


def children(node: Node) -> list[Node]:
    """The direct child nodes of `node`, in field order."""
    out: list[Node] = []
    for name in node.__dataclass_fields__:
        if name == "span" or name == "header":
            continue
        value = getattr(node, name)
        if isinstance(value, Node):
            out.append(value)
        elif isinstance(value, tuple):
            out.extend(v for v in value if isinstance(v, Node))
    return out


def walk(node: Node, into: Callable[[Node], bool] | None = None) -> Iterator[Node]:
    """`node` and every node below it, pre-order in field order, without recursion.

    With `into`, the children of a node are visited only where `into(node)` is true
    (the node itself is still yielded).
    """
    stack = [node]
    while stack:
        n = stack.pop()
        yield n
        if into is None or into(n):
            stack.extend(reversed(children(n)))


# C text of expressions (minimal parentheses): messages, reports, cache keys

_PREC = {
    ",": 1,
    "||": 4,
    "&&": 5,
    "|": 6,
    "^": 7,
    "&": 8,
    "==": 9,
    "!=": 9,
    "<": 10,
    "<=": 10,
    ">": 10,
    ">=": 10,
    "<<": 11,
    ">>": 11,
    "+": 12,
    "-": 12,
    "*": 13,
    "/": 13,
    "%": 13,
}


def c_text(e: Expr | None, prec: int = 0) -> str:
    """C source text of an IR expression (minimal parentheses)."""
    if e is None:
        return ""
    s, p = _text(e)
    return f"({s})" if p < prec else s


def _text(e: Expr) -> tuple[str, int]:
    if isinstance(e, IntLit):
        return (str(e.value), 16) if e.value >= 0 else (str(e.value), 14)
    if isinstance(e, FloatLit):
        return e.text, 16
    if isinstance(e, Name):
        return e.name, 16
    if isinstance(e, Opaque):
        return e.text, 16
    if isinstance(e, Unary):
        inner = c_text(e.operand, 14)
        sep = " " if inner.startswith(e.op) and e.op in "+-" else ""
        return f"{e.op}{sep}{inner}", 14
    if isinstance(e, Cast):
        return f"({e.type_name}){c_text(e.operand, 14)}", 14
    if isinstance(e, Binary):
        p = _PREC.get(e.op, 3)
        sep = ", " if e.op == "," else f" {e.op} "
        return f"{c_text(e.left, p)}{sep}{c_text(e.right, p + 1)}", p
    if isinstance(e, Ternary):
        return f"{c_text(e.cond, 4)} ? {c_text(e.then, 3)} : {c_text(e.other, 3)}", 3
    if isinstance(e, Call):
        return f"{e.func}({', '.join(c_text(a, 2) for a in e.args)})", 15
    if isinstance(e, ArrayRef):
        return e.array + "".join(f"[{c_text(i)}]" for i in e.indices), 15
    if isinstance(e, Assign):
        return f"{c_text(e.target, 14)} {e.op} {c_text(e.value, 2)}", 2
    if isinstance(e, IncDec):
        t = c_text(e.target, 15)
        return (f"{e.op}{t}", 14) if e.prefix else (f"{t}{e.op}", 15)
    return type(e).__name__, 16
