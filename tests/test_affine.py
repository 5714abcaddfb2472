# Tests of tripcount.affine: the affine language (exact C integer division,
# simplification, negation, monotonicity), the C forms it recognizes (steps,
# MIN/MAX ternaries, casts, constants), name mangling and C types, and the
# nests it extracts from C text (loop tree, guards, continue, refusals with
# their codes and scopes). No isl here: the stage is pure Python. Inputs are
# small harbour-control snippets of the port city Velin.

from __future__ import annotations

import math
from fractions import Fraction

import islpy as isl
import pytest
from hypothesis import given
from hypothesis import strategies as st
from internal import assert_no_internal_errors

from tripcount import affine as af
from tripcount import ir
from tripcount.frontend import parse_text
from tripcount.ir import Span

S = Span(1, 1, 1, 2)


def nests_of(text: str, snippet: bool = True, file_codes: tuple[str, ...] = ()) -> list[af.ANest]:
    unit, _ = parse_text(text, path="velin.c", snippet=snippet)
    nests, file_diags = af.extract_nests(unit)
    assert [d.code for d in file_diags] == list(file_codes)
    return nests


def one(text: str) -> af.ANest:
    (nest,) = nests_of(text)
    return nest


def expr(text: str) -> ir.Expr:
    """IR of a C expression (through the front end)."""
    unit, _ = parse_text(f"x = {text};", snippet=True)
    stmt = unit.functions[0].body.body[0]
    return stmt.expr.value


class _Names:
    """Resolver for Converter tests: every name is a parameter."""

    def name(self, node):
        return af.var(("param", node.name), node.name)

    def opaque(self, node, text):
        return af.var(("sym", text, af.symbol_base(text)), text)


def lin(text: str) -> af.Lin:
    return af.Converter(_Names()).lin(expr(text))


def codes(nest: af.ANest) -> list[str]:
    return sorted(d.code for d in nest.diagnostics)


def refusals(nest: af.ANest) -> list[str | None]:
    return [s.refusal.code if s.refusal else None for s in nest.stmts]


N = af.var(("param", "n"), "n")
M = af.var(("param", "m"), "m")


# --------------------------------------------------------------------------
# C integer division (ISO C99 6.5.5: quotient truncated toward zero, (a/b)*b + a%b == a)


@given(st.integers(-10**6, 10**6), st.integers(-50, 50).filter(lambda b: b != 0))
def test_c_division_truncates_toward_zero(a, b):
    assert af.c_div(a, b) == math.trunc(Fraction(a, b))
    assert af.c_div(a, b) * b + af.c_mod(a, b) == a
    assert abs(af.c_mod(a, b)) < abs(b) and (af.c_mod(a, b) == 0 or (af.c_mod(a, b) > 0) == (a > 0))


def test_c_division_examples_from_the_standard_rules():
    # ISO C99 6.5.5p6 with truncation: -7 / 2 == -3 and -7 % 2 == -1; 7 / -2 == -3 and 7 % -2 == 1.
    assert (af.c_div(-7, 2), af.c_mod(-7, 2), af.c_div(7, -2), af.c_mod(7, -2)) == (-3, -1, -3, 1)
    assert lin("-7 / 2").const == -3 and lin("-7 % 2").const == -1 and lin("7 % -2").const == 1


def test_division_atoms_simplify_only_when_exact():
    assert af.cdiv(af.scale(N, 4), 2) == af.scale(N, 2)  # exact multiple: truncation changes nothing
    assert af.cmod(af.scale(N, 6), 3) == af.const(0)
    assert af.cdiv(N, -2) == af.scale(af.atom(af.CDiv(N, 2)), -1)  # n / -2 == -(n / 2) in C
    assert af.cmod(N, -3) == af.atom(af.CMod(N, 3))  # the sign of the divisor does not matter
    assert af.cdiv(N, 1) == N and af.cmod(N, 1) == af.const(0)
    assert lin("(2 * n + 4) / 2") == af.add(N, af.const(2))


def test_shifts_and_masks():
    assert lin("n << 3") == af.scale(N, 8)
    assert lin("n >> 2") == af.atom(af.FDiv(N, 4))  # arithmetic shift floors (common practice)
    assert lin("n & 7") == af.atom(af.FMod(N, 8))  # two's complement: n & (2^k - 1) == n mod 2^k
    assert lin("n & ~3") == af.scale(af.atom(af.FDiv(N, 4)), 4)
    assert lin("~n") == af.sub(af.const(-1), N)
    with pytest.raises(af.NotAffine):
        lin("n & 6")
    with pytest.raises(af.NotAffine):
        lin("n >> m")


def test_products_casts_and_constants():
    assert lin("(long)(3 * (n - 1))") == af.sub(af.scale(N, 3), af.const(3))
    assert lin("n * 2 * 5") == af.scale(N, 10)
    assert lin("(int)sizeof(double) * n") == af.scale(N, 8)
    for bad, kind in [("n * m", "product"), ("n / m", "product"), ("n / 0", "other"), ("(double)n", "float"),
                      ("A[n]", "array"), ("n++", "side-effect"), ("(n, m)", "side-effect"), ("0.5 * n", "float")]:
        with pytest.raises(af.NotAffine) as err:
            lin(bad)
        assert err.value.kind == kind, bad


def test_min_max_calls_ternaries_and_abs():
    mn = af.extremum("min", [N, M])
    mx = af.extremum("max", [N, M])
    for text in ["n < m ? n : m", "n <= m ? n : m", "m > n ? n : m", "m >= n ? n : m", "MIN(n, m)", "imin(m, n)"]:
        assert lin(text) == mn, text
    for text in ["n > m ? n : m", "n >= m ? n : m", "m < n ? n : m", "MAX(n, m)", "max(m, n)"]:
        assert lin(text) == mx, text
    assert lin("abs(n)") == af.extremum("max", [N, af.scale(N, -1)])
    # a ternary that is not a min: kept as a selection
    sel = lin("n < m + 2 ? n : m")
    assert isinstance(sel.terms[0][0], af.Select)
    assert af.extremum("min", [af.const(3), af.extremum("min", [N, af.const(1)])]) == af.extremum("min", [N, af.const(1)])


def test_conditions_and_negation():
    c = af.Converter(_Names()).cond(expr("n < m && !(n == 3) || m"))
    assert isinstance(c, af.Or)
    assert af.negate(af.negate(c)) == c
    assert af.negate(af.ge(N, M)) == af.gt(M, N)
    assert af.negate(af.eq(N, M)) == af.ne(N, M)
    assert af.conj([af.TRUE, af.ge(N, M), af.FALSE]) == af.FALSE
    assert af.disj([af.ge(N, M), af.TRUE]) == af.TRUE
    assert af.rel("ge", af.const(-1)) == af.FALSE


def test_monotonicity_and_closure():
    i = af.var(("loop", 0), "i")
    key = ("loop", 0)
    assert af.monotone(af.add(af.scale(i, 2), N), key) == "inc"
    assert af.monotone(af.cdiv(af.scale(i, -1), 3), key) == "dec"
    assert af.monotone(af.cmod(i, 3), key) is None
    assert af.monotone(af.extremum("min", [i, N]), key) == "inc"
    assert af.closure(af.gt(N, i), key) == "down"  # i < n: true below a threshold
    assert af.closure(af.ge(i, af.const(0)), key) == "up"
    assert af.closure(af.ne(i, N), key) is None
    assert af.closure(af.conj([af.gt(N, i), af.gt(M, i)]), key) == "down"
    assert af.closure(af.disj([af.gt(N, i), af.ge(i, M)]), key) is None


def test_substitution():
    i = af.var(("loop", 0), "i")
    e = af.add(af.cdiv(af.add(i, N), 2), af.extremum("max", [i, M]))
    got = af.subst(e, ("loop", 0), af.const(4))
    assert got == af.add(af.cdiv(af.add(N, af.const(4)), 2), af.extremum("max", [M, af.const(4)]))


def test_step_forms():
    def step(text):
        return af.parse_step(_step_expr(text))

    assert step("i++") == ("i", 1, None) and step("++i") == ("i", 1, None)
    assert step("i--") == ("i", -1, None) and step("--i") == ("i", -1, None)
    for text, sign in [("i += 4", 1), ("i -= 4", -1), ("i = i + 4", 1), ("i = 4 + i", 1), ("i = i - 4", -1)]:
        v, sg, amount = step(text)
        assert (v, sg, amount.value) == ("i", sign, 4), text
    assert step("i *= 2") == "only additions of a constant are counted"
    assert step("i = 2 * i") == "only additions of a constant are counted"
    assert step("i++, j++") == "several"


def _step_expr(text: str) -> ir.Expr:
    unit, _ = parse_text(f"{text};", snippet=True)
    return unit.functions[0].body.body[0].expr


# --------------------------------------------------------------------------
# Names and types


def test_mangling_is_deterministic_and_valid():
    assert af.mangle("n") == "n" and af.mangle("N_max2") == "N_max2"
    assert af.mangle("min") == "min_" and af.mangle("floor") == "floor_"
    # isl reads its own words in any letter case: every mangled name must parse (isl itself decides)
    for word in ("MAX", "Min", "FLOOR", "NaN", "Exists", "floord", "CEILD", "True"):
        name = af.mangle(word)
        assert name == word + "_"
        isl.Set(f"[{name}] -> {{ : {name} >= 1 }}")
    assert af.mangle("größe") == "gr_uf6__udf_e" == af.mangle("größe")
    assert af.mangle("a$b") == "a_u24_b"
    assert af.symbol_base("len(s)") == "len_s" and af.symbol_base("s->n") == "s_n"
    assert af.symbol_base("*count") == "count_val" and af.symbol_base("q.rows[2]") == "q_rows_2"


def test_c_types():
    assert af.base_type("const double") == "double"
    assert af.base_type("unsigned long int") == "unsigned long"
    assert af.base_type("static const long long") == "long long"
    sizes = {t: af.type_size(t) for t in ["char", "short int", "int", "unsigned", "float", "long", "double",
                                          "long double", "size_t", "int64_t", "uint8_t", "struct quay", "real_t"]}
    assert sizes == {"char": 1, "short int": 2, "int": 4, "unsigned": 4, "float": 4, "long": 8, "double": 8,
                     "long double": 16, "size_t": 8, "int64_t": 8, "uint8_t": 1, "struct quay": None, "real_t": None}
    assert af.is_integer_type("unsigned long") and af.is_integer_type("int32_t") and af.is_integer_type("size_t")
    assert not af.is_integer_type("double") and not af.is_integer_type("int *")
    assert af.is_floating_type("long double") and not af.is_floating_type("double *")


def test_c_text_round_trip():
    for text in ["a + b * c", "(a + b) * c", "a - (b - c)", "a < b ? a : b", "-(n - 1) / 2", "f(a, b[i][j])",
                 "A[i][j] += B[i][k] * C[k][j]", "!(i == j) && k || m"]:
        unit, _ = parse_text(f"{text};", snippet=True)
        e = unit.functions[0].body.body[0].expr
        assert ir.c_text(e) == text


# --------------------------------------------------------------------------
# Nest extraction


def test_nest_structure_statements_and_guards():
    nest = one("""
    for (t = 0; t < n; t++) {
        double s = 0.0;
        for (c = t; c <= m; c += 2)
            if (c != t)
                s += level[c];
            else
                level[c] = s;
        out[t] = s;
    }
    """)
    assert [(lp.display, lp.depth, lp.parent, lp.children, lp.step) for lp in nest.loops] == [
        ("t", 0, None, [1], 1),
        ("c", 1, 0, [], 2),
    ]
    assert [(s.id, s.text, s.loops) for s in nest.stmts] == [
        ("S1", "double s = 0.0", (0,)),
        ("S2", "s += level[c]", (0, 1)),
        ("S3", "level[c] = s", (0, 1)),
        ("S4", "out[t] = s", (0,)),
    ]
    c = af.var(("loop", 1), "c")
    t = af.var(("loop", 0), "t")
    assert nest.stmts[1].guard == af.ne(c, t) and nest.stmts[2].guard == af.eq(c, t)
    assert nest.params == ("m", "n") and nest.names[("loop", 1)] == "c"
    assert nest.source.startswith("for (t = 0; t < n; t++)")


def test_continue_becomes_a_guard_on_later_statements():
    nest = one("""
    for (i = 0; i < n; i++) {
        a[i] = 0;
        if (i % 2 == 0) continue;
        b[i] = 1;
        for (j = 0; j < i; j++) c[j] = 2;
    }
    """)
    i = af.var(("loop", 0), "i")
    odd = af.ne(af.cmod(i, 2), af.const(0))
    assert [s.guard for s in nest.stmts] == [af.TRUE, odd, af.TRUE]
    assert nest.loops[1].guard == odd and refusals(nest) == [None, None, None]


def test_outermost_fors_inside_ifs_blocks_and_whiles():
    nests = nests_of("""
    void f(int n) {
        int x = 0;
        if (n) { for (int i = 0; i < n; i++) for (int j = 0; j < i; j++) x++; }
        while (x > 0) { for (int k = 0; k < n; k++) x--; }
    }
    """, snippet=False, file_codes=("TC223",))  # the while itself is named (not counted)
    assert [(n.span.line, len(n.loops)) for n in nests] == [(4, 2), (5, 1)]
    assert [d.code for d in nests[1].diagnostics if d.code == "TC224"] == ["TC224"]  # per while iteration


@pytest.mark.parametrize("text, want_codes, want_stmts", [
    ("for (i = 0; i < n; i *= 2) a[i] = 0;", ["TC201"], ["TC201"]),
    ("for (i = 0; i < n; i += s) a[i] = 0;", ["TC201"], ["TC201"]),
    ("for (i = 0; i < n; i++) for (k = p[i]; k < p[i + 1]; k++) a[k] = 0;", ["TC202"], ["TC202"]),
    ("for (i = 0; i < n; i++) { w += 2; for (j = 0; j < w; j++) a[j] = 0; }", ["TC203"], [None, "TC203"]),
    ("for (i = 0; i < n; i++) for (j = 0; j < n; j++) if (a[j]) break;", ["TC204"], []),
    ("for (i = 0; i < n; i++) { a[i] = 0; goto out; }", ["TC205"], ["TC205"]),
    ("for (i = 0; i < n; i++) { do a[i]--; while (a[i] > 0); a[i] = 1; }", ["TC206"], ["TC206", None]),
    ("for (i = 0; i < n; i++) { a[i] = 0; i += 1; }", ["TC207"], ["TC207", "TC207"]),
    ("for (i = 0; ; i++) a[i] = 0;", ["TC208"], ["TC208"]),
    ("for (i = 0; i < n; i) a[i] = 0;", ["TC201"], ["TC201"]),
    ("for (i = 0; i < n; i += 0) a[i] = 0;", ["TC208"], ["TC208"]),
    ("for (i = 0; i < n; i++) for (j = 0; j < i * j + 1; j++) a[j] = 0;", ["TC209"], ["TC209"]),
    ("for (i = 0; i < n; i++) if (a[i] > 0 || i > 3) b[i] = 0; else b[i] = 1;", ["TC210"], ["TC210", "TC210"]),
    ("for (i = 0; i < n && i % 4 != 3; i++) a[i] = 0;", ["TC211"], ["TC211"]),
    ("for (i = 0; i == 0; i++) a[i] = 0;", ["TC211"], ["TC211"]),
    ("for (i = 0, j = 0; i < n; i++) a[i] = 0;", ["TC212"], ["TC212"]),
    ("for (i = 0; i < n; j++) a[i] = 0;", ["TC212"], ["TC212"]),
    ("for (i = 0; i < n; i++, j++) a[i] = 0;", ["TC212"], ["TC212"]),
    ("for (i = 0; i < n; i++) for (j = 0; j < n; ) { a[j] = 0; j++; }", ["TC212"], ["TC212", "TC212"]),
    ("for (i = 0; i < n; i++) { if (a[i]) continue; b[i] = 0; }", ["TC210", "TC213"], ["TC213"]),
    ("for (i = 0; i < n; i++) switch (a[i]) { case 1: b[i] = 0; }", ["TC214"], ["TC214"]),
    ("for (float x = 0; x < n; x += 1) a[0] = x;", ["TC219"], ["TC219"]),
    ("for (i = 0; i < n; i++) for (j = 0; j < f(i); j++) a[j] = 0;", ["TC209"], ["TC209"]),
    ("for (i = 0; i < n; i++) a[b[i]] = i * i;", ["TC217"], [None]),
    ("for (i = 0; i < len(s); i++) a[i] = 0;", ["TC216"], [None]),
])
def test_refusal_kinds(text, want_codes, want_stmts):
    nest = one(text)
    assert codes(nest) == sorted(want_codes), [d.message for d in nest.diagnostics]
    assert refusals(nest) == want_stmts


def test_inner_loop_without_start_value_and_outer_without_init():
    nest = one("for (; i < n; i++) a[i] = 0;")
    assert codes(nest) == ["TC216"] and refusals(nest) == [None]
    assert nest.symbolic == {"i_start": "i (value before the loop)"}


def test_symbolic_parameters_record_their_text():
    nest = one("for (i = 0; i < s->rows; i++) for (j = 0; j < len(name) - *count; j++) a[j] = 0;")
    assert nest.params == ("count_val", "len_name", "s_rows")
    assert nest.symbolic == {"count_val": "*count", "len_name": "len(name)", "s_rows": "s->rows"}
    assert [d.args["name"] for d in nest.diagnostics] == ["s_rows", "len_name", "count_val"]


def test_symbol_written_in_the_nest_is_refused():
    nest = one("for (i = 0; i < len(s); i++) s[i] = 0;")
    assert codes(nest) == ["TC203"]
    nest = one("for (i = 0; i < len(s); i++) fill(s);")
    assert codes(nest) == ["TC203"]


def test_invariant_locals_and_globals():
    (nest,) = nests_of("""
    static const int LANES = 4;
    const int WIDTH = 3 * LANES;
    int tide_extra;
    void f(int n, double *x) {
        int half = n / 2;
        const int ts = 8;
        int moved = n;
        moved = moved + 1;
        for (int i = 0; i < half + moved; i += ts)
            for (int j = 0; j < WIDTH + tide_extra; j++)
                x[j] = 0;
    }
    """, snippet=False)
    assert nest.params == ("moved", "n", "tide_extra")
    i = af.var(("loop", 0), "i")
    n = af.var(("param", "n"), "n")
    moved = af.var(("param", "moved"), "moved")
    assert af.gt(af.add(af.cdiv(n, 2), moved), i) in nest.loops[0].constraint.args
    assert nest.loops[0].step == 8


def test_loop_var_shadowing_a_parameter_gets_a_new_name():
    (nest,) = nests_of("void f(int k) { for (int i = 0; i < k; i++) for (int k = 0; k < i; k++) ; }", snippet=False)
    assert nest.params == ("k",)
    assert [nest.names[("loop", lp.index)] for lp in nest.loops] == ["i", "k_1"]


def test_unparsed_statement_inside_a_loop():
    # IR built by hand: the front end could not read one statement.
    body = ir.Block(S, (ir.Unparsed(Span(2, 5, 2, 20), "weird @ thing;", "syntax"),
                        ir.Unparsed(Span(3, 5, 3, 20), "if (q) break;")))
    loop = ir.For(S, ir.ExprStmt(S, ir.Assign(S, "=", ir.Name(S, "i"), ir.IntLit(S, 0)), "i = 0"),
                  ir.Binary(S, "<", ir.Name(S, "i"), ir.Name(S, "n")),
                  ir.IncDec(S, "++", False, ir.Name(S, "i")), body, S)
    fn = ir.Function(S, "f", "void", (), ir.Block(S, (loop,)))
    (nest,), _ = af.extract_nests(ir.TranslationUnit(S, "velin.c", (fn,)))
    assert codes(nest) == ["TC204", "TC215", "TC215"]
    assert [s.text for s in nest.stmts] == ["weird @ thing;", "if (q) break;"]
    assert refusals(nest) == ["TC204", "TC204"]


def test_strange_ir_never_raises():
    weird = [
        ir.For(S, ir.Block(S, ()), None, None, ir.Empty(S), S),
        ir.For(S, None, ir.Name(S, "c"), ir.Opaque(S, "i <<= 1"), ir.Jump(S, "continue"), S),
        ir.For(S, ir.Decl(S, "int", (ir.Declarator(S, "i"),)), ir.IntLit(S, 1),
               ir.IncDec(S, "++", True, ir.ArrayRef(S, "a", ())), ir.ExprStmt(S, ir.ArrayRef(S, "a", ()), "a"), S),
        ir.For(S, None, ir.Binary(S, "<", ir.Name(S, "i"), ir.Name(S, "n")), ir.IncDec(S, "++", False, ir.Name(S, "i")),
               ir.Labeled(S, "case", ir.Switch(S, ir.Name(S, "i"), ir.Jump(S, "break"))), S),
    ]
    fn = ir.Function(S, "f", "void", (), ir.Block(S, tuple(weird)))
    nests, diags = af.extract_nests(ir.TranslationUnit(S, "velin.c", (fn,)))
    assert len(nests) == 4 and diags == []
    assert_no_internal_errors([d for n in nests for d in n.diagnostics])


def test_internal_failure_is_contained(monkeypatch):
    def boom(self, s, ctx):
        raise ZeroDivisionError("boom")

    monkeypatch.setattr(af._NestBuilder, "walk_for", boom)
    nests = nests_of("for (i = 0; i < n; i++) a[i] = 0;")
    assert [d.code for d in nests[0].diagnostics] == ["TC900"] and nests[0].loops == []


# --------------------------------------------------------------------------
# Nesting depth (issue 7): the front end builds any depth; this stage and the
# later ones recurse, so code nested past af.MAX_DEPTH levels is cut with a
# diagnostic, and a nest holding such code is not counted at all.

def _deep_run(text: str) -> tuple[list[af.ANest], list, float]:
    import time

    start = time.monotonic()
    unit, _ = parse_text(text, path="velin.c")
    nests, file_diags = af.extract_nests(unit)
    return nests, file_diags, time.monotonic() - start


def test_three_thousand_nested_ifs_stop_at_the_limit_with_a_position():
    head = "void f(int N, int x, double *A) { for (int i = 0; i < N; i++) "
    text = head + "if (x) " * 3000 + "A[i] = 1; }\n"
    nests, file_diags, elapsed = _deep_run(text)
    assert elapsed < 20.0  # a guard against quadratic blow-up (minutes), not a speed target
    (nest,) = nests
    assert "TC900" not in codes(nest) and file_diags == []
    deep = [d for d in nest.diagnostics if d.code == "TC112"]
    assert len(deep) == 1
    # the for loop is level 1 below the function body, the k-th `if` level k + 1: the first one past
    # the limit is `if` number MAX_DEPTH, at column len(head) + 1 + 7 * (MAX_DEPTH - 1)
    assert (deep[0].span.line, deep[0].span.column) == (1, len(head) + 1 + 7 * (af.MAX_DEPTH - 1))
    assert str(af.MAX_DEPTH) in deep[0].message
    assert all(lp.refusal is deep[0] for lp in nest.loops)  # nothing in the nest is counted
    assert nest.stmts and all(st.refusal is deep[0] for st in nest.stmts)


def test_twenty_thousand_nested_blocks_are_cut_inside_and_outside_nests():
    inner = "void f(int N, double *A) { for (int i = 0; i < N; i++) " + "{" * 20000 + "A[i] = 1;" + "}" * 20000 + " }\n"
    outer = "void g(int N, double *A) { " + "{" * 20000 + "A[0] = 1;" + "}" * 20000 + "\n for (int i = 0; i < N; i++) A[i] = 2; }\n"
    nests, file_diags, elapsed = _deep_run(inner + outer)
    assert elapsed < 20.0  # a guard against quadratic blow-up (minutes), not a speed target
    f_nest, g_nest = nests
    assert [d.code for d in f_nest.diagnostics] == ["TC112"]
    assert f_nest.diagnostics[0].span.line == 1
    assert all(lp.refusal is not None for lp in f_nest.loops)
    # outside any nest the cut is a file-level diagnostic; the loop after it is counted as usual
    assert [(d.code, d.span.line) for d in file_diags] == [("TC112", 2)]
    assert g_nest.diagnostics == [] and all(lp.refusal is None for lp in g_nest.loops)


def test_deep_expression_gets_its_own_diagnostic():
    text = "void f(int N, double *A) { for (int i = 0; i < N; i++) A[i] = " + " + ".join(["A[i]"] * 5000) + "; }\n"
    nests, file_diags, elapsed = _deep_run(text)
    assert elapsed < 20.0  # a guard against quadratic blow-up (minutes), not a speed target
    (nest,) = nests
    deep = [d for d in nest.diagnostics if d.code == "TC220"]
    assert len(deep) == 1 and deep[0].span.line == 1
    assert "expression" in deep[0].message
    assert all(st.refusal is deep[0] for st in nest.stmts)


def test_cut_code_before_a_nest_may_write_its_bound():
    # `n` is set again inside the skipped part: its initializer must not be used as the bound
    text = ("void f(double *A) { int n = 10; " + "{" * 300 + "n = 20;" + "}" * 300
            + " for (int i = 0; i < n; i++) A[i] = 1; }\n")
    nests, file_diags, _ = _deep_run(text)
    (nest,) = nests
    assert [d.code for d in file_diags] == ["TC112"]
    assert nest.params == ("n",)  # a size parameter, not the constant 10


def test_nesting_just_below_the_limit_is_counted_exactly_through_the_pipeline():
    from tripcount.options import Options
    from tripcount.pipeline import analyze_text

    depth = af.MAX_DEPTH - 10
    text = ("void f(int N, double *A) { for (int i = 0; i < N; i++) " + "{" * depth + "A[i] += 1.0;"
            + "}" * depth + " }\n")
    fr = analyze_text(text, "velin.c", Options(at={"N": 7}))
    assert [d.code for d in fr.all_diagnostics()] == ["TC508"]  # only the parallel-candidate note
    (nr,) = fr.nests
    assert nr.statements[0].count.value == 7  # one statement, N executions (direct count)
