# Tests of tripcount.affine.whiles: counted loops in disguise become `for`s;
# every other while/do outside a nest is named with its reason; nests inside
# one are counted per iteration of it.
#
# External reference: gcc compiling and executing the loops (tests/oracle.py).

from __future__ import annotations

import os

import oracle
import pytest

from tripcount.options import Options
from tripcount.pipeline import analyze_file

SOURCE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "inputs", "whiles", "tide_sweeps.c")
needs_gcc = pytest.mark.skipif(not oracle.gcc_available(), reason="gcc not available")


def _file(n: int):
    return analyze_file(SOURCE, Options(at={"n": n}))


def test_disguised_loops_are_counted_like_their_for():
    fr = _file(10)
    by_fn = {nr.nest.function: nr for nr in fr.nests}
    assert set(by_fn) == {"tide_relax", "tide_every_third", "tide_upper", "tide_down"}
    assert [sr.count.value for sr in by_fn["tide_every_third"].statements] == [3]  # i = 2, 5, 8
    assert [sr.count.value for sr in by_fn["tide_upper"].statements] == [55]
    assert [sr.count.value for sr in by_fn["tide_down"].statements] == [5]  # k = 10, 8, 6, 4, 2


def test_other_whiles_are_named_with_their_reason():
    fr = _file(10)
    whiles = sorted((g.span.line, g.message) for g in fr.diagnostics if g.code == "TC223")
    assert [line for line, _ in whiles] == [6, 37]
    assert "res > tol" in whiles[0][1] and "'break' at 39:13" in whiles[1][1]
    (relax,) = [nr for nr in fr.nests if nr.nest.function == "tide_relax"]
    (note,) = [g for g in relax.diagnostics if g.code == "TC224"]
    assert "per iteration of the 'while' loop at line 6" in note.message
    assert [sr.count.value for sr in relax.statements] == [10]  # one execution of the while's body


@needs_gcc
def test_counts_agree_with_gcc():
    text = open(SOURCE, encoding="utf-8").read()
    sizes = [0, 1, 2, 3, 7, 10]
    for fname in ("tide_every_third", "tide_upper", "tide_down"):
        frs = [_file(n) for n in sizes]
        (nr,) = [x for x in frs[0].nests if x.nest.function == fname]
        spans = [(s.span.line, s.span.column, s.span.end_line, s.span.end_column) for s in nr.nest.statements]
        ptypes = [("n", "int", False), ("level", "double *", True)]
        # gcc: the statements replaced by counters, the loops run as compiled
        want = oracle.count_statements(text, fname, spans, ptypes, [{"n": n} for n in sizes], path=SOURCE)
        for fr, row, n in zip(frs, want, sizes, strict=True):
            (mine,) = [x for x in fr.nests if x.nest.function == fname]
            assert [sr.count.value for sr in mine.statements] == row, (fname, n)
