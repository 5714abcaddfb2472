# Power sums for the counting engine (Faulhaber's formula via Bernoulli numbers).
#
# S_k(n) = sum_{x=1}^{n} x^k is a polynomial in n of degree k+1; it satisfies
# S_k(n) - S_k(n-1) = n^k identically, so sum_{x=lo}^{hi} x^k = S_k(hi) - S_k(lo-1)
# for all integers lo <= hi + 1 (the empty range gives 0). The engine sums a
# polynomial summand over an interval of one variable with these.

from __future__ import annotations

from fractions import Fraction
from functools import cache
from math import comb

from tripcount.engine.qpoly import QPoly


@cache
def bernoulli_plus(n: int) -> Fraction:
    """Bernoulli number B_n with the convention B_1 = +1/2."""
    # recurrence for B^- : sum_{j=0}^{m} C(m+1, j) B_j = 0
    bs = [Fraction(1)]
    for m in range(1, n + 1):
        bs.append(-sum(comb(m + 1, j) * bs[j] for j in range(m)) / (m + 1))
    b = bs[n]
    return -b if n == 1 else b


@cache
def power_sum_coeffs(k: int) -> tuple[Fraction, ...]:
    """Coefficients c_0..c_{k+1} of S_k(n) = sum_{x=1}^n x^k = sum_j c_j n^j."""
    c = [Fraction(0)] * (k + 2)
    for j in range(k + 1):
        c[k + 1 - j] += Fraction(comb(k + 1, j)) * bernoulli_plus(j) / (k + 1)
    return tuple(c)


def antidifference(coeffs: dict[int, QPoly]):
    """G with sum_{x=lo}^{hi} sum_k coeffs[k] * x^k = G(hi) - G(lo - 1) whenever
    lo <= hi + 1. G memoizes its values: the chambers of an interval sum share
    their bounds, so each bound is expanded once instead of once per pair."""
    top = max(coeffs) + 1 if coeffs else 0
    g: list[QPoly] = [QPoly() for _ in range(top + 1)]
    for k, ck in coeffs.items():
        if ck.is_zero():
            continue
        for j, s in enumerate(power_sum_coeffs(k)):
            if s:
                g[j] = g[j] + ck * s
    memo: dict[QPoly, QPoly] = {}

    def big_g(n: QPoly) -> QPoly:
        got = memo.get(n)
        if got is not None:
            return got
        out = QPoly()
        pn = QPoly.const(1)
        for j in range(1, top + 1):
            pn = pn * n
            if not g[j].is_zero():
                out = out + g[j] * pn
        memo[n] = out
        return out

    return big_g


def sum_interval(coeffs: dict[int, QPoly], lo: QPoly, hi: QPoly) -> QPoly:
    """sum_{x=lo}^{hi} sum_k coeffs[k] * x^k, valid whenever lo <= hi + 1."""
    if not coeffs:
        return QPoly()
    top = max(coeffs) + 1
    # G(n) = sum_k c_k S_k(n) collected by powers of n
    g: list[QPoly] = [QPoly() for _ in range(top + 1)]
    for k, ck in coeffs.items():
        if ck.is_zero():
            continue
        for j, s in enumerate(power_sum_coeffs(k)):
            if s:
                g[j] = g[j] + ck * s
    lo1 = lo - 1
    out = QPoly()
    ph = QPoly.const(1)
    pl = QPoly.const(1)
    for j in range(top + 1):
        if j:
            ph = ph * hi
            pl = pl * lo1
        if not g[j].is_zero() and j:
            out = out + g[j] * (ph - pl)
    return out
