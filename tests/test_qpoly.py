# Tests of the engine's quasi-polynomials (tripcount/engine/qpoly.py),
# power sums (faulhaber.py) and text forms (fmt.py).
#
# External sources named beside the checks: Python's exact integer floor
# division (the definition of floor checked against), sympy (parsing of our
# expression text, sympy summation for power sums), and the identity proof is
# checked against brute-force evaluation.

from __future__ import annotations

import itertools
import subprocess
import sys
from fractions import Fraction

import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from tripcount.engine.faulhaber import bernoulli_plus, power_sum_coeffs, sum_interval
from tripcount.engine.piecewise import qpoly_identical
from tripcount.engine.qpoly import Floor, QPoly, atom_period, floor_of

N, M = QPoly.var("N"), QPoly.var("M")


def to_sympy(p: QPoly):
    """Parse our expression text with sympy (^ is power), explicit symbols."""
    syms = {v: sympy.Symbol(v) for v in p.variables()}
    syms["floor"] = sympy.floor
    return sympy.parse_expr(p.to_expr().replace("^", "**"), local_dict=syms)


def sympy_value(expr, env):
    return expr.subs({sympy.Symbol(k): v for k, v in env.items()})


# -- floors -------------------------------------------------------------------


@given(
    a=st.integers(-7, 7),
    b=st.integers(-7, 7),
    c=st.integers(-20, 20),
    m=st.integers(1, 9),
    n=st.integers(-30, 30),
    k=st.integers(-30, 30),
)
@settings(max_examples=300, deadline=None)
def test_floor_canonical_form_is_exact(a, b, c, m, n, k):
    # check: Python's // is mathematical floor division
    p = QPoly.floor(N * a + M * b + c, m)
    assert p.evaluate({"N": n, "M": k}) == (a * n + b * k + c) // m


@given(a=st.integers(-5, 5), c=st.integers(-9, 9), m=st.integers(2, 6), m2=st.integers(2, 5),
       n=st.integers(-40, 40))
@settings(max_examples=200, deadline=None)
def test_nested_floor_exact(a, c, m, m2, n):
    inner = QPoly.floor(N * a + c, m)
    p = QPoly.floor(N + inner * 3 + 1, m2)
    assert p.evaluate({"N": n}) == (n + 3 * ((a * n + c) // m) + 1) // m2


def test_equal_floors_compare_equal():
    # integer parts pulled out and gcd reduced: floor((2N + 4)/4) == floor(N/2) + 1
    assert QPoly.floor(N * 2 + 4, 4) == QPoly.floor(N, 2) + 1
    # floor((-N + 5)/3) == 1 - floor(N/3)   (checked by Python // below)
    assert QPoly.floor(-N + 5, 3) == 1 - QPoly.floor(N, 3)
    for n in range(-10, 10):
        assert (-n + 5) // 3 == 1 - n // 3
    # one parity atom: floor((N + 1)/2) == N - floor(N/2)
    assert QPoly.floor(N + 1, 2) == N - QPoly.floor(N, 2)


def test_floor_of_rational_coefficients():
    d, c = floor_of({"N": Fraction(1, 2)}, Fraction(1, 3), 1)  # floor(N/2 + 1/3)
    p = QPoly.from_lin((d, c))
    for n in range(-12, 12):
        assert p.evaluate({"N": n}) == (3 * n + 2) // 6


def test_period():
    f = QPoly.floor(N, 3).as_lin()[0]
    (atom,) = [a for a in f if isinstance(a, Floor)]
    assert atom_period(atom, "N") == (3, 1)
    # floor((N + floor(N/3))/2): N -> N + 3 adds 4 to the numerator, so period 3, +2
    g = QPoly.floor(N + QPoly.floor(N, 3), 2)
    (outer,) = [a for a in g.atoms() if isinstance(a, Floor) and len(a.terms) > 1]
    L, inc = atom_period(outer, "N")
    assert (L, inc) == (3, 2)
    for n in range(-20, 20):
        assert g.evaluate({"N": n + L}) == g.evaluate({"N": n}) + inc


# -- arithmetic, substitution, evaluation --------------------------------------


def test_arithmetic_and_evaluate():
    p = (N + 1) * N / 2
    assert p.evaluate({"N": 10}) == 55
    assert (p - p).is_zero()
    assert (p * 0).is_zero()
    assert (N**3).degree() == 3
    assert (QPoly.floor(N, 2) * M + 1).degree() == 2
    assert QPoly.const(Fraction(3, 4)).evaluate({}) == Fraction(3, 4)
    assert (2 + N) == (N + 2)
    assert hash(N + 2) == hash(2 + N)


def test_substitute_partial_evaluation():
    p = QPoly.floor(N + M, 2) * N + M
    q = p.substitute("M", 3)
    for n in range(-5, 6):
        assert q.evaluate({"N": n}) == p.evaluate({"N": n, "M": 3})
    r = p.substitute("N", M * 2 + 1)
    for k in range(-5, 6):
        assert r.evaluate({"M": k}) == p.evaluate({"N": 2 * k + 1, "M": k})


def test_leading():
    p = (N + 1) * N * (N * 2 + 1) / 6
    n = sympy.Symbol("N")
    lead = sympy.parse_expr(p.leading().replace("^", "**"), local_dict={"N": n})
    assert sympy.simplify(lead - n**3 / 3) == 0
    q = QPoly.floor(N, 2) ** 2 + N
    assert q.leading() == "N^2/4"
    assert q.degree() == 2


# -- text forms (parsed back by sympy) -----------------------------------------


@pytest.mark.parametrize(
    "poly",
    [
        (N + 1) * N / 2,
        N * (N + 1) * (N + 2) / 6,
        N**3 * Fraction(2, 3) - N**2 / 2 - N / 6,
        QPoly.floor(N, 2) ** 2 + N,
        QPoly.floor(N + 2, 3) * (N * 2 - QPoly.floor(N + 2, 3) * 3 + 3) / 2,
        M * (N * 2 - M + 1) / 2,
        -(N * M) + 3,
        QPoly.floor(N + QPoly.floor(M, 3), 2) * M - 7,
        QPoly.const(0),
        QPoly.const(Fraction(-5, 3)),
    ],
)
def test_to_expr_roundtrip_sympy(poly):
    # check: sympy parses the text back to the same function (sympy parse_expr)
    e = to_sympy(poly)
    for n, k in itertools.product(range(-6, 7), range(-4, 5)):
        env = {"N": n, "M": k}
        assert sympy_value(e, env) == poly.evaluate(env)


def test_to_expr_factored():
    assert ((N + 1) * N / 2).to_expr() == "N*(N + 1)/2"
    assert (N * (N + 1) * (N + 2) / 6).to_expr() == "N*(N + 1)*(N + 2)/6"
    assert (M * (N * 2 - M + 1) / 2).to_expr() == "M*(2*N - M + 1)/2"
    assert (QPoly.floor(N, 2) ** 2 + N).to_expr() == "floor(N/2)^2 + N"


# -- power sums -----------------------------------------------------------------


def test_bernoulli_numbers():
    # from memory (common practice): B0..B8 = 1, +1/2, 1/6, 0, -1/30, 0, 1/42, 0, -1/30
    assert [bernoulli_plus(i) for i in range(9)] == [
        1, Fraction(1, 2), Fraction(1, 6), 0, Fraction(-1, 30), 0, Fraction(1, 42), 0, Fraction(-1, 30)
    ]


@pytest.mark.parametrize("k", range(0, 9))
def test_power_sums_match_sympy_summation(k):
    # check: sympy summation of x^k for x = 1..n
    n, x = sympy.symbols("n x", integer=True)
    ref = sympy.expand(sympy.summation(x**k, (x, 1, n)))
    ours = sum(sympy.Rational(c.numerator, c.denominator) * n**j for j, c in enumerate(power_sum_coeffs(k)))
    assert sympy.expand(ours - ref) == 0


@pytest.mark.parametrize("k", range(0, 6))
def test_sum_interval_exact(k):
    lo, hi = QPoly.var("a"), QPoly.var("b")
    s = sum_interval({k: QPoly.const(1)}, lo, hi)
    for a in range(-6, 6):
        for b in range(a - 1, 8):  # includes the empty range b = a - 1
            assert s.evaluate({"a": a, "b": b}) == sum(x**k for x in range(a, b + 1))


# -- identity proof by evaluation -----------------------------------------------


def test_identity_proof():
    f = QPoly.floor(N + 1, 2) + QPoly.floor(N, 2)
    assert qpoly_identical(f, N)  # floor((N+1)/2) + floor(N/2) = N
    # Hermite's identity: floor(N/3) + floor((N+1)/3) + floor((N+2)/3) = N
    h = QPoly.floor(N, 3) + QPoly.floor(N + 1, 3) + QPoly.floor(N + 2, 3)
    assert qpoly_identical(h, N)
    assert not qpoly_identical(QPoly.floor(N, 3), QPoly.floor(N + 1, 3))
    # differs only at one residue class of large period: still refuted
    g = QPoly.floor(N, 7) - QPoly.floor(N - 1, 7)  # 1 iff N % 7 == 0
    assert not qpoly_identical(g, QPoly.const(0))


def test_qpoly_does_not_import_its_printers():
    # the printers import qpoly, so qpoly must not import them back (no import cycle)
    import ast

    import tripcount.engine.qpoly as qp

    tree = ast.parse(open(qp.__file__, encoding="utf-8").read())
    names = {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    names |= {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom) and n.module}
    assert not any(n.startswith("tripcount.") for n in names), names
    assert (N - QPoly.floor(N, 2)).to_expr() == "floor((N + 1)/2)"  # printed through the registered printer


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.integers(-4, 4), st.integers(-4, 4), st.integers(-6, 6), st.integers(2, 5),
                          st.booleans()), min_size=1, max_size=3),
       st.integers(-30, 30), st.integers(-30, 30))
def test_compiled_conditions_match_exact_evaluation(cons, n, m):
    # reference: Python's exact integer floor division (the definition of floor)
    # and exact Fraction arithmetic, constraint by constraint
    from tripcount.engine.qpoly import compile_conditions

    conj = []
    want = True
    for a, b, c, d, eq in cons:
        fl = Floor((("N", 1), ("M", 2)), 1, d)
        lin = ({"N": Fraction(a, 2), fl: Fraction(b)}, Fraction(c, 3))
        conj.append((lin, eq))
        v = Fraction(a, 2) * n + b * ((n + 2 * m + 1) // d) + Fraction(c, 3)
        want = want and (v == 0 if eq else v >= 0)
    test = compile_conditions([conj, [(({"M": Fraction(1)}, Fraction(-100)), False)]])
    assert test({"N": n, "M": m}) == want  # the second conjunction (M >= 100) never holds here


def test_engine_import_does_not_import_sympy():
    code = "import sys, tripcount.engine; print('sympy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# -- readable forms (readable.py) ---------------------------------------------

_N2 = QPoly.floor(N, 2)
_H = QPoly.var("H")
_H32, _H32c = QPoly.floor(_H, 32), QPoly.floor(_H + 31, 32)
READABLE_CASES = [
    (N - _N2, "floor((N + 1)/2)"),
    ((N - _N2) ** 2, "floor((N + 1)/2)^2"),
    ((N**2 + 2 * _N2**2 - 2 * N * _N2 + 2 * _N2 - N + 2) / 2, "floor(N/2)*floor((N + 1)/2) + 1"),
    (2 * (N - _N2 - 1) * (_N2 - 1), "2*(floor(N/2) - 1)*(floor((N + 1)/2) - 1)"),
    (_H * _H32c + 16 * _H32**2 - _H * _H32 - 16 * _H32c**2 + 16 * _H32 + 16 * _H32c, "H"),
    (N * (N + 1) / 2, "N*(N + 1)/2"),
]


@pytest.mark.parametrize("p,text", READABLE_CASES)
def test_readable_forms(p, text):
    # check: sympy parses the printed form and it equals the exact value
    # (Python integer floor division) at many points, negative ones included
    assert p.to_expr() == text
    expr = to_sympy(p)
    for env in [{"N": n, "H": n} for n in range(-70, 70, 3)]:
        env = {k: v for k, v in env.items() if k in p.variables()}
        assert sympy_value(expr, env) == p.evaluate(env)


@given(
    cs=st.lists(st.integers(-3, 3), min_size=6, max_size=6),
    m=st.sampled_from([2, 3, 4]),
    c=st.integers(0, 3),
)
@settings(max_examples=60, deadline=None)
def test_readable_text_is_equal_form(cs, m, c):
    # check: sympy evaluation of the printed text agrees with exact evaluation
    f = QPoly.floor(N + c, m)
    g = QPoly.floor(M, 2)
    p = cs[0] * N**2 + cs[1] * N * f + cs[2] * f**2 + cs[3] * f * g + cs[4] * M * g + cs[5]
    expr = to_sympy(p)
    for n, k in itertools.product(range(-9, 10, 2), range(-5, 6, 3)):
        env = {"N": n, "M": k}
        env = {a: b for a, b in env.items() if a in p.variables()}
        assert sympy_value(expr, env) == p.evaluate(env)


def test_readable_keeps_leading():
    # check: the leading part is computed from the exact form (floors -> linear part)
    p = (N**2 + 2 * _N2**2 - 2 * N * _N2 + 2 * _N2 - N + 2) / 2
    assert p.leading() == "N^2/4"


def test_plain_forms_skip_the_search_and_keep_the_value():
    # check: inside plain_forms() the text is the factored or expanded form of the
    # same formula (sympy evaluation agrees with exact evaluation); the search's
    # text is neither used nor displaced, and a later full request still finds it
    from tripcount.engine import clear_memos
    from tripcount.engine.readable import plain_forms

    clear_memos()  # an earlier test may have searched this formula already (a found text is reused)
    p = N * (N - QPoly.floor(N, 2))  # the search finds N*floor((N + 1)/2)
    long = sum((QPoly.floor(N + k, 24) ** 2 for k in range(14)), QPoly.const(0))
    with plain_forms():
        short_text, long_text = p.to_expr(), long.to_expr()
    assert short_text == "N*(N - floor(N/2))"
    assert "(" not in long_text.split("floor")[0]  # many terms: expanded, not factored
    for q, text in ((p, short_text), (long, long_text)):
        expr = sympy.sympify(text.replace("^", "**"), locals={"floor": sympy.floor, "N": sympy.Symbol("N")})
        for n in range(-30, 60, 7):
            assert expr.subs("N", n) == q.evaluate({"N": n})
    assert p.to_expr() == "N*floor((N + 1)/2)"


def test_growth_degree_ignores_floor_terms_that_cancel():
    # a loop tiled by 64 with a min() bound: the count is 32*f1 + n*f1 - 32*f1^2 - n*f0 + 32*f0^2 + 32*f0
    # with f0 = floor(n/64), f1 = floor((n + 63)/64); it equals n for every n >= 1 (checked below against
    # isl enumeration of the iteration domain), so it grows like n: degree 1, although its terms have degree 2
    from tripcount import pipeline
    from tripcount.engine import enumerate_count
    from tripcount.options import Options

    src = ("void f(int n, double *a) { for (int t = 0; t < n; t += 64)\n"
           "  for (int i = t; i < (t + 64 < n ? t + 64 : n); ++i) a[i] = a[i] * 2; }")
    (nr,) = pipeline.analyze_text(src, "tiled.c", Options()).nests
    c = nr.statements[0].count
    assert c.formula.degree() == 1 and c.formula.pieces[0].poly.degree() == 2
    for n in (1, 63, 64, 65, 200, 1000):
        assert enumerate_count(nr.statements[0].stmt.domain, {"n": n}) == n
    n = QPoly.var("n")
    assert (n * QPoly.floor(n, 2) - n * n / 2).growth_degree() == 1  # -n*(n mod 2)/2 grows like n
    assert (n - QPoly.floor(n, 2) * 2).growth_degree() == 0  # n mod 2 is bounded
    assert (QPoly.floor(n, 3) ** 2).growth_degree() == 2
