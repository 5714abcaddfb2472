# Affine stage: C text of IR statements for messages, and names that isl accepts.

from __future__ import annotations

import re

from tripcount import ir
from tripcount.diagnostics import LoopRef
from tripcount.ir import Span, c_text
from tripcount.names import mangle

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


def loop_label(var: str, header: Span) -> LoopRef:
    """How messages name a loop: "loop 'for (i ...)' at 12:5", rendered when shown."""
    return LoopRef(var, header)


# --------------------------------------------------------------------------
# Names: isl needs plain ASCII identifiers that are not words of its own
# notation; C allows more (universal character names, `$`). Mangling is
# deterministic so that the same source always gives the same names.

# (tripcount.names.mangle: shared with the --at names, which must name the same parameters)


def symbol_base(text: str) -> str:
    """A parameter name for a loop-invariant C expression: `len(s)` -> `len_s`, `s->n` -> `s_n`."""
    words = re.findall(r"[A-Za-z_][A-Za-z0-9_]*|\d+", text)
    base = "_".join(words) or "value"
    if text.lstrip().startswith("*"):
        base += "_val"
    return mangle(base)
