# tripcount.guard and the driver's limits: an analysis cut by the nest's
# budget is left out (counts kept), front-end failures are contained per file,
# the file's budget, and the limit diagnostics.

from __future__ import annotations

import os

import islpy as isl
from conftest import INPUTS
from test_budget import hard_union as _hard_union

from tripcount import budget as bd
from tripcount import guard, pipeline
from tripcount.analysis.protocol import Analysis
from tripcount.options import Options

FLUSH = "tests/inputs/cli/harbour_flush.c"


def _with_extra(monkeypatch, extra):
    real = pipeline.analyses
    monkeypatch.setattr(pipeline, "analyses", lambda: real() + [Analysis("extra", extra, produces=("extra",))])


def test_a_hanging_analysis_is_cut_and_the_other_nests_go_on(monkeypatch):
    seen = []

    def hang(result, options, budget):
        seen.append(result.nest.function)
        if result.nest.function == "flush_basin":
            while True:
                pass
        result.extras["extra"] = "done"

    # counts and the hanging analysis only, so that machine load cannot spend the time first
    counts = pipeline.analyses()[0]
    assert counts.name == "counts"
    monkeypatch.setattr(pipeline, "analyses", lambda: [counts, Analysis("extra", hang, produces=("extra",))])
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}, time_limit=2))
    assert seen == ["flush_basin", "basin_mean"]
    first, second = fr.nests
    assert [d.code for d in first.diagnostics if d.code == "TC310"] == ["TC310"]
    assert first.statements[0].count.value == 10  # counts kept: 4 + 3 + 2 + 1, by hand
    assert "extra" not in first.extras
    assert second.extras.get("extra") == "done"
    assert not any(d.code == "TC310" for d in second.diagnostics)


def test_an_analysis_spending_isl_operations_is_cut(monkeypatch):
    monkeypatch.setattr(bd, "MIN_OPS", 3_000_000)  # counts fit (measured ~1e5), the spender does not
    monkeypatch.setattr(bd, "ISL_OPS_PER_SECOND", 1)

    def spend(result, options, budget):
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
    monkeypatch.setattr(bd, "MIN_OPS", 3_000_000)
    monkeypatch.setattr(bd, "ISL_OPS_PER_SECOND", 1)

    def swallow(result, options, budget):
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


def test_a_nest_with_bounds_of_10_30_is_not_stopped_by_the_hard_limit(run_cli):
    # it used to spend the whole hard allowance in the footprint and end in TC310
    path = os.path.join(INPUTS, "robustness", "huge_constant_bounds.c")
    status, out, _ = run_cli("analyze", "--no-cache", "--time-limit", "2", path)
    assert status == 0
    assert "TC310" not in out and "TC9" not in out
    assert "runs 1000000000000000000000000000000000000000000000000000000000000" in out
    assert "footprint of the nest: 2 arrays" in out
