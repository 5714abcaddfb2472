# --verify for the work figures: flops by kind and by call, loads and stores,
# per statement and per nest, against per-execution weights times statement
# counts enumerated by isl (Set.count_val with the parameters fixed).

from __future__ import annotations

import json
import os

from conftest import CORPUS

from tripcount.analysis import flops
from tripcount.analysis.results import Count

GAIN = os.path.join(CORPUS, "tide_gain.c")


def _codes(out: str) -> list[str]:
    return [d["code"] for d in json.loads(out)["files"][0]["diagnostics"]]


def test_corpus_file_verifies_counts_trips_per_entry_and_work(run_cli):
    status, out, err = run_cli("analyze", GAIN, "--verify", "--at", "*=7", "--format", "json")
    assert status == 0, err
    codes = _codes(out)
    assert "TC302" not in codes and not any(c.startswith("TC9") for c in codes)
    assert codes.count("TC303") == codes.count("TC304") >= 3


def test_a_wrong_flop_figure_is_caught(run_cli, monkeypatch):
    right = flops.scaled

    def off_by_one(count: Count, weight: int) -> Count:
        return right(count, weight + 1 if weight == 2 else weight)  # the multiply-add statements

    monkeypatch.setattr(flops, "scaled", off_by_one)
    status, out, _ = run_cli("analyze", GAIN, "--verify", "--at", "*=5", "--format", "json", "--no-cache")
    assert status == 1
    msgs = [d["message"] for d in json.loads(out)["files"][0]["diagnostics"] if d["code"] == "TC302"]
    assert any(m.startswith("formula for flops of S") for m in msgs)
