# Benchmark of tripcount's counting engine (not run in CI).
#
# Every measurement is cold: all memo tables of the engine are emptied
# (tripcount.engine.clear_memos) before each timed call, in the same process,
# so the figures are the computation and never a memo hit. Timings are
# wall-clock measurements on this machine, not a model.
#
# 1. count() on triangular nests of depth 1..5, strided nests (strides up to
#    64) and a few awkward sets; on the nests sympy can sum in closed form,
#    the same count by sympy.summation (ratio of medians).
# 2. The random profile (bench/random_nests.py, seeded): nests of depth 1..5
#    with min/max bounds, C division of bounds by 2..5, strides 1..5, modulo
#    guards with coefficients, != guards and negative ranges, each analysed
#    whole (tripcount.pipeline.analyze_text, default limits) and printed as
#    JSON: give-up rate (a formula missing: TC301/TC310/TC311), median, 95th
#    percentile and worst time per nest, and the share of printing in it.
#    With --check every formula is also compared with direct execution of the
#    nest in Python (C semantics) at small sizes.
#
#   python bench/bench_engine.py [--repeat 5] [--per-depth 100] [--seed 1] [--check]
#
# The default profile (100 nests at each depth 1..5) takes the better part of
# an hour on a 2-core machine: the nests that end at the time limit dominate.
# --per-depth 25 (depths 1..5) gives the table in about ten minutes.

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from fractions import Fraction

import islpy as isl

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from random_nests import random_nests  # noqa: E402

from tripcount.engine import clear_memos, count  # noqa: E402

GIVE_UP_CODES = {"TC301", "TC310", "TC311"}


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


def timed_cold(fn, repeat: int) -> float:
    """Median wall time of fn() over `repeat` runs, every memo emptied before each."""
    ts = []
    for _ in range(repeat):
        clear_memos()
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts)


def sympy_table(repeat: int) -> None:
    import sympy  # only the comparison needs it

    rows = []
    for depth in range(1, 6):
        text, ranges = nest(depth)
        s = isl.Set(text)
        t_eng = timed_cold(lambda s=s: count(s), repeat)
        syms = {f"i{k}": sympy.Symbol(f"i{k}") for k in range(depth)} | {"N": sympy.Symbol("N")}

        def by_sympy(ranges=ranges, syms=syms):
            e = sympy.Integer(1)
            for v, lo, hi in ranges:
                e = sympy.summation(e, (syms[v], sympy.sympify(lo, syms), sympy.sympify(hi, syms)))
            return sympy.factor(e)

        sympy.core.cache.clear_cache()
        t_sym = timed_cold(lambda: (sympy.core.cache.clear_cache(), by_sympy()), max(1, repeat // 2))
        rows.append((f"depth {depth}", t_eng, t_sym))
    for stride in (2, 4, 8, 16, 32, 64):
        s = isl.Set(strided(stride))
        rows.append((f"stride {stride}", timed_cold(lambda s=s: count(s), repeat), None))
    for text in (
        "[N] -> { S[i, j] : 0 <= i < N and 0 <= 64j < i }",
        "[N, M] -> { S[i, j] : 0 <= i < N and 0 <= j < M and (i + j) mod 64 = 3 }",
        "[N, M, K] -> { S[i, j, k] : 0 <= i < N and i < j < M and 0 <= k < min(j, K) }",
    ):
        s = isl.Set(text)
        rows.append((text[:48], timed_cold(lambda s=s: count(s), repeat), None))

    print(f"count() cold (every engine memo emptied before each run), median of {repeat};"
          " sympy.summation with its cache cleared")
    print(f"{'nest':<50} {'engine ms':>10} {'sympy ms':>10} {'ratio':>8}")
    for name, te, ts in rows:
        r = f"{ts / te:8.1f}" if ts else "       -"
        s = f"{ts * 1e3:10.1f}" if ts else "         -"
        print(f"{name:<50} {te * 1e3:10.2f} {s} {r}")
    ratios = [ts / te for _, te, ts in rows if ts]
    if ratios:
        print(f"median speed-up over sympy summation (nests sympy sums): {statistics.median(ratios):.1f}x")


def _formulas(fr):
    for nr in fr.nests:
        for lr in nr.loops:
            yield lr.loop.span.line, lr.trips
        for sr in nr.statements:
            yield sr.stmt.span.line, sr.count


def _check(gen, fr) -> int:
    """Compare every formula with direct execution at small sizes; returns the comparisons."""
    from strategies import TooBig

    n = 0
    for vals in range(-1, 7, 2):
        pt = {p: vals + k for k, p in enumerate(gen.params)}
        try:
            want = gen.execute(pt)
        except TooBig:
            continue
        for line, cnt in _formulas(fr):
            if cnt is None or cnt.formula is None:
                continue
            got = cnt.formula.evaluate(pt)
            # reference: direct execution of the same nest in Python with C semantics
            assert got == Fraction(want[line]), f"line {line} at {pt}: {got} != {want[line]}\n{gen.source()}"
            n += 1
    return n


def profile_table(seed: int, per_depth: int, depths: list[int], at: int, time_limit: float,
                  check: bool, show: bool) -> None:
    from tripcount.options import Options
    from tripcount.pipeline import analyze_text
    from tripcount.report.jsonout import file_json

    print(f"\nrandom profile (bench/random_nests.py, seed {seed}), {per_depth} nests per depth, "
          f"--at '*={at}', time limit {time_limit} s per nest; cold: every engine memo emptied before each nest")
    print(f"{'depth':>5} {'nests':>6} {'give-ups':>9} {'median ms':>10} {'p95 ms':>9} {'worst ms':>9} "
          f"{'printing':>9}")
    total_checked = 0
    for depth in depths:
        times, prints, give_ups = [], [], []
        for k, gen in enumerate(random_nests(seed, depth, per_depth)):
            src = gen.source()
            opts = Options(at={"*": at}, time_limit=time_limit)
            clear_memos()
            t0 = time.perf_counter()
            fr = analyze_text(src, "random.c", opts)
            t1 = time.perf_counter()
            file_json(fr)
            t2 = time.perf_counter()
            times.append(t2 - t0)
            prints.append(t2 - t1)
            if show:
                print(f"  depth {depth} #{k}: {(t2 - t0) * 1e3:.1f} ms", flush=True)
            codes = {d.code for d in fr.all_diagnostics()}
            missing = any(c is None or c.formula is None for _, c in _formulas(fr))
            if codes & GIVE_UP_CODES or missing:
                give_ups.append(k)
                if show:
                    print(f"  give-up depth {depth} #{k} ({sorted(codes)}):\n{src}")
            if check:
                total_checked += _check(gen, fr)
        q = statistics.quantiles(times, n=20)[-1] if len(times) > 1 else times[0]
        share = sum(prints) / sum(times)
        print(f"{depth:>5} {len(times):>6} {len(give_ups):>9} {statistics.median(times) * 1e3:>10.1f} "
              f"{q * 1e3:>9.1f} {max(times) * 1e3:>9.1f} {share:>8.1%}", flush=True)
    if check:
        print(f"formulas compared with direct execution: {total_checked}, all equal")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--per-depth", type=int, default=100)
    ap.add_argument("--depths", default="1,2,3,4,5")
    ap.add_argument("--at", type=int, default=100)
    ap.add_argument("--time-limit", type=float, default=20.0)
    ap.add_argument("--check", action="store_true", help="compare formulas with direct execution")
    ap.add_argument("--show", action="store_true", help="print the nests that got no formula")
    ap.add_argument("--only", choices=["sympy", "profile"], default=None)
    args = ap.parse_args()
    if args.only != "profile":
        sympy_table(args.repeat)
    if args.only != "sympy":
        depths = [int(d) for d in args.depths.split(",")]
        profile_table(args.seed, args.per_depth, depths, args.at, args.time_limit, args.check, args.show)


if __name__ == "__main__":
    main()
