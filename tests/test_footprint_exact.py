# Tests of tripcount.analysis.footprint.exact: every working-set value at the
# --at sizes (elements, bytes, cache lines; per loop level the largest over
# the outer loop variables, per iteration, and the whole nest) equals the
# brute force over what gcc's compiled code touches: tests/accesstrace.py runs
# each kernel of tests/inputs/footprint/velin_exact.c as gcc compiles it and
# records the byte offset of every array access (reference: gcc, ISO C99
# 6.5.2.1 packed row-major layout, arrays starting on a 64-byte boundary, the
# model's stated assumption). Sizes are kept small where a trace would be
# long; the values at the large sizes of the scenario are checked against
# counts worked out by hand from the same layout rule (marked as such).

from __future__ import annotations

import functools
import os

import islpy as isl
import pytest
from accesstrace import access_trace, working_sets
from conftest import INPUTS
from internal import assert_no_internal_errors
from oracle import gcc_available

from tripcount import pipeline
from tripcount.analysis.footprint import exact
from tripcount.options import Options

# the kernels file is analysed once per size (_analysed): its tests stay on one worker
pytestmark = pytest.mark.xdist_group("footprint-exact")

KERNELS = os.path.join(INPUTS, "footprint", "velin_exact.c")
SRC = open(KERNELS, encoding="utf-8").read()
LINE = 64
CACHES = {"L1": 32 * 1024, "L2": 1024 * 1024, "L3": 32 * 1024 * 1024}

PARAMS = {
    "harbour_blur": [("H", "int", False), ("W", "int", False), ("img", "double", True), ("out", "double", True),
                     ("k", "double", True)],
    "harbour_blur_flat": [("H", "int", False), ("W", "int", False), ("img", "double", True),
                          ("out", "double", True), ("k", "double", True)],
    "quay_elimination": [("n", "int", False), ("A", "double", True)],
    "quay_blocked": [("n", "int", False), ("A", "double", True), ("B", "double", True), ("C", "double", True)],
    "tide_pairs": [("n", "int", False), ("m", "int", False), ("x", "double", True), ("g", "double", True)],
    "tide_rows": [("n", "int", False), ("m", "int", False), ("A", "double", True), ("x", "double", True),
                  ("y", "double", True)],
    "wave_steps": [("T", "int", False), ("nx", "int", False), ("ny", "int", False), ("u", "double", True),
                   ("v", "double", True)],
}


SMALL = {"H": 7, "W": 21, "n": 37, "m": 13, "T": 3, "nx": 9, "ny": 11}
OTHER = {"H": 5, "W": 16, "n": 33, "m": 8, "T": 2, "nx": 6, "ny": 9}
LARGE = {"H": 1001, "W": 2000, "n": 1000, "m": 13, "T": 10, "nx": 300, "ny": 300}


@pytest.fixture(autouse=True)
def _unhurried(monkeypatch):
    """Time budgets of the exact values well above what these kernels need on an idle machine, so that
    a loaded machine (parallel test workers) does not turn values into bounds or blanks: these tests
    check the values, the budgets have tests of their own."""
    from tripcount.analysis.footprint import exact as ex
    from tripcount.analysis.footprint import quantities, scopes
    monkeypatch.setattr(ex, "EXACT_BUDGET_S", 60.0)
    monkeypatch.setattr(scopes, "CHECK_BUDGET_S", 20.0)
    monkeypatch.setattr(quantities, "BUDGET_S", 60.0)


@functools.lru_cache(maxsize=4)
def _analysed(key: tuple) -> dict:
    fr = pipeline.analyze_file(KERNELS, Options(at=dict(key), line_size=LINE, caches=dict(CACHES), time_limit=300))
    assert_no_internal_errors(fr.all_diagnostics())
    return {nr.nest.function: nr for nr in fr.nests}


def _nests(at: dict[str, int]) -> dict:
    """Every nest of the kernels file analysed at `at` (once per module run)."""
    return _analysed(tuple(sorted(at.items())))


def _check_against_trace(function: str, at: dict[str, int]) -> int:
    """Every exact value of the nest equals the trace's brute force; returns how many were compared."""
    nr = _nests(at)[function]
    nest = nr.nest
    at = {p: at[p] for p in nest.params}
    stmts = [s for s in nest.statements if s.domain is not None]
    spans = [((s.span.line, s.span.column, s.span.end_line, s.span.end_column), s.loop_vars) for s in stmts]
    events = access_trace(SRC, function, PARAMS[function], at, spans)
    compared = 0

    def check(fp, depth: int, members: set[int], what: str) -> None:
        nonlocal compared
        ev = [e for e in events if e.stmt in members]
        groups = working_sets(ev, depth, LINE)
        want = tuple(max(v[k] for v in groups.values()) for k in range(3))
        for k, c in enumerate((fp.elements, fp.bytes, fp.lines)):
            assert c.value is not None, (what, k)
            if c.bound:
                assert c.value >= want[k], (what, k, c.value, want)
            else:
                assert c.value == want[k], (what, ("elements", "bytes", "lines")[k], c.value, want[k])
                compared += 1

    check(nr.extras["footprint"].footprint, 0, set(range(len(stmts))), "whole nest")
    for lr in nr.loops:
        ws = lr.extras.get("working_set")
        if ws is None:
            continue
        members = {k for k, s in enumerate(stmts) if lr.loop.index in s.loops}
        check(ws.whole, lr.loop.depth, members, f"loop {lr.loop.var} line {lr.loop.span.line}")
        if ws.per_iteration is not None:
            check(ws.per_iteration, lr.loop.depth + 1, members, f"one iteration of {lr.loop.var}")
    return compared


gcc = pytest.mark.skipif(not gcc_available(), reason="gcc not available")


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("function, at", [
    ("harbour_blur", SMALL),  # rows of 168 B: not a multiple of the line
    ("harbour_blur", OTHER),  # rows of 128 B
    ("harbour_blur_flat", SMALL),  # the same blur on flattened buffers: the packed layout of W columns
    ("quay_blocked", SMALL),  # interior and boundary tiles, rows of 296 B
    ("tide_rows", SMALL),  # VLA rows of 104 B
    ("tide_pairs", SMALL),  # two rows i and j of one matrix, triangular
    ("quay_elimination", SMALL),  # rows shortening with k
    ("tide_rows", OTHER),  # rows of 64 B
    ("wave_steps", SMALL),
    ("wave_steps", OTHER),
])
def test_every_value_at_the_sizes_equals_the_gcc_trace(function, at):
    assert _check_against_trace(function, at) > 0


def test_convolution_window_at_the_large_size_is_a_few_lines():
    """H=1001, W=2000: rows of 16000 B (a multiple of 64), so the 3x3 window of img (3 rows x 3
    doubles) touches at most 2 lines per row; k (72 B from a line boundary) 2 lines; out 1 line.
    Counted by hand from the packed layout (line = floor(8*(W*r + c)/64)); the small-size test above
    checks the same computation against gcc."""
    nr = _nests(LARGE)["harbour_blur"]
    ws = {lr.loop.var: lr.extras["working_set"] for lr in nr.loops}
    di = ws["di"].whole
    assert not di.lines.bound and di.lines.value == 3 * 2 + 2 + 1
    assert di.by_array["img"].lines.value == 6 and di.by_array["img"].bytes.value == 72
    assert ws["di"].occupancy == 9 * LINE
    assert ws["dj"].whole.lines.value == 2 + 1 + 1 + 1  # one row of img, k's row, out
    assert all(ws[v].fits.get("L1") for v in ("di", "dj"))
    assert not [d for d in nr.diagnostics if d.code == "TC401" and "'di'" in d.render()]


def test_blocked_product_inner_loop_at_1000():
    """n=1000, tiles of 32: with i, j fixed the k loop reads 32 doubles of a row of A (256 B: 4 or 5
    lines, rows of 8000 B start on a line boundary, tile starts at multiples of 256 B: 4), 32 rows of B
    (one line each) and one element of C: 37 lines (by hand from the packed layout)."""
    nr = _nests(LARGE)["quay_blocked"]
    k = {lr.loop.var: lr.extras["working_set"] for lr in nr.loops}["k"]
    assert not k.whole.lines.bound
    assert k.whole.lines.value == 4 + 32 + 1
    assert k.whole.elements.value == 32 + 32 + 1


def test_maximum_splits_by_alignment_offset():
    """A window of 3 doubles sliding along a row: 1 line or 2 depending on the start (brute force)."""
    rel = isl.Map("{ [j] -> [a] : j <= a <= j + 2 and 0 <= j <= 40 }")
    lm = exact.packed_line_map(1, [], 8, 64)
    res = isl.Map.from_pw_multi_aff(rel.lexmin_pw_multi_aff()).apply_range(exact._residue_map([1], 8, 64))
    part = exact.Part(rel, rel.apply_range(lm), 1, res)
    got = exact.maximum([part], isl.Set("{ [j] : 0 <= j <= 40 }"), ["j"])
    want = max(len({(8 * a) // 64 for a in range(j, j + 3)}) for j in range(41))
    assert got.side is None and got.value == want == 2


def test_flattened_blur_has_the_working_sets_of_the_two_dimensional_one():
    """img[(i + di - 1)*W + (j + dj - 1)] is img[i + di - 1][j + dj - 1] of a W-column matrix in memory:
    same elements, bytes and lines at every loop level (the gcc trace test checks one of them)."""
    nests = _nests(SMALL)
    flat = {lr.loop.var: lr.extras["working_set"].whole for lr in nests["harbour_blur_flat"].loops}
    two_d = {lr.loop.var: lr.extras["working_set"].whole for lr in nests["harbour_blur"].loops}
    for v, ws in two_d.items():
        for q in ("elements", "bytes", "lines"):
            a, b = getattr(flat[v], q), getattr(ws, q)
            assert (a.value, a.bound) == (b.value, b.bound), (v, q)


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("function", ["harbour_blur", "quay_blocked"])
def test_values_without_formulas_are_exact_or_bounds(monkeypatch, function):
    """With no time for footprint formulas, the maximum over the outer variables is not taken from a
    formula's extreme values (an unchecked claim): every value shown as exact still equals the trace."""
    from tripcount.analysis.footprint import quantities
    monkeypatch.setattr(quantities, "BUDGET_S", 0.0)
    _analysed.cache_clear()
    try:
        assert _check_against_trace(function, SMALL) > 0  # some values stay exact without formulas
    finally:
        _analysed.cache_clear()


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("function, inner", [("tide_pairs", "k"), ("quay_elimination", "j")])
@pytest.mark.parametrize("at", [SMALL, OTHER], ids=["rows of 104 or 296 B", "rows of 64 or 264 B"])
def test_rows_at_varying_distance_without_enumerating_the_outer_values(monkeypatch, function, inner, at):
    """With no outer value tried one by one, the inner loop's rows (x[i][.] and x[j][.] at a varying
    distance; A[i][k+1..] and A[k][k+1..], shortening with k) are maximised reference by reference:
    exact where every part is at its largest and no two share a line, checked against the gcc trace
    like every other value."""
    from tripcount.analysis.footprint import exact as ex
    monkeypatch.setattr(ex, "POINT_CAP", 0)
    _analysed.cache_clear()
    try:
        assert _check_against_trace(function, at) > 0
        ws = {lr.loop.var: lr.extras["working_set"] for lr in _nests(at)[function].loops}
        assert not ws[inner].whole.lines.bound
    finally:
        _analysed.cache_clear()


def test_two_rows_at_1000_are_exact():
    """n = m = 1000: rows of 8000 B (125 lines, each starting on a line boundary): the k loop touches two
    rows, 250 lines (by hand from the packed layout)."""
    src = SRC[SRC.index("void tide_pairs"):]
    src = src[:src.index("\n}\n") + 3]
    fr = pipeline.analyze_text(src, "tide_pairs.c", Options(at={"n": 1000, "m": 1000}, line_size=LINE,
                                                            caches=dict(CACHES), time_limit=300))
    (nr,) = fr.nests
    ws = {lr.loop.var: lr.extras["working_set"] for lr in nr.loops}
    assert (ws["k"].whole.lines.value, ws["k"].whole.lines.bound) == (250, False)
    # the j loop at i = 999 (a triangular loop: too many values of i to try one by one, its formula
    # (i + 1)*(m + 1) is maximised at the end of the range): rows 0..999 of x and row 999 of g
    assert (ws["j"].whole.elements.value, ws["j"].whole.elements.bound) == (1000 * 1000 + 1000, False)


def _packed_lines(rows: int, cols: int) -> int:
    """Lines of a packed rows x cols matrix of doubles starting on a line boundary, by enumeration."""
    return len({(8 * (r * cols + c)) // LINE for r in range(rows) for c in range(cols)})


def test_threshold_is_the_exact_one_of_the_packed_layout():
    """Rows of 13 doubles (104 B) share lines: the whole matrix fits a 32 KiB cache (512 lines) up to
    n = 315 rows, not the 256 of the rows-aligned formula (2 lines per row). The threshold is found with
    the exact count and checked here by enumeration at it and one past it."""
    src = "void f(int n, int m, double A[n][m]) {\n for (int i = 0; i < n; i++)\n" \
          "  for (int j = 0; j < m; j++)\n   A[i][j] += 1.0;\n}\n"
    fr = pipeline.analyze_text(src, "rows.c", Options(at={"n": 300, "m": 13}, line_size=LINE,
                                                      caches={"L1": 32 * 1024, "L2": 1024 * 1024},
                                                      solve_for="n"))
    (nr,) = fr.nests
    ws = {lr.loop.var: lr.extras["working_set"] for lr in nr.loops}["i"]
    t = ws.thresholds["L1"]
    assert (t.param, t.checked, t.assumes) == ("n", True, None)
    assert _packed_lines(t.largest, 13) <= 512 < _packed_lines(t.largest + 1, 13)
    assert t.largest == 315


def test_maximum_with_arrays_touched_in_some_iterations_only():
    """Three phases by i % 3, each writing its own array: one iteration of i touches x[i] and one
    element of p0, p1 or p2 -- two elements in two lines (hand count; the arrays start on line
    boundaries). Past the per-value enumeration cap (N = 60) the exact maximum splits the values of i
    by what each array touches; values where an array touches nothing are a region of their own."""
    text = ("void buoy_phases(int N, const float *x, float *p0, float *p1, float *p2)\n{\n"
            "    for (int i = 0; i < N; i++) {\n        if (i % 3 == 0)\n            p0[i / 3] = x[i];\n"
            "        else if (i % 3 == 1)\n            p1[i / 3] = x[i];\n        else\n"
            "            p2[i / 3] = x[i];\n    }\n}\n")
    nr = pipeline.analyze_text(text, "buoy_phases.c", Options(at={"N": 60}, line_size=64)).nests[0]
    it = nr.loops[0].extras["working_set"].per_iteration
    assert (it.elements.value, it.lines.value) == (2, 2)
    assert not it.lines.bound
