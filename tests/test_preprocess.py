# Tests of tripcount/frontend/preprocess.py: tokens and their positions,
# comments and continuations, directives, macro expansion (C11 6.10.3, from
# memory: a macro is not re-expanded inside its own expansion; arguments are
# expanded before substitution unless next to # or ##), conditionals, and the
# pragma tokens handed to the parser.

from __future__ import annotations

import os

from tripcount.frontend import preprocess as pp
from tripcount.frontend.includes import Includes
from tripcount.frontend.lexer import SourceMap, char_value, int_value, tokenize
from tripcount.frontend.preprocess import preprocess

INPUTS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "inputs", "frontend")


def values(text: str) -> list[str]:
    """The spellings of the preprocessed tokens."""
    return [t.value for t in preprocess(text).tokens]


def codes(text: str) -> list[str]:
    return [d.code for d in preprocess(text).diagnostics]


def pos(text: str, tok: pp.Tok) -> tuple[int, int, int, int]:
    sm = SourceMap(text)
    return sm.position(tok.start) + sm.position(tok.end)


# ------------------------------------------------------------------ tokens
def test_tokens_and_positions():
    text = "for (i = 0; i <= n;\n\ti += 2) a[i] = .5e1f;"
    toks = tokenize(text)
    assert [t.value for t in toks] == [
        "for", "(", "i", "=", "0", ";", "i", "<=", "n", ";", "i", "+=", "2", ")",
        "a", "[", "i", "]", "=", ".5e1f", ";"]
    assert [t.kind for t in toks[:5]] == ["id", "punct", "id", "punct", "num"]
    plus = toks[11]
    assert pos(text, plus) == (2, 4, 2, 6)  # a tab is one column; the end is exclusive


def test_comments_are_dropped_and_positions_kept():
    text = "a /* tide\n table */ = // note\n b;"
    toks = tokenize(text)
    assert [t.value for t in toks] == ["a", "=", "b", ";"]
    assert pos(text, toks[1]) == (2, 11, 2, 12)
    assert pos(text, toks[2]) == (3, 2, 3, 3)


def test_line_continuation_maps_back_to_the_original():
    text = "x = al\\\npha + 1;"
    toks = tokenize(text)
    assert [t.value for t in toks] == ["x", "=", "alpha", "+", "1", ";"]
    assert pos(text, toks[2]) == (1, 5, 2, 4)
    assert pos(text, toks[3]) == (2, 5, 2, 6)


def test_crlf_line_endings():
    text = "a = 1;\r\nb = 2;\r\n"
    toks = tokenize(text)
    assert pos(text, toks[4]) == (2, 1, 2, 2)


def test_strings_chars_and_other_characters():
    toks = tokenize("s = \"a \\\" b\"; c = 'x'; @ `")
    assert [(t.kind, t.value) for t in toks if t.kind != "punct"] == [
        ("id", "s"), ("str", '"a \\" b"'), ("id", "c"), ("chr", "'x'"), ("other", "@"),
        ("other", "`")]


def test_unterminated_comment():
    pre = preprocess("int a;\n/* never closed\nint b;")
    assert [t.value for t in pre.tokens] == ["int", "a", ";"]
    assert [d.code for d in pre.diagnostics] == ["TC105"]
    assert "2:1" in pre.diagnostics[0].message


def test_source_map():
    sm = SourceMap("ab\ncd\n")
    assert sm.position(0) == (1, 1)
    assert sm.position(3) == (2, 1)
    assert sm.offset(2, 2) == 4
    assert sm.offset(99, 1) == 6


def test_literal_values():
    # C11 6.4.4.1: hexadecimal, octal and suffixed integer constants
    assert [int_value(s) for s in ["0x1F", "017", "10u", "7UL", "5ll", "0", "0b11"]] == \
        [31, 15, 10, 7, 5, 0, 3]
    assert int_value("09") is None
    assert [char_value(s) for s in ["'a'", "'\\n'", "'\\0'", "'\\x41'", "L'b'"]] == \
        [97, 10, 0, 65, 98]


# ------------------------------------------------------------------ macros
def test_object_and_function_like_macros_nest():
    text = "#define N 64\n#define SQ(x) ((x) * (x))\n#define AREA SQ(N)\nv = AREA;"
    assert values(text) == ["v", "=", "(", "(", "64", ")", "*", "(", "64", ")", ")", ";"]


def test_expansion_carries_the_invocation_position():
    text = "#define MIN(a, b) ((a) < (b) ? (a) : (b))\n  m = MIN(i, n);"
    pre = preprocess(text)
    expanded = pre.tokens[2:-1]
    assert {pos(text, t) for t in expanded} == {(2, 7, 2, 16)}
    assert pos(text, pre.tokens[0]) == (2, 3, 2, 4)


def test_macro_is_not_expanded_inside_itself():
    text = "#define SELF SELF + 1\nx = SELF;"
    pre = preprocess(text)
    assert [t.value for t in pre.tokens] == ["x", "=", "SELF", "+", "1", ";"]
    assert [d.code for d in pre.diagnostics] == ["TC103"]
    assert "'SELF'" in pre.diagnostics[0].message


def test_mutual_recursion_stops():
    text = "#define A B + 1\n#define B A * 2\nx = A;"
    assert values(text) == ["x", "=", "A", "*", "2", "+", "1", ";"]


def test_arguments_are_expanded_before_substitution():
    text = "#define ID(x) x\n#define TWICE(x) ID(x) ID(x)\ny = ID(ID(3)) TWICE(ID(4));"
    assert values(text) == ["y", "=", "3", "4", "4", ";"]


def test_function_like_name_without_arguments_is_a_name():
    text = "#define F(x) (x + 1)\nint F; y = F(2);"
    assert values(text) == ["int", "F", ";", "y", "=", "(", "2", "+", "1", ")", ";"]


def test_arguments_with_parentheses_and_commas():
    text = "#define FST(a, b) a\nx = FST(f(1, 2), g(3));"
    assert values(text) == ["x", "=", "f", "(", "1", ",", "2", ")", ";"]


def test_stringify_paste_and_variadic():
    text = ("#define STR(x) #x\n#define CAT(a, b) a ## b\n#define CALL(f, ...) f(__VA_ARGS__)\n"
            "s = STR(tide  level); v = CAT(wave, 3); CALL(g, 1, 2);")
    assert values(text) == ["s", "=", '"tide level"', ";", "v", "=", "wave3", ";",
                            "g", "(", "1", ",", "2", ")", ";"]


def test_undef_and_redefinition():
    text = "#define N 1\na = N;\n#undef N\nb = N;\n#define N 2\nc = N;"
    assert values(text) == ["a", "=", "1", ";", "b", "=", "N", ";", "c", "=", "2", ";"]


def test_macros_are_recorded():
    pre = preprocess("#define N 64\n#define IDX(i, j) ((i) * N + (j))\n#define E\n")
    assert [(m.name, m.params, m.body) for m in pre.macros] == [
        ("N", None, "64"), ("IDX", ("i", "j"), "((i) * N + (j))"), ("E", None, "")]
    assert (pre.macros[1].span.line, pre.macros[1].span.column) == (2, 1)


def test_multi_line_macro():
    text = "#define SUM(a, b) \\\n   ((a) + \\\n    (b))\nx = SUM(1, 2);"
    assert values(text) == ["x", "=", "(", "(", "1", ")", "+", "(", "2", ")", ")", ";"]


def test_bad_macro_calls():
    assert codes("#define F(a, b) a\nx = F(1);") == ["TC110"]
    assert codes("#define F(a) a\nx = F(1;") == ["TC110"]
    assert values("#define F(a) a\nx = F(1;") == ["x", "=", "F", "(", "1", ";"]


def test_bad_define():
    assert codes("#define\n#define (x) 1\n#define F(a b) a\n#undef\n") == \
        ["TC109", "TC109", "TC109", "TC109"]


def test_exponential_expansion_stops(monkeypatch):
    monkeypatch.setattr(pp, "EXPANSION_FLOOR", 10_000)
    lines = ["#define A0 x x"] + [f"#define A{k} A{k - 1} A{k - 1}" for k in range(1, 40)]
    pre = preprocess("\n".join(lines) + "\ny = A39;")
    assert [d.code for d in pre.diagnostics] == ["TC108"]
    assert len(pre.tokens) < 20_000


def test_deeply_nested_macro_arguments():
    text = "#define F(x) (x)\ny = " + "F(" * 200 + "1" + ")" * 200 + ";"
    pre = preprocess(text)
    assert "TC108" in [d.code for d in pre.diagnostics]  # stops expanding, does not crash


# ------------------------------------------------------------------ conditionals
def test_if_zero_and_one():
    assert values("#if 0\na;\n#else\nb;\n#endif\n#if 1\nc;\n#endif") == ["b", ";", "c", ";"]


def test_elif_defined_and_expressions():
    text = ("#define NB 64\n#if defined(NB) && NB > 32\nwide;\n#elif NB > 8\nmid;\n#else\nnarrow;\n"
            "#endif\n#if !defined NB || (NB % 3 == 1) ? 1 : 0\nodd;\n#endif\n"
            "#if UNKNOWN_NAME\nno;\n#elif (2 + 3) * 4 == 20 && -1 < 0\nyes;\n#endif")
    assert values(text) == ["wide", ";", "odd", ";", "yes", ";"]


def test_ifdef_ifndef_and_nesting():
    text = ("#ifdef NO_SUCH\n#if 1\nx;\n#endif\n#else\ny;\n#endif\n"
            "#ifndef GUARD\n#define GUARD\nz;\n#endif\n#ifndef GUARD\nw;\n#endif")
    assert values(text) == ["y", ";", "z", ";"]


def test_directives_in_inactive_branches_are_ignored():
    text = "#if 0\n#define N 1\n#error no\n#pragma omp for\n#endif\nN;"
    pre = preprocess(text)
    assert [t.value for t in pre.tokens] == ["N", ";"]
    assert pre.diagnostics == []


def test_unevaluable_condition_takes_first_branch():
    pre = preprocess('#if __has_include(<omp.h>)\na;\n#else\nb;\n#endif')
    assert [t.value for t in pre.tokens] == ["a", ";"]
    assert [d.code for d in pre.diagnostics] == ["TC113"]
    assert "1:1" in pre.diagnostics[0].message


def test_huge_values_are_not_computed():
    pre = preprocess("#if (1 << 1000) || 7 * 100000000000000000000000000000000000000000\na;\n#endif")
    assert [t.value for t in pre.tokens] == ["a", ";"]
    assert [d.code for d in pre.diagnostics] == ["TC113"]


def test_openmp_is_predefined():
    assert values("#ifdef _OPENMP\nomp;\n#endif") == ["omp", ";"]


def test_conditional_problems():
    assert codes("#endif\n#else\n") == ["TC107", "TC107"]
    pre = preprocess("#if 1\na;\n")
    assert [d.code for d in pre.diagnostics] == ["TC106"]
    assert [t.value for t in pre.tokens] == ["a", ";"]


def test_missing_include_noted_error_reported(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # a text without a path looks for quoted headers here
    pre = preprocess('#include <stdio.h>\n#include "velin.h"\n#error tide table missing\nx;')
    assert [t.value for t in pre.tokens] == ["x", ";"]
    assert [d.code for d in pre.diagnostics] == ["TC119", "TC114"]
    assert "tide table missing" in pre.diagnostics[1].message


# ------------------------------------------------------------------ pragmas
def test_omp_pragma_becomes_one_token():
    text = "#define CH 8\n#pragma omp parallel for schedule(static, CH)\nfor (;;);\n#pragma GCC unroll 4\n"
    pre = preprocess(text)
    p = pre.tokens[0]
    assert p.kind == "pragma"
    assert p.value == "parallel for schedule(static, CH)"
    assert [t.value for t in p.extra] == ["parallel", "for", "schedule", "(", "static", ",", "8", ")"]
    assert pos(text, p) == (2, 1, 2, 46)
    assert [t.value for t in pre.tokens[1:]] == ["for", "(", ";", ";", ")", ";"]


def test_harbour_macros_file():
    with open(os.path.join(INPUTS, "harbour_macros.c"), encoding="utf-8") as f:
        text = f.read()
    pre = preprocess(text)
    names = [m.name for m in pre.macros]
    assert names == ["NB", "HALF", "SQ", "IDX", "LOOP", "SELF", "LONG_SUM", "WIDE", "TIDE_TABLE",
                     "TMP"]
    assert "NB" in pre.defined and "TMP" not in pre.defined
    assert [d.code for d in pre.diagnostics] == ["TC103"]
    assert "never" not in [t.value for t in pre.tokens]


# ------------------------------------------------------------------ expansion size (issue 7)
def _doubling(levels: int, use: str) -> str:
    lines = ["#define A0 x"] + [f"#define A{k} A{k - 1} A{k - 1}" for k in range(1, levels + 1)]
    return "\n".join(lines) + "\n" + use


def test_exponential_macro_use_is_capped_quickly_and_left_as_written():
    import resource
    import time

    text = _doubling(40, "void f(int N) { for (int i = 0; i < N; i++) { A40; } }\n")
    assert len(text) < 1100  # a 1 KB file asking for 2^40 tokens
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    start = time.monotonic()
    pre = preprocess(text)
    elapsed = time.monotonic() - start
    grown_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before
    assert elapsed < 5.0, elapsed  # a guard against a blow-up, not a speed target
    assert grown_kib < 200 * 1024, grown_kib  # bounded memory (ru_maxrss is in KiB on Linux)
    (diag,) = [d for d in pre.diagnostics if d.code == "TC118"]
    line = text.count("\n", 0, text.index("A40;")) + 1
    column = text.index("A40;") - text.rfind("\n", 0, text.index("A40;"))
    assert (diag.span.line, diag.span.column) == (line, column)
    assert str(pp.MAX_USE_TOKENS) in diag.message
    # the use is kept as written (no partial expansion), the rest of the file is expanded as usual
    vals = [t.value for t in pre.tokens]
    assert vals[-5:] == ["{", "A40", ";", "}", "}"]
    assert "x" not in vals


def test_many_capped_uses_are_bounded_by_the_file_budget():
    import time

    text = _doubling(40, "y = " + " + ".join(["A40"] * 200) + ";\nz = A3;\n")
    start = time.monotonic()
    pre = preprocess(text)
    assert time.monotonic() - start < 15  # a guard against a blow-up, not a speed target
    codes = [d.code for d in pre.diagnostics]
    assert codes[-1] == "TC108" and set(codes[:-1]) == {"TC118"}  # capped uses, then the file budget
    assert "budget" in pre.diagnostics[-1].message
    vals = [t.value for t in pre.tokens]
    assert vals[-4:] == ["z", "=", "A3", ";"]  # past the file budget nothing more is expanded


def test_large_but_reasonable_expansion_is_kept_whole():
    # 2^12 = 4096 tokens from one use: below the per-use cap, expanded in full
    pre = preprocess(_doubling(12, "y = A12;"))
    assert [d.code for d in pre.diagnostics] == []
    assert [t.value for t in pre.tokens].count("x") == 4096


def test_function_like_macro_capped_use_keeps_its_arguments_as_written():
    lines = ["#define F0(a) a"] + [f"#define F{k}(a) F{k - 1}(a) F{k - 1}(a)" for k in range(1, 31)]
    text = "\n".join(lines) + "\ny = F30(q + 1); w = F2(r);\n"
    pre = preprocess(text)
    assert [d.code for d in pre.diagnostics] == ["TC118"]
    vals = [t.value for t in pre.tokens]
    assert vals[:8] == ["y", "=", "F30", "(", "q", "+", "1", ")"]
    assert vals[8:] == [";", "w", "=", "r", "r", "r", "r", ";"]


def test_capped_macro_in_an_if_condition_is_not_evaluated():
    pre = preprocess(_doubling(40, "#if A40\nyes;\n#else\nno;\n#endif\n"))
    assert [d.code for d in pre.diagnostics] == ["TC118", "TC113"]  # not read as 0: the first branch is taken
    assert [t.value for t in pre.tokens] == ["yes", ";"]


# -- #include, -I, -D, -U ------------------------------------------------------

INCLUDES = os.path.join(INPUTS, "includes")
SMOOTH = os.path.join(INCLUDES, "harbour_smooth.c")


def _smooth(**kw):
    text = open(SMOOTH, encoding="utf-8").read()
    inc = Includes(dirs=(os.path.join(INCLUDES, "include"),), **kw)
    return text, preprocess(text, SMOOTH, inc)


def test_quoted_header_from_an_include_directory_gives_macros():
    text, pre = _smooth(defines=(("HALO", "2"),))
    assert {"GRID_X", "GRID_Y", "SQRT_FUN", "HALO"} <= set(pre.defined)
    spelled = " ".join(t.value for t in pre.tokens)
    # the loop bounds read the header's sizes and the -D value
    assert "i < 1024 - 1" in spelled and "j < ( 1024 / 2 ) + 2" in spelled
    assert "sqrt (" in spelled
    # header tokens carry the position of the #include directive in this file
    typedef = next(t for t in pre.tokens if t.value == "typedef")
    assert pre.source.position(typedef.start) == (3, 1)
    # the helper's body defined in the header is dropped (a prototype remains)
    assert "row [ i ] = 0" not in spelled and "clear_row" in spelled


def test_pragma_once_and_guards_read_a_header_once():
    _, pre = _smooth()
    assert sum(1 for t in pre.tokens if t.value == "typedef") == 1


def test_missing_quoted_header_is_a_note_system_header_is_silent():
    _, pre = _smooth()
    codes = [(g.code, g.span.line) for g in pre.diagnostics]
    assert ("TC119", 6) in codes  # "velin_tides.h" is nowhere
    assert all(line != 5 for _, line in codes)  # <math.h> is not looked for


def test_problems_inside_a_header_are_one_warning_at_the_directive():
    _, pre = _smooth(defines=(("TIDE_DEBUG", "1"),))
    (w,) = [g for g in pre.diagnostics if g.code == "TC120"]
    assert w.span.line == 3  # the #include of velin_grid.h (velin_math.h is nested in it)
    assert "velin_math.h:5:1" in w.message


def test_command_line_define_undefine_and_function_like():
    text = "int a = W; int b = SQ(3); int c = _OPENMP;\n#ifdef GONE\nint d;\n#endif\n"
    pre = preprocess(text, None, Includes(defines=(("W", "1"), ("SQ(x)", "((x)*(x))"), ("GONE", "1")),
                                          undefines=("GONE", "_OPENMP")))
    spelled = " ".join(t.value for t in pre.tokens)
    assert "a = 1" in spelled and "( ( 3 ) * ( 3 ) )" in spelled
    assert "int d" not in spelled and "c = _OPENMP" in spelled
    assert [m.name for m in pre.macros] == []  # command-line macros are not the file's


def test_include_cycle_and_depth_are_bounded(tmp_path):
    (tmp_path / "a.h").write_text('#include "b.h"\nint from_a;\n')
    (tmp_path / "b.h").write_text('#include "a.h"\nint from_b;\n')
    main = tmp_path / "m.c"
    main.write_text('#include "a.h"\n')
    pre = preprocess(main.read_text(), str(main))
    assert any(g.code == "TC120" and "TC121" in g.message for g in pre.diagnostics)


def test_include_of_a_fifo_does_not_block(tmp_path):
    os.mkfifo(tmp_path / "pipe.h")
    main = tmp_path / "m.c"
    main.write_text('#include "pipe.h"\nint x;\n')
    pre = preprocess(main.read_text(), str(main))
    assert any(g.code == "TC121" and "regular file" in g.message for g in pre.diagnostics)
