# Tests of the gcc access-trace helper (tests/accesstrace.py) on kernels whose
# access pattern is known from the handbook (Golub & Van Loan, matrix
# multiplication ijk: each C element is updated p times, reading A[i][k] and
# B[k][j]) and from C's array layout (ISO C99 6.5.2.1: A[i][k] of
# `double A[n][p]` is at byte 8*(i*p + k) from A's start).

from __future__ import annotations

import os

import pytest
from accesstrace import access_trace, lru_misses, working_sets
from conftest import INPUTS
from oracle import gcc_available

pytestmark = [pytest.mark.gcc, pytest.mark.skipif(not gcc_available(), reason="gcc not available")]

GRID = os.path.join(INPUTS, "trace", "harbour_grid.c")
SRC = open(GRID, encoding="utf-8").read()


def span_of(stmt: str) -> tuple[int, int, int, int]:
    start = SRC.index(stmt)
    line = SRC.count("\n", 0, start) + 1
    col = start - (SRC.rfind("\n", 0, start) + 1) + 1
    return (line, col, line, col + len(stmt))


VLA = [("n", "int", False), ("m", "int", False), ("p", "int", False),
       ("A", "double", True), ("B", "double", True), ("C", "double", True)]


def test_matmul_trace_has_the_handbook_access_count_and_c_layout():
    n, m, p = 3, 5, 7
    ev = access_trace(SRC, "survey_product", VLA, {"n": n, "m": m, "p": p},
                      [(span_of("C[i][j] += A[i][k] * B[k][j];"), ("i", "j", "k"))])
    # per instance: read C, read A, read B, write C (reads first)
    assert len(ev) == 4 * n * m * p
    first = ev[:4]
    assert [e.write for e in first] == [False, False, False, True]
    assert {e.array for e in first} == {"A", "B", "C"}
    for e in ev:
        i, j, k = e.iters
        want = {"A": 8 * (i * p + k), "B": 8 * (k * m + j), "C": 8 * (i * m + j)}[e.array]
        assert e.offset == want and e.size == 8


def test_working_sets_of_matmul_levels():
    n = m = p = 6
    ev = access_trace(SRC, "survey_product", VLA, {"n": n, "m": m, "p": p},
                      [(span_of("C[i][j] += A[i][k] * B[k][j];"), ("i", "j", "k"))])
    whole = working_sets(ev, 0)[()]
    assert whole[0] == 3 * n * n  # every element of A, B and C (common practice)
    assert whole[1] == 8 * whole[0]
    # 48-byte rows are packed: A, B, C each 288 bytes from a line boundary, 5 lines each
    assert whole[2] == 3 * 5
    inner = working_sets(ev, 2)
    # k loop, i and j fixed: a row of A, a column of B, one element of C
    assert {v[0] for v in inner.values()} == {2 * p + 1}


def test_flattened_product_touches_the_same_bytes_as_the_vla_one():
    n = 5
    flat = access_trace(SRC, "survey_product_flat", [("n", "int", False), ("A", "double", True),
                                                      ("B", "double", True), ("C", "double", True)],
                        {"n": n}, [(span_of("C[i * n + j] += A[i * n + k] * B[k * n + j];"), ("i", "j", "k"))])
    vla = access_trace(SRC, "survey_product", VLA, {"n": n, "m": n, "p": n},
                       [(span_of("C[i][j] += A[i][k] * B[k][j];"), ("i", "j", "k"))])
    assert [(e.array, e.offset, e.write, e.iters) for e in flat] == \
           [(e.array, e.offset, e.write, e.iters) for e in vla]


def test_recurrence_reads_before_it_writes_and_lru_counts_cold_misses():
    n = 40
    ev = access_trace(SRC, "sounding_prefix", [("n", "int", False), ("s", "float", True)], {"n": n},
                      [(span_of("s[i] = s[i - 1] + s[i];"), ("i",))])
    assert len(ev) == 3 * (n - 1)
    # iteration i reads s[i-1] (written by iteration i-1) and s[i], then writes s[i]
    assert [(e.offset // 4, e.write) for e in ev[:3]] == [(0, False), (1, False), (1, True)]
    # 40 floats = 160 bytes = 3 lines: a one-line LRU cache misses once per line (sequential sweep)
    assert lru_misses(ev, capacity_lines=1) == 3
    assert lru_misses(ev, capacity_lines=64) == 3
