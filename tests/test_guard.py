# tripcount.guard: per-nest budgets (deadline, isl operations, bounded point
# counting, hard stop), their use by the pipeline, and the last-resort handler.

from __future__ import annotations

import os
import threading
import time

import islpy as isl
import pytest
from conftest import INPUTS

from tripcount import guard, pipeline
from tripcount.options import Options

CUBE = "[N] -> { [i, j, k] : 0 <= i < N and 0 <= j < N and 0 <= k < N }"


def _fixed(text: str, n: int) -> isl.Set:
    s = isl.Set(text)
    return s.fix_val(isl.dim_type.param, 0, isl.Val.read_from_str(s.get_ctx(), str(n)))


def _hard_union(k: int = 14) -> isl.Set:
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
    monkeypatch.setattr(guard, "MIN_OPS", 20_000)
    monkeypatch.setattr(guard, "ISL_OPS_PER_SECOND", 1)


def test_isl_operation_budget_stops_a_long_call_and_is_lifted_after(few_ops):
    with pytest.raises(guard.NestLimit) as info:
        with guard.nest_budget(Options(time_limit=60)) as b:
            assert b.max_ops == 20_000
            for _ in range(50):
                _hard_union().make_disjoint().coalesce()
    assert "operation" in str(info.value)
    # the context works again: parse and print
    assert str(isl.Set("{ [i] : 0 <= i < 3 }")) == "{ [i] : 0 <= i <= 2 }"


def test_count_val_is_unchanged_outside_and_for_small_sets():
    s = _fixed(CUBE, 20)
    assert s.count_val().to_python() == 8000  # 20^3
    with guard.nest_budget(Options(time_limit=5)):
        assert s.count_val().to_python() == 8000


def test_huge_count_is_stopped_at_the_deadline():
    # 3000^3 points: isl's scan takes ~20 s here and counts no operations, so only the
    # forked, killed child bounds it.
    s = _fixed(CUBE, 3000)
    start = time.monotonic()
    with pytest.raises((guard.EnumerationLimit, guard.NestLimit)):
        with guard.nest_budget(Options(time_limit=0.3)):
            s.count_val()
    assert time.monotonic() - start < 8.0  # hard deadline 1.45 s, plus slack for a loaded machine
    assert s.count_val.__name__ == "guarded"


def test_large_count_in_a_child_is_exact():
    s = _fixed(CUBE, 400)  # 160,000 outer points: counted in a child, 400^3 exactly
    assert guard.scan_estimate(s) > guard.INLINE_SCAN_POINTS
    with guard.nest_budget(Options(time_limit=20)):
        assert s.count_val().to_python() == 400**3


def test_hard_stop_interrupts_a_python_loop():
    start = time.monotonic()
    with pytest.raises(guard.NestLimit):
        with guard.nest_budget(Options(time_limit=0.2)):
            try:
                while True:
                    pass
            except Exception:  # NestLimit is a BaseException: this must not catch it
                pytest.fail("NestLimit caught as Exception")
    assert time.monotonic() - start < guard.HARD_FACTOR * 0.2 + guard.HARD_EXTRA_S + 5.0


def test_nested_budgets_share_the_outer_deadline():
    with guard.nest_budget(Options(time_limit=5)) as outer:
        with guard.nest_budget(Options(time_limit=100)) as inner:
            assert inner.deadline <= outer.deadline
        assert guard.current() is outer
    assert guard.current() is None


def test_budget_in_a_worker_thread(few_ops):
    box = []

    def work():
        try:
            with guard.nest_budget(Options(time_limit=60)):
                for _ in range(50):
                    _hard_union().make_disjoint().coalesce()
        except guard.NestLimit as exc:
            box.append(exc)

    t = threading.Thread(target=work)
    t.start()
    t.join(60)
    assert box and isinstance(box[0], guard.NestLimit)


def test_quota_error_is_recognized_through_chains():
    err = isl.Error("call to isl_set_coalesce failed: maximal number of operations exceeded in x")
    try:
        try:
            raise err
        except isl.Error as e:
            raise ValueError("wrapped") from e
    except ValueError as outer:
        assert guard.is_quota_error(outer)
    assert not guard.is_quota_error(ValueError("other"))


FLUSH = "tests/inputs/cli/harbour_flush.c"


def _with_extra(monkeypatch, extra):
    real = pipeline.analyses
    monkeypatch.setattr(pipeline, "analyses", lambda: real() + [("extra", extra)])


def test_a_hanging_analysis_is_cut_and_the_other_nests_go_on(monkeypatch):
    seen = []

    def hang(result, options):
        seen.append(result.nest.function)
        if result.nest.function == "flush_basin":
            while True:
                pass
        result.extras["extra"] = "done"

    # counts and the hanging analysis only, so that machine load cannot spend the time first
    monkeypatch.setattr(pipeline, "analyses", lambda: [("counts", pipeline.counts.analyze), ("extra", hang)])
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}, time_limit=2))
    assert seen == ["flush_basin", "basin_mean"]
    first, second = fr.nests
    assert [d.code for d in first.diagnostics if d.code == "TC310"] == ["TC310"]
    assert first.statements[0].count.value == 10  # counts kept: 4 + 3 + 2 + 1, by hand
    assert "extra" not in first.extras
    assert second.extras.get("extra") == "done"
    assert not any(d.code == "TC310" for d in second.diagnostics)


def test_an_analysis_spending_isl_operations_is_cut(monkeypatch):
    monkeypatch.setattr(guard, "MIN_OPS", 3_000_000)  # counts fit (measured ~1e5), the spender does not
    monkeypatch.setattr(guard, "ISL_OPS_PER_SECOND", 1)
    def spend(result, options):
        result.extras["extra"] = "partial"
        for _ in range(1000):
            _hard_union().make_disjoint().coalesce()

    _with_extra(monkeypatch, spend)
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}, time_limit=60))
    for nr in fr.nests:
        assert nr.statements[0].count.value is not None  # counts finished within the budget
        assert "extra" not in nr.extras  # partial output taken back
        assert any(d.code == "TC310" for d in nr.diagnostics)
    assert str(isl.Set("{ [0] }")) == "{ [0] }"


def test_an_analysis_swallowing_the_quota_error_is_taken_back(monkeypatch):
    monkeypatch.setattr(guard, "MIN_OPS", 3_000_000)
    monkeypatch.setattr(guard, "ISL_OPS_PER_SECOND", 1)
    def swallow(result, options):
        try:
            for _ in range(1000):
                _hard_union().make_disjoint().coalesce()
        except isl.Error:
            pass  # an analysis that treats any isl failure as "unknown"
        result.extras["extra"] = "maybe wrong"

    _with_extra(monkeypatch, swallow)
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}, time_limit=60))
    for nr in fr.nests:
        assert "extra" not in nr.extras
        assert any(d.code == "TC310" for d in nr.diagnostics)


def test_front_end_and_model_failures_are_contained_per_file(monkeypatch, tmp_path):
    def boom(*a, **k):
        raise RecursionError("maximum recursion depth exceeded")

    monkeypatch.setattr(pipeline, "parse_text", boom)
    fr = pipeline.analyze_text("int x;", "a.c", Options())
    assert [d.code for d in fr.all_diagnostics()] == ["TC902"]
    assert fr.all_diagnostics()[0].span.line == 1
    monkeypatch.undo()
    monkeypatch.setattr(pipeline, "build_nests", boom)
    fr = pipeline.analyze_text("void f(int n){for(int i=0;i<n;i++);}", "b.c", Options())
    assert "TC902" in [d.code for d in fr.all_diagnostics()]


def test_file_budget_marks_the_remaining_nests(monkeypatch):
    monkeypatch.setattr(guard, "FILE_TIME_FACTOR", 0)
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}))
    assert all(any(d.code == "TC311" for d in nr.diagnostics) for nr in fr.nests)
    assert all(sr.count.value is None for nr in fr.nests for sr in nr.statements)


def test_limit_diagnostics_are_registered():
    from tripcount.diagnostics import by_code, engine, internal

    assert by_code("TC310") is engine.AnalysisLimit
    assert by_code("TC311") is engine.FileBudgetSpent
    assert by_code("TC902") is internal.ReadFailure


# Direct `.count_val(` calls outside tripcount/guard.py that still rely on the
# global patch of isl's count_val (module -> number of calls). Each should
# call guard.count_points instead; take an entry off once its calls are gone,
# so that they cannot come back. A new direct call anywhere fails.
KNOWN_DIRECT_COUNTS = {
    "engine/piecewise.py": 1,
    "engine/__init__.py": 1,
    "analysis/footprint/isets.py": 1,
    "analysis/footprint/scopes.py": 1,
    "analysis/balance/profiles.py": 5,
}


def test_no_new_direct_count_val_calls():
    import ast
    from pathlib import Path

    pkg = Path(guard.__file__).resolve().parent
    found: dict[str, int] = {}
    for path in sorted(pkg.rglob("*.py")):
        rel = path.relative_to(pkg).as_posix()
        if rel == "guard.py":
            continue
        n = sum(1 for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
                if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                and node.func.attr == "count_val")
        if n:
            found[rel] = n
    grown = {k: v for k, v in found.items() if v > KNOWN_DIRECT_COUNTS.get(k, 0)}
    assert not grown, f"call guard.count_points(s) instead of s.count_val() in {grown}"
    gone = {k for k, v in KNOWN_DIRECT_COUNTS.items() if found.get(k, 0) < v}
    assert not gone, f"take these off KNOWN_DIRECT_COUNTS (fewer direct calls now): {gone}"


def test_count_points_counts_under_the_budget_and_without():
    # reference: isl enumeration (Set.count_val) of the triangle 0 <= j <= i < 10: 55 points (OEIS A000217)
    import islpy as isl

    tri = isl.Set("{ [i, j] : 0 <= j <= i < 10 }")
    assert guard.count_points(tri) == 55
    with guard.nest_budget(Options(time_limit=5)):
        assert guard.count_points(tri) == 55


def test_a_count_that_cannot_finish_is_refused_at_once(monkeypatch):
    # 10^30 outer points: even at the fastest scan rate no time limit is enough, so
    # no child is forked to run until the hard deadline (31 s at the default limit)
    s = _fixed(CUBE, 10**30)
    assert guard.scan_estimate(s) > 10**59

    def no_fork() -> int:
        raise AssertionError("a child was forked for a count that cannot finish")

    monkeypatch.setattr(guard.os, "fork", no_fork)
    with guard.nest_budget(Options(time_limit=20)) as b:
        with pytest.raises(guard.EnumerationLimit, match="cannot finish"):
            s.count_val()
        assert b.enumerations_refused == 1


def test_a_nest_with_bounds_of_10_30_is_not_stopped_by_the_hard_limit(run_cli):
    # it used to spend the whole hard allowance in the footprint and end in TC310
    path = os.path.join(INPUTS, "robustness", "huge_constant_bounds.c")
    status, out, _ = run_cli("analyze", "--no-cache", "--time-limit", "2", path)
    assert status == 0
    assert "TC310" not in out and "TC9" not in out
    assert "runs 1000000000000000000000000000000000000000000000000000000000000" in out
    assert "footprint of the nest: 2 arrays" in out
