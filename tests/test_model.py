# Tests of tripcount.model: the isl model of affine loop nests.
#
# Iteration domains are counted with isl's Set.count_val() at fixed parameter
# values (the enumeration oracle, a reference library) and compared with
# brute-force Python loops that follow C semantics: `/` truncates toward
# zero and `%` takes the sign of the dividend (ISO C99 6.5.5). The same C
# inputs (tests/inputs/model/, harbour scenarios of the port city Velin) are
# also run by gcc through tests/oracle.py, which counts how often each
# statement executes. Random affine nests (hypothesis) are checked against
# their own Python interpretation.

from __future__ import annotations

import itertools
import math
import os
import re
from collections import Counter
from fractions import Fraction
from pathlib import Path

import islpy as isl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from internal import assert_no_internal_errors

from tripcount import affine, model
from tripcount.frontend import parse_text
from tripcount.model import Nest, build_nests, parse_assumptions

try:
    from tests import oracle
except ImportError:  # tests/ is not a package: pytest put tests/ itself on sys.path
    import oracle

INPUTS = Path(__file__).resolve().parent / "inputs" / "model"


# --------------------------------------------------------------------------
# Helpers


def c_div(a: int, b: int) -> int:
    """ISO C99 6.5.5p6: the quotient of integers is truncated toward zero."""
    return math.trunc(Fraction(a, b))


def c_mod(a: int, b: int) -> int:
    """ISO C99 6.5.5p6: (a/b)*b + a%b == a."""
    return a - b * c_div(a, b)


def load(name: str, assume: str | None = None) -> list[Nest]:
    text = (INPUTS / name).read_text(encoding="utf-8")
    unit, _ = parse_text(text, path=name)
    nests, file_diags = build_nests(unit, assume=assume, path=name)
    assert not file_diags
    return nests


def snippet(text: str, assume: str | None = None) -> tuple[list[Nest], list]:
    unit, _ = parse_text(text, path="snippet.c", snippet=True)
    return build_nests(unit, assume=assume, path="snippet.c")


def count(s: isl.Set, point: dict[str, int]) -> int:
    """Number of points of s with its parameters fixed (isl enumeration)."""
    for k in range(s.dim(isl.dim_type.param)):
        name = s.get_dim_name(isl.dim_type.param, k)
        s = s.fix_val(isl.dim_type.param, k, isl.Val.int_from_si(s.get_ctx(), point[name]))
    return s.count_val().to_python()


def code(d) -> str | None:
    return d.code if d is not None else None


def nest_dict(nest: Nest) -> dict:
    """A nest as plain data for short assertions."""
    return {
        "function": nest.function,
        "params": list(nest.params),
        "loops": [(lp.display, lp.var, lp.depth, lp.step, code(lp.refusal)) for lp in nest.loops],
        "statements": [(s.id, s.text, s.loop_vars, code(s.refusal)) for s in nest.statements],
        "codes": sorted(d.code for d in nest.diagnostics),
    }


def of(nests: list[Nest], function: str) -> list[Nest]:
    return [n for n in nests if n.function == function]


def check_counts(nests: list[Nest], mirror, points: list[dict[str, int]]) -> int:
    """Every statement with a domain counts what the Python mirror counts; returns checks made."""
    checks = 0
    for pt in points:
        want = mirror(**pt)
        for k, nest in enumerate(nests):
            for s in nest.statements:
                if s.domain is None:
                    continue
                got = count(s.domain, {p: pt[p] for p in nest.params})
                assert got == want[k, s.id], (nest.function, k, s.id, s.text, pt, got, want[k, s.id])
                checks += 1
    return checks


def grid(names: str, values: list[int]) -> list[dict[str, int]]:
    keys = names.split()
    return [dict(zip(keys, vs, strict=True)) for vs in itertools.product(values, repeat=len(keys))]


SIZES = [-5, -1, 0, 1, 2, 3, 7, 12]


# --------------------------------------------------------------------------
# Strides and directions


def py_tide_resample(n: int, lo: int) -> Counter:
    c: Counter = Counter()
    t = lo
    while t < n:
        c[0, "S1"] += 1
        t += 3
    t = n
    while t >= lo:
        c[1, "S1"] += 1
        t -= 4
    t = lo + 2
    while t <= 2 * n - 1:
        k = t
        while k > lo - t:
            c[2, "S1"] += 1
            k -= 2
        t = 5 + t
    return c


def py_tide_reverse_sweep(n: int, m: int) -> Counter:
    c: Counter = Counter()
    i = n - 1
    while i >= 0:
        j = i
        while j < m:
            c[0, "S1"] += 1
            j += 1
        i -= 1
    i = 3 * n
    while i > -n:
        j = m
        while j >= i:
            c[1, "S1"] += 1
            j -= 3
        i -= 1
    return c


def test_strides_up_and_down_match_python():
    nests = load("tide_strides.c")
    assert check_counts(of(nests, "tide_resample"), py_tide_resample, grid("n lo", SIZES)) == 3 * 64
    assert check_counts(of(nests, "tide_reverse_sweep"), py_tide_reverse_sweep, grid("n m", SIZES)) == 2 * 64
    steps = [lp.step for n in nests for lp in n.loops]
    assert steps == [3, -4, 5, -2, -1, 1, -1, -3]


def test_stride_with_parametric_start_is_exact():
    # The lattice t = lo + 3q follows a start that depends on a parameter (and on n mod 3).
    nest = load("tide_strides.c")[0]
    pts = {(n, lo): count(nest.statements[0].domain, {"n": n, "lo": lo}) for n in range(-4, 9) for lo in range(-4, 5)}
    assert pts == {(n, lo): len(range(lo, n, 3)) for n in range(-4, 9) for lo in range(-4, 5)}


# --------------------------------------------------------------------------
# C integer division


def py_basin_offsets(n: int, m: int) -> Counter:
    c: Counter = Counter()
    for i in range(-n, c_div(n, 3)):
        for _j in range(c_div(i, 2), c_mod(i, 3) + m + 1):
            c[0, "S1"] += 1
    for i in range(c_mod(n, 4) - 5, c_div(n - 7, 2)):
        if c_mod(i, 2) != 0 and c_div(-i, 4) < m:
            c[1, "S1"] += 1
    for _i in range(-8, n >> 1):  # gcc shifts signed values arithmetically (Python's >> floors too)
        c[2, "S1"] += 1
    return c


def test_truncating_division_matches_python():
    nests = load("harbour_division.c")
    assert check_counts(nests, py_basin_offsets, grid("n m", list(range(-9, 10)) + [25])) > 0


def test_truncating_division_is_not_floor():
    # n = -3: C gives -3 / 2 == -1 and -3 % 2 == -1 (ISO C99 6.5.5); floor division would give -2 and 1.
    (nest,), _ = snippet("for (i = -7; i < n / 2; i++) A[i] = 0;")
    dom = nest.statements[0].domain
    assert count(dom, {"n": -3}) == len(range(-7, -1)) == 6
    (nest,), _ = snippet("for (i = 0; i < 9; i++) if (i % 2 == n % 2) A[i] = 0;")
    dom = nest.statements[0].domain
    assert count(dom, {"n": -3}) == 0  # i % 2 is never -1 for i >= 0
    assert count(dom, {"n": 3}) == 4
    (nest,), _ = snippet("for (i = -9; i < 9; i++) if (i / 4 == 0) A[i] = 0;")
    assert count(nest.statements[0].domain, {}) == 7  # -3..3 truncate to 0


# --------------------------------------------------------------------------
# min/max macros, helper calls, ternaries


def py_crane_tiles(n: int, m: int) -> Counter:
    c: Counter = Counter()
    for ii in range(0, max(n, 0), 4):
        for i in range(ii, min(ii + 4, n)):
            for _j in range(max(0, i - 2), min(m, i + 2) + 1):
                c[0, "S1"] += 1
    return c


def py_crane_reach(n: int, m: int) -> Counter:
    c: Counter = Counter()
    for i in range(0, n):
        c[0, "S1"] += len(range(m if i > m else i, n))
        c[0, "S2"] += len(range(0, n if c_mod(i, 2) == 0 else m))
        c[0, "S3"] += len(range(max(i - m, -2), min(n, m + i)))
        c[0, "S4"] += len(range(-abs(i - m), abs(m)))
    return c


def test_min_max_macros_calls_and_ternaries():
    nests = load("quay_minmax.c")
    assert check_counts(of(nests, "crane_tiles"), py_crane_tiles, grid("n m", SIZES)) == 64
    assert check_counts(of(nests, "crane_reach"), py_crane_reach, grid("n m", SIZES)) == 4 * 64


def test_general_ternary_with_affine_condition():
    (nest,), _ = snippet("for (i = 0; i < n; i++) for (j = 0; j < (i >= 2 && i != 4 ? i : 3); j++) S(i, j);")
    for n in range(-1, 9):
        want = sum(i if (i >= 2 and i != 4) else 3 for i in range(n))
        assert count(nest.statements[0].domain, {"n": n}) == want


# --------------------------------------------------------------------------
# Guards and continue


def py_lock_fill(n: int, m: int, g: int) -> Counter:
    c: Counter = Counter()
    for t in range(0, n):
        for cc in range(0, m):
            if cc == t or (cc > 2 * t and not (cc == g)):
                c[0, "S1"] += 1
            elif cc != t + 1:
                c[0, "S2"] += 1
            else:
                c[0, "S3"] += 1
        if c_mod(t, 3) == 0:
            continue
        c[0, "S4"] += 1
        for cc in range(t, m):
            if cc < g:
                continue
            if cc - t > 4:
                c[0, "S5"] += 1
                continue
            c[0, "S6"] += 1
    return c


def test_guards_else_branches_and_continue():
    nests = load("lock_guards.c")
    assert [s.refusal for s in nests[0].statements] == [None] * 6
    assert check_counts(nests, py_lock_fill, grid("n m g", [-1, 0, 1, 3, 7, 11])) == 6 * 216


# --------------------------------------------------------------------------
# Invariant locals, constants, symbolic parameters


def py_berth_plan(n: int, berth_extra: int, q_slots: int, strlen_name: int) -> Counter:
    c: Counter = Counter()
    for _i in range(0, c_div(n, 2), 2):  # half = n / 2; step ts / 4 with ts = 8
        c[0, "S1"] += len(range(0, 4 + berth_extra))  # LANES = 4
    for i in range(0, q_slots):
        c[1, "S1"] += len(range(i, strlen_name))
    return c


def test_invariant_locals_constants_and_symbols():
    nests = load("berth_invariants.c")
    assert [n.params for n in nests] == [("berth_extra", "n"), ("q_slots", "strlen_name")]
    assert nests[0].symbolic == {}
    assert nests[1].symbolic == {"q_slots": "q->slots", "strlen_name": "strlen(name)"}
    notes = [d for d in nests[1].diagnostics if d.code == "TC216"]
    assert [(d.span.line, d.args["name"]) for d in notes] == [(22, "q_slots"), (17, "strlen_name")]
    assert "treated as a size parameter 'q_slots'" in notes[0].message
    pts = grid("n berth_extra q_slots strlen_name", [-3, 0, 1, 5])
    assert check_counts(nests, py_berth_plan, pts) == 2 * 256


def test_reassigned_local_is_a_parameter_not_substituted():
    src = """
    void f(int n, double *x) {
        int lim = n / 2;
        lim = lim + 1;
        int top = n * n;
        for (int i = 0; i < lim; i++)
            for (int j = 0; j < top; j++)
                x[j] = 0;
    }
    """
    unit, _ = parse_text(src)
    (nest,), _ = build_nests(unit)
    assert nest.params == ("lim", "top")
    assert nest.symbolic == {"top": "n * n"}  # a non-affine initializer: named after its local
    assert count(nest.statements[0].domain, {"lim": 3, "top": 4}) == 12


# --------------------------------------------------------------------------
# Refusals: the smallest scope, everything else exact


EXPECTED_REFUSALS = {
    "doubling_windows": [["TC201"], ["TC201"]],
    "csr_rows": [[None, "TC202"]],
    "growing_window": [["TC203", None, None]],
    "first_dry_berth": [[None, "TC204", None]],
    "scan_alarm": [[]],
    "settle": [[None, "TC206", "TC206", None]],
    "skip_marks": [["TC207", "TC207"]],
    "unbounded_forms": [["TC208"]],
    "forever_sweep": [["TC208"]],
    "products": [["TC209"]],
    "wet_cells": [["TC210", "TC210", None]],
    "sawtooth": [["TC211"]],
    "paired": [["TC212"], ["TC207"]],
    "skip_wet": [[None, "TC213"]],
    "gate_modes": [["TC214", "TC214", None]],
    "float_sweep": [["TC219"]],
    "probed": [["TC209"]],
}


def test_each_refusal_kind_at_the_smallest_scope():
    nests = load("refusals.c")
    got: dict[str, list] = {}
    for n in nests:
        got.setdefault(n.function, []).append([code(s.refusal) for s in n.statements])
    assert got == EXPECTED_REFUSALS
    codes = {d.code for n in nests for d in n.diagnostics}
    assert codes >= {f"TC2{k:02d}" for k in range(1, 15)} | {"TC219"}


def test_refusal_messages_name_file_position_and_loop():
    nests = load("refusals.c")
    csr = of(nests, "csr_rows")[0]
    (d,) = csr.diagnostics
    assert d.render() == (
        "refusals.c:18:22: warning: loop 'for (k ...)' at 18:9: the start value depends on array "
        "contents ('rowptr[i]'), so its iteration count is data-dependent and not counted [TC202]"
    )
    (brk,) = [d for d in of(nests, "first_dry_berth")[0].diagnostics]
    assert (brk.code, brk.span.line, brk.span.column) == ("TC204", 40, 17)
    assert "loop 'for (j ...)' at 38:9" in brk.message


def test_break_refuses_only_the_inner_loop():
    nest = of(load("refusals.c"), "first_dry_berth")[0]
    assert nest_dict(nest)["loops"] == [("i", "i", 0, 1, None), ("j", "j", 1, 1, "TC204")]
    assert nest.loops[0].domain is not None and nest.loops[1].domain is None
    for n in (-1, 0, 4):
        assert [count(nest.statements[k].domain, {"n": n}) for k in (0, 2)] == [max(n, 0)] * 2


def test_return_makes_the_whole_nest_unknown():
    (nest,), _ = snippet("for (i = 0; i < n; i++) { x[i] = 0; for (j = 0; j < n; j++) if (j == 3) return; x[i] = 1; }")
    d = nest_dict(nest)
    assert [lp[-1] for lp in d["loops"]] == ["TC205", "TC205"]
    assert [s[-1] for s in d["statements"]] == ["TC205", "TC205"]
    assert d["codes"] == ["TC205"]


def test_refused_statement_keeps_its_accesses_without_domain():
    nest = of(load("refusals.c"), "csr_rows")[0]
    s2 = nest.statements[1]
    assert s2.domain is None and [(a.array, a.kind) for a in s2.accesses] == [("y", "read"), ("y", "write"), ("col", "read")]
    assert all(a.map is not None and a.map.domain().is_equal(a.map.domain().universe(a.map.domain().get_space())) for a in s2.accesses)


def test_ne_condition_needs_a_provable_end():
    src = "for (i = a; i != n; i++) x[i] = 0;"
    (nest,), _ = snippet(src)
    assert nest.statements[0].refusal.code == "TC208"
    assert "--assume" in nest.statements[0].refusal.message
    (nest,), _ = snippet(src, assume="a <= n")
    dom = nest.statements[0].domain
    assert [count(dom, {"a": a, "n": n}) for a, n in [(0, 5), (3, 3), (-2, 1)]] == [5, 0, 3]
    # a stride must land on the end value
    (nest,), _ = snippet("for (i = 0; i != 2 * n; i += 2) x[i] = 0;", assume="n >= 0")
    assert count(nest.statements[0].domain, {"n": 4}) == 4
    (nest,), _ = snippet("for (i = 0; i != 2 * n + 1; i += 2) x[i] = 0;", assume="n >= 0")
    assert nest.statements[0].refusal.code == "TC208"
    (nest,), _ = snippet("for (i = n; i != -1; i--) x[i] = 0;", assume="n >= -1")
    assert count(nest.statements[0].domain, {"n": 6}) == 7


def test_unbounded_loop_accepted_when_assumed_empty():
    src = "for (i = 0; k > 0; i++) x[i] = 0;"
    (nest,), _ = snippet(src)
    assert nest.statements[0].refusal.code == "TC208"
    (nest,), _ = snippet(src, assume="k <= 0")
    assert nest.statements[0].refusal is None
    assert count(nest.statements[0].domain, {"k": -3}) == 0


def test_unbounded_minimum_in_condition_is_refused():
    # min(i, 5) < n stays true forever once n > 5: C would not terminate.
    (nest,), _ = snippet("for (i = 0; (i < 5 ? i : 5) < n; i++) x[i] = 0;")
    assert nest.statements[0].refusal.code == "TC208"
    (nest,), _ = snippet("for (i = 0; (i < 5 ? i : 5) < n; i++) x[i] = 0;", assume="n <= 5")
    assert count(nest.statements[0].domain, {"n": 3}) == 3


# --------------------------------------------------------------------------
# Structure, domains and names


def test_one_nest_per_outermost_for_and_statements_outside_loops():
    src = """
    void f(int n, double *x) {
        x[0] = 1.0;
        if (n > 0) {
            for (int i = 0; i < n; i++)
                for (int j = 0; j < i; j++)
                    x[j] = 0;
        }
        { for (int k = 0; k < n; k++) ; }
        while (x[0] > 0) { for (int k = 0; k < n; k++) x[k] -= 1; }
        x[1] = 2.0;
    }
    """
    unit, _ = parse_text(src)
    nests, file_diags = build_nests(unit)
    # the data-dependent while is named (it is not counted), and nothing else is said
    assert [(d.code, d.span.line) for d in file_diags] == [("TC223", 10)]
    assert [(n.span.line, len(n.loops), len(n.statements)) for n in nests] == [(5, 2, 1), (9, 1, 0), (10, 1, 1)]
    assert all(s.text != "x[0] = 1.0" for n in nests for s in n.statements)


def test_loop_domains_tuples_and_dims():
    nest = load("pier_accesses.c")[0]
    assert [(lp.var, lp.depth, lp.parent, lp.children) for lp in nest.loops] == [
        ("i", 0, None, (1,)),
        ("j", 1, 0, (2,)),
        ("k", 2, 1, ()),
    ]
    d2 = nest.loops[2].domain
    assert d2.get_tuple_name() == "L2" and d2.get_var_names(isl.dim_type.set) == ["i", "j", "k"]
    assert d2.is_equal(isl.Set("[K, M, N] -> { L2[i, j, k] : 0 <= i < N and 0 <= j < M and 0 <= k < K }"))
    s1 = nest.statements[0]
    assert s1.domain.get_tuple_name() == "S1" and s1.loop_vars == ("i", "j", "k") and s1.loops == (0, 1, 2)
    assert nest.params == ("K", "M", "N") and nest.context.is_params()


def test_pragma_clauses_are_copied():
    nests = load("pier_accesses.c")
    omp = nests[0].loops[0].omp
    assert (omp.directive, omp.schedule, omp.collapse) == ("parallel for", "static", 2)
    assert omp.chunk.value == 2
    assert [lp.omp for lp in nests[0].loops[1:]] == [None, None] and nests[1].loops[0].omp is None


def test_accesses_kinds_maps_and_element_sizes():
    nests = load("pier_accesses.c")
    s1 = nests[0].statements[0]
    table = [(a.array, a.kind, a.subscripts, a.elem_type, a.elem_size, a.extents) for a in s1.accesses]
    assert table == [
        ("A", "read", ("i", "j"), "double", 8, ("N", "M")),
        ("A", "write", ("i", "j"), "double", 8, ("N", "M")),
        ("B", "read", ("i", "k"), "double", 8, ("N", "K")),
        ("C", "read", ("k", "j"), "double", 8, ("K", "M")),
    ]
    want = isl.Map("[K, M, N] -> { S1[i, j, k] -> C[k, j] : 0 <= i < N and 0 <= j < M and 0 <= k < K }")
    assert s1.accesses[3].map.is_equal(want)
    rows = [[(a.array, a.kind, a.subscripts, a.elem_type, a.elem_size, a.map is None) for a in s.accesses]
            for s in nests[1].statements]
    assert rows == [
        [("w", "read", ("i",), "float", 4, False)],
        [("tally", "read", ("i",), "int64_t", 8, False), ("tally", "write", ("i",), "int64_t", 8, False)],
        [("slot", "write", ("i",), "size_t", 8, False), ("tally", "read", ("2 * i + 1",), "int64_t", 8, False),
         ("slot", "read", ("tally[i]",), "size_t", 8, True), ("tally", "read", ("i",), "int64_t", 8, False)],
        [("pier_ledger", "write", ("i % 64",), "long double", 16, False)],
    ]
    assert [d.code for d in nests[1].diagnostics] == ["TC217"]
    ledger = nests[1].statements[3].accesses[0].map
    assert ledger.is_equal(isl.Map("[N] -> { S4[i] -> pier_ledger[i % 64] : 0 <= i < N }"))


def test_declaration_inside_nest_is_a_statement_and_substitutes():
    src = """
    void f(int n, double *x) {
        for (int i = 0; i < n; i++) {
            int lim = i / 2 + 1;
            double t = 0.0;
            int u;
            for (int j = 0; j < lim; j++)
                t += x[j];
        }
    }
    """
    unit, _ = parse_text(src)
    (nest,), _ = build_nests(unit)
    assert [s.text for s in nest.statements] == ["int lim = i / 2 + 1", "double t = 0.0", "t += x[j]"]
    for n in range(-1, 8):
        assert count(nest.statements[2].domain, {"n": n}) == sum(i // 2 + 1 for i in range(n))


def test_loop_variable_named_like_a_parameter_is_renamed():
    src = """
    void f(int n, int k, double *x) {
        for (int i = 0; i < k; i++)
            for (int k = 0; k < i + n; k++)
                x[k] = 0;
    }
    """
    unit, _ = parse_text(src)
    (nest,), _ = build_nests(unit)
    inner = nest.loops[1]
    assert (inner.display, inner.var) == ("k", "k_1") and nest.params == ("k", "n")
    s = nest.statements[0]
    assert s.loop_vars == ("i", "k_1") and s.accesses[0].map.get_var_names(isl.dim_type.in_) == ["i", "k_1"]
    for kk, n in [(4, 1), (5, -2), (0, 3)]:
        assert count(s.domain, {"k": kk, "n": n}) == sum(max(i + n, 0) for i in range(kk))


def test_unusable_names_are_mangled_and_recorded():
    src = "void f(int min, int größe, double *x) { for (int max = 0; max < min + größe; max++) x[max] = 0; }"
    unit, _ = parse_text(src)
    (nest,), _ = build_nests(unit)
    assert all(re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", p) for p in nest.params)
    assert set(nest.symbolic.values()) == {"min", "größe"}
    assert nest.loops[0].display == "max" and nest.loops[0].var not in ("max", *nest.params)
    by_c = {c: p for p, c in nest.symbolic.items()}
    assert nest.names == {"min": by_c["min"], "größe": by_c["größe"]}
    assert count(nest.statements[0].domain, {by_c["min"]: 3, by_c["größe"]: 4}) == 7
    # the isl text of the objects reads back (no reserved words as names)
    assert isl.Set(nest.statements[0].domain.to_str()).is_equal(nest.statements[0].domain)


# --------------------------------------------------------------------------
# Context and assumptions


def test_assume_becomes_the_context_and_unknown_names_are_projected():
    (nest,), _ = snippet("for (i = 0; i < M; i++) x[i] = 0;", assume="N >= 16, M >= N && T > 0")
    assert nest.params == ("M",)
    assert nest.context.is_equal(isl.Set("[M] -> { : M >= 16 }"))


def test_bad_assumption_is_a_file_diagnostic():
    nests, file_diags = snippet("for (i = 0; i < n; i++) x[i] = 0;", assume="n >= 1, n * m > 3")
    assert [d.code for d in file_diags] == ["TC218"]
    assert "not affine" in file_diags[0].message
    assert nests[0].context.is_equal(isl.Set("[n] -> { : }"))


def test_parse_assumptions():
    s = parse_assumptions("N >= 16, M >= N", ["N"])
    assert s.get_var_names(isl.dim_type.param) == ["N", "M"]
    assert s.is_equal(isl.Set("[N, M] -> { : N >= 16 and M >= N }"))
    s = parse_assumptions("0 <= t < T && T % 2 == 0, -(T - 1) != 3 * t", {"T": "T"})
    assert s.is_equal(isl.Set("[T, t] -> { : 0 <= t < T and T mod 2 = 0 and 1 - T != 3t }"))
    assert parse_assumptions("  ", ["n"]).is_equal(isl.Set("[n] -> { : }"))
    for bad, why in [("N >", "end"), ("N >= 16 M", "unexpected"), ("N * M >= 2", "not affine"),
                     ("N @ 3", "unexpected character"), ("N", "comparison"), ("N / M > 1", "positive integer")]:
        with pytest.raises(ValueError, match=why):
            parse_assumptions(bad, ["N", "M"])


# --------------------------------------------------------------------------
# Never raises


def test_internal_error_is_reported_per_nest(monkeypatch):
    src = "void f(int n, double *x) { for (int i = 0; i < n; i++) x[i] = 0; for (int j = 0; j < n; j++) x[j] = 1; }"
    unit, _ = parse_text(src)
    real = model._Space.set

    def failing(self, c):
        if "j" in self.vars:
            raise RuntimeError("boom")
        return real(self, c)

    monkeypatch.setattr(model._Space, "set", failing)
    nests, _ = build_nests(unit)
    assert nests[0].statements[0].domain is not None
    (err,) = nests[1].diagnostics
    assert err.code == "TC900" and err.span == nests[1].span and err.span.column == src.index("for (int j") + 1
    assert nests[1].statements[0].refusal.code == "TC900"

    monkeypatch.undo()

    def broken_walk(self, s, ctx):
        raise KeyError("walk")

    monkeypatch.setattr(affine._NestBuilder, "walk_if", broken_walk)
    nests, _ = snippet("for (i = 0; i < n; i++) if (i) x[i] = 0;\nfor (j = 0; j < n; j++) x[j] = 0;")
    assert [d.code for d in nests[0].diagnostics] == ["TC900"] and nests[1].diagnostics == []


# --------------------------------------------------------------------------
# Random affine nests against their Python interpretation (hypothesis)

PARAMS = ("n", "m")


@st.composite
def affine_expr(draw, names: tuple[str, ...], depth: int = 0):
    """(C text, Python function of an environment) of a random affine expression."""
    kind = draw(st.sampled_from(["var", "const", "var", "add", "sub", "scale", "div", "mod", "min", "max"]
                                if depth < 2 else ["var", "const"]))
    if kind == "var":
        v = draw(st.sampled_from(names))
        return v, lambda env, v=v: env[v]
    if kind == "const":
        k = draw(st.integers(-3, 4))
        return str(k), lambda env, k=k: k
    a, fa = draw(affine_expr(names, depth + 1))
    if kind in ("scale", "div", "mod"):
        k = draw(st.sampled_from([2, 3, -2]) if kind != "scale" else st.sampled_from([-2, 2, 3]))
        if kind == "scale":
            return f"{k} * ({a})", lambda env: k * fa(env)
        if kind == "div":
            return f"({a}) / {k}", lambda env: c_div(fa(env), k)
        return f"({a}) % {k}", lambda env: c_mod(fa(env), k)
    b, fb = draw(affine_expr(names, depth + 1))
    if kind == "add":
        return f"({a}) + ({b})", lambda env: fa(env) + fb(env)
    if kind == "sub":
        return f"({a}) - ({b})", lambda env: fa(env) - fb(env)
    if kind == "min":
        return f"(({a}) < ({b}) ? ({a}) : ({b}))", lambda env: min(fa(env), fb(env))
    return f"(({a}) > ({b}) ? ({a}) : ({b}))", lambda env: max(fa(env), fb(env))


_OPS = {"<": lambda x, y: x < y, "<=": lambda x, y: x <= y, ">": lambda x, y: x > y,
        ">=": lambda x, y: x >= y, "==": lambda x, y: x == y, "!=": lambda x, y: x != y}


@st.composite
def random_condition(draw, names: tuple[str, ...]):
    """(C text, Python predicate) of a comparison, or of two joined by && / ||."""
    ga, fga = draw(affine_expr(names))
    gb, fgb = draw(affine_expr(names))
    gop = draw(st.sampled_from(sorted(_OPS)))
    text, fn = f"{ga} {gop} {gb}", lambda env: _OPS[gop](fga(env), fgb(env))
    join = draw(st.sampled_from([None, None, "&&", "||"]))
    if join is None:
        return text, fn
    t2, f2 = draw(random_condition(names))
    if join == "&&":
        return f"({text}) && ({t2})", lambda env: fn(env) and f2(env)
    return f"({text}) || ({t2})", lambda env: fn(env) or f2(env)


@st.composite
def random_nest(draw):
    """C text of a random nest of 1 to 3 affine loops and its structure for run_python."""
    depth = draw(st.integers(1, 3))
    names = PARAMS
    loops = []
    for d in range(depth):
        v = f"v{d}"
        lo, flo = draw(affine_expr(names))
        hi, fhi = draw(affine_expr(names))
        step = draw(st.sampled_from([1, 1, 2, 3, -1, -2]))
        ops = ["<", "<="] if step > 0 else [">", ">="]
        op = draw(st.sampled_from(ops))
        extra = None  # a second bound joined with &&
        if draw(st.integers(0, 3)) == 0:
            hi2, fhi2 = draw(affine_expr(names))
            extra = (draw(st.sampled_from(ops)), hi2, fhi2)
        guard = draw(random_condition(names + (v,))) if draw(st.booleans()) else None
        names = names + (v,)
        loops.append((v, lo, flo, hi, fhi, step, op, extra, guard))
    skip = draw(random_condition(names)) if draw(st.integers(0, 2)) == 0 else None
    text = ""
    for v, lo, _, hi, _, step, op, extra, guard in loops:
        inc = f"{v}++" if step == 1 else f"{v}--" if step == -1 else f"{v} += {step}"
        cond = f"{v} {op} {hi}" + (f" && {v} {extra[0]} {extra[1]}" if extra else "")
        text += f"for (int {v} = {lo}; {cond}; {inc}) "
        if guard:
            text += f"if ({guard[0]}) "
    body = (f"if ({skip[0]}) continue; " if skip else "") + "x[0] += 1;"
    return text + "{ " + body + " }", (loops, skip)


def run_python(case, env: dict[str, int], level: int = 0) -> int:
    """How often the statement of a random nest runs (C semantics, by direct execution)."""
    loops, skip = case
    if level == len(loops):
        return 0 if skip and skip[1](env) else 1
    v, _, flo, _, fhi, step, op, extra, guard = loops[level]
    total, value = 0, flo(env)
    while True:
        inner = {**env, v: value}
        if not _OPS[op](value, fhi(inner)) or (extra and not _OPS[extra[0]](value, extra[2](inner))):
            break
        if guard is None or guard[1](inner):
            total += run_python(case, inner, level + 1)
        value += step
    return total


@settings(max_examples=int(os.environ.get("TC_EXAMPLES", "60")), deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(random_nest())
def test_random_affine_nests_match_python(case):
    text, structure = case
    nests, _ = snippet(text)
    (nest,) = nests
    (stmt,) = nest.statements
    assert stmt.domain is not None, (text, [d.message for d in nest.diagnostics])
    for n, m in [(0, 0), (1, -2), (4, 3), (-3, 5), (6, 6)]:
        want = run_python(structure, {"n": n, "m": m})
        assert count(stmt.domain, {p: {"n": n, "m": m}[p] for p in nest.params}) == want, text


# --------------------------------------------------------------------------
# gcc executing the loops (tests/oracle.py) as the reference

# Functions of refusals.c that run to completion with zeroed arrays (the others loop forever or call
# an undefined function); their exact statements are checked against gcc too.
GCC_SAFE_REFUSALS = {"csr_rows", "growing_window", "first_dry_berth", "settle", "wet_cells", "skip_wet",
                     "gate_modes"}
GCC_POINTS = [0, 1, 2, 5, -3, (9, 4, -2, 3), (13, -1, 6, 0), (4, 11, 3, 7)]


def _gcc_cases():
    out = []
    for path in sorted(INPUTS.glob("*.c")):
        text = path.read_text(encoding="utf-8")
        unit, _ = parse_text(text, path=path.name)
        nests, _ = build_nests(unit, path=path.name)
        for fn in unit.functions:
            if path.name == "refusals.c" and fn.name not in GCC_SAFE_REFUSALS:
                continue
            fnests = [n for n in nests if n.function == fn.name]
            if fnests:
                out.append(pytest.param(path, fn, fnests, text, id=f"{path.stem}-{fn.name}"))
    return out


@pytest.mark.gcc
@pytest.mark.skipif(not oracle.gcc_available(), reason="gcc not available")
@pytest.mark.parametrize("path, fn, nests, text", _gcc_cases())
def test_counts_match_gcc(path, fn, nests, text):
    ptypes = [(p.name, p.type_name, bool(p.pointer or p.dims)) for p in fn.params]
    ints = sorted(n for n, t, ptr in ptypes if not ptr and not re.search(r"float|double", t))
    symbols = {}
    stmts = []
    for nest in nests:
        extra = [p for p in nest.params if p not in ints]
        if any(p not in nest.symbolic or p in nest.names for p in extra):
            continue  # e.g. a global size: gcc's driver cannot set it
        symbols.update({p: nest.symbolic[p] for p in extra})
        stmts += [(nest, s) for s in nest.statements if s.domain is not None]
    if not stmts:
        pytest.skip("no statement with a domain whose parameters gcc can set")
    names = ints + sorted(symbols)
    points = []
    for v in GCC_POINTS:
        vals = itertools.cycle(v if isinstance(v, tuple) else (v,))
        points.append({k: max(x, 0) if k in symbols else x for k, x in zip(names, vals, strict=False)})
    spans = [(s.span.line, s.span.column, s.span.end_line, s.span.end_column) for _, s in stmts]
    rows = oracle.count_statements(text, fn.name, spans, ptypes, points, symbols=symbols or None, path=path.name)
    for pt, row in zip(points, rows, strict=True):
        for (nest, s), want in zip(stmts, row, strict=True):
            got = count(s.domain, {p: pt[p] for p in nest.params})
            assert got == want, (fn.name, s.id, s.text, pt, got, want)


def test_divisors_and_moduli_beyond_64_bits_are_exact():
    # check: isl enumeration against C semantics (ISO C99 6.5.5p6, truncating division)
    big = 0x7FFFFFFFFFFFFFFF2  # a hexadecimal constant past 64 bits, found by fuzzing
    nests, diags = snippet(f"for (i = (2 * M + 2) / {big}; i <= 10; i++) A[i] += 1;\n"
                           f"for (j = 0; j < M % {big}; j++) A[j] += 1;")
    assert_no_internal_errors([*diags, *(d for n in nests for d in n.diagnostics)])
    first, second = (n.statements[0].domain for n in nests)
    for m in (-5, -1, 0, 4, 100):
        assert count(first, {"M": m}) == len(range(c_div(2 * m + 2, big), 11))
        assert count(second, {"M": m}) == max(c_mod(m, big), 0)
