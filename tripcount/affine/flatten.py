# Affine stage: flattened subscripts. `a[i*n + j]` (and a macro `IDX(i, j)`
# that expands to it) is how C and C++ index a matrix stored in one block;
# the product `i*n` of a loop variable and a size is not affine. When the
# subscript is `P*X + R` with one size expression P (free of loop variables)
# and affine X and R, the access is the two-dimensional `a[X][R]` exactly
# when 0 <= R < P holds on the statement's domain (then distinct (X, R)
# pairs are distinct elements) -- the delinearization of the literature on
# dependence analysis. This module finds the split; tripcount.model proves
# the condition on the domain, or keeps the reference out with a note.

from __future__ import annotations

from tripcount import ir
from tripcount.affine.convert import Converter, NotAffine
from tripcount.affine.lin import Lin, Var, add, const, lin_vars, scale


def _terms(e: ir.Expr, sign: int, out: list[tuple[int, ir.Expr]], depth: int = 0) -> None:
    if depth > 64:
        raise NotAffine("other", e, "subscript too deep")
    if isinstance(e, ir.Binary) and e.op in ("+", "-"):
        _terms(e.left, sign, out, depth + 1)
        _terms(e.right, sign if e.op == "+" else -sign, out, depth + 1)
    elif isinstance(e, ir.Unary) and e.op in ("-", "+"):
        _terms(e.operand, -sign if e.op == "-" else sign, out, depth + 1)
    else:
        out.append((sign, e))


def _has_loop(x: Lin) -> bool:
    return any(isinstance(a, Var) and a.key[0] == "loop" for a in lin_vars(x))


def split_flat(conv: Converter, e: ir.Expr) -> tuple[Lin, Lin, Lin] | None:
    """(X, R, P) with e == P*X + R, P free of loop variables; None when e is not of that shape."""
    terms: list[tuple[int, ir.Expr]] = []
    try:
        _terms(e, 1, terms)
        xs: list[Lin] = []
        rs: list[Lin] = [const(0)]
        p: Lin | None = None
        for sign, t in terms:
            if isinstance(t, ir.Binary) and t.op == "*":
                a, b = conv.lin(t.left), conv.lin(t.right)
                if a.is_const or b.is_const:
                    rs.append(scale(conv.lin(t), sign))
                    continue
                if _has_loop(a) and not _has_loop(b):
                    x, q = a, b
                elif _has_loop(b) and not _has_loop(a):
                    x, q = b, a
                else:
                    return None
                if p is not None and q != p:
                    return None
                p = q
                xs.append(scale(x, sign))
            else:
                rs.append(scale(conv.lin(t), sign))
    except NotAffine:
        return None
    if p is None:
        return None
    return add(*xs), add(*rs), p
