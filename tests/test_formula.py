# Tests of the formula reader (tripcount.formula) and of printed formulas read
# back through it.
#
# References: C's integer division and remainder are ISO C99 6.5.5 (the
# quotient truncates toward zero; a % b has the sign of a); operator precedence
# is C's (* / % one level, left to right, above + -, above comparisons, above
# && above ||). Counts are checked against isl enumeration (Set.count_val with
# the parameters fixed).

from __future__ import annotations

import itertools
from fractions import Fraction

import islpy as isl
import pytest
import sympy
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tripcount.engine import EngineLimit, Limits, count, enumerate_count
from tripcount.engine.fmt import format_expanded, format_qpoly
from tripcount.engine.readable import format_grouped
from tripcount.formula import FormulaError, parse, parse_condition, parse_expr, piecewise_value

# -- the reader ------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, env, want",
    [
        # C99 6.5.5: truncation toward zero, remainder with the dividend's sign
        ("(N - 1) / 2 >= M", {"N": -2, "M": -1}, True),  # -3/2 == -1 in C
        ("N % 5 == 4", {"N": -1}, False),  # -1 % 5 == -1 in C
        ("N % 5 == -1", {"N": -1}, True),
        ("(N % 5 + 5) % 5 == 4", {"N": -1}, True),
        # C precedence: * and % one level, left to right
        ("7*(2*N + 1) % 5 >= M + 24", {"N": 9, "M": 0}, False),  # (7*19) % 5 = 3
        ("7*((2*N + 1) % 5) >= M + 24", {"N": 9, "M": 0}, True),  # 7*4 = 28
        ("N >= 1 && M >= N || N == 0", {"N": 0, "M": -5}, True),
        ("!(N >= 1) && true", {"N": 0}, True),
        ("false || N != 3", {"N": 3}, False),
    ],
)
def test_conditions_read_with_c_semantics(text, env, want):
    assert parse_condition(text).evaluate(env) is want


@pytest.mark.parametrize(
    "text, env, want",
    [
        ("N*(N + 1)/2", {"N": 4}, 10),
        ("n^2/2 - n/2", {"n": 5}, 10),  # '/' is exact division in an expression
        ("-N^2", {"N": 3}, -9),  # power binds tighter than unary minus
        ("2^3^2", {}, 512),  # right-associative
        ("floor((N - 1)/2)", {"N": -2}, -2),  # mathematical floor, not truncation
        ("floor(N/3) + floor((M + 2)/7)", {"N": 8, "M": -10}, 2 - 2),
        ("min(N, M) + max(N, 3)", {"N": 1, "M": 2}, 4),
    ],
)
def test_expressions_read_exactly(text, env, want):
    assert parse_expr(text).evaluate(env) == Fraction(want)


def test_floor_inside_a_condition_is_exact_division():
    # inside floor() '/' is exact; outside, in a condition, it is C's
    assert parse_condition("floor((N - 1)/2) == -2").evaluate({"N": -2})
    assert parse_condition("(N - 1) / 2 == -1").evaluate({"N": -2})


@pytest.mark.parametrize("name", ["N", "S", "Q", "I", "E", "O", "pi", "oo", "beta", "floor_n"])
def test_names_sympy_reads_as_its_own_are_plain_symbols(name):
    f = parse(f"{name}*({name} + 1)/2")
    assert f.names == {name}
    assert f.evaluate({name: 4}) == 10
    sym = sympy.Symbol(name)
    assert sympy.simplify(f.to_sympy() - sym * (sym + 1) / 2) == 0


@pytest.mark.parametrize(
    "text", ["", "N +* 2", "floor(N, M)", "(N", "N)", "N @ 2", "3 4", "N % ", "&&"]
)
def test_malformed_text_is_a_formula_error_with_a_column(text):
    with pytest.raises(FormulaError) as err:
        parse(text)
    assert err.value.column >= 1


def test_deep_nesting_is_an_error_not_a_crash():
    with pytest.raises(FormulaError):
        parse("(" * 5000 + "N" + ")" * 5000)


def test_missing_parameter_and_bad_division():
    with pytest.raises(KeyError):
        parse("N + M").evaluate({"N": 1})
    with pytest.raises(ZeroDivisionError):
        parse_condition("N % M == 0").evaluate({"N": 1, "M": 0})


def test_piecewise_value_is_zero_outside_and_rejects_overlaps():
    pieces = [{"when": "N >= 1", "expr": "N"}, {"when": "N <= -5", "expr": "2"}]
    assert piecewise_value(pieces, {"N": 0}) == 0
    assert piecewise_value(pieces, {"N": 3}) == 3
    with pytest.raises(ValueError):
        piecewise_value([{"when": "true", "expr": "1"}, {"when": "N >= 0", "expr": "2"}], {"N": 0})


# -- printed formulas read back ------------------------------------------------------

# The nest of the report that printed `7*(2*N + 1) % 5 >= M + 24` (a coefficient
# in front of a % without parentheses), written as an isl set:
#   for (int i = -N - 2; i <= -M - N + 2; i = i + 7)
#     if ((-i - 2) % 5 != 4) S1; else S2;
# C's remainder is 4 only for a nonnegative dividend -i - 2 (C99 6.5.5).
MOD_GUARD_S2 = (
    "[N, M] -> { S2[i] : exists k : i = -N - 2 + 7*k and -N - 2 <= i <= -M - N + 2 and "
    "-i - 2 >= 0 and (-i - 2) mod 5 = 4 }"
)


def printed_forms(pw) -> list[list[dict[str, str]]]:
    """Every text form a report may print for the pieces: the readable form
    (analyze), and the two plain forms (the gate: factored, expanded)."""
    forms = []
    for fmt in (lambda q: q.to_expr(), lambda q: format_grouped(q, format_qpoly), format_expanded):
        forms.append([{"when": p.when, "expr": fmt(p.poly)} for p in pw.pieces])
    return forms


def assert_printed_exact(s: isl.Set, pw, points) -> None:
    wants = [enumerate_count(s, env) for env in points]
    for pieces in printed_forms(pw):
        for env, want in zip(points, wants, strict=True):
            got = piecewise_value(pieces, env)
            assert got == want, f"printed {pieces} gives {got} at {env}, isl enumeration {want}"


def test_mod_guard_nest_prints_parenthesised_remainder():
    s = isl.Set(MOD_GUARD_S2)
    pw = count(s)
    grid = [dict(zip(("N", "M"), v, strict=True)) for v in itertools.product(range(-6, 16), range(-8, 6))]
    assert_printed_exact(s, pw, grid)
    assert not any("7*(2*N + 1) % 5" in p.when for p in pw.pieces)


@st.composite
def guarded_nests(draw):
    """Loops with strides 1..7, coefficients, negative ranges and modulo
    guards of several shapes (==, !=, ranges of residues), as isl sets."""
    params = ("N", "M")
    depth = draw(st.integers(1, 2))
    vs = [f"i{k}" for k in range(depth)]
    cons, exists = [], []

    def lin(names, cmax, cr=(-3, 3)):
        terms = [f"{draw(st.integers(-cmax, cmax))}*{n}" for n in names]
        return " + ".join(terms + [str(draw(st.integers(*cr)))])

    for k, v in enumerate(vs):
        outer = tuple(vs[:k]) + params
        cons.append(f"{v} >= {lin(outer, 1)}")
        cons.append(f"{v} <= N + {lin(outer[:-2] + ('M',), 1)}")
        stride = draw(st.integers(1, 7))
        if stride > 1:
            q = f"q{k}"
            exists.append(q)
            cons.append(f"{v} = {stride}*{q} + {lin(params, 1)}")
    for _ in range(draw(st.integers(1, 2))):
        m = draw(st.integers(2, 6))
        a = draw(st.sampled_from([-2, -1, 1, 2, 3]))
        e = f"{a}*{vs[-1]} + {lin(params[: draw(st.integers(0, 2))], 2)}"
        r = draw(st.integers(0, m - 1))
        op = draw(st.sampled_from(["=", "!=", "<=", ">="]))
        cons.append(f"({e}) mod {m} {op} {r}")
    body = " and ".join(cons)
    if exists:
        body = f"exists {', '.join(exists)} : {body}"
    return f"[N, M] -> {{ S[{', '.join(vs)}] : {body} }}"


GRID = [
    {"N": n, "M": m} for n, m in itertools.product((-5, -2, -1, 0, 1, 3, 4, 7, 9, 12), (-7, -3, -1, 0, 2, 5))
]


def check_guarded(text: str) -> None:
    # reference: isl enumeration at every grid point, read through the printed text
    s = isl.Set(text)
    try:
        pw = count(s, limits=Limits(time_s=1.0))
    except EngineLimit:
        return
    assert_printed_exact(s, pw, GRID)


@settings(deadline=None, max_examples=30, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(text=guarded_nests())
def test_printed_formulas_of_guarded_nests_read_back_exactly(text):
    check_guarded(text)


@pytest.mark.slow
@settings(deadline=None, max_examples=2000, suppress_health_check=[HealthCheck.too_slow])
@given(text=guarded_nests())
def test_printed_formulas_of_guarded_nests_many(text):
    check_guarded(text)
