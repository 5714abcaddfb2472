# Tests of tripcount/engine/memo.py: the bounded memo tables of the engine.

from __future__ import annotations

from tripcount.engine.memo import Memo


def test_memo_keeps_and_forgets_all_when_full():
    m: Memo[int, str] = Memo(3)
    assert m.keep(1, "a") == "a"
    m.keep(2, "b")
    m.keep(3, "c")
    assert dict(m) == {1: "a", 2: "b", 3: "c"}
    m.keep(4, "d")  # full: emptied first, so memory stays bounded
    assert dict(m) == {4: "d"}


def test_clear_all_empties_every_table():
    from tripcount.engine.memo import clear_all

    a: Memo[int, int] = Memo(5)
    b: Memo[str, int] = Memo(5)
    a.keep(1, 1)
    b.keep("x", 2)
    assert clear_all() >= 2
    assert not a and not b


def test_clear_memos_forgets_engine_results():
    # benchmarks rely on it to time the computation, not a memo hit
    import islpy as isl

    import tripcount.engine as eng

    s = isl.Set("[N] -> { S[i, j] : 0 <= i < N and 0 <= j <= i }")
    first = eng.count(s)
    assert eng._MEMO
    eng.clear_memos()
    assert not eng._MEMO
    again = eng.count(s)
    assert again is not first
    # reference: OEIS A000217, the triangular numbers N*(N + 1)/2 (here for N - 1)
    assert [again.evaluate({"N": n}) for n in range(6)] == [0, 1, 3, 6, 10, 15]
