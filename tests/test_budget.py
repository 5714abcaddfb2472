# tripcount.budget: the one budget (deadline, isl operations, bounded point
# counting, hard stop), passed explicitly; count_points is the only caller of
# isl's count_val.

from __future__ import annotations

import threading
import time

import islpy as isl
import pytest

from tripcount import budget as bd
from tripcount.budget import Budget, count_points

CUBE = "[N] -> { [i, j, k] : 0 <= i < N and 0 <= j < N and 0 <= k < N }"


def _fixed(text: str, n: int) -> isl.Set:
    s = isl.Set(text)
    return s.fix_val(isl.dim_type.param, 0, isl.Val.read_from_str(s.get_ctx(), str(n)))


def hard_union(k: int = 14) -> isl.Set:
    # many overlapping skewed, strided pieces: make_disjoint/coalesce needs many operations
    s = None
    for a in range(k):
        p = isl.Set(f"[N, M] -> {{ [i, j, l] : 0 <= i < N and {a % 5 - 2}*i + {a} <= j <= {(a * 7) % 5 - 2}*i + M "
                    f"and j - i <= l <= N + {a % 3}*j - M and (i + {a}*j) mod {a % 4 + 2} < 2 }}")
        s = p if s is None else s.union(p)
    return s


@pytest.fixture
def few_ops(monkeypatch):
    """A budget of 20,000 isl operations whatever the time limit (so that machine load cannot
    make the time limit trip first)."""
    monkeypatch.setattr(bd, "MIN_OPS", 20_000)
    monkeypatch.setattr(bd, "ISL_OPS_PER_SECOND", 1)


def test_isl_operation_budget_stops_a_long_call_and_is_lifted_after(few_ops):
    with pytest.raises(bd.NestLimit) as info:
        with Budget.start(60).enforce() as b:
            assert b.max_ops == 20_000
            for _ in range(50):
                hard_union().make_disjoint().coalesce()
    assert "operation" in str(info.value)
    # the context works again: parse and print
    assert str(isl.Set("{ [i] : 0 <= i < 3 }")) == "{ [i] : 0 <= i <= 2 }"


def test_counts_without_and_within_a_budget_agree_for_small_sets():
    s = _fixed(CUBE, 20)
    assert count_points(s, None) == 8000  # 20^3
    b = Budget.start(5)
    with b.enforce():
        assert count_points(s, b) == 8000
    assert count_points(s, Budget.start(5)) == 8000  # no enforce(): the bound on counting alone


def test_huge_count_is_stopped_at_the_deadline():
    # 3000^3 points: isl's scan takes ~20 s here and counts no operations, so only the
    # forked, killed child bounds it.
    s = _fixed(CUBE, 3000)
    start = time.monotonic()
    with pytest.raises((bd.EnumerationLimit, bd.NestLimit)):
        b = Budget.start(0.3)
        with b.enforce():
            count_points(s, b)
    assert time.monotonic() - start < 8.0  # hard deadline 1.45 s, plus slack for a loaded machine
    assert isl.Set.count_val.__name__ != "guarded"  # isl is not patched


def test_large_count_in_a_child_is_exact():
    s = _fixed(CUBE, 400)  # 160,000 outer points: counted in a child, 400^3 exactly
    assert bd.scan_estimate(s) > bd.INLINE_SCAN_POINTS
    b = Budget.start(20)
    with b.enforce():
        assert count_points(s, b) == 400**3


def test_hard_stop_interrupts_a_python_loop():
    start = time.monotonic()
    with pytest.raises(bd.NestLimit):
        with Budget.start(0.2).enforce():
            try:
                while True:
                    pass
            except Exception:  # NestLimit is a BaseException: this must not catch it
                pytest.fail("NestLimit caught as Exception")
    assert time.monotonic() - start < bd.HARD_FACTOR * 0.2 + bd.HARD_EXTRA_S + 5.0


def test_child_budgets_share_the_outer_deadline():
    outer = Budget.start(5)
    inner = outer.sub(100)
    assert inner.deadline <= outer.deadline and inner.hard_deadline == outer.hard_deadline
    assert inner.root() is outer
    short = outer.sub(0.0)
    with pytest.raises(bd.TimeLimit):  # the child's share is spent, the nest's is not
        short.check()
    outer.deadline = time.monotonic() - 1
    with pytest.raises(bd.NestLimit):
        inner.check()
    assert outer.tripped == "time"


def test_budget_in_a_worker_thread(few_ops):
    box = []

    def work():
        try:
            with Budget.start(60).enforce():
                for _ in range(50):
                    hard_union().make_disjoint().coalesce()
        except bd.NestLimit as exc:
            box.append(exc)

    t = threading.Thread(target=work)
    t.start()
    t.join(60)
    assert box and isinstance(box[0], bd.NestLimit)


def test_quota_error_is_recognized_through_chains():
    err = isl.Error("call to isl_set_coalesce failed: maximal number of operations exceeded in x")
    try:
        try:
            raise err
        except isl.Error as e:
            raise ValueError("wrapped") from e
    except ValueError as outer:
        assert bd.is_quota_error(outer)
    assert not bd.is_quota_error(ValueError("other"))


def test_only_count_points_calls_count_val():
    # isl's count_val scans without counting operations: the one call is in
    # budget.count_points, where the scan is bounded; any other call fails here
    import ast
    from pathlib import Path

    pkg = Path(bd.__file__).resolve().parent
    found: dict[str, int] = {}
    for path in sorted(pkg.rglob("*.py")):
        rel = path.relative_to(pkg).as_posix()
        n = sum(1 for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
                if isinstance(node, ast.Attribute) and node.attr == "count_val")
        if n:
            found[rel] = n
    assert set(found) == {"budget.py"}, f"call budget.count_points(s, budget) instead of s.count_val() in {found}"


def test_count_points_counts_under_the_budget_and_without():
    # reference: isl enumeration (Set.count_val) of the triangle 0 <= j <= i < 10: 55 points (OEIS A000217)
    tri = isl.Set("{ [i, j] : 0 <= j <= i < 10 }")
    assert count_points(tri, None) == 55
    b = Budget.start(5)
    with b.enforce():
        assert count_points(tri, b) == 55


def test_a_count_that_cannot_finish_is_refused_at_once(monkeypatch):
    # 10^30 outer points: even at the fastest scan rate no time limit is enough, so
    # no child is forked to run until the hard deadline (31 s at the default limit)
    s = _fixed(CUBE, 10**30)
    assert bd.scan_estimate(s) > 10**59

    def no_fork() -> int:
        raise AssertionError("a child was forked for a count that cannot finish")

    monkeypatch.setattr(bd.os, "fork", no_fork)
    b = Budget.start(20)
    with b.enforce():
        with pytest.raises(bd.EnumerationLimit, match="cannot finish"):
            count_points(s, b)
        assert b.enumerations_refused == 1
    child = Budget.start(20).sub(5)
    with pytest.raises(bd.EnumerationLimit):
        count_points(s, child)
    assert child.root().enumerations_refused == 1  # counted on the nest's budget


def test_limit_seconds_is_usable():
    assert bd.limit_seconds(float("nan")) == bd.DEFAULT_TIME_LIMIT == 20
    assert bd.limit_seconds(float("inf")) == bd.MAX_TIME_LIMIT_S
    assert bd.limit_seconds(-1) == 20 and bd.limit_seconds("x") == 20 and bd.limit_seconds(3) == 3


def test_whether_a_limit_was_a_matter_of_time_is_its_type_not_its_text():
    from tripcount.budget import EnumerationLimit, LimitReached, TimeLimit, time_dependent

    assert time_dependent(TimeLimit("share spent"))
    assert time_dependent(EnumerationLimit("enumeration too long"))
    # the words of a message decide nothing: a piece limit that mentions time is still a piece limit
    assert not time_dependent(LimitReached("more than 64 pieces (time limit not reached)"))


def test_no_decision_searches_a_message_of_ours_for_words():
    # the only message texts read are isl's (its quota error), which has no other channel
    import re
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent / "tripcount"
    found = []
    for p in root.rglob("*.py"):
        for k, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1):
            if re.search(r"""["'][a-z ]+["'] in (str\(exc\)|reason|message|.*\.message)\b""", line):
                found.append(f"{p.relative_to(root)}:{k}: {line.strip()}")
    assert not found, found
