# Tests of tripcount/frontend/parser.py and the public API: whole files
# (functions found, everything else skipped or kept as globals), snippets,
# error recovery and its diagnostics, type-name heuristics, robustness on
# deep nesting and large inputs, and that reading never raises.

from __future__ import annotations

import os
import time

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from internal import assert_no_internal_errors
from test_build import ctext, shape

from tripcount import ir
from tripcount.frontend import lalr, parse_file, parse_text
from tripcount.frontend import parser as fp
from tripcount.frontend.build import IRBuilder

INPUTS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "inputs", "frontend")


def read(name: str) -> tuple[ir.TranslationUnit, list]:
    return parse_file(os.path.join(INPUTS, name))


walk = ir.walk


def loops(node: ir.Node) -> list[ir.For]:
    return [n for n in walk(node) if isinstance(n, ir.For)]


# ------------------------------------------------------------------ whole files
def test_tide_gauge_file():
    tu, diags = read("tide_gauge.c")
    # the project header "velin/harbour.h" is not there: one note; <stdio.h> is not looked for
    assert [(d.code, d.span.line) for d in diags] == [("TC119", 6)]
    assert [(f.name, f.return_type) for f in tu.functions] == [
        ("smooth", "void"), ("mean_level", "level_t"), ("basin_tiles", "void"), ("main", "int")]
    # enum quay { NORTH, SOUTH } gives two integer constants (C11 6.7.2.2: 0, then +1)
    assert [[decl.name for decl in g.declarators] for g in tu.globals] == [
        ["NORTH"], ["SOUTH"], ["TS"], ["levels"], ["datum", "cursor"], ["gauges"]]
    assert [g.type_name for g in tu.globals] == ["const int", "const int", "static const int",
                                                 "double", "level_t", "struct gauge"]
    assert [ctext(g.declarators[0].init) for g in tu.globals[:2]] == ["0", "1"]
    assert [ctext(x) for x in tu.globals[3].declarators[0].dims] == ["48", "1440"]
    assert [m.name for m in tu.macros] == ["NGAUGE", "NSTEP", "MIN", "MAX"]
    assert tu.path.endswith("tide_gauge.c")
    smooth = tu.functions[0]
    assert (smooth.span.line, smooth.span.column, smooth.span.end_line) == (31, 1, 41)
    inner = loops(smooth)[2]
    assert ctext(inner.init.expr) == "k = ((0 > (t - w)) ? 0 : (t - w))"
    assert inner.header.line == 37


def test_tide_gauge_parallel_tiles():
    tu, _ = read("tide_gauge.c")
    tiles = next(f for f in tu.functions if f.name == "basin_tiles")
    outer = tiles.body.body[0]
    assert isinstance(outer, ir.For)
    assert (outer.omp.directive, outer.omp.schedule, ctext(outer.omp.chunk), outer.omp.collapse) \
        == ("parallel for", "dynamic", "2", 2)
    assert len(loops(tiles)) == 4
    assert ctext(loops(tiles)[2].cond) == "i < (((ti + TS) < ny) ? (ti + TS) : ny)"


def test_while_body_in_function_without_for():
    tu, _ = read("tide_gauge.c")
    mean = next(f for f in tu.functions if f.name == "mean_level")
    assert shape(mean.body)[2] == ["while", "i < n", ["s += x[i]", "i++"]]


def test_prototypes_structs_typedefs_are_skipped():
    src = """
    typedef struct { int a; } pier_t;
    struct wave { double h, t; };
    union u { int i; float f; };
    extern int tide(int n);
    int (*handler)(int);
    enum { A = 1, B };
    static double table[] = { 1.0, 2.0 };
    pier_t piers[4];
    void go(pier_t *p) { p[0].a = 1; }
    """
    tu, diags = parse_text(src)
    assert diags == []
    assert [f.name for f in tu.functions] == ["go"]
    # the enumerators are integer constants (A = 1, B = 2 by C11 6.7.2.2), the rest is skipped
    assert [g.declarators[0].name for g in tu.globals] == ["A", "B", "table", "piers"]
    assert [ctext(g.declarators[0].init) for g in tu.globals[:2]] == ["1", "2"]


def test_enumerators_count_on_and_use_earlier_ones():
    src = """
    enum tile { TW = 8, TH = TW * 2, TD, TNEG = -3, TNEXT };
    enum { BAD = sizeof(int), AFTER };
    """
    tu, _ = parse_text(src)
    got = {g.declarators[0].name: ctext(g.declarators[0].init) for g in tu.globals}
    # a value that cannot be read (sizeof) leaves it and the ones counting on from it out
    assert got == {"TW": "8", "TH": "16", "TD": "17", "TNEG": "-3", "TNEXT": "-2"}


def test_typedefs_in_the_file_and_a_read_header_resolve_to_their_base_type():
    # velin_types.h (beside the file) chains grain_t -> real -> double and
    # defines a pointer typedef; the file adds its own typedef and a C++ alias
    tu, diags = read(os.path.join("typedefs", "sediment_types.c"))
    assert [g for g in diags if g.severity != "note"] == []
    (fn,) = tu.functions
    types = {p.name: (p.ctype, p.pointer) for p in fn.params[1:]}
    assert [p.type_name for p in fn.params][1:3] == ["grain_t", "base"]  # as written
    assert types == {"g": ("double", 1), "tag": ("char", 1), "code": ("unsigned short", 1),
                     "out": ("double", 1), "s": ("float", 1)}
    casts = [(n.type_name, n.ctype) for n in walk(fn.body) if isinstance(n, ir.Cast)]
    assert casts == [("real", "double")]
    tu, _ = parse_text("typedef float real; typedef real *row_t;\n"
                       "void f(int n) { row_t r; const real w = 2; for (int i = 0; i < n; i++) r[i] = w; }")
    decls = {d.declarators[0].name: (d.ctype, d.declarators[0].pointer)
             for d in walk(tu.functions[0].body) if isinstance(d, ir.Decl)}
    assert decls["r"] == ("float", 1) and decls["w"] == ("const float", 0)


def test_extern_c_block_is_read():
    tu, diags = parse_text('extern "C" {\nvoid f(int n) { n++; }\n}\nvoid g(void) { }\n')
    assert diags == []
    assert [f.name for f in tu.functions] == ["f", "g"]


def test_function_attributes_and_qualifiers():
    src = "static inline __attribute__((always_inline)) double pier(int n) { return n; }"
    tu, _ = parse_text(src)
    f = tu.functions[0]
    assert (f.name, f.return_type, [p.name for p in f.params]) == ("pier", "double", ["n"])


def test_function_head_after_an_unexpanded_macro_call():
    src = "DECLARE_TIDE_TABLE(velin)\nstatic __attribute__((unused)) double *restrict\n" \
          "quay(double *p) __attribute__((cold)) { return p; }"
    tu, diags = parse_text(src)
    assert diags == []
    (f,) = tu.functions
    assert (f.name, f.return_type, f.span.line, f.span.column) == ("quay", "double *", 2, 1)


def test_old_style_main():
    tu, _ = parse_text("main() { return 0; }")
    assert [(f.name, f.return_type) for f in tu.functions] == [("main", "int")]


# ------------------------------------------------------------------ snippets
def test_snippet_bare_statements():
    tu, diags = parse_text("for (i = 0; i < n; i++) for (j = 0; j <= i; j++) s += a[i][j];",
                           snippet=True)
    assert diags == []
    (f,) = tu.functions
    assert (f.name, f.params) == ("<snippet>", ())
    assert shape(f.body) == [["for", "i = 0", "i < n", "i++",
                              ["for", "j = 0", "j <= i", "j++", "s += a[i][j]"]]]
    assert (f.span.line, f.span.column, f.span.end_column) == (1, 1, 63)


def test_snippet_function_body_with_braces():
    tu, _ = parse_text("{\n  double t = 0;\n  for (k = 0; k < n; k++) t += x[k];\n}", snippet=True)
    body = tu.functions[0].body
    assert shape(body) == [["decl", "double", ["t = 0"]], ["for", "k = 0", "k < n", "k++", "t += x[k]"]]
    assert (body.span.line, body.span.column, body.span.end_line, body.span.end_column) == (1, 1, 4, 2)


def test_snippet_that_is_a_whole_file():
    tu, _ = parse_text("#define N 8\nvoid f(double *a) { for (int i = 0; i < N; i++) a[i] = 0; }",
                       snippet=True)
    assert [f.name for f in tu.functions] == ["f"]


def test_empty_snippet_and_file():
    tu, diags = parse_text("", snippet=True)
    assert (len(tu.functions), tu.functions[0].body.body, diags) == (1, (), [])
    tu, diags = parse_text("/* only a comment */\n")
    assert (tu.functions, diags) == ((), [])


# ------------------------------------------------------------------ recovery
def test_broken_quay_recovers_statement_by_statement():
    tu, diags = read("broken_quay.c")
    assert [f.name for f in tu.functions] == ["survey", "ok_after"]
    survey = tu.functions[0]
    assert shape(survey.body) == [
        ["for", ["decl", "int", ["i = 0"]], "i < n", "i++",
         ["h[i] = (h[i] * 0.5)", ["unparsed", "h[i] = @ 2;"], "h[i] += 1.0"]],
        ["unparsed", "for (int k = 0; k < n; k++ {\n        h[k] = 0;\n    }"],
        ["unparsed", "h[0] = ;"],
        "n = (n + 1)",
    ]
    assert shape(tu.functions[1].body) == [
        ["for", ["decl", "int", ["i = 0"]], "i < n", "i++", "h[i] = i"]]
    rendered = [dg.render() for dg in diags]
    assert rendered == [
        f"{tu.path}:25:1: error: unbalanced braces at 25:1: this '{{' is never closed; "
        "the rest of the file is skipped [TC104]",
        f"{tu.path}:8:9: warning: cannot read this as C at 8:9: unexpected character '@' "
        "at 8:16; skipped [TC101]",
        f"{tu.path}:11:5: warning: cannot read this as C at 11:5: unexpected '{{' at 11:32; "
        "skipped [TC101]",
        f"{tu.path}:14:5: warning: cannot read this as C at 14:5: unexpected ';' at 14:12; "
        "skipped [TC101]",
    ]
    bad = next(n for n in walk(survey) if isinstance(n, ir.Unparsed))
    assert str(bad.reason) == "unexpected character '@' at 8:16"
    assert (bad.span.line, bad.span.column, bad.span.end_column) == (8, 9, 20)
    assert len(tu.problems) == 4


def test_recovery_keeps_the_loop_around_a_bad_statement():
    src = "void f(int n) {\n  for (int i = 0; i < n; i++)\n    for (j = 0; j < n; j++) {\n" \
          "      x = y +* ;\n      a[i][j] = 0;\n    }\n}\n"
    tu, diags = parse_text(src)
    outer = tu.functions[0].body.body[0]
    assert shape(outer) == ["for", ["decl", "int", ["i = 0"]], "i < n", "i++",
                            ["for", "j = 0", "j < n", "j++",
                             [["unparsed", "x = y +* ;"], "a[i][j] = 0"]]]
    assert (outer.span.line, outer.span.end_line) == (2, 6)
    assert [d.code for d in diags] == ["TC101"]


def test_recovery_in_if_else_do_labels_and_pragmas():
    src = """
    if (a) { x = @; } else y = 1;
    do { z = ]; } while (n--);
    out: w = 1 1;
    #pragma omp parallel for
    for (i = 0; i < n; i++) { a[i] = ` ; }
    switch (n) { case 1: q = (; break; default: q = 0; }
    """
    tu, diags = parse_text(src, snippet=True)
    assert shape(tu.functions[0].body) == [
        ["if", "a", [["unparsed", "x = @;"]], "y = 1"],
        ["do", [["unparsed", "z = ];"]], "n--"],
        ["label", "out", ["unparsed", "w = 1 1;"]],
        ["for", "i = 0", "i < n", "i++", [["unparsed", "a[i] = ` ;"]]],
        ["switch", "n", [["label", "case", ["unparsed", "q = (;"]], ["break"],
                         ["label", "default", "q = 0"]]],
    ]
    assert tu.functions[0].body.body[3].omp.directive == "parallel for"
    assert [d.code for d in diags] == ["TC101"] * 5


def test_recovery_gives_each_else_to_the_nearest_if():
    tu, _ = parse_text("if (a) if (b) x = @; else y = 1; else z = 2; w = 3;", snippet=True)
    assert shape(tu.functions[0].body) == [
        ["if", "a", ["if", "b", ["unparsed", "x = @;"], "y = 1"], "z = 2"], "w = 3"]


def test_missing_semicolon_before_closing_brace():
    tu, diags = parse_text("void f(void) { int x = 1 }\nvoid g(void) { y = 2; }")
    assert shape(tu.functions[0].body) == [["unparsed", "int x = 1"]]
    assert diags[0].message == ("cannot read this as C at 1:16: it ends before the statement "
                                "is complete; skipped")
    assert shape(tu.functions[1].body) == ["y = 2"]


def test_stray_closing_braces_give_one_diagnostic():
    tu, diags = parse_text("}\n}\nvoid f(void) { x = 1; }\n}")
    assert [f.name for f in tu.functions] == ["f"]
    assert [d.code for d in diags] == ["TC104"]
    assert "1:1" in diags[0].message and "2 more" in diags[0].message


def test_unclosed_function_is_reported_not_read():
    tu, diags = parse_text("void f(void) { x = 1; }\nvoid g(int n) {\n  while (n) { n--;\n")
    assert [f.name for f in tu.functions] == ["f"]
    assert [(d.code, d.span.line, d.span.column) for d in diags] == [("TC104", 2, 15)]


def test_nesting_too_deep_for_recovery():
    depth = fp.MAX_RECOVERY_DEPTH + 30
    src = "void f(void) {" + "{" * depth + "x = @;" + "}" * depth + "}"
    tu, diags = parse_text(src)
    assert [d.code for d in diags] == ["TC112"]
    assert len(tu.functions) == 1


# ------------------------------------------------------------------ type names
@pytest.mark.parametrize("src, expected", [
    ("real x = 0;", ["decl", "real", ["x = 0"]]),
    ("real *p = q;", ["decl", "real", ["*p = q"]]),
    ("static real **p, *q;", ["decl", "static real", ["**p", "*q"]]),
    ("size_t n = 0;", ["decl", "size_t", ["n = 0"]]),
    ("const idx_t n = 4;", ["decl", "const idx_t", ["n = 4"]]),
    ("x = (real)i;", "x = (real)i"),
    ("x = (real *)p;", "x = (real *)p"),
    ("x = (size_t)n * 2;", "x = ((size_t)n * 2)"),
    ("if (c) x = 1;", ["if", "c", "x = 1", None]),
    ("y = (n) + 1;", "y = (n + 1)"),
    ("z = a * b;", "z = (a * b)"),
    ("struct pier p;", ["decl", "struct pier", ["p"]]),
    ("for (idx_t i = 0; i < n; i++) ;", ["for", ["decl", "idx_t", ["i = 0"]], "i < n", "i++",
                                          ["empty"]]),
])
def test_type_name_heuristics(src, expected):
    tu, diags = parse_text(src, snippet=True)
    assert diags == []
    assert shape(tu.functions[0].body)[0] == expected


def test_typedef_names_from_the_file():
    src = "typedef double wave_t;\nvoid f(wave_t *w) { wave_t t = (wave_t)1; w[0] = t; }"
    tu, diags = parse_text(src)
    assert diags == []
    assert shape(tu.functions[0].body) == [["decl", "wave_t", ["t = (wave_t)1"]], "w[0] = t"]


# ------------------------------------------------------------------ robustness
def test_fifty_nested_loops():
    n = 50
    src = "void f(int n, double *a) {\n" + "".join(
        f"for (int i{k} = 0; i{k} < n; i{k}++)\n" for k in range(n)) + "a[0] += 1;\n}\n"
    tu, diags = parse_text(src)
    assert diags == []
    assert len(loops(tu.functions[0])) == n


def test_deep_blocks_and_parentheses():
    src = "void f(void) {" + "{" * 3000 + "x = " + "(" * 3000 + "1" + ")" * 3000 + ";" + \
          "}" * 3000 + "}"
    tu, diags = parse_text(src)
    assert diags == []
    assert tu.functions[0].name == "f"


def test_unbalanced_deep_input():
    tu, diags = parse_text("void f(void) {" + "{" * 20000)
    assert [d.code for d in diags] == ["TC104"]
    tu, diags = parse_text("void f(void) { x = " + "(" * 20000 + "; }")
    assert [d.code for d in diags] == ["TC101"]


def kernel_file(functions: int, lines: int) -> str:
    fn = """
/* Velin tide kernel {k} */
void kernel{k}(int n, int m, double A[restrict n][m], double *b) {{
  int i, j;
  double s = 0.0;
  #pragma omp parallel for schedule(static)
  for (i = 0; i < n; i++) {{
    for (j = 0; j < m; j++) {{
      A[i][j] = A[i][j] * 0.5 + b[j];
      s += A[i][j];
    }}
    if (s > 10.0) s = 0;
  }}
  for (i = 1; i < n - 1; i++)
    for (j = i; j < m; j += 2)
      A[i][j] = (A[i-1][j] + A[i+1][j]) / 2.0;
  b[0] = s;
}}
"""
    per = lines // functions - fn.count("\n")
    pad = "  b[1] = b[1] + 1.0;\n" * max(0, per)
    return "".join(fn.format(k=k).replace("  b[0] = s;\n", pad + "  b[0] = s;\n")
                   for k in range(functions))


def test_two_thousand_lines_forty_functions_is_fast():
    src = kernel_file(40, 2000)
    assert src.count("\n") >= 2000
    fp.engine()  # compiling the grammar is start-up, not reading
    t = time.process_time()
    tu, diags = parse_text(src)
    elapsed = time.process_time() - t
    assert (len(tu.functions), diags) == (40, [])
    assert elapsed < 10.0, elapsed  # a guard against a blow-up, not a speed target (about 0.15 s here)


def test_large_file_is_read_within_the_budget(monkeypatch):
    monkeypatch.setattr(fp, "GRAMMAR_TOKEN_BUDGET", 3000)
    src = kernel_file(40, 800)
    tu, diags = parse_text(src)
    assert len(tu.functions) == 40
    read_bodies = [f for f in tu.functions if f.body.body]
    assert 0 < len(read_bodies) < 40
    (diag,) = diags
    assert diag.code == "TC117"
    first_skipped = tu.functions[len(read_bodies)]
    assert (diag.span.line, diag.span.column) == (first_skipped.span.line, 1)


def test_large_file_skips_bodies_without_loops(monkeypatch):
    monkeypatch.setattr(fp, "LARGE_FILE_TOKENS", 10)
    tu, _ = parse_text("void f(int n) { n++; }\nvoid g(int n) { for (;;) n++; }")
    assert [len(f.body.body) for f in tu.functions] == [0, 1]


@pytest.mark.slow
def test_ten_megabyte_file():
    src = kernel_file(40, 2000)
    big = src * (10_000_000 // len(src) + 1)
    t = time.process_time()
    tu, diags = parse_text(big)
    assert time.process_time() - t < 120
    assert len(tu.functions) > 5_000
    assert [d.code for d in diags] == ["TC117"]


# ------------------------------------------------------------------ files and encodings
def test_parse_file_with_invalid_utf8(tmp_path):
    path = tmp_path / "gauge.c"
    path.write_bytes(b"void f(int n) {\n  /* caf\xe9 */ n++;\n}\n")
    tu, diags = parse_file(str(path))
    assert [f.name for f in tu.functions] == ["f"]
    assert [(d.code, d.span.line, d.span.column, d.path) for d in diags] == [
        ("TC190", 2, 9, str(path))]
    assert shape(tu.functions[0].body) == ["n++"]


def test_byte_order_mark_is_not_a_column(tmp_path):
    path = tmp_path / "bom.c"
    path.write_bytes("\ufeffvoid f(void) { x = 1; }".encode())
    tu, diags = parse_file(str(path))
    assert diags == [] and tu.functions[0].span.column == 1


def test_unreadable_file_raises(tmp_path):
    with pytest.raises(OSError):
        parse_file(str(tmp_path / "missing.c"))


def test_internal_errors_are_diagnostics(monkeypatch):
    def broken(self, lt):
        raise ValueError("boom")

    monkeypatch.setattr(fp.UnitParser, "parse_body", broken)
    tu, diags = parse_text("int g;\nvoid f(void) { x = 1; }\nvoid h(void) { }")
    assert tu.functions == () and [g.declarators[0].name for g in tu.globals] == ["g"]
    assert [(d.code, d.span.line) for d in diags] == [("TC111", 2), ("TC111", 3)]
    assert "function 'f' at 2:1 is skipped: internal error (ValueError: boom)" in diags[0].message

    def worse(text):
        raise RuntimeError("bust")

    import tripcount.frontend as fe

    monkeypatch.setattr(fe, "_preprocess", worse)
    tu, diags = parse_text("void f(void) { }")
    assert tu.functions == () and [d.code for d in diags] == ["TC903"]


def test_grammar_text_is_found():
    text = lalr._grammar_text()
    assert "compound" in text and "%declare" in text


def test_diagnostics_carry_the_path():
    _, diags = parse_text("void f(void) { x = @; }", path="velin/quay.c")
    assert diags[0].render().startswith("velin/quay.c:1:16: warning:")


# ------------------------------------------------------------------ never raises
_PIECES = st.sampled_from([
    "for", "(", ")", "{", "}", "[", "]", ";", ",", "i", "n", "=", "<", "<=", "++", "+=", "0",
    "1", "int", "double", "if", "else", "while", "do", "return", "#define X(a) a\n",
    "#if 1\n", "#endif\n", "#pragma omp parallel for\n", "X(", "*", "&", "?", ":", "/*", "*/",
    "\"", "'", "\\\n", "\n", " ", "@", "A", ".", "->", "struct", "typedef", "void", "f", "#",
])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(_PIECES, max_size=80), st.booleans())
def test_reading_never_raises(pieces, snippet):
    text = " ".join(pieces)
    tu, diags = parse_text(text, snippet=snippet)
    assert_no_internal_errors(diags, text)  # a contained failure of the front end is a failure too
    lines = text.count("\n") + 1
    for f in tu.functions:
        for n in walk(f):
            assert 1 <= n.span.line <= n.span.end_line <= lines
    for dg in diags:
        assert dg.message and 1 <= dg.span.line <= lines


@settings(max_examples=60, deadline=None)
@given(st.text(max_size=300))
def test_arbitrary_text_never_raises(text):
    for snippet in (False, True):
        _tu, diags = parse_text(text, snippet=snippet)
        assert_no_internal_errors(diags, text)


def test_compiled_grammar_is_kept_in_the_cache_directory(tmp_path, monkeypatch):
    # the LALR tables are written once and loaded afterwards (the file is not
    # rewritten: a second compile is a hit); a corrupt file is only a miss, an
    # unwritable directory only no cache
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "c"))
    first = lalr._compile(IRBuilder())
    files = list((tmp_path / "c").glob("grammar-*.json"))
    assert len(files) == 1
    written = files[0].stat().st_mtime_ns
    time.sleep(0.01)
    again = lalr._compile(IRBuilder())
    assert files[0].stat().st_mtime_ns == written
    assert again.terminals and len(again.terminals) == len(first.terminals)
    files[0].write_bytes(b"not a grammar")
    assert lalr._compile(IRBuilder()).terminals
    blocked = tmp_path / "file"
    blocked.write_text("x")
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(blocked / "sub"))
    assert lalr._compile(IRBuilder()).terminals
