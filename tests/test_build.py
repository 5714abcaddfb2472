# Tests of tripcount/frontend/build.py: the IR the front end builds for each
# C construct, its spans and source texts, and OpenMP clauses. The helpers at
# the top (also used by test_parser.py) turn IR into short strings and lists.
# C semantics checked here are those of the C standard (C11, 6.5-6.8) and the
# OpenMP 4.5 specification (loop construct, 2.7.1) -- from memory.

from __future__ import annotations

import os

import pytest

from tripcount import ir
from tripcount.frontend import parse_file, parse_text

INPUTS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "inputs", "frontend")


# ------------------------------------------------------------------ helpers
def ctext(e: ir.Expr | None) -> str | None:
    """An expression as C text; every nested binary operation is parenthesised."""
    if e is None:
        return None

    def inner(x: ir.Expr) -> str:
        s = ctext(x)
        return f"({s})" if isinstance(x, (ir.Binary, ir.Assign, ir.Ternary)) else s

    if isinstance(e, ir.IntLit):
        return str(e.value)
    if isinstance(e, ir.FloatLit):
        return e.text
    if isinstance(e, ir.Name):
        return e.name
    if isinstance(e, ir.Opaque):
        return f"opaque<{e.text}>"
    if isinstance(e, ir.Unary):
        return f"{e.op}{inner(e.operand)}"
    if isinstance(e, ir.Binary):
        return f"{inner(e.left)} {e.op} {inner(e.right)}"
    if isinstance(e, ir.Assign):
        return f"{inner(e.target)} {e.op} {inner(e.value)}"
    if isinstance(e, ir.Ternary):
        return f"{inner(e.cond)} ? {inner(e.then)} : {inner(e.other)}"
    if isinstance(e, ir.Call):
        return f"{e.func}({', '.join(ctext(a) for a in e.args)})"
    if isinstance(e, ir.ArrayRef):
        return e.array + "".join(f"[{ctext(i)}]" for i in e.indices)
    if isinstance(e, ir.Cast):
        return f"({e.type_name}){inner(e.operand)}"
    if isinstance(e, ir.IncDec):
        return f"{e.op}{inner(e.target)}" if e.prefix else f"{inner(e.target)}{e.op}"
    raise AssertionError(f"unknown expression {e!r}")


def shape(s: ir.Stmt | None):
    """A statement as nested lists: ['for', init, cond, step, body], ['expr', text], ..."""
    if s is None:
        return None
    if isinstance(s, ir.Block):
        return [shape(x) for x in s.body]
    if isinstance(s, ir.For):
        return ["for", shape(s.init), ctext(s.cond), ctext(s.step), shape(s.body)]
    if isinstance(s, ir.ExprStmt):
        return ctext(s.expr)
    if isinstance(s, ir.Decl):
        return ["decl", s.type_name, [decl_plain(x) for x in s.declarators]]
    if isinstance(s, ir.If):
        return ["if", ctext(s.cond), shape(s.then), shape(s.other)]
    if isinstance(s, ir.While):
        return ["while", ctext(s.cond), shape(s.body)]
    if isinstance(s, ir.DoWhile):
        return ["do", shape(s.body), ctext(s.cond)]
    if isinstance(s, ir.Switch):
        return ["switch", ctext(s.value), shape(s.body)]
    if isinstance(s, ir.Jump):
        return [s.kind] + ([ctext(s.value)] if s.value is not None else []) + \
            ([s.label] if s.label else [])
    if isinstance(s, ir.Labeled):
        return ["label", s.label, shape(s.stmt)]
    if isinstance(s, ir.Empty):
        return ["empty"]
    if isinstance(s, ir.Unparsed):
        return ["unparsed", s.text]
    raise AssertionError(f"unknown statement {s!r}")


def decl_plain(x: ir.Declarator) -> str:
    """`*p`, `A[N][]`, `x = 3` as text."""
    dims = "".join(f"[{ctext(d) if d is not None else ''}]" for d in x.dims)
    init = f" = {ctext(x.init)}" if x.init is not None else ""
    return "*" * x.pointer + x.name + dims + init


def body(src: str) -> list:
    """The shape of a snippet's statements (the snippet must read cleanly)."""
    tu, diags = parse_text(src, snippet=True)
    assert [d for d in diags if d.severity != "note"] == [], [d.render() for d in diags]
    return shape(tu.functions[0].body)


def first(src: str) -> ir.Stmt:
    """The first statement of a snippet."""
    tu, _ = parse_text(src, snippet=True)
    return tu.functions[0].body.body[0]


def span4(n: ir.Node | ir.Span) -> tuple[int, int, int, int]:
    s = n if isinstance(n, ir.Span) else n.span
    return (s.line, s.column, s.end_line, s.end_column)


# ------------------------------------------------------------------ for loops
@pytest.mark.parametrize("src, init, cond, step", [
    ("for (int i = a; i < n; i++) ;", ["decl", "int", ["i = a"]], "i < n", "i++"),
    ("for (i = a; i <= n; ++i) ;", "i = a", "i <= n", "++i"),
    ("for (i = n; i > 0; i--) ;", "i = n", "i > 0", "i--"),
    ("for (i = n; i >= 0; --i) ;", "i = n", "i >= 0", "--i"),
    ("for (i = 0; i != n; i += 4) ;", "i = 0", "i != n", "i += 4"),
    ("for (i = n; i > 0 && j < m; i -= 2) ;", "i = n", "(i > 0) && (j < m)", "i -= 2"),
    ("for (i = 0; i < n; i = i + 3) ;", "i = 0", "i < n", "i = (i + 3)"),
    ("for (i = 0; i < n; i = 3 + i) ;", "i = 0", "i < n", "i = (3 + i)"),
    ("for (i = 1; i < n; i *= 2) ;", "i = 1", "i < n", "i *= 2"),
    ("for (;;) ;", None, None, None),
    ("for (i = 0, j = n; i < j; i++, j--) ;", "(i = 0) , (j = n)", "i < j", "i++ , j--"),
    ("for (unsigned long k = 0UL; k < 10; k++) ;", ["decl", "unsigned long", ["k = 0"]], "k < 10", "k++"),
])
def test_for_spellings(src, init, cond, step):
    assert body(src) == [["for", init, cond, step, ["empty"]]]


def test_for_span_and_header():
    src = "x = 0;\n  for (int i = 0;\n       i < n; i++) {\n    a[i] = 0;\n  }\n"
    loop = parse_text(src, snippet=True)[0].functions[0].body.body[1]
    assert isinstance(loop, ir.For)
    assert span4(loop) == (2, 3, 5, 4)  # from `for` to one past the '}'
    assert span4(loop.header) == (2, 3, 3, 19)  # `for (...)`, one past the ')'
    assert loop.init.text == "int i = 0"


def test_nested_loops_snippet():
    assert body("for (i = 0; i < n; i++) for (j = 0; j <= i; j++) s += a[i][j];") == [
        ["for", "i = 0", "i < n", "i++",
         ["for", "j = 0", "j <= i", "j++", "s += a[i][j]"]]]


# ------------------------------------------------------------------ statements
def test_if_else_and_dangling_else():
    # C11 6.8.4.1: an else binds to the nearest if
    assert body("if (a) if (b) x = 1; else x = 2;") == [
        ["if", "a", ["if", "b", "x = 1", "x = 2"], None]]
    assert body("if (a) { x = 1; } else { x = 2; }") == [["if", "a", ["x = 1"], ["x = 2"]]]


def test_while_do_switch_jumps_labels():
    src = """
    while (n > 0) n--;
    do { n++; } while (n < 10);
    switch (n) { case 1: x = 2; break; case 2: default: x = 3; }
    for (;;) { if (x) continue; break; }
    goto out;
    out: return n + 1;
    """
    assert body(src) == [
        ["while", "n > 0", "n--"],
        ["do", ["n++"], "n < 10"],
        ["switch", "n", [["label", "case", "x = 2"], ["break"],
                         ["label", "case", ["label", "default", "x = 3"]]]],
        ["for", None, None, None, [["if", "x", ["continue"], None], ["break"]]],
        ["goto", "out"],
        ["label", "out", ["return", "n + 1"]],
    ]


def test_declarations():
    src = """
    int half = n / 2;
    double t = 0.0;
    double tmp[64], *p, grid[N][M];
    const int A[] = {1, 2, 3};
    static unsigned int count;
    """
    assert body(src) == [
        ["decl", "int", ["half = n / 2"]],
        ["decl", "double", ["t = 0.0"]],
        ["decl", "double", ["tmp[64]", "*p", "grid[N][M]"]],
        ["decl", "const int", ["A[] = opaque<{1, 2, 3}>"]],
        ["decl", "static unsigned int", ["count"]],
    ]


def test_more_declaration_spellings():
    src = """
    struct p q = {.x = 1, .y = {2, 3}};
    int a[3] = {[0] = 1, [2] = 5,};
    long long int c = 1LL;
    double const k = 2;
    double complex z = 0;
    double tmp[n][m];
    for (int i = 0, n2 = 10; i < n2; i++) ;
    """
    assert body(src) == [
        ["decl", "struct p", ["q = opaque<{.x = 1, .y = {2, 3}}>"]],
        ["decl", "int", ["a[3] = opaque<{[0] = 1, [2] = 5,}>"]],
        ["decl", "long long int", ["c = 1"]],
        ["decl", "double const", ["k = 2"]],
        ["decl", "double complex", ["z = 0"]],
        ["decl", "double", ["tmp[n][m]"]],
        ["for", ["decl", "int", ["i = 0", "n2 = 10"]], "i < n2", "i++", ["empty"]],
    ]


def test_decl_text_and_declarator_fields():
    d = first("double tmp[64], *p = q;")
    assert isinstance(d, ir.Decl)
    assert d.text == "double tmp[64], *p = q"
    tmp, p = d.declarators
    assert (tmp.name, tmp.pointer, ctext(tmp.dims[0])) == ("tmp", 0, "64")
    assert (p.name, p.pointer, ctext(p.init)) == ("p", 1, "q")


def test_empty_statement_and_calls():
    assert body("; f(x, 2); g(); x++; --y;") == [
        ["empty"], "f(x, 2)", "g()", "x++", "--y"]


# ------------------------------------------------------------------ expressions
@pytest.mark.parametrize("src, text", [
    ("x = (double)i;", "x = (double)i"),
    ("x = (int)(n / 2);", "x = (int)(n / 2)"),
    ("x = (unsigned long)n;", "x = (unsigned long)n"),
    ("p = (double *)q;", "p = (double *)q"),
    ("x = sizeof(double) + sizeof x;", "x = (opaque<sizeof(double)> + opaque<sizeof x>)"),
    ("x = s.a + p->x;", "x = (opaque<s.a> + opaque<p->x>)"),
    ("x = s.a[i];", "x = s.a[i]"),
    ("y = A[i][j] + p[i] + x[2*i+1];", "y = ((A[i][j] + p[i]) + x[(2 * i) + 1])"),
    ("m = a < b ? a : b;", "m = ((a < b) ? a : b)"),
    ("x = -a + !b + ~c + *p + &q[0];", "x = ((((-a + !b) + ~c) + *p) + &q[0])"),
    ("x = a << 2 | b >> 1 & c ^ d;", "x = ((a << 2) | (((b >> 1) & c) ^ d))"),
    ("x = a % b == c || d != e && f >= g;", "x = (((a % b) == c) || ((d != e) && (f >= g)))"),
    ("x = 0x1F + 017 + 10u + 7UL + 5ll + 0b101;", "x = (((((31 + 15) + 10) + 7) + 5) + 5)"),
    ("x = 1.5e-3f + .5 + 2. + 0x1p4;", "x = (((1.5e-3f + .5) + 2.) + 0x1p4)"),
    ("c = 'a' + '\\n';", "c = (97 + 10)"),
    ("s = \"harbour\";", "s = opaque<\"harbour\">"),
    ("x = sqrt(y) * fabs(z - 1);", "x = (sqrt(y) * fabs(z - 1))"),
    ("a[i] += b[i] * c;", "a[i] += (b[i] * c)"),
    ("x <<= 1; ", "x <<= 1"),
    ("x = (struct p){1, 2}.x;", "x = opaque<(struct p){1, 2}.x>"),
    ("y = ({ int t = 1; t; });", "y = opaque<({ int t = 1; t; })>"),
])
def test_expressions(src, text):
    assert body(src)[0] == text


def test_comma_operator_is_binary():
    e = first("x = 1, y = 2;").expr
    assert isinstance(e, ir.Binary) and e.op == ","


def test_parenthesised_expression_span_includes_parentheses():
    e = first("x = (a + b) * c;").expr.value
    assert isinstance(e, ir.Binary) and e.op == "*"
    assert span4(e) == (1, 5, 1, 16)
    assert span4(e.left) == (1, 5, 1, 12)


def test_member_call_is_opaque():
    e = first("x = s.f(1);").expr.value
    assert isinstance(e, ir.Opaque) and e.text == "s.f(1)"


# ------------------------------------------------------------------ spans and texts
def test_expr_stmt_text_is_original_source_without_semicolon():
    src = "#define IDX(i, j) ((i) * 64 + (j))\nvoid f(double *a) {\n  a[IDX(r, c)] =   0 ;\n}\n"
    tu, diags = parse_text(src)
    s = tu.functions[0].body.body[0]
    assert isinstance(s, ir.ExprStmt)
    assert s.text == "a[IDX(r, c)] =   0"
    assert span4(s) == (3, 3, 3, 23)
    ref = s.expr.target
    assert ctext(ref) == "a[(r * 64) + c]"
    # tokens from the expansion carry the span of the invocation `IDX(r, c)`
    assert span4(ref.indices[0]) == (3, 5, 3, 14)
    assert span4(ref.indices[0].left.left) == (3, 5, 3, 14)


def test_tabs_count_one_column_and_crlf():
    src = "void f(int n)\r\n{\r\n\tfor (int i = 0; i < n; i++)\r\n\t\tn--;\r\n}\r\n"
    tu, diags = parse_text(src)
    assert diags == []
    loop = tu.functions[0].body.body[0]
    assert span4(loop.header) == (3, 2, 3, 29)
    assert span4(loop.body) == (4, 3, 4, 7)
    assert loop.body.text == "n--"


def test_line_continuation_keeps_positions():
    src = "#define N \\\n  100\nvoid f(double *a) {\n  for (int i = 0; i < N; i++) a[i] = 0;\n}\n"
    tu, _ = parse_text(src)
    loop = tu.functions[0].body.body[0]
    assert ctext(loop.cond) == "i < 100"
    assert span4(loop.cond.right) == (4, 23, 4, 24)
    assert tu.macros[0].body == "100"


def test_positions_in_snippet_point_into_the_snippet():
    src = "\n\n   a[i] = 1;"
    s = first(src)
    assert span4(s) == (3, 4, 3, 13)


# ------------------------------------------------------------------ OpenMP
def test_omp_parallel_for_clauses():
    src = """
    #pragma omp parallel for schedule(dynamic, 4) collapse(2) num_threads(nt) private(j)
    for (i = 0; i < n; i++)
      for (j = 0; j < n; j++) a[i][j] = 0;
    """
    loop = first(src)
    assert isinstance(loop, ir.For)
    omp = loop.omp
    assert omp.directive == "parallel for"
    assert (omp.schedule, ctext(omp.chunk), omp.collapse, ctext(omp.num_threads)) == \
        ("dynamic", "4", 2, "nt")
    assert omp.text.startswith("#pragma omp parallel for schedule(dynamic, 4)")
    assert span4(omp)[:2] == (2, 5)
    assert loop.body.omp is None
    # the For span still starts at the `for` keyword
    assert span4(loop)[:2] == (3, 5)


@pytest.mark.parametrize("pragma, directive, schedule", [
    ("#pragma omp for", "for", None),
    ("#pragma omp for simd schedule(static)", "for simd", "static"),
    ("#pragma omp parallel for simd schedule(monotonic: guided, 8)", "parallel for simd", "guided"),
    ("#pragma omp parallel for schedule(runtime)", "parallel for", "runtime"),
])
def test_omp_directives(pragma, directive, schedule):
    loop = first(f"{pragma}\nfor (i = 0; i < n; i++) a[i] = 0;")
    assert (loop.omp.directive, loop.omp.schedule) == (directive, schedule)


def test_omp_macro_in_clause_and_continuation():
    src = ("#define CH 16\n#define NT 4\nvoid f(int n, double *a) {\n"
           "#pragma omp parallel for \\\n    schedule(static, CH) num_threads(NT)\n"
           "  for (int i = 0; i < n; i++) a[i] = 0;\n}\n")
    tu, diags = parse_text(src)
    omp = tu.functions[0].body.body[0].omp
    assert (ctext(omp.chunk), ctext(omp.num_threads)) == ("16", "4")
    assert span4(omp.chunk) == (5, 22, 5, 24)  # the macro name CH, where it is written


def test_omp_parallel_region_with_inner_for():
    src = """
    #pragma omp parallel num_threads(8)
    {
      double t = 0;
      #pragma omp for schedule(static, 1)
      for (i = 0; i < n; i++) a[i] = t;
      #pragma omp barrier
      for (i = 0; i < n; i++) b[i] = 0;
    }
    """
    block = first(src)
    assert isinstance(block, ir.Block)
    inner, plain = block.body[1], block.body[2]
    assert inner.omp.directive == "for"
    assert ctext(inner.omp.num_threads) == "8"  # inherited from the region
    assert (inner.omp.schedule, ctext(inner.omp.chunk)) == ("static", "1")
    assert plain.omp is None  # every thread runs it whole: no work sharing


def test_other_pragmas_are_ignored():
    src = "#pragma once\n#pragma GCC ivdep\n#pragma omp simd\nfor (i = 0; i < n; i++) a[i] = 0;"
    assert first(src).omp is None


def test_stray_omp_pragma_is_a_note():
    tu, diags = parse_text("#pragma omp parallel for\nx = 1;", snippet=True)
    assert shape(tu.functions[0].body) == ["x = 1"]
    assert [d.code for d in diags] == ["TC116"]
    assert "2:1" not in diags[0].message and "1:1" in diags[0].message


def test_bad_collapse_is_reported():
    tu, diags = parse_text("#pragma omp for collapse(k)\nfor (i = 0; i < n; i++) ;", snippet=True)
    loop = tu.functions[0].body.body[0]
    assert loop.omp.collapse == 1
    assert [d.code for d in diags] == ["TC115"]


# ------------------------------------------------------------------ functions and params
def params_of(tu: ir.TranslationUnit, name: str) -> list:
    f = next(f for f in tu.functions if f.name == name)
    return [(p.name, p.type_name, p.pointer, [ctext(x) for x in p.dims]) for p in f.params]


def test_parameter_spellings():
    tu, diags = parse_file(os.path.join(INPUTS, "berth_params.c"))
    assert diags == []
    assert params_of(tu, "b_restrict") == [
        ("n", "int", 0, []), ("A", "double", 0, ["n", "64"]), ("x", "const float", 1, [])]
    assert params_of(tu, "b_pointer_to_array") == [("m", "long", 0, []), ("A", "double", 1, ["64"])]
    assert params_of(tu, "b_open_dim") == [
        ("n", "size_t", 0, []), ("A", "double", 0, [None, "64"]), ("flags", "unsigned int", 0, [])]
    assert params_of(tu, "b_void") == []
    assert params_of(tu, "b_empty") == []
    assert params_of(tu, "b_typedef") == [
        ("d", "depth_t", 1, []), ("e", "depth_t", 0, ["4"]), ("b", "struct berth", 1, [])]
    assert params_of(tu, "b_callback") == [("notify", "void", 1, []), ("rows", "int", 2, [])]
    f = next(f for f in tu.functions if f.name == "b_returns")
    assert f.return_type == "double *"
    assert shape(f.body) == [["return", "p"]]


def test_param_span():
    tu, _ = parse_text("void f(int n,\n       double A[restrict n]) { }")
    p = tu.functions[0].params[1]
    assert span4(p) == (2, 8, 2, 28)
