# Tests of tripcount/measure.py: `tripcount machine --measure` on a tiny
# budget with small caches writes a description that loads back, and prints
# each figure with its spread over the repeats. The figures themselves are
# measurements of the host running the tests; only their shape is checked
# (positive, best >= median, common practice of STREAM-style reporting).

from __future__ import annotations

import pytest

from tripcount.machine import load_machine
from tripcount.measure import Figure

pytest.importorskip("numpy")


def test_measure_writes_a_description(tmp_path, run_cli):
    out = tmp_path / "host.toml"
    status, text, err = run_cli("machine", "--measure", "--budget", "0.3", "--cache", "L1=4KiB",
                                "--cache", "L2=16KiB", "--cache", "L3=64KiB", "-o", str(out))
    assert status == 0, err
    assert "measured on this host" in text and "over 5 repeats" in text
    m = load_machine(str(out))
    assert m.peak_gflops_per_core > 0 and m.memory_gbs > 0
    assert [k for k, _ in m.cache_gbs] == ["L1", "L2", "L3"] and m.source.startswith("measured on this host")


def test_bad_budget_is_a_usage_error(run_cli):
    assert run_cli("machine", "--measure", "--budget", "0")[0] == 2


def test_figure_text():
    f = Figure("L2", 1 << 20, (10.0, 12.0, 11.0))
    assert f.best == 12.0
    assert f.text() == "L2 (arrays 1 MiB): 12 GB/s best, median 11, range 10..12 over 3 repeats"
