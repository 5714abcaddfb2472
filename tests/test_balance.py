# Tests of tripcount/analysis/balance/ and schedules.py: work balance of
# parallel loops.
#
# Sources of the expected values, named beside each check:
#   * isl enumeration (Set.count_val on the thread's slice, sizes fixed);
#   * closed forms derived by hand (marked "derived by hand");
#   * the schedule rules of the GNU OpenMP runtime as the issue states them
#     (static split q = n / P, r = n % P; guided chunk max(c, ceil(rem / P)));
#     the runtime itself is the reference in tests/test_balance_openmp.py.

from __future__ import annotations

import io
import json
import time
from fractions import Fraction
from pathlib import Path

import islpy as isl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tripcount import ir
from tripcount.analysis import balance
from tripcount.analysis import schedules as sch
from tripcount.analysis.results import Count, LoopResult, NestResult, StatementResult
from tripcount.model import Loop, Nest, Statement
from tripcount.options import Options
from tripcount.pipeline import analyze_text

HERE = Path(__file__).resolve().parent
CORPUS = HERE.parent / "corpus"
INPUTS = HERE / "inputs" / "balance"
SPAN = ir.Span(1, 1, 1, 2)


# --------------------------------------------------------------------------
# Hand-built nests (isl sets written out), independent of the front end


def make_nest(loops, stmts, params, omp=None, context=None) -> NestResult:
    """loops: (var, parent, domain, step); stmts: (domain, enclosing loop indices)."""
    omp = omp or {}
    built = []
    for idx, (var, parent, dom, step) in enumerate(loops):
        depth = 0 if parent is None else built[parent].depth + 1
        children = tuple(j for j, lp in enumerate(loops) if lp[1] == idx)
        built.append(Loop(idx, var, depth, ir.Span(idx + 1, 1, idx + 9, 1), ir.Span(idx + 1, 1, idx + 1, 20),
                          parent, isl.Set(dom), step, omp.get(idx), children))
    statements = []
    for k, (dom, lps) in enumerate(stmts):
        s = isl.Set(dom)
        names = tuple(s.get_dim_name(isl.dim_type.set, i) for i in range(s.dim(isl.dim_type.set)))
        statements.append(Statement(f"S{k + 1}", ir.Span(20 + k, 1, 20 + k, 9), "x = 0", names, lps, s))
    ctx = isl.Set(context or "[" + ", ".join(params) + "] -> { : }")
    nest = Nest("balance.c", "f", SPAN, tuple(params), ctx, tuple(built), tuple(statements))
    return NestResult(nest, [LoopResult(lp, Count()) for lp in built],
                      [StatementResult(s, Count()) for s in statements])


def pragma(schedule=None, chunk=None, collapse=1, num_threads=None) -> ir.OmpClauses:
    return ir.OmpClauses(SPAN, "parallel for", schedule,
                         None if chunk is None else ir.IntLit(SPAN, chunk), collapse,
                         None if num_threads is None else ir.IntLit(SPAN, num_threads))


def triangle(omp: ir.OmpClauses, lower: bool = True) -> NestResult:
    inner = "0 <= j <= i" if lower else "i <= j < N"
    return make_nest([("i", None, "[N] -> { L0[i] : 0 <= i < N }", 1),
                      ("j", 0, f"[N] -> {{ L1[i, j] : 0 <= i < N and {inner} }}", 1)],
                     [(f"[N] -> {{ S1[i, j] : 0 <= i < N and {inner} }}", (0, 1))], ["N"], {0: omp})


def rectangle(omp: ir.OmpClauses) -> NestResult:
    return make_nest([("i", None, "[N, M] -> { L0[i] : 0 <= i < N }", 1),
                      ("j", 0, "[N, M] -> { L1[i, j] : 0 <= i < N and 0 <= j < M }", 1)],
                     [("[N, M] -> { S1[i, j] : 0 <= i < N and 0 <= j < M }", (0, 1))], ["M", "N"], {0: omp})


def run(result: NestResult, **opts) -> balance.ParallelBalance:
    balance.analyze(result, Options(**opts))
    return result.loops[0].extras["parallel"]


def codes(result: NestResult) -> list[str]:
    return [d.code for d in result.diagnostics]


def enumerate_slices(result: NestResult, at: dict[str, int], threads: int, chunk: int | None) -> list[int]:
    """Per-thread work by isl enumeration of each thread's slice (Set.count_val, sizes fixed)."""
    nest = result.nest
    loop = nest.loops[0]
    sp, _ = balance._space(nest, loop, 1, {})
    fixed = balance.space_at(sp, at)
    return [int(v) for v in balance.static_per_thread_exact(fixed, threads, chunk)]


# --------------------------------------------------------------------------
# schedules.py


@pytest.mark.parametrize("n", [0, 1, 7, 8, 9, 100, 1001])
@pytest.mark.parametrize("threads", [1, 3, 4, 8])
def test_static_split_is_contiguous_and_near_equal(n, threads):
    # libgomp's split as the issue states it: t < r get q+1 from t*(q+1), others q from t*q + r.
    q, r = divmod(n, threads)
    starts = [sch.static_start(n, threads, t) for t in range(threads + 1)]
    assert starts[0] == 0 and starts[-1] == n
    for t in range(threads):
        assert starts[t + 1] - starts[t] == (q + 1 if t < r else q)
        assert starts[t] == (t * (q + 1) if t < r else t * q + r)


@pytest.mark.parametrize("n,threads,chunk", [(10, 4, 3), (25, 8, 4), (7, 3, 10), (0, 2, 1), (64, 8, 1)])
def test_chunked_iterations_round_robin(n, threads, chunk):
    # chunk k (iterations k*c .. k*c+c-1) goes to thread k % P: count them one by one.
    want = [0] * threads
    for k in range(n):
        want[(k // chunk) % threads] += 1
    assert [sch.chunked_iterations(n, threads, chunk, t) for t in range(threads)] == want
    assert sch.static_chunked_work(sch.ConstProfile(n, 3), threads, chunk) == [3 * w for w in want]


def test_guided_chunk_sizes():
    # max(c, ceil(remaining / P)), capped by what remains: 100 over 4 threads, c = 1.
    sizes = [b - a for a, b in sch.guided_chunks(100, 4, 1)]
    assert sizes[:6] == [25, 19, 14, 11, 8, 6]
    assert sum(sizes) == 100
    assert [b - a for a, b in sch.guided_chunks(10, 4, 4)] == [4, 4, 2]


def test_dynamic_list_scheduling_by_hand():
    # Work 5, 1, 1, 1, 4 on 2 threads, chunk 1, derived by hand: t0 takes 5; t1 takes 1, 1, 1
    # (loads 1, 2, 3 stay below 5), then 4 goes to t1 (3 < 5): loads 5 and 7.
    prof = sch.VectorProfile([5, 1, 1, 1, 4])
    assert sch.dynamic_work(prof, 2, 1) == [5, 7]
    assert sch.static_work(prof, 2) == [7, 5]


def test_pairing_profile_is_flat_for_a_triangle():
    # Derived by hand: w(k) = k + 1 and w(n-1-k) = n - k sum to n + 1 for every pair.
    n = 11
    p = sch.paired(sch.VectorProfile([k + 1 for k in range(n)]))
    assert p.work[:-1] == [n + 1] * (n // 2) and p.work[-1] == (n + 1) // 2


def test_outcome_with_barriers():
    # Two entries with opposite imbalance: totals are equal (max/mean = 1) but each entry
    # waits for its busiest thread: critical path 3 + 3 over mean (2 + 2) -> 3/2.
    o = sch.Outcome(2)
    o.add([3, 1])
    o.add([1, 3])
    assert o.per_thread == [4, 4] and o.imbalance == Fraction(3, 2)


# --------------------------------------------------------------------------
# Closed forms


@pytest.mark.parametrize("threads", [2, 3, 4, 8])
def test_triangle_static_blocks_imbalance_tends_to_2_minus_1_over_p(threads):
    # Derived by hand: n = P*m rows, row i has i + 1 points. Block t sums (i + 1) over
    # i = t*m .. t*m + m - 1, i.e. m*(t*m + (m + 1)/2); the last block (t = P-1) is the
    # largest and the mean is n(n + 1)/(2P) = m(Pm + 1)/2, so
    # imbalance = ((2P - 1)m + 1)/(Pm + 1), which tends to 2 - 1/P as n grows.
    previous = None
    for m in (5, 50, 500):
        bal = run(triangle(pragma("static")), at={"N": threads * m}, threads=threads)
        assert bal.imbalance == Fraction((2 * threads - 1) * m + 1, threads * m + 1)
        gap = abs(float(bal.imbalance) - (2 - 1 / threads))
        assert previous is None or gap < previous
        previous = gap
    assert previous < 2e-3


@pytest.mark.parametrize("n,threads", [(12, 4), (96, 8), (30, 3), (7, 7)])
def test_rectangle_is_balanced_when_p_divides_n(n, threads):
    # Derived by hand: every row has M points and every thread gets n/P rows.
    result = rectangle(pragma("static"))
    bal = run(result, at={"N": n, "M": 5}, threads=threads)
    assert bal.imbalance == 1 and bal.efficiency == 1
    assert bal.per_thread == [5 * n // threads] * threads
    assert not bal.flagged and "TC501" not in codes(result)


def test_rectangle_not_dividing():
    # 10 rows of 5 on 4 threads: blocks of 3, 3, 2, 2 rows (derived by hand), imbalance 15/12.5.
    bal = run(rectangle(pragma("static")), at={"N": 10, "M": 5}, threads=4)
    assert bal.per_thread == [15, 15, 10, 10]
    assert bal.imbalance == Fraction(6, 5)


# --------------------------------------------------------------------------
# Per-thread values and formulas against isl enumeration


@pytest.mark.parametrize("n", [1, 5, 8, 13, 40])
@pytest.mark.parametrize("chunk", [None, 1, 3])
def test_per_thread_matches_isl_enumeration(n, chunk):
    # Reference: isl enumeration (Set.count_val of each thread's slice at fixed sizes).
    result = triangle(pragma("static", chunk))
    bal = run(result, at={"N": n}, threads=3)
    assert bal.per_thread == enumerate_slices(result, {"N": n}, 3, chunk)
    assert sum(bal.per_thread) == n * (n + 1) // 2  # triangular numbers (OEIS A000217)


@pytest.mark.parametrize("chunk", [None, 2])
def test_per_thread_formula_in_n_and_t(chunk):
    # Reference: isl enumeration at several sizes, with the formula evaluated at each thread id.
    result = triangle(pragma("static", chunk), lower=False)
    bal = run(result, threads=4)
    f = bal.per_thread_formula
    assert f is not None and f.formula is not None, f and f.note
    assert bal.thread_param in f.formula.params and "N" in f.formula.params
    for n in (0, 1, 3, 4, 9, 17, 30):
        want = enumerate_slices(result, {"N": n}, 4, chunk)
        assert [f.formula.evaluate({"N": n, bal.thread_param: t}) for t in range(4)] == want


def test_per_thread_formula_collapsed_rectangle():
    # Reference: isl enumeration; the linearized index i*M + j is not affine, the formula
    # comes from the equal work per iteration (first iteration times the thread's share).
    omp = pragma("static", None, collapse=2)
    result = rectangle(omp)
    bal = run(result, threads=4)
    f = bal.per_thread_formula.formula
    assert f is not None
    for n, m in ((3, 5), (4, 4), (7, 1), (1, 9)):
        want = [0] * 4
        total = n * m
        for t in range(4):
            q, r = divmod(total, 4)
            want[t] = q + (1 if t < r else 0)
        assert [f.evaluate({"N": n, "M": m, bal.thread_param: t}) for t in range(4)] == want


def test_work_per_iteration_formula():
    # The inner loop of row i has i + 1 points (derived by hand).
    bal = run(triangle(pragma()), at={"N": 9}, threads=2)
    w = bal.work_per_iteration.formula
    assert w is not None
    assert [w.evaluate({"N": 9, "i": i}) for i in range(9)] == [i + 1 for i in range(9)]
    assert bal.iteration_work[:2] == (1, 9)


# --------------------------------------------------------------------------
# Property: per-thread values sum to the total count


def _loop_case(kind: str, step: int) -> NestResult:
    if kind == "triangle":
        dom, inner = "0 <= i < N", "0 <= j <= i"
    elif kind == "rectangle":
        dom, inner = "0 <= i < N", "0 <= j < 3"
    else:  # strided rows starting at 2, triangle in the row index
        dom, inner = f"2 <= i < N and (i - 2) mod {step} = 0", "0 <= j < i"
    return make_nest([("i", None, f"[N] -> {{ L0[i] : {dom} }}", step if kind == "strided" else 1),
                      ("j", 0, f"[N] -> {{ L1[i, j] : {dom} and {inner} }}", 1)],
                     [(f"[N] -> {{ S1[i, j] : {dom} and {inner} }}", (0, 1)),
                      (f"[N] -> {{ S2[i] : {dom} }}", (0,))], ["N"], {})


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(kind=st.sampled_from(["triangle", "rectangle", "strided"]), step=st.integers(2, 4),
       n=st.integers(0, 60), threads=st.integers(1, 9),
       schedule=st.sampled_from(["static", "dynamic", "guided"]), chunk=st.one_of(st.none(), st.integers(1, 7)))
def test_per_thread_sums_to_total(kind, step, n, threads, schedule, chunk):
    # Reference: isl enumeration of the statement domains (Set.count_val).
    result = _loop_case(kind, step)
    loop = result.nest.loops[0]
    result.nest.loops = (Loop(loop.index, loop.var, loop.depth, loop.span, loop.header, loop.parent,
                              loop.domain, loop.step, pragma(schedule, chunk), loop.children),
                         *result.nest.loops[1:])
    result.loops[0].loop = result.nest.loops[0]
    bal = run(result, at={"N": n}, threads=threads)
    total = sum(balance.fix_params(s.domain, {"N": n}).count_val().to_python() for s in result.nest.statements)
    assert len(bal.per_thread) == threads
    assert sum(bal.per_thread) == total
    if schedule == "static" and n:
        assert bal.per_thread == enumerate_slices(result, {"N": n}, threads, chunk)


# --------------------------------------------------------------------------
# Diagnostics, advice, JSON and text


def test_flagged_triangle_gets_advice():
    result = triangle(pragma("static"))
    bal = run(result, at={"N": 1000}, threads=8)
    assert bal.flagged and "TC501" in codes(result)
    msg = next(d.message for d in result.diagnostics if d.code == "TC501")
    assert msg.startswith("parallel loop 'i' (line 1): schedule(static) gives 8 threads imbalance 1.87")
    assert "model estimate" in msg
    assert bal.best is not None and bal.best.imbalance < Fraction(102, 100)
    assert "model estimate" in bal.recommendation and "no scheduling overhead" in bal.recommendation
    labels = {(a.schedule, a.chunk, a.rewrite is not None) for a in bal.alternatives}
    assert {("static", None, False), ("static", 1, False), ("static", 64, False), ("dynamic", 1, False),
            ("guided", 1, False), ("static", None, True)} <= labels
    pair = next(a for a in bal.alternatives if a.rewrite)
    assert pair.imbalance < Fraction(101, 100)
    lines = bal.text_lines()
    assert len([ln for ln in lines if ln.strip().startswith("thread ")]) == 8
    assert "█" in lines[-2] and "117,250" in lines[-2]  # the last thread: rows 875..999 (derived by hand)


def test_json_fields_merge_into_parallel_object():
    from tripcount.report import jsonout

    result = triangle(pragma("static", 4))
    run(result, at={"N": 50}, threads=4)
    out = jsonout.loop_json(result.loops[0])
    par = out["parallel"]
    assert par["directive"] == "parallel for" and par["collapse"] == 1  # pragma fields kept
    for key in ("schedule", "chunk", "threads", "per_thread", "imbalance", "efficiency", "work_per_iteration",
                "per_thread_formula", "alternatives", "estimate", "recommendation"):
        assert key in par
    assert par["schedule"] == "static" and par["chunk"] == "4" and par["chunk_size"] == 4
    assert par["estimate"] is False
    assert sum(par["per_thread"]) == 50 * 51 // 2
    assert isinstance(par["imbalance"], float) and isinstance(par["efficiency"], float)
    assert par["per_thread_formula"]["pieces"]
    json.dumps(out)
    from tripcount.report.schema import validate_part

    validate_part(out, "loop")  # the report schema, schema_version 1


def test_dynamic_and_guided_are_estimates():
    for schedule in ("dynamic", "guided", "runtime"):
        result = triangle(pragma(schedule))
        bal = run(result, at={"N": 100}, threads=4)
        assert bal.estimate and bal.per_thread_formula is None
        assert sum(bal.per_thread) == 5050
    assert bal.schedule == "dynamic" and bal.chunk == 1  # runtime: libgomp's default (see the gcc test)


def test_no_sizes_gives_formulas_only():
    result = triangle(pragma("static"))
    bal = run(result, threads=4)
    assert bal.per_thread is None and bal.imbalance is None
    assert bal.per_thread_formula.formula is not None and "--at N=" in bal.recommendation
    assert "TC501" not in codes(result)


def test_threads_from_num_threads_clause():
    bal = run(triangle(pragma("static", num_threads=3)), at={"N": 9}, threads=8)
    assert bal.threads == 3 and bal.threads_from == "num_threads" and len(bal.per_thread) == 3


def test_parallel_line_option_and_nested_note():
    result = triangle(None)
    bal = run(result, at={"N": 20}, threads=2, parallel_lines=(1,))
    assert bal.origin == "--parallel" and bal.schedule == "static" and sum(bal.per_thread) == 210
    nested = triangle(pragma("static"))
    inner = nested.nest.loops[1]
    nested.nest.loops = (nested.nest.loops[0],
                         Loop(inner.index, inner.var, inner.depth, inner.span, inner.header, inner.parent,
                              inner.domain, inner.step, pragma("static"), inner.children))
    balance.analyze(nested, Options(at={"N": 20}, threads=2))
    assert "TC504" in codes(nested) and "parallel" not in nested.loops[1].extras


def test_flops_without_weights_falls_back():
    result = triangle(pragma("static"))
    bal = run(result, at={"N": 10}, threads=2, work="flops")
    assert bal.work == "statements" and "TC502" in codes(result)


def test_flops_weights_from_the_flops_analysis():
    text = (INPUTS / "harbour_triangle.c").read_text()
    fr = analyze_text(text, "harbour_triangle.c", Options(at={"N": 12}, threads=3, work="flops"))
    nr = next(n for n in fr.nests if n.nest.function == "buoy_spacing")
    bal = nr.loops[0].extras["parallel"]
    per = nr.statements[0].extras["flops"].per_execution
    plain = analyze_text(text, "harbour_triangle.c", Options(at={"N": 12}, threads=3))
    base = next(n for n in plain.nests if n.nest.function == "buoy_spacing").loops[0].extras["parallel"]
    assert bal.work == "flops" and per == 1  # one subtraction per pair
    assert bal.per_thread == [per * v for v in base.per_thread]


def test_inner_parallel_loop_entries_and_barriers():
    text = (INPUTS / "silt_columns.c").read_text()
    fr = analyze_text(text, "silt_columns.c", Options(at={"N": 40, "T": 5}, threads=4))
    sweep = next(n for n in fr.nests if n.nest.function == "silt_sweep")
    bal = next(lr.extras["parallel"] for lr in sweep.loops if "parallel" in lr.extras)
    assert bal.entries == 39  # k = 0 .. 38 have rows below them
    # Reference: isl enumeration of the whole statement domain.
    total = sum(balance.fix_params(s.domain, {"N": 40}).count_val().to_python() for s in sweep.nest.statements)
    assert sum(bal.per_thread) == total
    # Derived by hand: step k has n = 39 - k rows of n points each; its busiest thread has
    # ceil(n/4) rows, and every step ends at a barrier.
    critical = sum(-(-n // 4) * n for n in range(1, 40))
    assert total == sum(n * n for n in range(1, 40))
    assert bal.imbalance == Fraction(critical * 4, total)


def test_negative_step_counts_from_the_first_iteration():
    # for (i = N-1; i >= 0; i--) with inner k < i: thread 0 gets the first (largest) rows.
    text = (INPUTS / "tide_steps.c").read_text()
    fr = analyze_text(text, "tide_steps.c", Options(at={"N": 8}, threads=2))
    bal = next(n for n in fr.nests if n.nest.function == "gauge_backwards").loops[0].extras["parallel"]
    assert bal.per_thread == [7 + 6 + 5 + 4, 3 + 2 + 1 + 0]  # derived by hand


def test_text_report_has_the_section():
    from tripcount.analysis.results import Report
    from tripcount.report.text import TextReporter

    text = (INPUTS / "harbour_triangle.c").read_text()
    fr = analyze_text(text, "harbour_triangle.c", Options(at={"N": 100}, threads=4))
    out = io.StringIO()
    TextReporter(out).write(Report([fr], at={"N": 100}))
    s = out.getvalue()
    assert "balance: schedule(static), 4 threads" in s and "imbalance 1.7" in s and "[TC501]" in s


# --------------------------------------------------------------------------
# Sizes and speed


def test_large_collapse_is_weighed_without_enumeration():
    omp = pragma("static", 7, collapse=2)
    t0 = time.perf_counter()
    bal = run(rectangle(omp), at={"N": 1000, "M": 1000}, threads=8)
    assert time.perf_counter() - t0 < 2.0
    assert sum(bal.per_thread) == 10**6 and bal.imbalance < Fraction(1001, 1000)


def test_long_varying_loop_uses_blocks_and_exact_static_values():
    result = triangle(pragma("static"))
    bal = run(result, at={"N": 30000}, threads=4)
    assert any("blocks" in n for n in bal.notes)
    assert bal.per_thread == enumerate_slices(result, {"N": 30000}, 4, None)
    assert not bal.estimate  # one entry: the exact totals give the imbalance


def test_corpus_kernel_balance_is_fast():
    # Performance target of the issue: the balance analysis of a corpus kernel well under 0.3 s.
    path = CORPUS / "sediment_cholesky.c"
    if not path.exists():
        pytest.skip("corpus not present")
    from tripcount import pipeline

    times = []
    original = balance.analyze

    def timed(result, options, budget=None):
        t0 = time.perf_counter()
        original(result, options, budget)
        times.append(time.perf_counter() - t0)

    try:
        balance.analyze = timed
        analyze_text(path.read_text(), str(path), Options(at={"N": 1000, "M": 800}, threads=8))
    finally:
        balance.analyze = original
    assert pipeline is not None and times and max(times) < 0.3, times


def test_clause_values_follow_c_arithmetic():
    # ISO C99 6.5.5: division truncates toward zero, % takes the sign of the dividend.
    n = ir.Name(SPAN, "N")
    expr = ir.Binary(SPAN, "/", ir.Unary(SPAN, "-", n), ir.IntLit(SPAN, 4))
    assert balance.const_value(expr, {"N": 7}) == -1
    assert balance.const_value(ir.Binary(SPAN, "%", ir.Unary(SPAN, "-", n), ir.IntLit(SPAN, 4)), {"N": 7}) == -3
    assert balance.const_value(n, {}) is None


def test_chunk_depending_on_the_sizes():
    omp = ir.OmpClauses(SPAN, "parallel for", "static", ir.Binary(SPAN, "/", ir.Name(SPAN, "N"), ir.IntLit(SPAN, 4)))
    result = triangle(omp)
    bal = run(result, at={"N": 20}, threads=2)
    assert bal.chunk == 5 and bal.per_thread == enumerate_slices(result, {"N": 20}, 2, 5)
    assert bal.per_thread_formula.formula is None and "depends on the sizes" in bal.per_thread_formula.note
    without = triangle(omp)
    balance.analyze(without, Options(threads=2))
    assert "TC503" in codes(without)


def test_non_rectangular_collapse_numbers_iterations_in_loop_order():
    # Points (i, j), 0 <= j <= i < 4, in loop order get ranks 0..9; 3 threads take ranks
    # 0-3, 4-6, 7-9 (derived by hand); the work is one statement per point.
    result = make_nest([("i", None, "[N] -> { L0[i] : 0 <= i < N }", 1),
                        ("j", 0, "[N] -> { L1[i, j] : 0 <= i < N and 0 <= j <= i }", 1)],
                       [("[N] -> { S1[i, j] : 0 <= i < N and 0 <= j <= i }", (0, 1))], ["N"],
                       {0: pragma(None, None, collapse=2)})
    bal = run(result, at={"N": 4}, threads=3)
    assert bal.per_thread == [4, 3, 3]
    f = bal.per_thread_formula.formula
    assert f is not None  # every point weighs the same: the formula is the thread's share of n
    for n in range(0, 9):
        pts = n * (n + 1) // 2  # triangular numbers (OEIS A000217)
        want = [pts // 3 + (1 if t < pts % 3 else 0) for t in range(3)]
        assert [f.evaluate({"N": n, bal.thread_param: t}) for t in range(3)] == want


def test_reversed_loop_alternative_for_growing_work():
    bal = run(triangle(pragma("static")), at={"N": 200}, threads=4)
    rev = [a for a in bal.alternatives if a.rewrite and "backwards" in a.rewrite]
    assert rev and rev[0].schedule == "dynamic" and rev[0].estimate
    dyn = next(a for a in bal.alternatives if a.schedule == "dynamic" and not a.rewrite)
    assert rev[0].imbalance <= dyn.imbalance  # heaviest first never hurts list scheduling here
