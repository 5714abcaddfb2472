# Tests of the text reporter (tripcount/report/text.py): the layout a user
# reads in the terminal.

from __future__ import annotations


def test_triangle_nest_header_formula_and_summary(run_cli):
    # check: n*(n + 1)/2 is OEIS A000217 (triangular numbers); 500,500 at n = 1000
    status, out, _ = run_cli("analyze", "--code",
                             "for (i = 0; i < n; i++) for (j = 0; j <= i; j++) s += a[i][j];", "--at", "n=1000")
    assert status == 0
    lines = out.splitlines()
    assert lines[0].startswith("<code>:1:1: nest in <snippet>()") and lines[0].endswith("parameters: n")
    s1 = next(k for k, ln in enumerate(lines) if ln.strip().startswith("S1 "))
    assert "runs n*(n + 1)/2" in lines[s1 + 1] and lines[s1 + 1].endswith("= 500,500")
    assert "[TC403]" in out  # undeclared array: element size unknown
    assert lines[-1] == "1 file(s), 1 nest(s), 2 diagnostic(s); values at n=1000"  # and the TC508 note


def test_unmodelled_nest_says_so_instead_of_no_parameters(run_cli):
    status, out, _ = run_cli("analyze", "--code", "for (i = 0; p[i] != 0; i++) A[i] += 1;")
    assert status == 0
    first = out.splitlines()[0]
    assert first.endswith("parameters: unknown (the nest is not modelled)")
    assert "not counted" in out and "[TC202]" in out
    assert out.splitlines()[-1] == "1 file(s), 1 nest(s), 2 diagnostic(s)"  # no --at hint without sizes


def test_constant_nest_has_no_parameters(run_cli):
    # common practice: a 4 x 5 rectangle runs its body 20 times
    _, out, _ = run_cli("analyze", "--code", "for (i = 0; i < 4; i++) for (j = 0; j < 5; j++) s += 1;")
    assert out.splitlines()[0].endswith("parameters: none")
    assert "runs 20" in out


def test_loop_without_variable_is_named_as_written(run_cli):
    _, out, _ = run_cli("analyze", "--code", "for (;;) { if (k >= n) break; k++; }")
    assert "for (;;)  (line 1)   not counted" in out
    assert "_u3f_" not in out


def test_dominant_statement_is_the_largest_not_the_first_of_the_highest_degree(run_cli):
    # S1 runs n times, S2 100*n times: both degree 1, S2 dominates (direct count)
    code = "for (i = 0; i < n; i++) { t = 0; for (j = 0; j < 100; j++) t += a[i][j]; }"
    status, out, _ = run_cli("analyze", "--code", code)
    assert status == 0
    assert "dominant S2 ~ 100*n, the largest count for large equal sizes" in out
    status, out, _ = run_cli("analyze", "--code", code, "--at", "n=3")
    assert "dominant S2 ~ 100*n, the largest count at the --at sizes" in out


def test_flops_by_kind_without_sizes_are_exact_formulas(run_cli):
    # strict lower triangle: n*(n - 1)/2 runs (OEIS A000217 shifted), one add and one mul each
    code = "for (i = 0; i < n; i++) for (j = 0; j < i; j++) s += a[i][j] * 2.0;"
    status, out, _ = run_cli("analyze", "--code", code)
    assert status == 0
    assert "flops n*(n - 1) (add n*(n - 1)/2, mul n*(n - 1)/2)" in out
