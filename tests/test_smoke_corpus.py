# Smoke test: every corpus file goes through the whole pipeline and every
# reporter without an internal error, and every count that has a formula
# agrees with its own value at the sizes given.

from __future__ import annotations

import io
import json
import os

import pytest
from conftest import corpus_files

from tripcount.analysis.results import Report
from tripcount.options import Options
from tripcount.pipeline import analyze_file
from tripcount.report import get_reporter


@pytest.mark.parametrize("path", corpus_files(), ids=os.path.basename)
def test_corpus_file(path):
    options = Options(at={"*": 7})
    fr = analyze_file(path, options)
    codes = [d.code for d in fr.all_diagnostics()]
    assert "TC900" not in codes, [d.render() for d in fr.all_diagnostics()]
    report = Report(files=[fr], at=options.at)
    for fmt in ("text", "json"):
        out = io.StringIO()
        get_reporter(fmt, out).write(report)
        assert out.getvalue()
    data = json.loads(_json(report))
    for nest in data["files"][0]["nests"]:
        for s in nest["statements"]:
            if s["count"]["pieces"] is not None and not nest["symbolic"]:
                assert s["count"]["value"] is not None


def _json(report: Report) -> str:
    out = io.StringIO()
    get_reporter("json", out).write(report)
    return out.getvalue()


def test_corpus_has_enough_kernels():
    assert len(corpus_files()) >= 12
