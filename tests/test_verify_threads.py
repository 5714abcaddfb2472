# --verify for the per-thread balance (tripcount.analysis.verify_threads):
# each thread's work, the imbalance and the work formulas of static
# schedules against the iterations of each thread enumerated one by one.
# The split of schedule(static) without a chunk is that of the GNU OpenMP
# runtime (from memory of libgomp's static iterator: the first n % T threads
# get one iteration more); with a chunk, chunks go round-robin (OpenMP 5.2,
# section 11.5.3).

from __future__ import annotations

import json
import os

from conftest import INPUTS

from tripcount.analysis import schedules
from tripcount.analysis.verify_threads import static_share

QUAY = os.path.join(INPUTS, "verify", "quay_shares.c")
SIZES = "n=10,steps=3,b=5,h=7"


def _run(run_cli, *more: str) -> tuple[int, list[dict], dict]:
    status, out, err = run_cli("analyze", QUAY, "--verify", "--at", SIZES, "--format", "json", "--threads", "3",
                               *more)
    assert out, err
    report = json.loads(out)
    return status, [d for f in report["files"] for d in f["diagnostics"]], report


def test_static_shares_by_hand():
    """10 iterations on 3 threads: 4, 3, 3 without a chunk; chunks of 2 round-robin: 0 0 1 1 2 2 0 0 1 1."""
    assert static_share(10, 3, None) == [0] * 4 + [1] * 3 + [2] * 3
    assert static_share(10, 3, 2) == [0, 0, 1, 1, 2, 2, 0, 0, 1, 1]
    assert static_share(2, 3, None) == [0, 1]


def test_parallel_loops_verify(run_cli):
    status, diags, report = _run(run_cli)
    codes = [d["code"] for d in diags]
    assert status == 0 and "TC305" not in codes and not any(c.startswith("TC9") for c in codes)
    notes = [d["message"] for d in diags if d["code"] == "TC306"]
    assert len(notes) == 3 and all(m.startswith("verified ") for m in notes)
    # the triangle: iteration i does i statement instances; threads get i = 0..3, 4..6, 7..9
    # (sums of arithmetic series: 6, 15, 24)
    tri = report["files"][0]["nests"][0]["loops"][0]["parallel"]
    assert tri["per_thread"] == [6, 15, 24]


def test_a_wrong_static_split_is_caught(run_cli, monkeypatch):
    """The remainder given to the last threads instead of the first: every split with n % T != 0 moves."""
    monkeypatch.setattr(schedules, "static_start", lambda n, threads, t: t * (n // threads) + max(
        0, t - (threads - n % threads)))
    status, diags, _ = _run(run_cli)
    assert status == 1
    msgs = [d["message"] for d in diags if d["code"] == "TC305"]
    assert any(m.startswith("work of thread 0 of parallel loop 'i' (line 7)") for m in msgs), msgs


def test_a_wrong_chunked_split_is_caught(run_cli, monkeypatch):
    right = schedules.static_chunked_work
    monkeypatch.setattr(schedules, "static_chunked_work", lambda profile, threads, chunk: right(
        profile, threads, chunk + 1))
    status, diags, _ = _run(run_cli)
    assert status == 1
    msgs = [d["message"] for d in diags if d["code"] == "TC305"]
    assert any("parallel loop 'i' (line 16)" in m for m in msgs), msgs
