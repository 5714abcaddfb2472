# Affine stage: the header of a `for` loop -- its variable, start, constant
# step and condition, turned into the loop's affine constraint, or refused
# with the reason.

from __future__ import annotations

import re
from typing import Any

from tripcount import ir
from tripcount.affine.convert import Converter, NotAffine
from tripcount.affine.ctext import loop_label, mangle
from tripcount.affine.inttypes import int_type, range_issues, unsigned_condition
from tripcount.affine.lin import (
    And,
    Cond,
    Lin,
    Rel,
    Var,
    atom,
    closure,
    cmod,
    conj,
    const,
    disj,
    eq,
    ge,
    gt,
    mentions,
    ne,
    scale,
    sub,
    subst_cond,
    var,
)
from tripcount.affine.nests import ALoop
from tripcount.affine.walkctx import Builder, _Ctx, _Resolver
from tripcount.affine.writes import write_target
from tripcount.ctable import base_type, is_floating_type
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.model import (
    ArrayDependentBound,
    FloatingLoop,
    IntegerWrap,
    NonAffineBound,
    NonConstantStep,
    NonMonotoneCondition,
    UnboundedLoop,
    UnsignedComparison,
    UnsupportedLoopForm,
    WrittenValueBound,
)
from tripcount.ir import c_text


def loop_header(b: Builder, s: ir.For, lp: ALoop, ctx: _Ctx, env: dict[str, tuple[Any, ...]]) -> Diagnostic | None:
    """Fill lp.constraint/step from the header; returns the refusal, if any."""
    label = loop_label(lp.display, lp.header)
    hdr = s.header
    if s.cond is None:
        return b.diag(UnboundedLoop, hdr, loop=label, detail="it has no condition")
    # -- init
    init_var: str | None = None
    init_expr: ir.Expr | None = None
    var_type: str | None = None
    if isinstance(s.init, ir.Decl):
        ds = s.init.declarators
        if len(ds) != 1:
            return b.diag(UnsupportedLoopForm, hdr, loop=label, detail="it declares several variables")
        if ds[0].init is None:
            return b.diag(UnsupportedLoopForm, hdr, loop=label, detail="its variable has no start value")
        init_var, init_expr, var_type = ds[0].name, ds[0].init, s.init.ctype
    elif isinstance(s.init, ir.ExprStmt):
        e = s.init.expr
        if isinstance(e, ir.Assign) and e.op == "=" and write_target(e.target):
            init_var, init_expr = write_target(e.target), e.value
        else:
            return b.diag(
                UnsupportedLoopForm, hdr, loop=label,
                detail=f"the initialization '{c_text(e)}' is not a single assignment",
            )  # fmt: skip
    elif s.init is not None:
        return b.diag(UnsupportedLoopForm, hdr, loop=label, detail="unsupported initialization")
    # -- step
    if s.step is None:
        return b.diag(UnsupportedLoopForm, hdr, loop=label, detail="it has no step")
    st = parse_step(s.step)
    if isinstance(st, str):
        if st == "several":
            return b.diag(
                UnsupportedLoopForm, s.step.span, loop=label,
                detail=f"the step '{c_text(s.step)}' advances several variables",
            )  # fmt: skip
        return b.diag(
            NonConstantStep, s.step.span, loop=label, step=c_text(s.step),
            var=init_var or lp.display, detail=st,
        )  # fmt: skip
    step_var, sign, amount = st
    if init_var is not None and step_var != init_var:
        return b.diag(
            UnsupportedLoopForm, hdr, loop=label,
            detail=f"it initializes '{init_var}' but steps '{step_var}'",
        )  # fmt: skip
    v = step_var
    lp.display = v
    label = loop_label(v, lp.header)
    if var_type is None:
        d = b.info.lookup(v, s.span)
        var_type = d.type_name if d is not None else None
    if var_type is not None and is_floating_type(var_type):
        return b.diag(FloatingLoop, hdr, loop=label, var=v, type=var_type)
    conv_outer = Converter(_Resolver(b, ctx.env))
    # -- start value (evaluated before the variable is bound)
    if init_expr is None:
        if lp.depth > 0:
            return b.diag(
                UnsupportedLoopForm, hdr, loop=label,
                detail="it has no initialization, so its start value depends on earlier iterations",
            )  # fmt: skip
        text = f"{v} (value before the loop)"
        key = ("sym", text, mangle(v + "_start"))
        start = var(key, text)
        b.symbols_noted.add(key)
        b._pending_symbols.append((key, hdr))
    else:
        try:
            start = conv_outer.lin(init_expr)
        except NotAffine as err:
            return bound_diag(b, err, label, "start value", init_expr)
    env[v] = ("loop", lp.index)
    conv = Converter(_Resolver(b, env))
    key = lp.key
    # -- step amount
    try:
        amt = conv.lin(amount) if amount is not None else const(1)
    except NotAffine as err:
        return b.diag(
            NonConstantStep, s.step.span, loop=label, step=c_text(s.step), var=v, detail=err.detail
        )
    if not amt.is_const:
        return b.diag(
            NonConstantStep, s.step.span, loop=label, step=c_text(s.step), var=v,
            detail="the increment is not a constant",
        )  # fmt: skip
    step = sign * amt.const
    if step == 0:
        return b.diag(UnboundedLoop, s.step.span, loop=label, detail="its step is zero")
    lp.step = step
    # -- condition, read with C's integer conversions (see inttypes)
    lp.cond_text = c_text(s.cond)

    def lookup(name: str) -> str | None:
        d = b.info.lookup(name, s.span)
        return d.type_name if d is not None else None

    vt = int_type(var_type)
    try:
        cond, wrapped = unsigned_condition(conv, s.cond, v, vt, lookup)
        issues = (range_issues(conv, s.cond, v, vt, base_type(var_type or ""), start,
                               c_text(init_expr) if init_expr is not None else f"{v} before the loop",
                               step, lookup) if vt is not None else [])
    except NotAffine as err:
        return bound_diag(b, err, label, "condition", s.cond)
    for bound, ct in wrapped:
        b.diag(UnsignedComparison, bound.span, loop=label, bound=c_text(bound), var=v,
               type=("unsigned" if ct.bits == 32 else f"a {ct.bits}-bit unsigned value"),
               shifted=f"{c_text(bound, 12)} + {1 << ct.bits}")
    extra: list[Cond] = []
    for issue in issues:
        if issue.assume is None:
            return b.diag(UnboundedLoop, issue.bound.span, loop=label, detail=issue.what)
        b.diag(IntegerWrap, issue.bound.span, loop=label, what=issue.what, when=issue.when)
        extra.append(issue.assume)
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
            return b.diag(NonMonotoneCondition, s.cond.span, loop=label, text=lp.cond_text, var=v)
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
    lp.constraint = conj(parts + extra)
    return None

def bound_diag(b: Builder, err: NotAffine, label: str, part: str, whole: ir.Expr) -> Diagnostic:
    node = err.node if isinstance(err.node, ir.Expr) else whole
    span = err.node.span if err.node is not None else whole.span
    if err.kind == "array":
        return b.diag(ArrayDependentBound, span, loop=label, part=part, text=c_text(node))
    if err.kind == "written":
        return b.diag(WrittenValueBound, span, loop=label, part=part, name=err.name or c_text(node))
    if err.kind == "float":
        return b.diag(NonAffineBound, span, loop=label, part=part, text=c_text(whole), detail=err.detail)
    return b.diag(NonAffineBound, span, loop=label, part=part, text=c_text(whole), detail=err.detail)

# ---- accesses


def loop_var_guess(s: ir.For) -> str:
    """The loop variable's name as written (for messages), before the header is checked."""
    if isinstance(s.init, ir.Decl) and s.init.declarators:
        return s.init.declarators[0].name
    if isinstance(s.init, ir.ExprStmt) and isinstance(s.init.expr, ir.Assign):
        n = write_target(s.init.expr.target)
        if n:
            return n
    st = parse_step(s.step) if s.step is not None else None
    if isinstance(st, tuple):
        return st[0]
    return "?"


def parse_step(e: ir.Expr) -> tuple[str, int, ir.Expr | None] | str:
    """(variable, sign, amount expression or None for 1), or a reason string ("several" for commas)."""
    if isinstance(e, ir.Binary) and e.op == ",":
        return "several"
    if isinstance(e, ir.IncDec):
        n = write_target(e.target)
        if n:
            return (n, 1 if e.op == "++" else -1, None)
        return "it does not advance a variable"
    if isinstance(e, ir.Assign):
        n = write_target(e.target)
        if not n:
            return "it does not advance a variable"
        if e.op == "+=":
            return (n, 1, e.value)
        if e.op == "-=":
            return (n, -1, e.value)
        if e.op == "=" and isinstance(e.value, ir.Binary):
            b = e.value
            if b.op == "+" and write_target(b.left) == n:
                return (n, 1, b.right)
            if b.op == "+" and write_target(b.right) == n:
                return (n, 1, b.left)
            if b.op == "-" and write_target(b.left) == n:
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
