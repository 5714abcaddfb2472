# Tests of tripcount.analysis.flops: floating-point operations by kind, loads
# and stores per statement, nest totals, and the arithmetic intensity.
#
# External references, named beside each check:
#   * Golub & Van Loan, Matrix Computations, 4th ed. (leading flop terms;
#     the section numbers and statements are from memory, as recorded in the
#     project's reference values, tests/data/reference_values.json,
#     whose exact counts and check points are copied below with their ids);
#   * OEIS A000330 (square pyramidal numbers) and A000292 (tetrahedral numbers),
#     data read, for the update-statement counts of LU and Cholesky.
# The kernels are our own C loop nests (tests/inputs/footprint/harbour_kernels.c)
# run through the whole pipeline.

from __future__ import annotations

import os
from fractions import Fraction

import pytest

from tripcount import ir
from tripcount.analysis import flops
from tripcount.analysis.footprint import asymptotic_ratio
from tripcount.ir import Span
from tripcount.options import Options
from tripcount.pipeline import analyze_file, analyze_text

HERE = os.path.dirname(os.path.abspath(__file__))
KERNELS = os.path.join(HERE, "inputs", "footprint", "harbour_kernels.c")
MIXED = os.path.join(HERE, "inputs", "footprint", "quay_mixed.c")


@pytest.fixture(scope="module")
def kernels():
    fr = analyze_file(KERNELS, Options(at={"M": 7, "N": 10, "K": 5}))
    return {nr.nest.function: nr for nr in fr.nests}


def total(nr, point):
    return nr.extras["flops"].count.formula.evaluate(point)


# (reference id, function, exact count as a function, check points with values, leading term)
CASES = [
    # rect_gaxpy: G&VL Sec. 1.1 (gaxpy), 2mn flops (from memory)
    ("rect_gaxpy", "buoy_gaxpy", lambda p: 2 * p["M"] * p["N"],
     [({"M": 0, "N": 0}, 0), ({"M": 1, "N": 1}, 2), ({"M": 2, "N": 3}, 12), ({"M": 5, "N": 7}, 70),
      ({"M": 3, "N": 0}, 0)], "2*M*N"),
    # matmul_2mnr: G&VL Sec. 1.1, C = C + AB costs 2mnr flops (from memory)
    ("matmul_2mnr", "berth_gain", lambda p: 2 * p["M"] * p["N"] * p["K"],
     [({"M": 0, "N": 0, "K": 0}, 0), ({"M": 1, "N": 1, "K": 1}, 2), ({"M": 2, "N": 3, "K": 4}, 48),
      ({"M": 3, "N": 3, "K": 3}, 54), ({"M": 5, "N": 2, "K": 0}, 0)], "2*K*M*N"),
    # lu_nopivot: G&VL Sec. 3.2, 2n^3/3 flops (from memory); exact 2N^3/3 - N^2/2 - N/6
    ("lu_nopivot", "silt_lu", lambda p: Fraction(2 * p["N"] ** 3, 3) - Fraction(p["N"] ** 2, 2) - Fraction(p["N"], 6),
     [({"N": 0}, 0), ({"N": 1}, 0), ({"N": 2}, 3), ({"N": 3}, 13), ({"N": 10}, 615)], "2*N^3/3"),
    # cholesky_rightlooking: G&VL Sec. 4.2, n^3/3 flops (from memory); sqrt counted as one flop
    ("cholesky_rightlooking", "keel_cholesky",
     lambda p: Fraction(p["N"] ** 3, 3) + Fraction(p["N"] ** 2, 2) + Fraction(p["N"], 6),
     [({"N": 0}, 0), ({"N": 1}, 1), ({"N": 2}, 5), ({"N": 3}, 14), ({"N": 8}, 204)], "N^3/3"),
    # forward_substitution: G&VL Sec. 3.1, n^2 flops (from memory)
    ("forward_substitution", "tide_forward", lambda p: p["N"] ** 2,
     [({"N": 0}, 0), ({"N": 1}, 1), ({"N": 2}, 4), ({"N": 5}, 25), ({"N": 10}, 100)], "N^2"),
    # syrk_lower: the usual BLAS-3 SYRK count n^2 k (G&VL Ch. 1, exact location not checked; from memory)
    ("syrk_lower", "hull_syrk", lambda p: p["K"] * p["N"] * (p["N"] + 1),
     [({"N": 0, "K": 3}, 0), ({"N": 1, "K": 1}, 2), ({"N": 2, "K": 2}, 12), ({"N": 4, "K": 3}, 60),
      ({"N": 6, "K": 0}, 0)], "K*N^2"),
]


@pytest.mark.parametrize("ref_id,function,exact,checks,leading", CASES, ids=[c[0] for c in CASES])
def test_classic_kernel_flops(kernels, ref_id, function, exact, checks, leading):
    """Total flops of our C kernels equal the reference counts; the leading term is the handbook's."""
    nr = kernels[function]
    for point, value in checks:
        assert total(nr, point) == value == exact(point), (ref_id, point)
    for n in range(0, 9):
        point = {p: n + k for k, p in enumerate(nr.nest.params)}
        assert total(nr, point) == exact(point), (ref_id, point)
    assert nr.extras["flops"].count.formula.leading().replace(" ", "") == leading


def test_lu_statements_by_kind(kernels):
    """LU: the scaling statement is one div, the update one mul and one add; A000330 update count."""
    nr = kernels["silt_lu"]
    s1, s2 = nr.statements
    assert s1.extras["flops"].ops.by_kind() == {"add": 0, "mul": 0, "div": 1, "other": 0}
    assert s2.extras["flops"].ops.by_kind() == {"add": 1, "mul": 1, "div": 0, "other": 0}
    # update count sum_{m<N} m^2 = A000330(N-1): 0, 1, 5, 14, 30, 55 (OEIS A000330, data read)
    for n, want in zip(range(1, 7), (0, 1, 5, 14, 30, 55), strict=True):
        assert s2.extras["flops"].kinds["mul"].count.formula.evaluate({"N": n}) == want
    assert (s2.extras["loads"].per_execution, s2.extras["stores"].per_execution) == (3, 1)
    assert (s1.extras["loads"].per_execution, s1.extras["stores"].per_execution) == (2, 1)


def test_cholesky_sqrt_is_other(kernels):
    """Cholesky: sqrt is an 'other' flop under its name; it runs N times."""
    nr = kernels["keel_cholesky"]
    s1 = nr.statements[0]
    assert s1.extras["flops"].ops.calls == {"sqrt": 1}
    j = s1.extras["flops"].to_json()
    assert j["by_kind"]["other"]["calls"]["sqrt"]["value"] == 10
    assert j["per_execution"] == 1
    # update count C(N+1, 3) = A000292(N-1): 0, 1, 4, 10, 20 (OEIS A000292, data read)
    s3 = nr.statements[2]
    for n, want in zip(range(1, 6), (0, 1, 4, 10, 20), strict=True):
        assert s3.count.formula.evaluate({"N": n}) == want


def test_json_fields(kernels):
    from tripcount.report.jsonout import nest_json

    j = nest_json(kernels["berth_gain"])
    st = j["statements"][0]
    assert st["flops"]["value"] == 2 * 7 * 10 * 5 and st["flops"]["per_execution"] == 2
    assert set(st["flops"]["by_kind"]) == {"add", "mul", "div", "other"}
    assert st["loads"]["value"] == 3 * 350 and st["stores"]["value"] == 350
    assert j["flops"]["value"] == 700
    it = j["intensity"]
    # compared as formulas: the printer may pick any of the equal forms
    import sympy

    K, M, N = sympy.symbols("K M N")
    got = sympy.sympify(it["asymptotic"].replace("^", "**"), locals={"K": K, "M": M, "N": N})
    assert sympy.simplify(got - K * M * N / (4 * (K * M + K * N + M * N))) == 0
    # at M=7, N=10, K=5: 700 flops over 8 * (70 + 35 + 50) bytes
    assert Fraction(it["exact"]) == Fraction(700, 8 * (70 + 35 + 50))
    assert it["roofline"] is None and "model estimate" in it["assumptions"]


def test_mixed_integer_and_floating():
    """Integer index arithmetic, integer arrays and casts are not flops; fma is a mul and an add."""
    fr = analyze_file(MIXED, Options(at={"N": 10}))
    (nr,) = fr.nests
    by = [sr.extras["flops"].ops for sr in nr.statements]
    assert (by[0].add, by[0].mul) == (1, 1)  # double r = 0.5 * (w[i-1] + w[i+1])
    assert by[1].total() == 0  # hist[i] = hist[i] + 2 * i (int)
    assert (by[2].add, by[2].div, by[2].calls) == (1, 1, {"fabs": 1, "sqrt": 1})
    assert (by[3].add, by[3].mul) == (2, 1)  # out[i] += fma(...)
    assert by[4].total() == 0  # v[i] = (float)(i * 3 + 1)
    assert nr.extras["flops"].count.value == 8 * (2 + 0 + 4 + 3 + 0)
    # loads/stores: r is a register; w[i-1], w[i+1] two loads
    assert nr.statements[0].extras["loads"].per_execution == 2
    assert nr.statements[0].extras["stores"].per_execution == 0


def test_snippet_without_types_counts_outside_subscripts():
    fr = analyze_text("for (int i = 0; i < n; i++) y[2*i+1] = a*x[i] + y[2*i+1];", "<code>",
                      Options(at={"n": 10}), snippet=True)
    (nr,) = fr.nests
    ops = nr.statements[0].extras["flops"].ops
    assert (ops.add, ops.mul) == (1, 1)  # 2*i+1 is address arithmetic
    assert nr.extras["flops"].count.value == 20
    assert nr.statements[0].extras["loads"].per_execution == 2  # y[2i+1] read once, x[i]


def _sp() -> Span:
    return Span(1, 1, 1, 2)


def _n(name: str) -> ir.Name:
    return ir.Name(_sp(), name)


def _ref(a: str, *idx: str) -> ir.ArrayRef:
    return ir.ArrayRef(_sp(), a, tuple(_n(i) for i in idx))


def test_statement_ops_rules():
    """Unit rules on hand-built IR."""
    # s += x[i] * x[i] with s unknown: counted (add and mul)
    e = ir.ExprStmt(_sp(), ir.Assign(_sp(), "+=", _n("s"), ir.Binary(_sp(), "*", _ref("x", "i"), _ref("x", "i"))), "")
    ops = flops.statement_ops(e, {}, {"x": "double"}, {"i"})
    assert (ops.add, ops.mul) == (1, 1)
    # the same with s declared long and x int: nothing
    ops = flops.statement_ops(e, {"s": "long"}, {"x": "int"}, {"i"})
    assert ops.total() == 0
    # count++ on an unknown scalar: an integer counter, not a flop
    inc = ir.ExprStmt(_sp(), ir.IncDec(_sp(), "++", False, _n("count")), "")
    assert flops.statement_ops(inc, {}, {}, set()).total() == 0
    # x += 1 with x declared double (scalar types given by the caller): one add
    inc2 = ir.ExprStmt(_sp(), ir.Assign(_sp(), "+=", _n("x"), ir.IntLit(_sp(), 1)), "")
    assert flops.statement_ops(inc2, {"x": "double"}, {}, set()).add == 1
    # conditional expression: the costlier branch is counted, with a note
    t = ir.ExprStmt(_sp(), ir.Assign(_sp(), "=", _ref("y", "i"), ir.Ternary(
        _sp(), ir.Binary(_sp(), ">", _ref("x", "i"), ir.FloatLit(_sp(), "0.0")),
        ir.Binary(_sp(), "*", _ref("x", "i"), _ref("x", "i")), ir.FloatLit(_sp(), "0.0"))), "")
    ops = flops.statement_ops(t, {}, {"x": "double", "y": "double"}, {"i"})
    assert ops.mul == 1 and ops.total() == 1 and ops.notes
    # an unknown function is not counted, and said so
    c = ir.ExprStmt(_sp(), ir.Assign(_sp(), "=", _ref("y", "i"), ir.Call(_sp(), "smooth", (_ref("x", "i"),))), "")
    ops = flops.statement_ops(c, {}, {"x": "double", "y": "double"}, {"i"})
    assert ops.total() == 0 and "smooth" in ops.notes[0]
    # float-suffixed math call
    c2 = ir.ExprStmt(_sp(), ir.Assign(_sp(), "=", _ref("y", "i"), ir.Call(_sp(), "expf", (_ref("x", "i"),))), "")
    assert flops.statement_ops(c2, {}, {"x": "float", "y": "float"}, {"i"}).calls == {"exp": 1}


def test_type_class():
    assert flops.type_class("const double") == "float"
    assert flops.type_class("unsigned long") == "int"
    assert flops.type_class("float *") == "float"
    assert flops.type_class("struct cell") is None


def test_roofline_estimate():
    """Square matmul: intensity N/12 flop/byte for large N (2N^3 flops over 3 N^2 doubles, derived)."""
    code = ("void f(int N, double C[N][N], double A[N][N], double B[N][N]) {\n"
            "  for (int i = 0; i < N; i++)\n    for (int j = 0; j < N; j++)\n"
            "      for (int k = 0; k < N; k++)\n        C[i][j] += A[i][k] * B[k][j];\n}\n")
    fr = analyze_text(code, "mm.c", Options(at={"N": 64}, peak_gflops=100.0, bandwidth_gbs=10.0))
    it = fr.nests[0].extras["intensity"]
    assert it.asymptotic == "N/12" and it.value == Fraction(64, 12)
    r = it.roofline
    assert r["bound_by"] == "memory bandwidth" and abs(r["attainable_gflops"] - 64 / 12 * 10) < 1e-3
    assert "model estimate" in r["note"]


def test_asymptotic_ratio_forms(kernels):
    nr = kernels["silt_lu"]
    assert asymptotic_ratio(nr.extras["flops"].count.formula, nr.extras["footprint"].footprint.bytes.formula) == "N/12"
    g = kernels["buoy_gaxpy"]
    assert asymptotic_ratio(g.extras["flops"].count.formula, g.extras["footprint"].footprint.bytes.formula) == "1/4"


def test_else_if_chain_total_is_exact():
    """A 60-branch else-if chain (one add per branch taken, none in the final else):
    the nest's flops are min(N, 60), by counting which branch each i takes."""
    branches = "\n".join(f"        {'if' if k == 0 else 'else if'} (i == {k}) A[i] += {k}.0;" for k in range(60))
    src = f"void f(int N, double *A) {{\n    for (int i = 0; i < N; i++) {{\n{branches}\n        else A[i] = 0.0;\n    }}\n}}\n"
    fr = analyze_text(src, "chain.c", Options(at={"N": 100}))
    (nr,) = fr.nests
    assert not [d for d in nr.diagnostics if d.code in ("TC301", "TC310")]
    total = nr.extras["flops"].count
    assert total.value == 60
    for n in (0, 1, 7, 59, 60, 61, 500):
        assert total.formula.evaluate({"N": n}) == min(n, 60)


def test_typedef_element_types_give_bytes_and_flops():
    # sediment_types.c reads velin_types.h beside it: grain_t and real_ptr are
    # double (8 B), base is char (1 B), depth_code unsigned short (2 B), sample
    # float (4 B); sizes of the LP64 ABI (common practice). Integer arithmetic
    # on char and unsigned short elements is not a flop.
    path = os.path.join(HERE, "inputs", "frontend", "typedefs", "sediment_types.c")
    fr = analyze_file(path, Options(at={"n": 100}))
    (nr,) = fr.nests
    assert not [g for g in fr.diagnostics + nr.diagnostics if g.code == "TC403"]
    fp = nr.extras["footprint"].footprint.to_json()
    sizes = {name: a["elem_size"] for name, a in fp["by_array"].items()}
    assert sizes == {"g": 8, "out": 8, "tag": 1, "code": 2, "s": 4}
    assert fp["bytes"]["value"] == 23 * 100
    assert [sr.extras["flops"].per_execution for sr in nr.statements] == [2, 0, 0]
