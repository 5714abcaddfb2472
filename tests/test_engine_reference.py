# Reference checks of the counting engine against values from outside tripcount.
#
# tests/data/reference_values.json (copied from the shared reference set): each
# entry names its source (OEIS numbers, Golub & Van Loan flop counts, Ehrhart
# polynomials, Eulerian numbers, ISO C99 6.5.5), gives the statements'
# iteration domains as isl sets and closed forms (sympy). The engine's formula
# must equal the closed form at the check points and over the whole sweep grid.
# Also: Ehrhart series numerators (h*-vectors, Stanley's nonnegativity theorem,
# Eulerian numbers OEIS A008292), Ehrhart-Macdonald reciprocity on lattice
# polytopes, and sympy summation on simple nests.

from __future__ import annotations

import itertools
import json
import os

import islpy as isl
import pytest
import sympy

from tripcount.engine import QPoly, count, enumerate_count, sum_over

HERE = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(HERE, "data", "reference_values.json")) as fh:
    REF = json.load(fh)


def _sym(params):
    d = {p: sympy.Symbol(p) for p in params}
    d.update({"binomial": sympy.binomial, "Min": sympy.Min, "Max": sympy.Max, "floor": sympy.floor})
    return d


def _closed(expr: str, params):
    return sympy.parse_expr(expr.replace("^", "**"), local_dict=_sym(params))


def _value(e, env):
    return sympy.Integer(e.subs({sympy.Symbol(k): v for k, v in env.items()}))


def _total(entry):
    total = None
    for stmt in entry["statements"]:
        pw = count(isl.Set(stmt["isl_set"])).scale(stmt["weight"])
        total = pw if total is None else total + pw
    return total


def _sweep(entry):
    params = entry["params"]
    rng = [range(entry["sweep"][p][0], entry["sweep"][p][1] + 1) for p in params]
    for vals in itertools.product(*rng):
        yield dict(zip(params, vals, strict=True))


@pytest.mark.parametrize("entry", REF, ids=[e["id"] for e in REF])
def test_reference_entry(entry):
    src = entry["source"]
    params = entry["params"]
    pw = _total(entry)
    closed = _closed(entry["closed_form"], params)
    for chk in entry["checks"]:
        got = pw.evaluate(chk["params"])
        assert got == chk["value"], f"{entry['id']} ({src}) at {chk['params']}: {got} != {chk['value']}"
    for env in _sweep(entry):
        assert pw.evaluate(env) == _value(closed, env), f"{entry['id']} ({src}) at {env}"
    # per statement, against the statement's closed form and isl enumeration
    for stmt in entry["statements"]:
        s = isl.Set(stmt["isl_set"])
        one = count(s)
        cf = _closed(stmt["closed_form"], params)
        for env in _sweep(entry):
            assert one.evaluate(env) == _value(cf, env) == enumerate_count(s, env), (
                f"{entry['id']}/{stmt['name']} ({src}; isl enumeration) at {env}"
            )


@pytest.mark.parametrize(
    "entry", [e for e in REF if "handbook_leading_term" in e], ids=lambda e: e["id"]
)
def test_handbook_leading_terms(entry):
    # Golub & Van Loan leading flop terms (the entry's handbook_leading_term)
    params = entry["params"]
    pw = _total(entry)
    lead_text = entry["handbook_leading_term"].split("(")[0].strip()
    want = _closed(lead_text, params)
    got = _closed(pw.leading(), params)
    assert sympy.simplify(got - want) == 0, f"{entry['id']} ({entry['source']}): {pw.leading()}"


@pytest.mark.parametrize("entry", [e for e in REF if "terms_check" in e], ids=lambda e: e["id"])
def test_oeis_terms(entry):
    # OEIS terms of the whole count, or of one statement's count when named
    tc = entry["terms_check"]
    if "statement" in tc:
        (stmt,) = [s for s in entry["statements"] if s["name"] == tc["statement"]]
        pw = count(isl.Set(stmt["isl_set"]))
    else:
        pw = _total(entry)
    for k, term in enumerate(tc["terms"]):
        n = tc["offset"] + k
        env = {p: int(sympy.sympify(expr).subs(sympy.Symbol("n"), n)) for p, expr in tc["params_of_n"].items()}
        if any(env[p] < entry["sweep"][p][0] for p in env):
            continue
        assert pw.evaluate(env) == term, f"{entry['id']}: {tc['oeis']} a({n})"


@pytest.mark.parametrize("entry", [e for e in REF if "ehrhart_hstar" in e], ids=lambda e: e["id"])
def test_ehrhart_hstar(entry):
    # Ehrhart series numerator of a lattice polytope: nonnegative coefficients
    # (Stanley's nonnegativity theorem), equal to the recorded h*-vector
    # (Eulerian numbers OEIS A008292 for the cubes)
    pw = _total(entry)
    h = pw.ehrhart_numerator()
    assert all(c >= 0 for c in h), f"{entry['id']}: Stanley nonnegativity {h}"
    assert [int(c) for c in h] == entry["ehrhart_hstar"]["hstar"], f"{entry['id']} ({entry['source']})"
    assert pw.degree() == entry["ehrhart_hstar"]["dim"]


POLYTOPES = [
    # (closed dilate tP, interior of tP, dimension)
    ("[t] -> { [i, j] : 0 <= j <= i <= t }", "[t] -> { [i, j] : 0 < j < i < t }", 2),
    ("[t] -> { [i, j, k] : i >= 0 and j >= 0 and k >= 0 and i + j + k <= t }",
     "[t] -> { [i, j, k] : i > 0 and j > 0 and k > 0 and i + j + k < t }", 3),
    ("[t] -> { [i, j, k] : 0 <= i <= t and 0 <= j <= t and 0 <= k <= t }",
     "[t] -> { [i, j, k] : 0 < i < t and 0 < j < t and 0 < k < t }", 3),
    ("[t] -> { [i, j] : 0 <= i <= 2t and 0 <= j <= t and j <= i }",
     "[t] -> { [i, j] : 0 < i < 2t and 0 < j < t and j < i }", 2),
    ("[t] -> { [i, j, k, l] : 0 <= l <= k <= j <= i <= t }",
     "[t] -> { [i, j, k, l] : 0 < l < k < j < i < t }", 4),
]


@pytest.mark.parametrize("closed,interior,dim", POLYTOPES)
def test_ehrhart_macdonald_reciprocity(closed, interior, dim):
    # Ehrhart-Macdonald reciprocity: #interior(tP) = (-1)^d L_P(-t)
    lp = count(isl.Set(closed)).pieces[0].poly
    inner = count(isl.Set(interior))
    for t in range(1, 15):
        assert inner.evaluate({"t": t}) == (-1) ** dim * lp.evaluate({"t": -t}), f"t={t}"
        assert inner.evaluate({"t": t}) == enumerate_count(isl.Set(interior), {"t": t})


SYMPY_NESTS = [
    # (isl set, weight, sympy summand and ranges innermost first, validity condition)
    ("[N, M] -> { [i, j] : 0 <= i < N and 0 <= j < M }", "1", "1", [("j", "0", "M - 1"), ("i", "0", "N - 1")]),
    ("[N] -> { [i, j] : 0 <= i < N and 0 <= j <= i }", "1", "1", [("j", "0", "i"), ("i", "0", "N - 1")]),
    ("[N, K] -> { [i, j, k] : 0 <= i < N and i <= j < N and 0 <= k < K }", "1", "1",
     [("k", "0", "K - 1"), ("j", "i", "N - 1"), ("i", "0", "N - 1")]),
    ("[N] -> { [i, j] : 0 <= i < N and 0 <= j <= i }", "i*j", "i*j", [("j", "0", "i"), ("i", "0", "N - 1")]),
    ("[N, M] -> { [i, j] : 1 <= i <= N and i <= j <= M + i }", "j^2", "j**2",
     [("j", "i", "M + i"), ("i", "1", "N")]),
    ("[N] -> { [i, j, k] : 0 <= i < N and 0 <= j <= i and j <= k <= i }", "k", "k",
     [("k", "j", "i"), ("j", "0", "i"), ("i", "0", "N - 1")]),
]


def _weight(text):
    names = {"i", "j", "k", "N", "M", "K"}
    expr = sympy.parse_expr(text.replace("^", "**"), local_dict={n: sympy.Symbol(n) for n in names})
    poly = sympy.Poly(expr, *[sympy.Symbol(n) for n in sorted(names)])
    out = QPoly()
    for monom, c in poly.terms():
        term = QPoly.const(int(c))
        for sym, e in zip(sorted(names), monom, strict=True):
            term = term * QPoly.var(sym) ** e
        out = out + term
    return out


@pytest.mark.parametrize("text,weight,summand,ranges", SYMPY_NESTS)
def test_against_sympy_summation(text, weight, summand, ranges):
    # check: sympy summation of the nest (closed form on the generic chamber)
    s = isl.Set(text)
    params = [s.get_space().get_dim_name(isl.dim_type.param, i) for i in range(s.dim(isl.dim_type.param))]
    loc = {n: sympy.Symbol(n) for n in ["i", "j", "k", *params]}
    e = sympy.parse_expr(summand, local_dict=loc)
    for var, lo, hi in ranges:
        e = sympy.summation(e, (loc[var], sympy.parse_expr(lo, local_dict=loc), sympy.parse_expr(hi, local_dict=loc)))
    pw = sum_over(s, _weight(weight))
    ours = pw.pieces[0].poly
    # the generic piece equals sympy's closed form as polynomials
    ours_sym = sympy.parse_expr(ours.to_expr().replace("^", "**"), local_dict=loc)
    assert sympy.expand(ours_sym - e) == 0, f"sympy summation: {e} vs {ours.to_expr()}"
    for env in itertools.product(range(1, 6), repeat=len(params)):
        envd = dict(zip(params, env, strict=True))
        assert pw.evaluate(envd) == _value(e, envd)
