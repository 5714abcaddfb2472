# Affine stage: `while` and `do` loops. A `while` that is a counted loop in
# disguise --
#     i = a;  while (i < n) { ...; i++; }
# (the statement before it sets its variable, the condition compares that
# variable, the last statement of the body steps it by a constant, nothing
# else in the body writes it, and no break/continue/goto/return can leave
# early) -- is rewritten into the `for` it is, and counted like one. Every
# other `while`/`do` outside a nest gets a diagnostic naming it and the
# reason; the `for` nests inside it are counted per iteration of it, and say
# so. (Inside a nest they are refused by the nest walk, TC206.)

from __future__ import annotations

from dataclasses import replace

from tripcount import ir
from tripcount.affine.loops import parse_step
from tripcount.affine.writes import collect_writes, find_jumps, write_target
from tripcount.diagnostics import Diagnostic, Phrase
from tripcount.diagnostics.model import PerWhileIteration, UncountedWhile
from tripcount.ir import c_text

_RELATIONS = ("<", "<=", ">", ">=", "!=")


def disguised_for(prev: ir.Stmt | None, w: ir.While) -> tuple[ir.For | None, str | Phrase]:
    """The `for` a `while` stands for (with `prev` as its initialization), or None and the reason."""
    cond = w.cond
    if not (isinstance(cond, ir.Binary) and cond.op in _RELATIONS):
        return None, f"its condition '{c_text(cond)}' is not one comparison, so its exit depends on the data"
    body = list(w.body.body) if isinstance(w.body, ir.Block) else [w.body]
    last = body[-1] if body else None
    step = parse_step(last.expr) if isinstance(last, ir.ExprStmt) else "no step"
    if isinstance(step, str):
        return None, (f"its exit depends on the data (the condition '{c_text(cond)}' is not on a variable "
                      "that the end of the body steps by a constant)")
    v = step[0]
    names = {write_target(cond.left), write_target(cond.right)}
    if v not in names:
        return None, f"its condition '{c_text(cond)}' does not test '{v}', the variable its body steps"
    sets = (isinstance(prev, ir.ExprStmt) and isinstance(prev.expr, ir.Assign) and prev.expr.op == "="
            and write_target(prev.expr.target) == v)
    declares = (isinstance(prev, ir.Decl) and len(prev.declarators) == 1 and prev.declarators[0].name == v
                and prev.declarators[0].init is not None and not prev.declarators[0].dims
                and not prev.declarators[0].pointer)
    if not (sets or declares):
        return None, f"'{v}' is not set by the statement right before it"
    rest = ir.Block(w.body.span, tuple(body[:-1]))
    if v in collect_writes(rest).scalars:
        return None, f"its body writes '{v}' before the step"
    jumps = find_jumps(rest, {"break", "continue"}, into_loops=False) + find_jumps(rest, {"return", "goto"}, True)
    if jumps:
        kind = jumps[0].kind if isinstance(jumps[0], ir.Jump) else "jump"
        return None, Phrase((f"'{kind}' at ", jumps[0].span, " can leave it early"))
    header = ir.Span(w.span.line, w.span.column, cond.span.end_line, cond.span.end_column + 1)
    return ir.For(w.span, prev, cond, last.expr, rest, header), ""


def rewrite_whiles(fn: ir.Function) -> ir.Function:
    """The function with every counted loop in disguise turned into its `for`."""
    if not any(isinstance(n, ir.While) for n in ir.walk(fn.body)):
        return fn
    return replace(fn, body=_stmt(fn.body))


def _stmt(s: ir.Stmt) -> ir.Stmt:
    if isinstance(s, ir.Block):
        out: list[ir.Stmt] = []
        for x in s.body:
            x = _stmt(x)
            if isinstance(x, ir.While) and out:
                f, _ = disguised_for(out[-1], x)
                if f is not None:
                    out[-1] = f
                    continue
            out.append(x)
        return replace(s, body=tuple(out))
    if isinstance(s, (ir.For, ir.While, ir.DoWhile, ir.Labeled, ir.Switch)):
        field = "stmt" if isinstance(s, ir.Labeled) else "body"
        return replace(s, **{field: _stmt(getattr(s, field))})
    if isinstance(s, ir.If):
        return replace(s, then=_stmt(s.then), other=_stmt(s.other) if s.other is not None else None)
    return s


def uncounted_whiles(fn: ir.Function, path: str) -> tuple[list[Diagnostic], dict[int, Diagnostic]]:
    """Diagnostics for the `while`/`do` loops outside every `for`, and, per outermost `for`
    inside one (by id), the note that it is counted per iteration of the innermost such loop."""
    diags: list[Diagnostic] = []
    per_nest: dict[int, Diagnostic] = {}
    stack: list[tuple[ir.Node, ir.Stmt | None, ir.Node | None]] = [(fn.body, None, None)]
    while stack:
        n, enclosing, prev = stack.pop()
        if isinstance(n, ir.For):
            if enclosing is not None:
                kind = "while" if isinstance(enclosing, ir.While) else "do"
                per_nest[id(n)] = PerWhileIteration(n.span, path=path, kind=kind, while_at=enclosing.span)
            continue
        if isinstance(n, ir.Expr):
            continue
        if isinstance(n, (ir.While, ir.DoWhile)):
            kind = "while" if isinstance(n, ir.While) else "do"
            if isinstance(n, ir.While):
                _, reason = disguised_for(prev if isinstance(prev, ir.Stmt) else None, n)
            else:
                reason = "'do' loops are not modelled (the body runs before the first test)"
            diags.append(UncountedWhile(n.span, path=path, kind=kind, pos=n.span, function=fn.name,
                                        reason=reason))
            enclosing = n
        kids = ir.children(n)
        for k in range(len(kids) - 1, -1, -1):
            stack.append((kids[k], enclosing, kids[k - 1] if k > 0 and isinstance(n, ir.Block) else None))
    return diags, per_nest
