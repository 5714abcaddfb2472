# Tests of tripcount/report/sarif.py: the SARIF 2.1.0 log of a report, read
# back with a SARIF consumer from PyPI (sarif-tools: its loader and its
# `sarif summary` command), rules from the diagnostics catalogue, regions in
# our coordinates, URIs relative to the working directory.

from __future__ import annotations

import io
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from sarif import loader as sarif_loader

from tripcount.cli import main
from tripcount.diagnostics import by_code, catalogue
from tripcount.report.sarif import artifact_location, sarif_from_json

INPUTS = Path(__file__).parent / "inputs" / "check"


def report(path="kernels/tide.c", diags=None):
    diags = diags if diags is not None else [
        {"line": 4, "column": 5, "end_line": 4, "end_column": 33, "severity": "error", "code": "TC601",
         "message": "work of this nest has degree 3 in the sizes"},
        {"line": 7, "column": 9, "end_line": 9, "end_column": 2, "severity": "note", "code": "TC404",
         "message": "footprint unknown"},
    ]
    return {"schema_version": 1, "tool": {"name": "tripcount", "version": "0"}, "at": {}, "settings": {},
            "files": [{"path": path, "nests": [], "diagnostics": diags}]}


def test_rules_are_the_registry(tmp_path):
    log = sarif_from_json(report(), root=str(tmp_path))
    assert log["version"] == "2.1.0" and len(log["runs"]) == 1
    rules = log["runs"][0]["tool"]["driver"]["rules"]
    ids = [r["id"] for r in rules]
    assert ids == sorted(set(ids))  # one rule per code
    assert {cls.code for cls in catalogue()} <= set(ids)
    for code in ("TC601", "TC610", "TC612", "TC900", "TC190"):
        assert code in ids
    r = rules[ids.index("TC601")]
    assert r["shortDescription"]["text"] == by_code("TC601").title
    assert r["fullDescription"]["text"] == by_code("TC601").description()
    assert r["defaultConfiguration"]["level"] == "error"


def test_results_locations_and_regions(tmp_path):
    log = sarif_from_json(report(path=str(tmp_path / "kernels" / "tide.c")), root=str(tmp_path))
    run = log["runs"][0]
    assert run["columnKind"] == "unicodeCodePoints"
    assert run["originalUriBaseIds"]["SRCROOT"]["uri"] == tmp_path.as_uri() + "/"
    res = run["results"]
    assert [r["ruleId"] for r in res] == ["TC601", "TC404"]
    assert [r["level"] for r in res] == ["error", "note"]
    rules = run["tool"]["driver"]["rules"]
    assert all(rules[r["ruleIndex"]]["id"] == r["ruleId"] for r in res)
    loc = res[0]["locations"][0]["physicalLocation"]
    assert loc["artifactLocation"] == {"uri": "kernels/tide.c", "uriBaseId": "SRCROOT"}
    # our spans are 1-based with an exclusive end, as SARIF regions are
    assert loc["region"] == {"startLine": 4, "startColumn": 5, "endLine": 4, "endColumn": 33}


def test_artifact_locations(tmp_path):
    assert artifact_location(str(tmp_path / "a b.c"), str(tmp_path)) == {"uri": "a%20b.c", "uriBaseId": "SRCROOT"}
    outside = artifact_location("/elsewhere/x.c", str(tmp_path))
    assert outside["uri"] == "file:///elsewhere/x.c" and "uriBaseId" not in outside
    assert artifact_location("<stdin>", str(tmp_path)) == {"uri": "stdin"}


def read_with_sarif_tools(path: Path):
    sf = sarif_loader.load_sarif_file(str(path))
    return sf, sf.get_records()


def test_sarif_tools_reads_our_log(tmp_path):
    out = tmp_path / "r.sarif"
    log = sarif_from_json(report(path=str(tmp_path / "kernels" / "tide.c")), root=str(tmp_path))
    out.write_text(json.dumps(log))
    sf, records = read_with_sarif_tools(out)
    assert sf.get_result_count() == 2
    assert sf.get_distinct_tool_names() == ["tripcount"]
    assert [(r["Code"], str(r["Line"]), r["Severity"]) for r in records] == [("TC601", "4", "error"),
                                                                           ("TC404", "7", "note")]
    assert records[0]["Location"].endswith("kernels/tide.c")


def cubic_project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A project with one cubic nest and a degree budget of 2, as the working directory."""
    src = tmp_path / "src"
    src.mkdir()
    shutil.copy(INPUTS / "harbour_cubic.c", src / "harbour_cubic.c")
    (tmp_path / "pyproject.toml").write_text("[tool.tripcount]\nmax_degree = 2\n")
    monkeypatch.chdir(tmp_path)


def test_check_and_analyze_emit_sarif_that_sarif_tools_summarizes(tmp_path, monkeypatch, private_cache):
    cubic_project(tmp_path, monkeypatch)
    out = io.StringIO()
    status = main(["check", "--format", "sarif", "-o", "check.sarif", "src/harbour_cubic.c"],
                  stdout=out, stderr=io.StringIO())
    assert status == 1
    sf, records = read_with_sarif_tools(tmp_path / "check.sarif")
    assert [r["Code"] for r in records] == ["TC601"]
    assert records[0]["Location"].endswith("src/harbour_cubic.c") and str(records[0]["Line"]) == "4"
    log = json.loads((tmp_path / "check.sarif").read_text())
    loc = log["runs"][0]["results"][0]["locations"][0]["physicalLocation"]
    assert loc["artifactLocation"] == {"uri": "src/harbour_cubic.c", "uriBaseId": "SRCROOT"}
    # the analyze command's SARIF (every diagnostic of the analysis)
    status = main(["analyze", "--format", "sarif", "-o", "all.sarif", "src"], stdout=out, stderr=io.StringIO())
    assert status == 0
    sf2, _ = read_with_sarif_tools(tmp_path / "all.sarif")
    assert sf2.get_distinct_tool_names() == ["tripcount"]
    # sarif-tools' own command line reads it too
    exe = shutil.which("sarif", path=str(Path(sys.executable).parent)) or shutil.which("sarif")
    if exe is None:
        pytest.skip("the sarif command of sarif-tools is not installed")
    proc = subprocess.run([exe, "summary", str(tmp_path / "check.sarif")], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert "error: 1" in proc.stdout.lower()


WARM_SARIF = """\
import json, sys
from tripcount.cli import main
status = main(["check", "--format", "sarif", "-o", "warm.sarif", "src/harbour_cubic.c"])
print(json.dumps({"status": status, "islpy": "islpy" in sys.modules,
                  "engine": "tripcount.engine" in sys.modules}))
"""


def test_check_sarif_on_a_warm_cache_imports_no_engine(tmp_path, monkeypatch, private_cache):
    # the rules come from the catalogue's own modules, not from importing every stage:
    # a warm `check --format sarif` reads the cache and never loads islpy
    cubic_project(tmp_path, monkeypatch)
    runs = [json.loads(subprocess.run([sys.executable, "-c", WARM_SARIF], capture_output=True, text=True,
                                      timeout=300, check=True).stdout) for _ in range(2)]
    assert runs[0] == {"status": 1, "islpy": True, "engine": True}  # cold: the test can fail
    assert runs[1] == {"status": 1, "islpy": False, "engine": False}
    rules = json.loads((tmp_path / "warm.sarif").read_text())["runs"][0]["tool"]["driver"]["rules"]
    assert [r["id"] for r in rules] == [cls.code for cls in catalogue()]
    assert all(r["fullDescription"]["text"] == by_code(r["id"]).description() for r in rules)
