# Tests of tripcount.affine.inttypes: loop variables and bounds of C's
# unsigned and narrow integer types.
#
# External references, named beside each check:
#   * gcc compiling and executing the loops (tests/oracle.py evaluate_c; at -O2
#     so that counting loops of 2^32 and 2^64 iterations are closed by the
#     compiler rather than run: a conforming compiler keeps the count);
#   * C11 6.3.1.1 (integer promotion) and 6.3.1.8 (usual arithmetic
#     conversions), from memory; type widths of the LP64 ABI (common practice).

from __future__ import annotations

import os

import oracle
import pytest

from tripcount import ir
from tripcount.affine.inttypes import INT, IntType, common, expr_type, int_type
from tripcount.options import Options
from tripcount.pipeline import analyze_text

needs_gcc = pytest.mark.skipif(not oracle.gcc_available(), reason="gcc not available")
SOURCE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "inputs", "inttypes", "tide_counters.c")
TEXT = open(SOURCE, encoding="utf-8").read()


def _analyze(point: dict[str, int]):
    fr = analyze_text(TEXT, SOURCE, Options(at=point))
    return fr


def _counts(fr, function: str) -> list[int | None]:
    return [sr.count.value for nr in fr.nests if nr.nest.function == function for sr in nr.statements]


def _codes(fr, line: int) -> list[str]:
    diags = fr.diagnostics + [g for nr in fr.nests for g in nr.diagnostics]
    return sorted({g.code for g in diags if g.span.line == line and g.code != "TC508"})  # not about types


def test_types_by_width_and_signedness():
    # LP64 (common practice); plain char signed as on x86-64 (common practice)
    assert int_type("unsigned char") == IntType(8, True)
    assert int_type("const size_t") == IntType(64, True)
    assert int_type("short") == IntType(16, False)
    assert int_type("uint32_t") == IntType(32, True)
    assert int_type("double") is None and int_type("int *") is None
    # C11 6.3.1.8: unsigned int with long -> long (it holds every unsigned value);
    # unsigned int with int -> unsigned int; narrow types promote to int (6.3.1.1)
    assert common(IntType(32, True), IntType(64, False)) == IntType(64, False)
    assert common(IntType(32, True), INT) == IntType(32, True)
    assert common(IntType(8, True), IntType(16, True)) == INT
    assert common(IntType(64, True), IntType(64, False)) == IntType(64, True)
    s = ir.Span(1, 1, 1, 1)
    e = ir.Binary(s, "-", ir.Name(s, "n"), ir.IntLit(s, 1))
    assert expr_type(e, {"n": "unsigned"}.get) == IntType(32, True)


# (function, statement line, points, the model must agree with gcc at each)
AGREE = [
    ("gauge_pairs", [0, 1, 2, 7]),
    ("gauge_signed_limit", [-5, 0, 3]),
    ("gauge_blocks", [0, 1, 9]),
    ("gauge_bytes", [0, 17, 255]),
    ("gauge_halves", [0, 2, 8]),
    ("gauge_plain", [-5, 0, 5]),
]

COUNTER = """
unsigned long long __tc_run_{f}(long long nv) {{
    double buf[1];
    unsigned long long runs = 0;
    {body}
    return runs;
}}
"""

BODIES = {
    "gauge_pairs": "unsigned n = nv; for (unsigned i = 0; i < n - 1; i++) runs++; (void)buf;",
    "gauge_signed_limit": "int n = nv; for (unsigned i = 0; i < n; i++) runs++; (void)buf;",
    "gauge_blocks": "long n = nv; for (size_t i = 0; i < n - 1; i++) runs++; (void)buf;",
    "gauge_bytes": "int n = nv; for (unsigned char c = 0; c < n; c++) runs++; (void)buf;",
    "gauge_halves": "unsigned n = nv; for (unsigned i = n; i > 0; i -= 2) runs++; (void)buf;",
    "gauge_plain": "int n = nv; for (int i = 0; i < n; i++) runs++; for (unsigned i = 0; i < n + 2u; i++) runs++;",
}


@needs_gcc
@pytest.mark.parametrize("function,points", AGREE, ids=[a[0] for a in AGREE])
def test_counts_agree_with_gcc(function, points):
    src = "#include <stddef.h>\n" + COUNTER.format(f=function, body=BODIES[function])
    # gcc -O2 executes the loop (or closes it in the compiler) at each point
    want = oracle.evaluate_c(src, [f"__tc_run_{function}(n)"], [("n", "long long", False)],
                             [{"n": p} for p in points], flags=["-O2"])
    for p, (gcc_runs,) in zip(points, want, strict=True):
        got = sum(_counts(_analyze({"n": p}), function))
        # evaluate_c prints a long long: 2^64 - 1 runs come back as -1
        assert got == gcc_runs % (1 << 64), (function, p)


def test_issue_values_named():
    # the values gcc gives (see test_counts_agree_with_gcc): 2^32 - 1 at n == 0,
    # 2^32 - 5 for int n == -5, 2^64 - 1 for size_t at n == 0
    assert _counts(_analyze({"n": 0}), "gauge_pairs") == [4_294_967_295]
    assert _counts(_analyze({"n": -5}), "gauge_signed_limit") == [4_294_967_291]
    assert _counts(_analyze({"n": 0}), "gauge_blocks") == [18_446_744_073_709_551_615]
    fr = _analyze({"n": 0})
    assert _codes(fr, 7) == ["TC221"] and _codes(fr, 13) == ["TC221"] and _codes(fr, 19) == ["TC221"]
    assert _codes(fr, 43) == []
    assert _codes(fr, 45) == ["TC221"]  # n + 2u is unsigned: n = -5 makes it 2^32 - 3


CAPPED = """
long long __tc_capped_{f}(long long nv) {{
    long long runs = 0;
    {body}
    return runs;
}}
"""
CAP = 100_000


@needs_gcc
def test_loops_that_never_end_are_refused_or_assumed_away():
    capped = {
        "gauge_all_bytes": f"for (unsigned char c = 0; c < 300; c++) if (++runs > {CAP}) break; (void)nv;",
        "gauge_halves": f"unsigned n = nv; for (unsigned i = n; i > 0; i -= 2) if (++runs > {CAP}) break;",
    }
    src = "".join(CAPPED.format(f=f, body=b) for f, b in capped.items())
    got = oracle.evaluate_c(src, [f"__tc_capped_{f}(n)" for f in capped], [("n", "long long", False)],
                            [{"n": 3}])
    # gcc: both still run after CAP iterations (unsigned char wraps at 256;
    # i = 3, 1, then 4294967295, ... odd forever)
    assert got == [[CAP + 1, CAP + 1]]
    fr = _analyze({"n": 3})
    assert "TC208" in _codes(fr, 37)
    assert _counts(fr, "gauge_all_bytes") == [None]
    (w,) = [g for nr in fr.nests for g in nr.diagnostics if g.code == "TC222" and g.span.line == 31]
    assert "n > 0 && (n - 1) % 2 < 1" in w.message
    assert _counts(fr, "gauge_halves") == [0]  # counted under the stated assumption
    (w,) = [g for nr in fr.nests for g in nr.diagnostics if g.code == "TC222" and g.span.line == 25]
    assert "n > 255" in w.message


def test_int_loop_to_a_huge_constant_is_refused():
    fr = analyze_text("void f(double *x) { for (int i = 0; i < 1000000000000000000000000000000; i++) x[i] = 0; }",
                      "huge.c", Options())
    (nr,) = fr.nests
    (g,) = [g for g in nr.diagnostics if g.code == "TC208"]
    assert "overflows" in g.message and "2147483647" in g.message
