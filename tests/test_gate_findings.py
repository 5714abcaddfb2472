# Tests of tripcount/gate/findings.py: budget findings (degree, working set
# with exact values and bounds, imbalance), regressions against a baseline
# nest, and findings_for's one suppression rule, on typed nest summaries of
# our own (tests/gatestubs.py).

from __future__ import annotations

import pytest
from gatestubs import LINES, Opts, make_nest, typed, working_set

from tripcount.config import ConfigError
from tripcount.gate import budgets, findings
from tripcount.report.schema import validate_part


def test_stub_nests_follow_the_schema():
    validate_part(make_nest(ws=1000, imb=1.3), "nest")


def test_degree_budget():
    b = budgets.Budgets(max_degree=2)
    assert findings.budget_findings(typed(make_nest(degree=2)), b, Opts(), LINES, {}) == []
    found = findings.budget_findings(typed(make_nest(degree=3, leading="N^3/6")), b, Opts(), LINES, {})
    assert [d.code for d in found] == ["TC601"]
    assert "degree 3" in found[0].message and "N^3/6" in found[0].message
    # the region is the loop header `for (...)` on line 3
    assert (found[0].span.line, found[0].span.column) == (3, 5)
    assert found[0].span.end_column == len(LINES[2]) + 1


def test_working_set_budget_by_level_and_bytes():
    levels = {"L1": 32768, "L2": 262144}
    b = budgets.Budgets(max_working_set="L1")
    nest = make_nest(ws=40000)
    found = findings.budget_findings(typed(nest), b, Opts(at={"N": 100}), LINES, levels)
    assert [d.code for d in found] == ["TC602"]
    assert "needs L2" in found[0].message and "loop 'j'" in found[0].message
    assert findings.budget_findings(typed(make_nest(ws=30000)), b, Opts(at={"N": 100}), LINES, levels) == []
    b2 = budgets.Budgets(max_working_set="20KiB")
    assert [d.code for d in findings.budget_findings(typed(make_nest(ws=30000)), b2, Opts(), LINES, levels)] == ["TC602"]


def test_working_set_unknown_is_a_note_not_a_failure():
    b = budgets.Budgets(max_working_set="L2")
    nest = make_nest()
    nest["loops"][1]["working_set"] = {"bytes": None}
    found = findings.budget_findings(typed(nest), b, Opts(), LINES, {"L2": 1})
    assert [(d.code, d.severity) for d in found] == [("TC604", "note")]
    assert "at" in found[0].message


def test_lower_bound_working_set_is_not_a_pass():
    # a working set that leaves out unmodelled references proves nothing under
    # the budget (a note says so); above it, it is a finding all the same
    levels = {"L1": 32768, "L2": 262144}
    b = budgets.Budgets(max_working_set="L1")
    nest = make_nest(ws=30000)
    nest["loops"][1]["working_set"]["estimate"] = "lower_bound"
    found = findings.budget_findings(typed(nest), b, Opts(at={"N": 100}), LINES, levels)
    assert [(d.code, d.severity) for d in found] == [("TC604", "note")]
    assert "lower bound" in found[0].message
    nest = make_nest(ws=40000)
    nest["loops"][1]["working_set"].update(working_set(40000, "lower_bound"))
    assert [d.code for d in findings.budget_findings(typed(nest), b, Opts(at={"N": 100}), LINES, levels)] == ["TC602"]


def test_unknown_level_is_a_configuration_error():
    with pytest.raises(ConfigError):
        findings.budget_findings(typed(make_nest(ws=10)), budgets.Budgets(max_working_set="L4"), Opts(), LINES, {"L1": 1})


def test_imbalance_budget():
    b = budgets.Budgets(max_imbalance=1.25)
    assert findings.budget_findings(typed(make_nest(imb=1.2)), b, Opts(), LINES, {}) == []
    found = findings.budget_findings(typed(make_nest(imb=1.5)), b, Opts(), LINES, {})
    assert [d.code for d in found] == ["TC603"]
    assert "4 threads" in found[0].message


def test_regressions():
    levels = {"L1": 32768, "L2": 262144}
    b = budgets.Budgets()
    old = make_nest(degree=2, leading="N^2/2", inner_ws=1000)
    assert findings.regression_findings(typed(old), typed(old), b, Opts(), LINES, levels, "HEAD") == []
    up = make_nest(degree=3, leading="N^3/6", inner_ws=1000)
    assert [d.code for d in findings.regression_findings(typed(old), typed(up), b, Opts(), LINES, levels, "HEAD")] == ["TC610"]
    grown = make_nest(degree=2, leading="N^2", inner_ws=1000)
    found = findings.regression_findings(typed(old), typed(grown), b, Opts(), LINES, levels, "HEAD")
    assert [d.code for d in found] == ["TC611"] and "2x" in found[0].message
    ok = make_nest(degree=2, leading="N^2/2 + N^2/4")  # 1.5x is allowed by default
    assert findings.regression_findings(typed(old), typed(ok), b, Opts(), LINES, levels, "HEAD") == []
    moved = make_nest(degree=2, leading="N^2/2", inner_ws=40000)
    found = findings.regression_findings(typed(old), typed(moved), b, Opts(at={"N": 64}), LINES, levels, "HEAD")
    assert [d.code for d in found] == ["TC612"]
    assert "now needs L2" in found[0].message and "fit L1" in found[0].message


def test_every_check_diagnostic_is_its_own_class():
    from tripcount.diagnostics import by_code

    codes = ["TC601", "TC602", "TC603", "TC604", "TC610", "TC611", "TC612", "TC620", "TC630"]
    classes = [by_code(c) for c in codes]
    assert len(set(classes)) == len(codes)
    for cls in classes:
        assert cls.__module__ == "tripcount.diagnostics.gate" and cls.title and cls.template


def test_findings_for_applies_one_suppression_rule_and_reports_unknown_kinds():
    # a comment on the outer loop header, on the finding's own loop, or in the
    # comment block above either silences the finding; an unknown kind is TC620
    b = budgets.Budgets(max_degree=1, max_imbalance=1.25)
    nest = typed(make_nest(degree=2, imb=1.5))
    text = "\n".join(LINES)
    assert sorted(d.code for d in findings.findings_for([nest], text, b, Opts(), {})) == ["TC601", "TC603"]
    allow = LINES[:2] + ["    for (int i = 0; i < N; i++)  // tripcount: allow degree, imbalance, speed"] + LINES[3:]
    found = findings.findings_for([nest], "\n".join(allow), b, Opts(), {})
    assert [d.code for d in found] == ["TC620"] and "speed" in found[0].message
    above = LINES[:1] + ["  // tripcount: allow all"] + LINES[2:]
    assert findings.findings_for([nest], "\n".join(above), b, Opts(), {}) == []
