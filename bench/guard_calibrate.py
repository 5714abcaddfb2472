# Calibration of tripcount.budget's constants on this machine:
#   * isl operations per second of one long isl call (ISL_OPS_PER_SECOND), found
#     by bisecting the smallest operation budget under which each call succeeds;
#   * microseconds per outer point of Set.count_val's scan (INLINE_SCAN_POINTS),
#     against budget.scan_estimate.
#
#   python bench/guard_calibrate.py

from __future__ import annotations

import os
import random
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

import islpy as isl  # noqa: E402

from tripcount import budget  # noqa: E402

CTX = isl.DEFAULT_CONTEXT


def ops_needed(fn) -> int:
    """Smallest operation budget under which fn() succeeds (bisection)."""
    lo, hi = 1, 10**10
    while lo < hi:
        mid = (lo + hi) // 2
        CTX.set_max_operations(0)
        CTX.reset_operations()
        CTX.set_max_operations(mid)
        try:
            fn()
            ok = True
        except isl.Error:
            ok = False
        CTX.set_max_operations(0)
        CTX.reset_operations()
        if ok:
            hi = mid
        else:
            lo = mid + 1
    return lo


def union(k: int, rng: random.Random) -> isl.Set:
    s = None
    for _ in range(k):
        a, b, c, d = (rng.randint(-3, 3) for _ in range(4))
        m = rng.randint(2, 5)
        p = isl.Set(f"[N, M] -> {{ [i, j, l] : 0 <= i < N and {a}*i + {b} <= j <= {c}*i + M + {d} "
                    f"and j - i <= l <= N + {a}*j - M and (i + {b}*j) mod {m} < 2 }}")
        s = p if s is None else s.union(p)
    return s


def main() -> None:
    rng = random.Random(1)
    print("isl operations per second of one call")
    for k in (2, 4, 6, 8):
        s = union(k, rng)
        for name, fn in (("make_disjoint", s.make_disjoint), ("coalesce", s.coalesce), ("lexmax", s.lexmax),
                         ("dim_max", lambda s=s: s.dim_max(2))):
            t = time.perf_counter()
            fn()
            dt = time.perf_counter() - t
            if dt < 0.002:
                continue
            n = ops_needed(fn)
            print(f"  {k} pieces {name:14s} {n:>10,} ops {dt:8.4f} s  {n / dt:10.3g} ops/s")
    print(f"budget.ISL_OPS_PER_SECOND = {budget.ISL_OPS_PER_SECOND:,}")
    print("count_val: microseconds per outer point (scan_estimate)")
    for text, n in (("[N] -> { [i, j, k] : 0 <= i < N and 0 <= j < N and 0 <= k < N }", 300),
                    ("[N] -> { [i, j, k] : 0 <= i < N and i <= j < N and 0 <= k <= j and (i + j + k) mod 3 = 0 }", 300),
                    ("[N] -> { [i, j] : 0 <= i < N and 0 <= j < 1000 * N and exists e : j = 12345 e + 7 i }", 2000)):
        s = isl.Set(text)
        s = s.fix_val(isl.dim_type.param, 0, isl.Val.read_from_str(s.get_ctx(), str(n)))
        rows = budget.scan_estimate(s)
        t = time.perf_counter()
        v = s.count_val()
        dt = time.perf_counter() - t
        print(f"  {rows:>10,} outer points  {dt:8.4f} s  {1e6 * dt / max(rows, 1):8.2f} us/point  ({v} points)")
    print(f"budget.INLINE_SCAN_POINTS = {budget.INLINE_SCAN_POINTS:,}")


if __name__ == "__main__":
    main()
