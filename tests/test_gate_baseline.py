# Tests of tripcount/gate/baseline.py: matching the nests of two versions.

from __future__ import annotations

from gatestubs import make_nest, typed_all

from tripcount.gate import baseline


def test_match_by_ordinal_then_nearest_line():
    old = [make_nest("f", 3), make_nest("f", 10), make_nest("g", 20)]
    new = [make_nest("f", 5), make_nest("f", 12), make_nest("g", 22)]
    assert baseline.match_nests(typed_all(old), typed_all(new)) == [(0, 0), (1, 1), (2, 2)]
    # a nest inserted at the top of f: the two old ones keep their counterparts
    new2 = [make_nest("f", 3, text="B[i] = 0"), make_nest("f", 8), make_nest("f", 15)]
    old2 = [make_nest("f", 3), make_nest("f", 10)]
    pairs = dict((j, i) for i, j in baseline.match_nests(typed_all(old2), typed_all(new2)))
    assert pairs == {1: 0, 2: 1}
    # nests of other functions never pair
    assert baseline.match_nests(typed_all([make_nest("f", 3)]), typed_all([make_nest("g", 3)])) == []
