# Tests of tripcount/cacheentry.py: the shapes the result cache accepts. What
# the cache writes for real nests passes; anything else, however it parses as
# JSON, does not (the end-to-end misses are in tests/test_cache.py).

from __future__ import annotations

from tripcount.cacheentry import bounded, valid_diagnostic, valid_entry, valid_summary
from tripcount.config import CommandLine, build_options

TIDE = """void tide(int N, double *h) {
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            h[i] += h[j];
}
"""


def _written_entry():
    from tripcount.cached import analyze_file_cached

    options = build_options({}, CommandLine.of({"at": ["N=10"]}))
    out = analyze_file_cached("t.c", TIDE, options, use_cache=False)
    return out["nests"][0], out["summaries"][0], out["diagnostics"]


def test_what_the_cache_writes_is_accepted():
    nest, summary, diags = _written_entry()
    entry = {"key": "k", "nest": nest, "summary": summary, "diagnostics": diags, "anchors": [1, 1], "wide": False}
    assert valid_entry("nest", entry)
    assert valid_entry("nest", {"nest": None, "diagnostics": [], "anchors": [], "wide": False})
    assert valid_entry("file", {"file": {"nests": [nest], "summaries": [summary], "diagnostics": diags}})
    assert valid_entry("fn", {"diagnostics": [], "anchors": [], "wide": True})
    assert valid_entry("out", {"diagnostics": [], "anchors": [3, 4]})


def test_other_shapes_are_refused():
    nest, summary, _ = _written_entry()
    base = {"nest": nest, "summary": summary, "diagnostics": [], "anchors": [], "wide": False}
    assert not valid_entry("nest", {"key": "k"})
    assert not valid_entry("nest", {**base, "nest": "x"})
    assert not valid_entry("nest", {**base, "wide": 1})
    assert not valid_entry("nest", {**base, "anchors": [1]})
    assert not valid_entry("nest", {**base, "summary": {**summary, "parameters": "N"}})
    assert not valid_entry("nest", {**base, "nest": {**nest, "loops": [{"line": 0}]}})
    assert not valid_entry("file", {"file": {"nests": [nest], "summaries": [], "diagnostics": []}})
    assert not valid_entry("other", base)
    assert not valid_summary({**summary, "statements": [{"text": {"__source_slice__": 1}}]})
    assert not valid_diagnostic({"line": 1, "column": 1, "severity": "fatal", "code": "TC101", "message": ""})
    assert not valid_diagnostic({"line": 1, "column": 1, "severity": "note", "code": "X", "message": ""})


def test_diagnostics_round_trip_their_structured_args():
    from tripcount.diagnostics import LoopRef, Phrase
    from tripcount.diagnostics.model import EarlyBreak
    from tripcount.diagnostics.source import SyntaxProblem
    from tripcount.ir import Span

    brk = EarlyBreak(Span(5, 13, 5, 19), pos=Span(5, 13, 5, 19), loop=LoopRef("i", Span(3, 5, 3, 32))).to_dict()
    syn = SyntaxProblem(Span.point(4, 9), where=Span.point(4, 9),
                        reason=Phrase(("unexpected '@' at ", Span.point(4, 16)))).to_dict()
    assert valid_diagnostic(brk) and valid_diagnostic(syn)
    span_arg = brk["args"]["pos"]
    for bad in (
        {k: v for k, v in brk.items() if k != "args"},  # written before arguments were stored
        {**brk, "message": "'break' somewhere else"},  # a message its arguments do not give
        {**brk, "args": {**brk["args"], "pos": {**span_arg, "line": 0}}},
        {**brk, "args": {**brk["args"], "pos": {**span_arg, "file": "x.c"}}},
        {**brk, "args": {**brk["args"], "loop": {**brk["args"]["loop"], "loop": 7}}},
        {**brk, "args": {**brk["args"], "pos": {"x": 1}}},
        {**brk, "args": [1]},
        {**brk, "code": "TC999"},  # not in the catalogue
        {**syn, "code": "TC199"},  # a retired code
    ):
        assert not valid_diagnostic(bad), bad


def test_depth_and_size_are_bounded_without_recursion():
    deep: list = []
    for _ in range(100_000):
        deep = [deep]
    assert not bounded(deep)
    assert not valid_entry("nest", {"nest": None, "diagnostics": [], "anchors": [], "wide": False, "x": deep})
    assert bounded({"a": [[1, 2], {"b": 3}]})
