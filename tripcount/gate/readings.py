# Readings of the typed nest summaries for the gate: the largest innermost
# working set, and the exact ratio of leading terms between two versions
# (evaluated with a small exact evaluator of our own: no sympy on this path).

from __future__ import annotations

import ast
import math
import re
from fractions import Fraction
from typing import Any

from tripcount.analysis.summary import LoopSummary, NestSummary, WorkingSetSummary

# --------------------------------------------------------------------------
# Readings of the typed nest summaries


def worst_innermost(nest: NestSummary) -> tuple[LoopSummary, WorkingSetSummary] | None:
    """The innermost loop with the largest working set value (exact or bound), and that working set."""
    best: tuple[LoopSummary, WorkingSetSummary] | None = None
    for lp in nest.innermost_loops():
        ws = lp.working_set
        if ws is not None and ws.occupancy is not None and (best is None or ws.occupancy > best[1].occupancy):
            best = (lp, ws)
    return best


def has_working_sets(nest: NestSummary) -> bool:
    """True when the footprint analysis attached working sets to this nest's loops."""
    return any(lp.working_set is not None for lp in nest.loops)



def summaries_of(result: dict[str, Any]) -> list[NestSummary]:
    """The typed summaries of an analyzed file (what the cache or the pipeline gave)."""
    return [NestSummary.from_json(s) for s in result.get("summaries", [])]



# --------------------------------------------------------------------------
# Exact evaluation of leading terms (no sympy on this path)

_ALLOWED = (ast.Expression, ast.BinOp, ast.UnaryOp, ast.Constant, ast.Name, ast.Load, ast.Call,
            ast.Add, ast.Sub, ast.Mult, ast.Div, ast.Pow, ast.USub, ast.UAdd, ast.FloorDiv, ast.Mod)


def eval_expr(text: str, values: dict[str, int]) -> Fraction:
    """Evaluate our formula notation (+ - * / ^, parentheses, floor/ceil/min/max) exactly."""
    tree = ast.parse(text.replace("^", "**"), mode="eval")
    for node in ast.walk(tree):
        if not isinstance(node, _ALLOWED):
            raise ValueError(f"unexpected {type(node).__name__} in '{text}'")

    def ev(n: ast.AST) -> Fraction:
        if isinstance(n, ast.Expression):
            return ev(n.body)
        if isinstance(n, ast.Constant) and isinstance(n.value, int | float) and not isinstance(n.value, bool):
            return Fraction(n.value)
        if isinstance(n, ast.Name):
            if n.id not in values:
                raise KeyError(n.id)
            return Fraction(values[n.id])
        if isinstance(n, ast.UnaryOp):
            v = ev(n.operand)
            return -v if isinstance(n.op, ast.USub) else v
        if isinstance(n, ast.BinOp):
            a, b = ev(n.left), ev(n.right)
            if isinstance(n.op, ast.Add):
                return a + b
            if isinstance(n.op, ast.Sub):
                return a - b
            if isinstance(n.op, ast.Mult):
                return a * b
            if isinstance(n.op, ast.Div):
                return a / b
            if isinstance(n.op, ast.FloorDiv):
                return Fraction(a // b)
            if isinstance(n.op, ast.Mod):
                return a - b * (a // b)
            if isinstance(n.op, ast.Pow):
                if b.denominator != 1 or abs(b) > 64:
                    raise ValueError("unsupported exponent")
                return a ** int(b)
        if isinstance(n, ast.Call) and isinstance(n.func, ast.Name):
            args = [ev(a) for a in n.args]
            f = n.func.id
            if f == "floor" and len(args) == 1:
                return Fraction(math.floor(args[0]))
            if f == "ceil" and len(args) == 1:
                return Fraction(math.ceil(args[0]))
            if f == "min" and args:
                return min(args)
            if f == "max" and args:
                return max(args)
        raise ValueError(f"cannot evaluate '{text}'")

    return ev(tree)


def _names(text: str) -> set[str]:
    return set(re.findall(r"[A-Za-z_]\w*", text)) - {"floor", "ceil", "min", "max"}


def leading_ratio(old: list[str], new: list[str], at: dict[str, int]) -> float | None:
    """new/old of the summed leading terms at the sizes (scale-free: both are homogeneous).

    Parameters without a size are given the largest configured size (or 1000),
    i.e. the sizes are taken as comparable.
    """
    if not old or not new:
        return None
    names = set().union(*(_names(t) for t in old + new))
    fill = at.get("*") or (max(at.values()) if at else 1000)
    point = {n: at.get(n, fill) for n in names}
    try:
        a = sum((eval_expr(t, point) for t in old), Fraction(0))
        b = sum((eval_expr(t, point) for t in new), Fraction(0))
    except (ValueError, KeyError, ZeroDivisionError, SyntaxError, OverflowError):
        return None
    if a <= 0:
        return None
    return float(b / a)


