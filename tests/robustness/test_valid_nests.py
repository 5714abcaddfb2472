# Robustness (a): random valid affine nests. Every count tripcount reports must
# equal direct execution of the same nest in Python (C semantics), which is
# the independent reference, and isl enumeration (Set.count_val).

from __future__ import annotations

import random

import pytest
from hypothesis import given, settings
from strategies import CI, SLOW, affine_nests, check_generated


@settings(CI)
@given(affine_nests())
def test_generated_nests_match_direct_execution(gen):
    out = check_generated(gen, random.Random(gen.source()))
    assert out.compared >= 0


@pytest.mark.slow
@settings(SLOW)
@given(affine_nests())
def test_generated_nests_match_direct_execution_slow(gen):
    check_generated(gen, random.Random(gen.source()))


def test_a_generated_nest_is_compared_at_all():
    # a fixed triangular nest: counts known by direct execution, 0+1+...+(N-1) = N(N-1)/2
    from strategies import Aff, Bound, GenNest, Loop, Stmt

    inner = Loop("j", Bound("", (Aff((), 0),)), Bound("", (Aff((("i", 1),), 0),)), False, 1, False,
                 (Stmt("A[i + j] += 1.0;"),))
    outer = Loop("i", Bound("", (Aff((), 0),)), Bound("", (Aff((("N", 1),), 0),)), False, 1, False, (inner,))
    gen = GenNest(("N",), outer)
    gen.source()
    assert gen.execute({"N": 5})[5] == 10  # direct execution: 5*4/2
    out = check_generated(gen, random.Random(3))
    assert out.compared > 0 and out.refused == 0
