# Tests of tripcount/ir.py: the traversal every stage uses (ir.walk).

from __future__ import annotations

from tripcount import ir
from tripcount.frontend import parse_text

SRC = """
void f(int n, double *a) {
  for (int i = 0; i < n; i++) {
    if (i > 2) a[i] = 0;
    for (int j = 0; j < i; j++) a[j] += 1;
  }
  while (n) n--;
}
"""


def _body() -> ir.Block:
    unit, diags = parse_text(SRC)
    assert not diags
    return unit.functions[0].body


def test_walk_is_preorder_in_field_order():
    kinds = [type(n).__name__ for n in ir.walk(_body()) if isinstance(n, ir.Stmt)]
    # the loop's header (init, condition, step) comes before its body
    assert kinds == ["Block", "For", "Decl", "Block", "If", "ExprStmt", "For", "Decl", "ExprStmt",
                     "While", "ExprStmt"]


def test_walk_yields_every_node_once():
    nodes = list(ir.walk(_body()))
    assert len({id(n) for n in nodes}) == len(nodes)
    names = [n.name for n in nodes if isinstance(n, ir.Name)]
    assert names.count("n") == 3 and names.count("i") >= 5


def test_walk_prunes_where_told():
    body = _body()
    fors = [n for n in ir.walk(body, lambda n: not isinstance(n, ir.For)) if isinstance(n, ir.For)]
    assert len(fors) == 1  # the inner loop is below the outer one
    assert len([n for n in ir.walk(body) if isinstance(n, ir.For)]) == 2


def test_walk_needs_no_recursion():
    e: ir.Expr = ir.Name(ir.Span.point(1, 1), "x")
    for _ in range(20_000):  # far deeper than Python's recursion limit
        e = ir.Unary(e.span, "-", e)
    assert sum(1 for _ in ir.walk(e)) == 20_001
