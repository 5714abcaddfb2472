# Tests of tripcount.analysis.tiling.
#
# External references, named beside each check:
# - gcc executing hand-tiled copies of three corpus kernels
#   (tests/inputs/tiling/velin_tiled.c, tile sizes as the advice gives them):
#   the distinct elements and cache lines of one tile, by brute force from the
#   access trace (tests/accesstrace.py `working_sets`), equal the advice's count.
# - Golub & Van Loan, "Matrix Computations" (4th ed., sec. 1.5, blocked matrix
#   multiplication): a b x b block of each of C, A and B is in use at once, so
#   a blocked product fits a cache of W words when 3 b^2 <= W.
# - Legality facts of the trade (common practice): a matrix product and a
#   Jacobi sweep are fully permutable; a 2-D Gauss-Seidel sweep inside a time
#   loop is not without skewing, and its distances are constant (skewing helps).

from __future__ import annotations

import functools
import os

import pytest
from accesstrace import access_trace, working_sets
from conftest import INPUTS
from oracle import gcc_available

from tripcount.analysis.caches import CacheLevel
from tripcount.analysis.dependences import dependences
from tripcount.analysis.tiling import Tiling, advise, choose_band, origin
from tripcount.frontend import parse_file, parse_text
from tripcount.model import Nest, build_nests
from tripcount.options import Options

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
TILED = os.path.join(INPUTS, "tiling", "velin_tiled.c")
SMALL = [CacheLevel("L1", 3 * 1024, "configured"), CacheLevel("L2", 12 * 1024, "configured")]


@functools.cache
def _nests(path: str) -> dict[str, Nest]:
    tu, _ = parse_file(path)
    nests, _ = build_nests(tu)
    return {n.function: n for n in nests}


def _advice(nest: Nest, at: dict[str, int], levels=SMALL) -> Tiling:
    t = advise(nest, dependences(nest), Options(), levels, 64, at)
    assert t is not None
    return t


def _text_nest(src: str) -> Nest:
    tu, _ = parse_text(src, "t.c")
    return build_nests(tu)[0][0]


MATMUL = """void quay_mm(int n, double C[n][n], double A[n][n], double B[n][n]) {
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++)
            for (int k = 0; k < n; k++)
                C[i][j] += A[i][k] * B[k][j];
}
"""


def test_blocked_product_follows_the_three_blocks_rule():
    # Golub & Van Loan sec. 1.5: 3 b^2 doubles in the cache; b a multiple of 8 doubles (one 64 B line)
    for cache in (48 * 1024, 32 * 1024, 2 * 1024 * 1024):
        t = _advice(_text_nest(MATMUL), {"n": 1000}, [CacheLevel("L1", cache, "configured")])
        assert t.legal and t.band == ("i", "j", "k")
        b = max(b for b in range(8, 1001, 8) if 3 * b * b * 8 <= cache)
        equal = [f for f in t.fits if f.shape == "equal"][0]
        assert equal.sizes == (b, b, b)
        assert equal.elements == 3 * b * b and equal.lines == 3 * b * b // 8


def test_gauss_seidel_in_time_tiles_only_the_sweep():
    # common practice: the time loop's anti dependence (t+1, i-1) runs backwards in i
    nest = _text_nest("""void basin_gs(int T, int n, double u[n][n]) {
    for (int t = 0; t < T; t++)
        for (int i = 1; i < n - 1; i++)
            for (int j = 1; j < n - 1; j++)
                u[i][j] = 0.25 * (u[i-1][j] + u[i+1][j] + u[i][j-1] + u[i][j+1]);
}
""")
    deps = dependences(nest)
    band, block = choose_band(nest, deps)
    # t with i, j is not permutable; the spatial sweep alone (i, j inside one t) is
    assert [lp.var for lp in band] == ["i", "j"] and block is None
    t = _advice(nest, {"T": 10, "n": 200})
    assert t.legal and t.band == ("i", "j")


def test_a_band_blocked_by_a_varying_distance_says_why():
    nest = _text_nest("""void quay_flip(int n, double a[n][n]) {
    for (int i = 1; i < n; i++)
        for (int j = 0; j < n - 1; j++)
            a[i][j] = a[i - 1][j + 1] + 1.0;
}
""")
    t = _advice(nest, {"n": 100})
    # distance (1, -1): constant, so skewing j by i makes it (1, 0)
    assert not t.legal and "(+, -)" in t.reason and "skewing" in (t.skewing or "")
    assert "constant" in (t.skewing or "")


def test_the_tile_is_the_hand_tiled_loops_one_gcc_counts():
    # checked below for three kernels; here the band of the matrix product's corpus copy
    nest = _nests(os.path.join(ROOT, "corpus", "tide_gain.c"))["tide_gain_product"]
    band, block = choose_band(nest, dependences(nest))
    assert [lp.var for lp in band] == ["i", "j"] and block is None


KERNELS = {
    # corpus file, function, sizes, tiled function, its parameters
    "tide_gain_product": ("tide_gain.c", {"N": 40, "M": 40, "K": 24},
                          [("N", "int", False), ("M", "int", False), ("K", "int", False), ("TI", "int", False),
                           ("TJ", "int", False), ("G", "double", True), ("A", "double", True),
                           ("B", "double", True)]),
    "wave_jacobi_step": ("wave_shallow.c", {"N": 42, "M": 50},
                         [("N", "int", False), ("M", "int", False), ("TI", "int", False), ("TJ", "int", False),
                          ("out", "double", True), ("in", "double", True)]),
    "harbour_silt_drift": ("harbour_silt.c", {"C": 40, "L": 60},
                           [("C", "int", False), ("L", "int", False), ("TI", "int", False), ("TJ", "int", False),
                            ("silt", "double", True), ("ebb", "double", True)]),
}

gcc = pytest.mark.skipif(not gcc_available(), reason="gcc not available")


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("function", sorted(KERNELS))
def test_hand_tiled_kernels_have_the_predicted_tile_working_sets(function):
    path, at, params = KERNELS[function]
    nest = _nests(os.path.join(ROOT, "corpus", path))[function]
    t = _advice(nest, at)
    assert t.legal and len(t.band) == 2 and t.fits
    src = open(TILED, encoding="utf-8").read()
    tiled = _nests(TILED)[function + "_tiled"]
    spans = [((s.span.line, s.span.column, s.span.end_line, s.span.end_column), s.loop_vars)
             for s in tiled.statements]
    for fit in t.fits:
        ti, tj = fit.sizes
        assert tj % 8 == 0  # innermost a multiple of the line length in doubles
        events = access_trace(src, function + "_tiled", params, {**at, "TI": ti, "TJ": tj}, spans)
        per_tile = working_sets(events, 2)
        # the advice's tile: its origin, which the tile loops ii, jj reach from the lower bounds
        pos = origin(nest, choose_band(nest, dependences(nest))[0], fit.sizes, at)
        assert pos is not None
        key = (pos[t.band[0]], pos[t.band[1]])
        elements, _bytes, lines = per_tile[key]
        assert (elements, lines) == (fit.elements, fit.lines), (function, fit, key)
        assert lines * 64 <= fit.capacity


def test_the_unit_reports_in_full_detail_only():
    from tripcount.pipeline import analyze_text

    full = analyze_text(MATMUL, "mm.c", Options(at={"n": 1000}, caches={"L1": 48 * 1024, "L2": 2 << 20}))
    (nr,) = full.nests
    t = nr.extras["tiling"]
    assert [f.sizes for f in t.fits if f.shape == "equal"] == [(40, 40, 40), (288, 288, 288)]
    js = t.to_json()
    assert [b["var"] for b in js["band"]] == ["i", "j", "k"] and js["band"][0]["line"] == 2
    assert any(line.startswith("tiling: loops i, j, k may be tiled") for line in t.text_lines())
    notes = [d for d in nr.diagnostics if d.code == "TC405"]
    assert len(notes) == 1 and "40x40x40 tiles keep one tile's working set (37.5 KiB) in L1" in notes[0].message
    assert "model estimate" in notes[0].message and "working set per tile only" in notes[0].message
    # the gate (`check`) does not compute it
    gate = analyze_text(MATMUL, "mm.c", Options(at={"n": 1000}, detail="gate"))
    assert "tiling" not in gate.nests[0].extras
    assert not [d for d in gate.nests[0].diagnostics if d.code in ("TC405", "TC406")]


def test_a_blocked_band_is_a_note_naming_the_dependence():
    from tripcount.pipeline import analyze_text

    src = """void quay_flip(int n, double a[n][n]) {
    for (int i = 1; i < n; i++)
        for (int j = 0; j < n - 1; j++)
            a[i][j] = a[i - 1][j + 1] + 1.0;
}
"""
    (nr,) = analyze_text(src, "f.c", Options(at={"n": 2000})).nests
    (note,) = [d for d in nr.diagnostics if d.code == "TC406"]
    assert "flow dependence on a" in note.message and "(+, -)" in note.message and "skewing" in note.message


def test_the_best_aspect_has_more_iterations_per_line_than_the_equal_tile():
    # a Jacobi sweep reads one array with a halo and writes another: the aspect, when given, fits the
    # same level and reuses each line for more iterations (common practice: long rows, few of them)
    nest = _nests(os.path.join(ROOT, "corpus", "wave_shallow.c"))["wave_jacobi_step"]
    t = _advice(nest, {"N": 1000, "M": 1000}, [CacheLevel("L1", 48 * 1024, "configured")])
    equal = [f for f in t.fits if f.shape == "equal"]
    aspect = [f for f in t.fits if f.shape == "aspect"]
    assert equal and aspect and equal[0].sizes[1] % 8 == 0
    for a in aspect:
        assert a.bytes <= a.capacity and a.sizes[-1] % 8 == 0
        assert a.sizes[0] * a.sizes[1] / a.lines > equal[0].sizes[0] * equal[0].sizes[1] / equal[0].lines
