# Tests of the gcc oracle harness (tests/oracle.py) itself, on small
# hand-written C whose counts are known from outside the project: OEIS
# sequences, the C99 standard's integer division rule, the OpenMP
# specification's round-robin rule for static schedules with a chunk size,
# and gcov (gcc's coverage tool) line counts of the unmodified corpus.
# The harness must be right before it can judge the product.

from __future__ import annotations

import itertools
import re
import shutil
from pathlib import Path

import pytest

try:
    from tests import oracle
except ImportError:  # tests/ is not a package: pytest put tests/ itself on sys.path
    import oracle

needs_gcc = pytest.mark.skipif(not oracle.gcc_available(), reason="gcc not available")
needs_openmp = pytest.mark.skipif(not oracle.openmp_available(), reason="gcc without OpenMP")

N_INT = [("n", "int", False)]


def span_of(src: str, text: str, occurrence: int = 0, with_semicolon: bool = False) -> tuple[int, int, int, int]:
    """Span (1-based, exclusive end) of the `occurrence`-th `text` in `src`, without its ';'."""
    start = -1
    for _ in range(occurrence + 1):
        start = src.index(text, start + 1)
    end = start + len(text)
    if with_semicolon:
        end = src.index(";", end) + 1
    line = src.count("\n", 0, start) + 1
    col = start - (src.rfind("\n", 0, start) + 1) + 1
    end_line = src.count("\n", 0, end) + 1
    end_col = end - (src.rfind("\n", 0, end) + 1) + 1
    return (line, col, end_line, end_col)


def counts_at(src: str, function: str, stmts: list[str], params, values: list[dict[str, int]], **kw):
    spans = [span_of(src, s) for s in stmts]
    return oracle.count_statements(src, function, spans, params, values, **kw)


TRIANGLE = """
void tri(int n, double *a)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++)
            a[i] += 1.0;
}
"""


@needs_gcc
def test_triangle_is_triangular_numbers():
    # OEIS A000217 (triangular numbers): a(n) = n(n+1)/2 = 0, 1, 3, 6, 10, 15, ...
    want = [0, 1, 3, 6, 10, 15, 21, 28, 36, 45, 55]
    got = counts_at(TRIANGLE, "tri", ["a[i] += 1.0"], [("n", "int", False), ("a", "double", True)],
                    [{"n": n} for n in range(11)])
    assert [row[0] for row in got] == want


@needs_gcc
def test_negative_and_degenerate_sizes():
    # a loop `i < n` with n <= 0 runs no iteration (C99 6.8.5.3: the test comes first)
    got = counts_at(TRIANGLE, "tri", ["a[i] += 1.0"], [("n", "int", False), ("a", "double", True)],
                    [{"n": -5}, {"n": -1}, {"n": 0}, {"n": 1}])
    assert got == [[0], [0], [0], [1]]


TETRA = """
static void tetra(long n, float *x)
{
    long i, j, k;
    for (i = 0; i < n; i++)
        for (j = 0; j <= i; j++)
            for (k = 0; k <= j; k++)
                x[k] = x[k] + 1.0f;
}
"""


@needs_gcc
def test_static_function_tetrahedral_numbers():
    # OEIS A000292 (tetrahedral numbers, from memory): n(n+1)(n+2)/6 = 0, 1, 4, 10, 20, 35
    got = counts_at(TETRA, "tetra", ["x[k] = x[k] + 1.0f"], [("n", "long", False), ("x", "float", True)],
                    [{"n": n} for n in range(6)])
    assert [r[0] for r in got] == [0, 1, 4, 10, 20, 35]


@needs_gcc
def test_span_with_or_without_semicolon():
    params = [("n", "int", False), ("a", "double", True)]
    without = [span_of(TRIANGLE, "a[i] += 1.0")]
    with_semi = [span_of(TRIANGLE, "a[i] += 1.0", with_semicolon=True)]
    pts = [{"n": 4}]
    assert oracle.count_statements(TRIANGLE, "tri", without, params, pts) == [[10]]
    assert oracle.count_statements(TRIANGLE, "tri", with_semi, params, pts) == [[10]]


BRACELESS = """
void split(int n, int *even, int *odd)
{
    int i;
    for (i = 0; i < n; i++)
        if (i % 2 == 0)
            even[i / 2] = i;
        else
            odd[i / 2] = i;
    for (i = 0; i < n; i += 3) odd[i] = 0;
}
"""


@needs_gcc
def test_statements_without_braces_and_else_branches():
    # even i in [0, n): ceil(n/2); odd: floor(n/2) (OEIS A004526, from memory: floor(n/2));
    # i = 0, 3, 6, ... below n: ceil(n/3)
    params = [("n", "int", False), ("even", "int", True), ("odd", "int", True)]
    got = counts_at(BRACELESS, "split", ["even[i / 2] = i", "odd[i / 2] = i", "odd[i] = 0"], params,
                    [{"n": n} for n in (0, 1, 2, 7, 10)])
    assert got == [[0, 0, 0], [1, 0, 1], [1, 1, 1], [4, 3, 3], [5, 5, 4]]


VLA = """
#define MIN(a,b) ((a)<(b)?(a):(b))
void rect(int N, int M, double A[restrict N][M], double alpha)
{
    double scale = alpha + 1.0;
    for (int i = 0; i < N; i++)
        for (int j = 0; j < MIN(M, i + 2); j++)
            A[i][j] = scale * A[i][j];
}
"""


@needs_gcc
def test_vla_parameter_and_macro_bound_and_floating_parameter():
    params = [("N", "int", False), ("M", "int", False), ("A", "double", True), ("alpha", "double", False)]
    got = counts_at(VLA, "rect", ["A[i][j] = scale * A[i][j]"], params,
                    [{"N": 3, "M": 5}, {"N": 4, "M": 2}, {"N": 0, "M": 9}, {"N": 5, "M": -1}])
    # rows i contribute min(M, i + 2) columns: hand sums 2+3+4, 2+2+2+2, 0, 0
    assert got == [[9], [8], [0], [0]]


KEPT = """
int steer(int n, int *a)
{
    int half = n / 2;
    int found = -1;
    for (int i = 0; i < n; i++) {
        int lim = half;
        for (int j = 0; j < lim; j++)
            a[j] = 1;
        if (i == 3)
            break;
    }
    for (int i = 0; i < n; i++) {
        a[i] = 2;
        if (a[i] == 0)
            i += 2;
    }
    for (int i = 0; i < n; i++) {
        found = i;
        if (found >= 1)
            return found;
    }
    return found;
}
"""


@needs_gcc
def test_declarations_jumps_and_scalar_assignments_keep_running():
    # `int lim = half;` must still declare lim; `break` must still break; `i += 2`
    # must still skip (a[i] stays 0 because `a[i] = 2` is replaced); `return` must return.
    # C99 6.5.5: integer division truncates toward zero, so n = -3 gives half = -1.
    stmts = ["int lim = half", "a[j] = 1", "break", "a[i] = 2", "i += 2", "found = i", "return found"]
    params = [("n", "int", False), ("a", "int", True)]
    got = counts_at(KEPT, "steer", stmts, params, [{"n": 9}, {"n": 2}, {"n": -3}])
    # n = 9: outer runs i = 0..3 (break at 3): 4 decls, 4 * 4 inner, 1 break;
    # second loop visits i = 0, 3, 6: 3 times; third loop returns at i = 1.
    assert got[0] == [4, 16, 1, 3, 3, 2, 1]
    # n = 2: half = 1; outer i = 0, 1 without break; second loop i = 0 only.
    assert got[1] == [2, 2, 0, 1, 1, 2, 1]
    assert got[2] == [0, 0, 0, 0, 0, 0, 0]


SYMBOLIC = """
long count_samples(const float *buf) { return (long)buf[0]; }
void scale(const float *buf, float *out)
{
    for (long i = 0; i < count_samples( buf ); i++)
        out[i] = 2.0f * buf[i + 1];
}
"""


@needs_gcc
def test_symbol_replaces_a_call_bound():
    params = [("buf", "float", True), ("out", "float", True)]
    got = counts_at(SYMBOLIC, "scale", ["out[i] = 2.0f * buf[i + 1]"], params,
                    [{"len": 0}, {"len": 5}, {"len": 17}], symbols={"len": "count_samples(buf)"})
    assert got == [[0], [5], [17]]


@needs_gcc
def test_c_integer_division_by_gcc():
    # C99 6.5.5p6: quotient truncated toward zero; (a/b)*b + a%b == a
    got = oracle.evaluate_c("#define MAX(a,b) ((a)>(b)?(a):(b))\n", ["(n - 1) / 2", "n % 3", "MAX(0, n)"],
                            N_INT, [{"n": 0}, {"n": -4}, {"n": 7}])
    assert got == [[0, 0, 0], [-2, -1, 0], [3, 1, 7]]


@needs_gcc
def test_failures_raise_oracle_error():
    hang = "void spin(int n) { for (;;) { n++; } }\n"
    with pytest.raises(oracle.OracleError, match="did not finish"):
        oracle.count_statements(hang, "spin", [span_of(hang, "n++")], N_INT, [{"n": 1}], timeout=2)
    broken = "void f(int n) { for (int i = 0; i < n; i++) g(i) }\n"
    with pytest.raises(oracle.OracleError):
        oracle.count_statements(broken, "f", [span_of(broken, "g(i)")], N_INT, [{"n": 1}])
    with pytest.raises(oracle.OracleError, match="no ';'"):
        oracle.count_statements(TRIANGLE, "tri", [span_of(TRIANGLE, "a[i]")], N_INT, [{"n": 1}])


PARALLEL = """
void team(int n, double *a)
{
#pragma omp parallel for
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++)
            a[i] += 1.0;
}
"""


@needs_openmp
def test_parallel_counts_are_exact():
    # atomic counters: the total is A000217 whatever the team does
    params = [("n", "int", False), ("a", "double", True)]
    got = counts_at(PARALLEL, "team", ["a[i] += 1.0"], params, [{"n": 200}])
    assert got == [[200 * 201 // 2]]


ROUND_ROBIN = """
void rr(int n, double *a)
{
#pragma omp parallel for schedule(static, 1)
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++)
            a[i] += 1.0;
#pragma omp parallel for schedule(static)
    for (int i = 0; i < n; i++)
        a[i] = 0.0;
}
"""


@needs_openmp
def test_per_thread_static_schedules():
    # OpenMP 4.5 section 2.7.1, schedule(static, chunk): chunks go to the threads
    # round-robin in thread-number order. n = 10, 4 threads: thread t gets the
    # rows i = t (mod 4), each worth i + 1: 1+5+9, 2+6+10, 3+7, 4+8.
    # schedule(static) without a chunk: at most one chunk per thread, approximately
    # equal; with n = 8 and 4 threads that is 2 rows each.
    params = [("n", "int", False), ("a", "double", True)]
    spans = [span_of(ROUND_ROBIN, "a[i] += 1.0"), span_of(ROUND_ROBIN, "a[i] = 0.0")]
    got = oracle.count_per_thread(ROUND_ROBIN, "rr", spans, params, [{"n": 10}, {"n": 8}], threads=4)
    assert [row[0] for row in got[0]] == [15, 18, 10, 12]
    assert sum(row[1] for row in got[0]) == 10
    assert [row[1] for row in got[1]] == [2, 2, 2, 2]


NUM_THREADS = """
void wide(int n, int *a)
{
#pragma omp parallel for schedule(static, 1) num_threads(4)
    for (int i = 0; i < n; i++)
        a[i] = i;
}
"""


@needs_openmp
def test_per_thread_rows_follow_a_num_threads_clause():
    params = [("n", "int", False), ("a", "int", True)]
    got = oracle.count_per_thread(NUM_THREADS, "wide", [span_of(NUM_THREADS, "a[i] = i")], params,
                                  [{"n": 8}], threads=2)
    assert [row[0] for row in got[0]] == [2, 2, 2, 2]


def test_kept_kinds():
    # pure text rules, no compiler needed
    kind = oracle._kept_kind
    assert kind("double s = b[i]", set()) == "decl"
    assert kind("const float *p = buf + 1", set()) == "decl"
    assert kind("pixel v = 0", set(), {"pixel"}) == "decl"
    assert kind("return i", set()) == "jump"
    assert kind("break", set()) == "jump"
    assert kind("acc += A[i][k] * B[k][j]", set()) == "scalar"
    assert kind("peak = fmax(peak, fabs(h[t]))", set()) == "scalar"
    assert kind("lo = MAX(0, i - w)", {"MAX"}) == "scalar"
    assert kind("j++", set()) == "scalar"
    assert kind("flag = a <= b", set()) == "scalar"
    assert kind("y[i] = acc", set()) is None
    assert kind("hist[img[i][j]]++", set()) is None
    assert kind("x = A[i] = 0", set()) is None
    assert kind("s = update(A, i)", set()) is None
    assert kind("int_count = 3", set()) == "scalar"
    assert kind("log_event(i)", set()) is None


# --------------------------------------------------------------------------
# Cross-check against gcov on the whole corpus: the instrumented program
# (statements replaced or kept) must run every statement line exactly as
# often as the unmodified program does, as gcc's own coverage tool counts it.

CORPUS = Path(__file__).resolve().parent.parent / "corpus"
_FUNC_RE = re.compile(
    r"^(?:static\s+)?(?:void|int|long|double|float)\s+(\w+)\s*\(([^)]*)\)\s*\{", re.M)
_NOT_A_STATEMENT_LINE = ("for", "while", "}", "#", "/*", "*", "//", "+", "-", "do", "{")


def _functions(text: str):
    out = []
    for m in _FUNC_RE.finditer(text):
        params = []
        for p in m.group(2).split(","):
            p = " ".join(p.split())
            head = p.split("[", 1)[0]
            name = re.findall(r"[A-Za-z_]\w*", head)[-1]
            params.append((name, head[: head.rindex(name)].replace("*", " ").strip(), "*" in head or "[" in p))
        out.append((m.group(1), params))
    return out


def _statement_lines(text: str, function: str) -> list[tuple[int, int, int, int]]:
    """Spans of the one-line statements of a function (alternately with and without ';')."""
    a, b = oracle._find_function(text, function)
    first = text.count("\n", 0, a) + 1
    spans = []
    for k, line in enumerate(text[a:b].split("\n")):
        s = line.strip()
        if not s.endswith(";") or s.startswith(_NOT_A_STATEMENT_LINE):
            continue
        col = len(line) - len(line.lstrip()) + 1
        end = line.rindex(";") + 1 + (1 if len(spans) % 2 else 0)
        spans.append((first + k, col, first + k, end))
    return spans


@needs_gcc
@pytest.mark.skipif(shutil.which("gcov") is None, reason="gcov not available")
@pytest.mark.parametrize("path", sorted(CORPUS.glob("*.c")), ids=lambda p: f"gcov-reference-{p.name}")
def test_instrumented_counts_equal_gcov_on_the_corpus(path: Path):
    """Replacing statements by counters changes no count (reference: gcov line counts)."""
    text = path.read_text(encoding="utf-8")
    checked = 0
    for fname, ptypes in _functions(text):
        names = sorted(n for n, t, p in ptypes if not p and "float" not in t and "double" not in t)
        points = [{n: 5 for n in names}, dict(zip(names, itertools.cycle((13, 4, 37))))]
        spans = _statement_lines(text, fname)
        if not spans:
            continue
        mine = oracle.count_statements(text, fname, spans, ptypes, points, path=str(path))
        # without OpenMP where a parallel loop sits inside another loop: gcc's coverage leaves
        # the lines of such a region out (the counts are the same either way)
        nested_omp = re.search(r"for \([^)]*\)[^;{]*\n\s*#pragma omp parallel", text) is not None
        ref = oracle.gcov_line_counts(text, fname, ptypes, points, openmp=False if nested_omp else None)
        for p, (row, lines) in enumerate(zip(mine, ref, strict=True)):
            for span, got in zip(spans, row, strict=True):
                if span[0] in lines:
                    checked += 1
                    assert got == lines[span[0]], (fname, span, points[p], got, lines[span[0]])
    assert checked > 0
