# tripcount.analysis.protocol: an analysis returns a frozen Output holding only
# what it declares; the driver assembles the NestResult from the outputs; an
# analysis never sees another's private copy; the counts stay partial at a
# limit. Reference counts: the loops of harbour_flush.c executed by hand
# (4 + 3 + 2 + 1 = 10 at n = 4).

from __future__ import annotations

import dataclasses
import os

import pytest
from conftest import INPUTS

from tripcount import pipeline
from tripcount.analysis.protocol import Analysis, Inputs, Output, analyses, assemble
from tripcount.budget import Budget, NestLimit
from tripcount.frontend import parse_text
from tripcount.model import build_nests
from tripcount.options import Options

FLUSH = os.path.join(INPUTS, "cli", "harbour_flush.c")


def first_nest():
    with open(FLUSH, encoding="utf-8") as f:
        unit, _ = parse_text(f.read(), path=FLUSH)
    nests, _ = build_nests(unit, path=FLUSH)
    return nests[0]


def test_the_analyses_declare_their_order_and_needs():
    units = analyses()
    names = [u.name for u in units]
    assert names == ["counts", "flops", "footprint", "traffic", "dependences", "tiling", "balance", "roofline", "verify"]
    for k, u in enumerate(units):
        assert set(u.needs) <= set(names[:k]), u.name  # what it reads ran before
        assert all(hasattr(Options(), r) for r in u.reads), u.name
    assert [u.name for u in units if u.partial] == ["counts"]


def test_outputs_are_frozen_and_hold_only_what_is_declared():
    nest = first_nest()

    def fill(result, options, budget):
        result.extras["mine"] = 1
        result.extras["not declared"] = 2
        result.statements[0].extras["mine"] = 3

    counts = analyses()[0].run(nest, Options(at={"n": 4}), Budget.start(20), Inputs(nest))
    assert counts.statements[0].count.value == 10
    out = Analysis("mine", fill, produces=("mine",)).run(nest, Options(), Budget.start(20), Inputs(nest, (counts,)))
    assert dict(out.extras) == {"mine": 1}
    assert {k: dict(v) for k, v in out.stmt_extras.items()} == {nest.statements[0].id: {"mine": 3}}
    with pytest.raises(dataclasses.FrozenInstanceError):
        out.name = "other"  # type: ignore[misc]
    with pytest.raises(TypeError):
        out.extras["mine"] = 5  # type: ignore[index]
    # the earlier output was not touched: each analysis fills its own copy
    assert all(not sr.extras for sr in counts.statements)
    result = assemble(nest, [counts, out])
    assert result.extras == {"mine": 1} and result.statements[0].extras == {"mine": 3}
    assert result.statements[0].count.value == 10


def test_a_partial_analysis_returns_what_it_completed():
    nest = first_nest()

    def two_then_stop(result, options, budget):
        result.diagnostics.append("first")
        raise NestLimit("time limit of 1 s per nest reached (test)")

    b = Budget.start(20)
    out = Analysis("counts", two_then_stop, partial=True).run(nest, Options(), b, Inputs(nest))
    assert out.stopped == "time limit of 1 s per nest reached (test)"
    assert out.diagnostics == ("first",) and out.statements == ()
    assert b.tripped == "time"
    with pytest.raises(NestLimit):  # an analysis that is not partial is cut by the driver
        Analysis("other", two_then_stop).run(nest, Options(), Budget.start(20), Inputs(nest))


def test_the_driver_assembles_the_outputs_and_leaves_a_failed_one_out(monkeypatch):
    def broken(result, options, budget):
        result.extras["half"] = "written before the failure"
        raise RuntimeError("boom")

    real = pipeline.analyses
    monkeypatch.setattr(pipeline, "analyses", lambda: real() + [Analysis("broken", broken, produces=("half",))])
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}))
    first = fr.nests[0]
    assert "half" not in first.extras
    assert {"flops", "footprint"} <= set(first.extras)
    assert [d.code for d in first.diagnostics if d.code == "TC900"] == ["TC900"]
    assert first.statements[0].count.value == 10


def test_an_empty_output_adds_nothing():
    out = Output(name="x")
    assert out.loops is None and out.statements is None and out.stopped is None
    assert dict(out.extras) == {} and out.diagnostics == ()
