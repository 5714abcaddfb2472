# Pipeline driver: stage order, per-nest isolation of failures, directories.

from __future__ import annotations

import os

from conftest import INPUTS

from tripcount import pipeline
from tripcount.options import Options

FLUSH = os.path.join(INPUTS, "cli", "harbour_flush.c")


def test_collect_paths_walks_directories():
    paths = pipeline.collect_paths([os.path.join(INPUTS, "cli")])
    assert FLUSH in paths
    assert all(p.endswith((".c", ".h")) for p in paths)


def test_failure_in_one_nest_is_contained(monkeypatch):
    calls = []

    def broken(result, options):
        calls.append(result.nest.function)
        if result.nest.function == "flush_basin":
            raise RuntimeError("boom")

    real = pipeline.analyses

    def patched():
        return real() + [("broken", broken)]

    monkeypatch.setattr(pipeline, "analyses", patched)
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}))
    assert calls == ["flush_basin", "basin_mean"]
    internal = [d for d in fr.all_diagnostics() if d.code == "TC900"]
    assert len(internal) == 1
    assert internal[0].span.line == fr.nests[0].nest.span.line
    # the counts of the failing nest are still there
    assert fr.nests[0].statements[0].count.value == 10


def test_unreadable_file(tmp_path):
    fr = pipeline.analyze_file(str(tmp_path / "missing.c"), Options())
    assert [d.code for d in fr.all_diagnostics()] == ["TC901"]


def test_invalid_utf8_is_reported_not_fatal(tmp_path):
    p = tmp_path / "bad.c"
    p.write_bytes(b"void f(int n, double *x) {\n  /* \xff\xfe */\n  for (int i = 0; i < n; i++) x[i] = 0;\n}\n")
    fr = pipeline.analyze_file(str(p), Options(at={"n": 3}))
    codes = [d.code for d in fr.all_diagnostics()]
    assert "TC190" in codes
    assert fr.nests[0].statements[0].count.value == 3
