# Benchmark of tripcount's counting engine (not run in CI).
#
# Times count() on generated loop nests of depth 1..5 and on strided nests with
# strides up to 64, and compares with sympy.summation on the nests sympy can
# sum in closed form (ratio of medians). Prints a table. Timings are
# measurements on this machine, not a model.
#
#   python bench/bench_engine.py [--repeat 5]

from __future__ import annotations

import argparse
import statistics
import time

import islpy as isl

from tripcount.engine import count


def nest(depth: int) -> tuple[str, list[tuple[str, str, str]]]:
    """A triangular-ish nest: 0 <= i0 < N, i_{k-1} <= i_k < N + k (isl text, sympy ranges)."""
    vs = [f"i{k}" for k in range(depth)]
    cons = ["0 <= i0 < N"]
    ranges = [("i0", "0", "N - 1")]
    for k in range(1, depth):
        cons.append(f"{vs[k - 1]} <= {vs[k]} < N + {k}")
        ranges.append((vs[k], vs[k - 1], f"N + {k - 1}"))
    return f"[N] -> {{ S[{', '.join(vs)}] : {' and '.join(cons)} }}", ranges[::-1]


def strided(stride: int) -> str:
    return (
        f"[N, M] -> {{ S[i, j] : exists q : i = {stride}q and 0 <= i < N and "
        f"i <= j < min(i + {stride}, M) }}"
    )


def timed(fn, repeat: int) -> float:
    ts = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    import sympy  # only the comparison needs it

    rows = []
    for depth in range(1, 6):
        text, ranges = nest(depth)
        s = isl.Set(text)
        t_eng = timed(lambda s=s: count(s), args.repeat)
        syms = {f"i{k}": sympy.Symbol(f"i{k}") for k in range(depth)} | {"N": sympy.Symbol("N")}

        def by_sympy(ranges=ranges, syms=syms):
            e = sympy.Integer(1)
            for v, lo, hi in ranges:
                e = sympy.summation(e, (syms[v], sympy.sympify(lo, syms), sympy.sympify(hi, syms)))
            return sympy.factor(e)

        t_sym = timed(by_sympy, max(1, args.repeat // 2))
        rows.append((f"depth {depth}", t_eng, t_sym))
    for stride in (2, 4, 8, 16, 32, 64):
        s = isl.Set(strided(stride))
        rows.append((f"stride {stride}", timed(lambda s=s: count(s), args.repeat), None))
    for text in (
        "[N] -> { S[i, j] : 0 <= i < N and 0 <= 64j < i }",
        "[N, M] -> { S[i, j] : 0 <= i < N and 0 <= j < M and (i + j) mod 64 = 3 }",
        "[N, M, K] -> { S[i, j, k] : 0 <= i < N and i < j < M and 0 <= k < min(j, K) }",
    ):
        s = isl.Set(text)
        rows.append((text[:48], timed(lambda s=s: count(s), args.repeat), None))

    print(f"{'nest':<50} {'engine ms':>10} {'sympy ms':>10} {'ratio':>8}")
    for name, te, ts in rows:
        r = f"{ts / te:8.1f}" if ts else "       -"
        s = f"{ts * 1e3:10.1f}" if ts else "         -"
        print(f"{name:<50} {te * 1e3:10.2f} {s} {r}")
    ratios = [ts / te for _, te, ts in rows if ts]
    if ratios:
        print(f"median speed-up over sympy summation: {statistics.median(ratios):.1f}x")


if __name__ == "__main__":
    main()
