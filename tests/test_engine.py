# Tests of the counting engine (tripcount/engine): hand-made loop nests.
#
# Every formula is compared over a parameter grid (negative values included)
# with isl enumeration (islpy Set.count_val on the set with the parameters
# fixed). The C conditions printed for pieces are evaluated with C semantics
# (ISO C99 6.5.5: / truncates toward zero, % takes the sign of the dividend)
# and compared with membership in the piece's domain.

from __future__ import annotations

import ast
import itertools
import time
from fractions import Fraction

import islpy as isl
import pytest

from tripcount.engine import EngineLimit, Limits, Piecewise, QPoly, count, enumerate_count, sum_over

# -- helpers (also used by the other test_engine_* modules) -------------------


def grid(params, lo=-3, hi=9):
    for vals in itertools.product(range(lo, hi + 1), repeat=len(params)):
        yield dict(zip(params, vals, strict=True))


def assert_matches_enumeration(s: isl.Set, pw: Piecewise, lo=-3, hi=9, params=None):
    """Formula == isl enumeration (Set.count_val) at every grid point."""
    params = params or pw.params
    for env in grid(params, lo, hi):
        got = pw.evaluate(env)
        want = enumerate_count(s, env)
        assert got == want, f"{env}: formula {got} != isl enumeration {want}; {pw}"


def _c_div(a, b):
    q = abs(a) // abs(b)
    return q if (a >= 0) == (b > 0) else -q


def _c_mod(a, b):
    return a - b * _c_div(a, b)


class _CSemantics(ast.NodeTransformer):
    """Rewrite a C condition (parsed as Python) to C99 integer semantics."""

    def visit_Call(self, node):
        # floor(a/b): mathematical floor division
        if isinstance(node.func, ast.Name) and node.func.id == "floor":
            (arg,) = node.args
            if isinstance(arg, ast.BinOp) and isinstance(arg.op, ast.Div):
                return ast.BinOp(self.visit(arg.left), ast.FloorDiv(), self.visit(arg.right))
        return self.generic_visit(node)

    def visit_BinOp(self, node):
        node = self.generic_visit(node)
        if isinstance(node.op, ast.Div):
            return ast.Call(ast.Name("_c_div", ast.Load()), [node.left, node.right], [])
        if isinstance(node.op, ast.Mod):
            return ast.Call(ast.Name("_c_mod", ast.Load()), [node.left, node.right], [])
        return node


def c_condition(text: str):
    """A Python predicate evaluating a C condition over integer parameters."""
    py = text.replace("&&", " and ").replace("||", " or ")
    if py == "true":
        return lambda env: True
    tree = ast.parse(py, mode="eval")
    tree = ast.fix_missing_locations(_CSemantics().visit(tree))
    code = compile(tree, "<when>", "eval")
    return lambda env: bool(eval(code, {"_c_div": _c_div, "_c_mod": _c_mod}, dict(env)))


def assert_conditions_are_c(pw: Piecewise, lo=-4, hi=9):
    """Each piece's C text (C99 6.5.5 semantics) holds exactly on the piece's domain."""
    for p in pw.pieces:
        pred = c_condition(p.when)
        for env in grid(pw.params, lo, hi):
            assert pred(env) == p.contains(env), f"{p.when!r} at {env}"


def count_checked(text: str, lo=-3, hi=9, context=None) -> Piecewise:
    s = isl.Set(text)
    pw = count(s, context=isl.Set(context) if context else None)
    if context is None:
        assert_matches_enumeration(s, pw, lo, hi)
        assert_conditions_are_c(pw)
    return pw


# -- hand cases ----------------------------------------------------------------

HAND = {
    "rectangle": "[N, M] -> { S[i, j] : 0 <= i < N and 0 <= j < M }",
    "triangle": "[N] -> { S[i, j] : 0 <= i < N and 0 <= j <= i }",
    "strict_triangle": "[N] -> { S[i, j] : 0 <= j < i < N }",
    "tetrahedron": "[N] -> { S[i, j, k] : 0 <= k <= j <= i < N }",
    "min_bound": "[N, M] -> { S[i, j] : 0 <= i < N and 0 <= j <= i and j < M }",
    "max_lower_bound": "[N, M] -> { S[i, j] : 0 <= i < N and j >= i and j >= M and j < N }",
    "stride3": "[N] -> { S[i] : exists q : i = 3q and 0 <= i < N }",
    "stride_offset": "[N] -> { S[i] : exists q : i = 4q + 3 and 3 <= i < N }",
    "stride_param_offset": "[N, M] -> { S[i] : exists q : i = 5q + M and M <= i < N }",
    "stride_inner": "[N] -> { S[i, j] : 0 <= i < N and exists q : j = i + 3q and i <= j < N }",
    "mod_guard": "[N] -> { S[i, j] : 0 <= i < N and i mod 2 = 0 and 0 <= j <= i }",
    "mod_guard_sum": "[N, M] -> { S[i, j] : 0 <= i < N and 0 <= j < M and (i + j) mod 3 = 1 }",
    "intdiv_bound": "[N] -> { S[i, j] : 0 <= i <= N and 0 <= 2j <= i }",
    "floor_bound_64": "[N] -> { S[i, j] : 0 <= i < N and 0 <= 64j < i }",
    "disjunction": "[N, M] -> { S[i] : 0 <= i < N and (i < M or i >= 2M) }",
    "union_overlap": "[N] -> { S[i, j] : 0 <= i < N and 0 <= j < N and (j <= i or j <= 2) }",
    "empty": "[N] -> { S[i] : 0 <= i < N and i > N }",
    "param_only_in_guard": "[N, P] -> { S[i] : 0 <= i < N and P > 3 }",
    "negative_range": "[N] -> { S[i] : -N <= i <= -1 }",
    "coefficient_bounds": "[N] -> { S[i, j] : 0 <= i < N and 2i <= 3j <= 2N + i }",
    "c_truncation": "[N] -> { S[i, j] : 0 <= i < N and j >= 0 and ((i >= 1 and 2j <= i - 1) or (i = 0 and j = 0)) }",
    "c_trunc_neg_div": "[N] -> { S[i, j] : -N <= i < N and 0 <= j and ((i >= 0 and 3j <= i) or (i < 0 and 3j <= -i)) }",
    "partitions": "[N] -> { S[c, b] : c >= 0 and 3c <= N and b >= c and 2b <= N - c }",
    "three_params": "[N, M, K] -> { S[i, j, k] : 0 <= i < N and i <= j < M and 0 <= k < K + i }",
    "equality": "[N] -> { S[i, j] : 0 <= i < N and j = 2i + 1 }",
    "nonunit_equality": "[N] -> { S[i, j] : 0 <= i < N and 3j = i }",
    "lower_param_band": "[N, M] -> { S[i, j] : 0 <= i < N and i - M <= j <= i + M and 0 <= j < N }",
}


@pytest.mark.parametrize("name", sorted(HAND))
def test_hand_case_matches_isl_enumeration(name):
    # check: isl enumeration (Set.count_val) over N, M, ... in -3..9
    lo, hi = (-3, 7) if name == "three_params" else (-3, 9)
    count_checked(HAND[name], lo, hi)


def test_triangle_formula_text():
    pw = count(isl.Set(HAND["triangle"]))
    assert pw.to_json() == {
        "pieces": [{"when": "N >= 1", "expr": "N*(N + 1)/2"}],
        "degree": 2,
        "leading": "N^2/2",
    }


def test_min_bound_chambers():
    pw = count(isl.Set(HAND["min_bound"]))
    texts = {p.when: p.poly.to_expr() for p in pw.pieces}
    assert texts == {"M >= 1 && N >= M": "M*(2*N - M + 1)/2", "N >= 1 && M >= N + 1": "N*(N + 1)/2"}


def test_empty_set_is_zero():
    pw = count(isl.Set(HAND["empty"]))
    assert pw.is_zero() and pw.evaluate({"N": 5}) == 0
    assert pw.to_json()["pieces"] == []


def test_parameter_only_in_guard():
    pw = count(isl.Set(HAND["param_only_in_guard"]))
    assert [p.when for p in pw.pieces] == ["N >= 1 && P >= 4"]
    assert pw.pieces[0].poly.to_expr() == "N"


def test_stride_with_parametric_offset_is_one_piece():
    # a stride whose offset is a parameter must not split into 5 residue pieces
    pw = count(isl.Set(HAND["stride_param_offset"]))
    assert len(pw.pieces) == 1


def test_large_modulus_is_fast_and_compact():
    # check: isl enumeration; modulus 64 must neither blow up nor be slow
    for text in (
        "[N] -> { S[i, j] : 0 <= i < N and 0 <= 64j < i }",
        "[N] -> { S[i] : exists q : i = 64q + 5 and 5 <= i < N }",
        "[N, M] -> { S[i, j] : exists q : i = 64q and 0 <= i < N and i <= j < M }",
        "[N] -> { S[i, j] : 0 <= i < N and i mod 64 = 3 and 0 <= j < i }",
    ):
        s = isl.Set(text)
        t0 = time.perf_counter()
        pw = count(s)
        assert time.perf_counter() - t0 < 1.0
        assert len(pw.pieces) <= 2
        assert_matches_enumeration(s, pw, -2, 140 if len(pw.params) == 1 else 70)


def test_residue_condition_printing_is_c():
    # pieces whose domains are residue classes: the C text must be right for
    # negative parameter values too (C99 6.5.5)
    for text in (
        "[N] -> { S[i] : 0 <= i < 3 and exists q : N = 3q + 1 }",
        "[N] -> { S[i] : 0 <= i < N and exists q : N = 2q + 1 }",
        "[N, M] -> { S[i] : 0 <= i < M and exists q : N + M = 4q + 3 }",
        "[N] -> { S[i] : 0 <= i < 4 and exists q : N = 5q + 2 or N = 5q + 3 }",
    ):
        pw = count(isl.Set(text))
        assert_conditions_are_c(pw, -12, 12)
        assert_matches_enumeration(isl.Set(text), pw, -12, 12)


def test_context_simplifies_pieces():
    s = isl.Set(HAND["min_bound"])
    ctx = isl.Set("[N, M] -> { : M >= N >= 0 }")
    pw = count(s, context=ctx)
    assert [(p.when, p.poly.to_expr()) for p in pw.pieces] == [("N >= 1", "N*(N + 1)/2")]
    for env in grid(pw.params, 0, 9):
        if env["M"] >= env["N"]:
            assert pw.evaluate(env) == enumerate_count(s, env)


def test_sum_over_weights():
    # check: isl enumeration, summing the weight over the enumerated points
    s = isl.Set("[N] -> { S[i, j] : 0 <= i < N and 0 <= j <= i }")
    w = QPoly.var("i") * QPoly.var("j") + QPoly.floor(QPoly.var("j"), 2) + QPoly.var("N")
    pw = sum_over(s, w)
    for n in range(-2, 12):
        pts: list[tuple[int, int]] = []

        def add(p, pts=pts):
            pts.append(tuple(p.get_coordinate_val(isl.dim_type.set, k).to_python() for k in (0, 1)))

        s.fix_val(isl.dim_type.param, 0, isl.Val(str(n))).foreach_point(add)
        want = sum(i * j + j // 2 + n for i, j in pts)
        assert pw.evaluate({"N": n}) == want


def test_sum_over_rejects_unknown_names():
    with pytest.raises(ValueError):
        sum_over(isl.Set(HAND["triangle"]), QPoly.var("zz"))


def test_piecewise_add_and_scale():
    a = count(isl.Set("[N] -> { S1[i, j] : 0 <= k < N and 0 <= i < N and 0 <= j <= i }".replace("0 <= k < N and ", "")))
    b = count(isl.Set("[N] -> { S2[i] : 0 <= i < N }"))
    tot = a.scale(2) + b
    for n in range(-3, 12):
        assert tot.evaluate({"N": n}) == 2 * a.evaluate({"N": n}) + b.evaluate({"N": n})
    assert tot.pieces[0].poly.to_expr() == "N*(N + 2)"  # forward substitution: 2*N(N-1)/2... + N
    assert a.scale(0).is_zero()


def test_unbounded_raises_engine_limit():
    with pytest.raises(EngineLimit):
        count(isl.Set("[N] -> { S[i, j] : 0 <= i < N and j >= i }"))


def test_time_limit_raises_engine_limit():
    s = isl.Set("[N, M] -> { S[i, j, k, l] : 0 <= i < N and 0 <= 3j <= i + M and 0 <= 5k <= j + i and 0 <= 7l <= k + 2j }")
    with pytest.raises(EngineLimit, match="time"):
        count(s, limits=Limits(time_s=0.0))


def test_piece_limit_raises_engine_limit():
    s = isl.Set("[N, M] -> { S[i] : 0 <= i < N and (i < M or i > 2M or i = 5) }")
    with pytest.raises(EngineLimit, match="pieces"):
        count(s, limits=Limits(max_pieces=1))


def test_unnamed_dims_and_basic_set_input():
    s = isl.BasicSet("[N] -> { [a, b] : 0 <= a < N and 0 <= b < a }")
    pw = count(s)
    assert pw.pieces[0].poly.to_expr() == "N*(N - 1)/2"


def test_evaluate_is_exact_for_huge_values():
    pw = count(isl.Set(HAND["tetrahedron"]))
    n = 10**30
    assert pw.evaluate({"N": n}) == Fraction(n * (n + 1) * (n + 2), 6)


def test_typical_kernel_speed():
    # a typical corpus kernel: 3 loops, 2 statements, well under 0.3 s
    sets = [
        "[N, M] -> { S1[i, j] : 0 <= i < N and i + 1 <= j < M }",
        "[N, M] -> { S2[i, j, k] : 0 <= i < N and i + 1 <= j < M and 0 <= k < min(j, N) }",
    ]
    t0 = time.perf_counter()
    for t in sets:
        count(isl.Set(t))
    assert time.perf_counter() - t0 < 0.3


def test_equal_sets_share_one_result_and_give_ups_are_not_kept():
    # check: isl enumeration at a few sizes; a repeated loop shape is counted once
    text = "[N] -> { S[i, j] : 0 <= i < N and i <= j < N and (i + j) mod 3 = 0 }"
    first = count(isl.Set(text))
    again = count(isl.Set(text))
    assert again is first
    for n in range(0, 12):
        assert first.evaluate({"N": n}) == enumerate_count(isl.Set(text), {"N": n})
    hard = "[N] -> { S[i, j, k] : 0 <= i < N and 0 <= j < N and 0 <= k < N and (3i + 5j + 7k) mod 11 = 0 }"
    with pytest.raises(EngineLimit, match="time"):
        count(isl.Set(hard), limits=Limits(time_s=0.0))
    full = count(isl.Set(hard))  # same key: the give-up above was not remembered
    assert full.evaluate({"N": 5}) == enumerate_count(isl.Set(hard), {"N": 5})


def test_add_all_equals_the_sum_one_by_one():
    # check: isl enumeration of each summand; an else-if chain gives many small pieces
    sets = [f"[N] -> {{ S[i] : 0 <= i < N and i = {k} }}" for k in range(12)]
    sets.append("[N] -> { S[i] : 12 <= i < N }")
    parts = [count(isl.Set(t)) for t in sets]
    from tripcount.engine import add_all

    total = add_all(parts)
    for n in range(0, 20):
        want = sum(enumerate_count(isl.Set(t), {"N": n}) for t in sets)
        assert total.evaluate({"N": n}) == want == max(n, 0)
    assert total.pieces[0].poly.to_expr() == "N"


def test_flat_substitution_finds_a_hyperplane_and_skips_huge_unions():
    # the merge of a region lying in a hyperplane (N = M + 1 here) is tried on
    # small regions only: a union past the caps (fuzzing met one of 118 basic
    # sets whose hull took minutes in one isl call) is left alone, which only
    # costs a piece
    from tripcount.engine import piecewise as pw

    flat = isl.Set("[M, N] -> { : N = M + 1 and M >= 0 }")
    sub = pw._flat_substitution(flat)
    assert sub is not None and len(sub) == 1
    (name, expr), = sub.items()
    point = {"M": 4, "N": 5}
    assert expr.evaluate({k: v for k, v in point.items() if k != name}) == point[name]
    many = " or ".join(f"(N = M + 1 and M = {k})" for k in range(pw._FLAT_MAX_BASIC + 1))
    huge = isl.Set(f"[M, N] -> {{ : {many} }}")
    assert len(huge.get_basic_sets()) > pw._FLAT_MAX_BASIC
    assert pw._flat_substitution(huge) is None
