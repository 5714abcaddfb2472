# Tests of tripcount/analysis/summary.py: every typed summary round-trips
# through its one to_json/from_json pair (on objects of our own and on every
# nest of the corpus), the readings of a working set bound prove only one side,
# and the summary of a real nest carries the bound flag of the footprint.

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import pytest

from tripcount.analysis.summary import (
    EXACT,
    LOWER,
    UNKNOWN,
    UPPER,
    BalanceSummary,
    FlopsSummary,
    LoopSummary,
    NestSummary,
    Piece,
    Quantity,
    Span4,
    StatementSummary,
    WorkingSetSummary,
)

ROOT = Path(__file__).resolve().parent.parent

Q = Quantity(Fraction(7, 2), (Piece("N >= 1", "N*(N + 1)/2"), Piece("N == 0", "0")), 2, "N^2/2", None)
WS = WorkingSetSummary("all iterations of loop 'j'", Q, 4096, UPPER, "the footprint over all values of i", "rows")
BAL = BalanceSummary("parallel for", "static", "4", 8, Fraction(9, 8), False, "schedule(static, 1)")
LOOP = LoopSummary(1, "j", 1, 0, Span4(3, 9, 5, 10), Q, Quantity(None, None, None, None, "limit"), WS, BAL)
STMT = StatementSummary("S1", Span4(4, 13, 4, 26), "A[i] += A[j]", Q, FlopsSummary(Q, 2))
NEST = NestSummary("f", Span4(2, 5, 5, 10), ("N",), (LOOP,), (STMT,), FlopsSummary(Q))


@pytest.mark.parametrize("obj", [Q, Quantity(), WS, WorkingSetSummary(), BAL, BalanceSummary(), FlopsSummary(Q),
                                 LOOP, STMT, NEST, Span4(1, 2, 3, 4)], ids=lambda o: type(o).__name__)
def test_round_trip_through_json(obj):
    data = json.loads(json.dumps(obj.to_json()))  # what the cache writes and reads
    assert type(obj).from_json(data) == obj
    assert type(obj).from_json(data).to_json() == data


def test_a_bound_proves_one_side_only():
    cap = 32 * 1024
    assert WorkingSetSummary(occupancy=cap + 1, estimate=EXACT).proves_above(cap)
    assert WorkingSetSummary(occupancy=cap, estimate=EXACT).proves_within(cap)
    assert WorkingSetSummary(occupancy=cap + 1, estimate=LOWER).proves_above(cap)
    assert not WorkingSetSummary(occupancy=cap, estimate=LOWER).proves_within(cap)
    assert not WorkingSetSummary(occupancy=cap + 1, estimate=UPPER).proves_above(cap)
    assert WorkingSetSummary(occupancy=cap, estimate=UPPER).proves_within(cap)
    unknown = WorkingSetSummary(occupancy=None, estimate=UNKNOWN)
    assert not unknown.proves_above(0) and not unknown.proves_within(1 << 60)


def test_work_is_the_highest_degree_and_its_statements():
    s2 = StatementSummary("S2", Span4(5, 1, 5, 9), "t = 0", Quantity(10, (Piece("true", "N"),), 1, "N"))
    w = NestSummary("f", Span4(1, 1, 9, 1), ("N",), (), (STMT, s2)).work()
    assert (w.degree, w.leading, w.who) == (2, ("N^2/2",), "S1")


def test_corpus_summaries_round_trip_and_carry_the_bound_flag():
    from tripcount.options import Options
    from tripcount.pipeline import analyze_file

    opts = Options(at={"*": 100}, caches={"L1": 32768, "L2": 1 << 20, "L3": 8 << 20}, detail="gate")
    seen = set()
    for path in sorted((ROOT / "corpus").glob("*.c"))[:3]:
        for nr in analyze_file(str(path), opts).nests:
            summary = nr.summary()
            assert NestSummary.from_json(json.loads(json.dumps(summary.to_json()))) == summary
            for lr, ls in zip(nr.loops, summary.loops, strict=True):
                ws = lr.extras.get("working_set")
                if ws is None:
                    continue
                seen.add(ls.working_set.estimate)
                # the flag is the footprint's own: a bound stays a bound
                if ws.occupancy is not None and not ws.whole.lower_bound:
                    assert ls.working_set.estimate == (UPPER if ws.whole.lines.bound else EXACT)
                    assert ls.working_set.occupancy == ws.occupancy
    assert EXACT in seen
