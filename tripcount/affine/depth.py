# Affine stage: code nested too deeply is cut before any recursive visitor sees it.

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.model import ExpressionTooDeep
from tripcount.diagnostics.source import NestingTooDeep
from tripcount.ir import Span

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
            return NestingTooDeep(self.at, path=path, where=self.at, limit=MAX_DEPTH)
        effect = "; the nest around it is not counted" if in_nest else ""
        return ExpressionTooDeep(self.at, path=path, pos=self.at, limit=MAX_EXPR_LEVEL, effect=effect)


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
