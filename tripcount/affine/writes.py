# Affine stage: scans of the IR -- the expressions of a node, what a nest
# assigns (by name, also in text that was not parsed), jumps, and writes to
# a loop variable.

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass, field

from tripcount import ir
from tripcount.affine.depth import DEEP_TEXT
from tripcount.ir import Span

# --------------------------------------------------------------------------
# Scanning helpers over the IR


def walk_exprs(node: ir.Node) -> Iterator[ir.Expr]:
    """All expression nodes under `node` (statements and expressions), pre-order."""
    return (n for n in ir.walk(node) if isinstance(n, ir.Expr))


def write_target(e: ir.Expr) -> str | None:
    while isinstance(e, ir.Cast):
        e = e.operand
    return e.name if isinstance(e, ir.Name) else None


def array_target(e: ir.Expr) -> str | None:
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
            name = write_target(t)
            if name:
                w.add(name, n.span)
            arr = array_target(t)
            if arr:
                w.arrays.add(arr)
        elif isinstance(n, ir.Unary) and n.op == "&":
            name = write_target(n.operand)
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
            name = write_target(n.target)
        elif isinstance(n, ir.Unary) and n.op == "&":
            name = write_target(n.operand)
        if name and name not in shadow:
            w.add(name, n.span)
        for c in ir.children(n):
            go(c, shadow)

    go(node, frozenset())
    return w


def find_jumps(node: ir.Node, kinds: set[str], into_loops: bool) -> list[ir.Node]:
    """Jump statements of the given kinds; `into_loops=False` stops at nested loops/switches."""
    loops = (ir.For, ir.While, ir.DoWhile, ir.Switch)

    def into(n: ir.Node) -> bool:
        if isinstance(n, ir.Expr) or (isinstance(n, ir.Jump) and n.kind in kinds):
            return False
        # a nested switch owns its `break`s but not the `continue`s
        return into_loops or not isinstance(n, loops) or (isinstance(n, ir.Switch) and "break" not in kinds)

    out: list[ir.Node] = []
    for c in ir.children(node) if isinstance(node, ir.For) else [node]:
        if isinstance(node, ir.For) and c is not node.body:
            continue
        for n in ir.walk(c, into):
            if isinstance(n, ir.Jump) and n.kind in kinds:
                out.append(n)
            elif isinstance(n, ir.Unparsed) and any(re.search(rf"\b{k}\b", n.text) for k in kinds):
                out.append(n)
    return out


def find_var_write(body: ir.Stmt, name: str) -> Span | None:
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
        if isinstance(n, (ir.Assign, ir.IncDec)) and write_target(n.target) == name:
            return n.span
        if isinstance(n, ir.Unary) and n.op == "&" and write_target(n.operand) == name:
            return n.span
        for c in ir.children(n):
            r = go(c)
            if r:
                return r
        return None

    return go(body)
