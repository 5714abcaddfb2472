# Tests of tripcount/analysis/counts.py under the nest's time budget: each
# count gets only the time left, statements are counted first, and when no
# formula can be had the value at the --at sizes still comes from (bounded)
# enumeration. Reference values: direct execution of the loops in Python
# (the same arithmetic as C for these nonnegative operands).

from __future__ import annotations

import os
import time

from conftest import INPUTS

from tripcount.analysis import counts
from tripcount.budget import Budget
from tripcount.options import Options

HARD5 = os.path.join(INPUTS, "robustness", "hard5_strides.c")


def hard5_count(N: int, M: int, P: int) -> int:
    """S1 of hard5_strides.c, by direct execution of its loops."""
    c = 0
    for i in range(0, N, 61):
        for j in range(i, M + i, 59):
            for k in range(0, P - j, 53):
                for l in range(N):  # noqa: E741 - the loop variable of the C source
                    for m in range(l, l + 3):
                        if (i + j + k) % 7 == 3 and (l + 2 * m) % 5 != 1:
                            c += 1
    return c


def test_limits_never_exceed_the_time_left():
    options = Options(time_limit=20)
    assert counts.limits_of(options).time_s == 20
    b = Budget.start(options.time_limit)
    assert counts.limits_of(options, b).time_s <= 20
    b.deadline = time.monotonic() + 0.5
    limits = counts.limits_of(options, b)
    assert limits.time_s <= 0.5 and limits.budget is b


def test_statement_value_by_enumeration_when_the_formula_limit_is_hit(run_cli):
    # at a 3 s limit the formula of S1 is out of reach here; the loops' formulas used
    # to spend the nest's time first, and S1 ended as "count unknown (nest limit reached)"
    want = hard5_count(300, 200, 250)
    assert want == 3600
    status, out, _ = run_cli("analyze", "--no-cache", "--time-limit", "3", "--at", "N=300,M=200,P=250", HARD5)
    assert status == 0
    assert "count unknown" not in out and "TC9" not in out
    runs = [line for line in out.splitlines() if line.strip().startswith("runs")]
    assert len(runs) == 1 and runs[0].rstrip().endswith("= 3,600"), runs
