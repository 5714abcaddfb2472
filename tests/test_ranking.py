# Tests of tripcount/report/ranking.py: "where the time goes" on a small
# input of three nests whose order is known by hand (flops: matrix product
# 2N^3, grid sweep N^2, saxpy 2N -- Golub & Van Loan; roofline times as in
# Williams, Waterman & Patterson, CACM 2009), in the text and in the JSON
# summary, which validates against the report's schema.

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tripcount.report.ranking import Entry, ranked, ranking_json, ranking_text
from tripcount.report.schema import report_errors

pytestmark = pytest.mark.usefixtures("compulsory_only")

HERE = Path(__file__).parent / "inputs" / "roofline"
QUAYS, BOX = str(HERE / "quays.c"), str(HERE / "box.toml")


def test_text_ends_with_the_ranking_by_time(run_cli):
    status, out, err = run_cli("analyze", QUAYS, "--at", "N=200", "--machine", BOX, "--no-cache")
    assert status == 0, err
    tail = out.splitlines()[-9:]
    assert tail[0].startswith("where the time goes: 3 nests ranked by estimated time")
    rows = [line for line in tail if line.endswith("()")]
    assert [r.split()[-1] for r in rows] == ["quay_loads()", "sediment_sweep()", "tide_gauge()"]
    # quay_loads: 2*200^3 = 16e6 flops / 10 GFLOP/s = 1.6 ms, compute-bound
    assert rows[0].split()[1:3] == ["1.6", "ms"] and "compute" in rows[0]
    # sediment_sweep: 200^2 doubles read and written once = 320,000 bytes / 8 GB/s = 40 us
    assert rows[1].split()[1:3] == ["40", "us"] and "memory" in rows[1]
    assert out.rstrip().endswith("values at N=200")


def test_top_limits_the_rows(run_cli):
    status, out, _ = run_cli("analyze", QUAYS, "--at", "N=200", "--machine", BOX, "--top", "1", "--no-cache")
    assert status == 0 and "; top 1" in out
    assert "quay_loads()" in out.split("where the time goes")[1] and "tide_gauge()" not in out.split("where the time goes")[1]
    assert run_cli("analyze", QUAYS, "--top", "0")[0] == 2


def test_without_machine_ranked_by_flops_with_a_hint(run_cli):
    status, out, _ = run_cli("analyze", QUAYS, "--at", "N=200", "--no-cache")
    part = out.split("where the work goes")[1]
    assert status == 0 and part.index("quay_loads") < part.index("sediment_sweep") < part.index("tide_gauge")
    assert "machine --measure" in part


def test_json_summary_is_the_same_ranking_and_valid(run_cli, tmp_path, monkeypatch):
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "cache"))
    status, out, err = run_cli("analyze", QUAYS, "--at", "N=200", "--machine", BOX, "--format", "json")
    assert status == 0, err
    doc = json.loads(out)
    assert report_errors(doc) == []
    s = doc["summary"]
    assert s["ranked_by"] == "time" and [n["function"] for n in s["nests"]] == ["quay_loads", "sediment_sweep",
                                                                                "tide_gauge"]
    assert abs(sum(n["share"] for n in s["nests"]) - 1) < 1e-5
    assert abs(s["nests"][0]["seconds"] - 1.6e-3) < 1e-12 and doc["schema_version"] == 1
    nest = doc["files"][0]["nests"][0]
    assert nest["roofline"]["binding"] == "compute" and nest["intensity"]["roofline"] is not None


def entry(name: str, seconds: float | None, flops: int, nbytes: int) -> Entry:
    return Entry("a.c", 1, name, {"seconds": seconds, "flops": flops, "memory_bytes": nbytes,
                                   "memory_from": "traffic", "degree": 1, "intensity": None, "binding": None})


def test_order_and_ties():
    es = [entry("a", 1.0, 5, 1), entry("b", 3.0, 1, 1), entry("c", 3.0, 9, 1)]
    assert [e.function for e in ranked(es)] == ["b", "c", "a"]  # ties keep source order
    es = [entry("a", None, 5, 1), entry("b", None, 5, 9), entry("c", None, 7, 0)]
    assert [e.function for e in ranked(es)] == ["c", "b", "a"]  # flops, then bytes
    assert ranking_json(es)["ranked_by"] == "flops" and ranking_json(es)["total_seconds"] is None


def test_one_nest_has_no_table():
    assert ranking_text([entry("a", 1.0, 1, 1)]) == []
    assert "machine --measure" in ranking_text([entry("a", None, 1, 1)])[0]
