# Tests of tripcount.affine.flatten (and its proof in tripcount.model):
# flattened subscripts a[i*n + j] read as a[i][j] where 0 <= j < n holds.
#
# External reference: gcc executing the kernels with every array access
# recorded (tests/accesstrace.py); distinct elements and bytes are counted
# by brute force from the trace.

from __future__ import annotations

import os

import pytest
from accesstrace import access_trace, working_sets
from conftest import INPUTS
from oracle import gcc_available

from tripcount.options import Options
from tripcount.pipeline import analyze_file

FLAT = os.path.join(INPUTS, "flatten", "harbour_flat.c")
SRC = open(FLAT, encoding="utf-8").read()
needs_gcc = pytest.mark.skipif(not gcc_available(), reason="gcc not available")

KERNELS = {
    "harbour_flat_smooth": ([("m", "int", False), ("n", "int", False), ("depth", "double *", True),
                             ("out", "double *", True)], ("i", "j")),
    "harbour_flat_upper": ([("g", "int", False), ("w", "double *", True)], ("p", "q")),
    "harbour_flat_shift": ([("m", "int", False), ("n", "int", False), ("a", "double *", True)], ("i", "j")),
}
POINTS = [{"m": 3, "n": 5, "g": 6}, {"m": 1, "n": 1, "g": 2}, {"m": 4, "n": 9, "g": 7}]


def _nest(point, function):
    fr = analyze_file(FLAT, Options(at=point))
    (nr,) = [x for x in fr.nests if x.nest.function == function]
    return nr


@needs_gcc
@pytest.mark.parametrize("function", ["harbour_flat_smooth", "harbour_flat_upper"])
def test_provable_flat_subscripts_give_exact_footprints(function):
    ptypes, loop_vars = KERNELS[function]
    for point in POINTS:
        nr = _nest(point, function)
        assert not [g for g in nr.diagnostics if g.code in ("TC217", "TC404")]
        span = nr.nest.statements[0].span
        ev = access_trace(SRC, function, ptypes, point,
                          [((span.line, span.column, span.end_line, span.end_column), loop_vars)])
        # gcc's trace: distinct elements and bytes of the whole nest
        elems, byts, _lines = working_sets(ev, 0)[()]
        fp = nr.extras["footprint"].footprint.to_json()
        assert (fp["elements"]["value"], fp["bytes"]["value"]) == (elems, byts), (function, point)


def test_unprovable_flat_subscript_is_named_not_dropped():
    nr = _nest({"m": 3, "n": 5}, "harbour_flat_shift")
    notes = [g for g in nr.diagnostics if g.code == "TC217"]
    assert len(notes) == 1 and "a[i * n + j + 1]" in notes[0].message and "row length" in notes[0].message
    text = nr.extras["footprint"].footprint.to_json()
    # the provable reference a[i*n + j] is kept (15 elements), the other left out and said so
    assert text["elements"]["value"] == 15
