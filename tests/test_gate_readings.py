# Tests of tripcount/gate/readings.py: exact evaluation of leading terms.

from __future__ import annotations

from fractions import Fraction

import pytest

from tripcount.gate import readings


def test_eval_expr_is_exact():
    assert readings.eval_expr("N^3/6 + N^2/2 + N/3", {"N": 5}) == 35  # tetrahedral number, OEIS A000292
    assert readings.eval_expr("floor((N + 1)/2)*M", {"N": 4, "M": 3}) == 6
    assert readings.eval_expr("-N/4", {"N": 2}) == Fraction(-1, 2)
    with pytest.raises(ValueError):
        readings.eval_expr("__import__('os')", {})


def test_leading_ratio():
    assert readings.leading_ratio(["N^2/2"], ["N^2"], {}) == pytest.approx(2.0)
    # homogeneous of the same degree: the ratio does not depend on the scale
    r1 = readings.leading_ratio(["N*M"], ["N^2/2 + N*M"], {"N": 10, "M": 10})
    r2 = readings.leading_ratio(["N*M"], ["N^2/2 + N*M"], {"N": 1000, "M": 1000})
    assert r1 == pytest.approx(1.5) and r2 == pytest.approx(1.5)
    assert readings.leading_ratio([], ["N"], {}) is None
