# Tests of tripcount.analysis.dependences.
#
# External reference: gcc executing each kernel (tests/accesstrace.py records
# every array access of every statement instance in execution order); the
# carried dependences are derived from that trace by brute force (two accesses
# of one byte, a write among them, the first in execution order is the
# source) and compared with the analysis at the same sizes. The textbook
# dependence structure of the kernels (matrix product: k carries a reduction;
# LU: k sequential, i and j parallel; in-place Gauss-Seidel: no loop parallel
# without skewing) is the common practice of the trade, stated beside each
# kernel in tests/inputs/dependences/velin_deps.c and asserted below as well.

from __future__ import annotations

import functools
import glob
import os

import pytest
from accesstrace import access_trace
from conftest import INPUTS
from oracle import OracleError, gcc_available

from tripcount.analysis.dependences import covered_names, dependences, unsafe_parallel
from tripcount.frontend import parse_file, parse_text
from tripcount.model import Nest, build_nests

KERNELS = os.path.join(INPUTS, "dependences", "velin_deps.c")
SRC = open(KERNELS, encoding="utf-8").read()

PARAMS = {
    "crane_product": [("n", "int", False), ("A", "double", True), ("B", "double", True), ("C", "double", True)],
    "quay_lu": [("n", "int", False), ("A", "double", True)],
    "basin_gauss_seidel": [("T", "int", False), ("n", "int", False), ("u", "double", True)],
    "basin_jacobi": [("n", "int", False), ("u", "double", True), ("v", "double", True)],
    "tide_forward": [("n", "int", False), ("L", "double", True), ("b", "double", True), ("x", "double", True)],
    "sediment_prefix": [("n", "int", False), ("m", "int", False), ("s", "double", True)],
    "wave_down": [("n", "int", False), ("w", "double", True)],
}
AT = {"n": 6, "m": 4, "T": 3}


@functools.lru_cache(maxsize=1)
def _nests() -> dict[str, Nest]:
    tu, _ = parse_file(KERNELS)
    nests, _ = build_nests(tu)
    return {n.function: n for n in nests}


def _verdicts(function: str) -> dict[str, str]:
    nest = _nests()[function]
    r = dependences(nest)
    return {nest.loops[v.loop].var: v.verdict for v in r.loops}


def test_textbook_verdicts():
    assert _verdicts("crane_product") == {"i": "parallel", "j": "parallel", "k": "reduction"}
    assert _verdicts("quay_lu") == {"k": "sequential", "i": "parallel", "j": "parallel"}
    assert _verdicts("basin_gauss_seidel") == {"t": "sequential", "i": "sequential", "j": "sequential"}
    assert _verdicts("basin_jacobi") == {"i": "parallel", "j": "parallel"}
    assert _verdicts("tide_forward") == {"i": "sequential", "j": "sequential"}
    assert _verdicts("sediment_prefix") == {"i": "sequential", "j": "parallel"}
    assert _verdicts("wave_down") == {"i": "sequential"}


def test_scalars_declared_in_a_loop_are_private_to_it():
    # acc declared in the body of i: a new variable per i (i parallel), summed over j (a reduction)
    assert _verdicts("gauge_rows") == {"i": "parallel", "j": "reduction"}
    # one accumulator for the whole nest: both loops carry its update
    assert _verdicts("gauge_all") == {"i": "reduction", "j": "reduction"}


def test_distances_and_examples():
    nest = _nests()["sediment_prefix"]
    r = dependences(nest, at={"n": 6, "m": 4})
    (dep,) = r.loops[0].carried
    assert (dep.kind, dep.array, dep.distance) == ("flow", "s", (1, 0))
    assert dep.example == ({"i": 1, "j": 0}, {"i": 2, "j": 0})
    down = dependences(_nests()["wave_down"], at={"n": 5})
    (dep,) = down.loops[0].carried
    assert (dep.kind, dep.distance, dep.example) == ("flow", (-1,), ({"i": 1}, {"i": 0}))


def _brute_force(function: str, nest: Nest | None = None, src: str = SRC, params=None, at=None,
                 openmp: bool = True) -> set[tuple[int | None, str, str, str, str]]:
    """(carrying loop index or None, kind, array, source, sink) of every dependence in the gcc trace."""
    nest = nest or _nests()[function]
    stmts = list(nest.statements)
    spans = [((s.span.line, s.span.column, s.span.end_line, s.span.end_column), s.loop_vars) for s in stmts]
    events = access_trace(src, function, params or PARAMS[function], at or AT, spans, openmp=openmp)
    by_byte: dict[tuple[str, int], list] = {}
    for e in events:
        for b in range(e.offset, e.offset + e.size):
            by_byte.setdefault((e.array, b), []).append(e)
    out = set()
    for (array, _), evs in by_byte.items():
        for x in range(len(evs)):
            for y in range(x + 1, len(evs)):
                a, b = evs[x], evs[y]
                if not (a.write or b.write) or (a.stmt, a.iters) == (b.stmt, b.iters):
                    continue
                sa, sb = stmts[a.stmt], stmts[b.stmt]
                common = 0
                while (common < min(len(sa.loops), len(sb.loops))
                       and sa.loops[common] == sb.loops[common]):
                    common += 1
                level = next((k for k in range(common) if a.iters[k] != b.iters[k]), None)
                loop = sa.loops[level] if level is not None else None
                kind = "flow" if a.write and not b.write else "anti" if b.write and not a.write else "output"
                out.add((loop, kind, array, sa.id, sb.id))
    return out


gcc = pytest.mark.skipif(not gcc_available(), reason="gcc not available")


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("function", sorted(PARAMS))
def test_every_dependence_at_small_sizes_equals_the_gcc_trace(function):
    nest = _nests()[function]
    r = dependences(nest, at={p: AT[p] for p in nest.params})
    got = {(d.loop, d.kind, d.array, d.source, d.sink)
           for v in r.loops for d in v.carried if d.example is not None}
    got |= {(None, d.kind, d.array, d.source, d.sink) for d in r.independent if d.example is not None}
    assert got == _brute_force(function)


CORPUS = os.path.join(os.path.dirname(INPUTS), "..", "corpus")
CORPUS_AT = 6  # every size parameter: small enough to trace, past the kernels' boundary cases


def _corpus_nests() -> list[tuple[str, str]]:
    return [(os.path.basename(p), n.function) for p in sorted(glob.glob(os.path.join(CORPUS, "*.c")))
            for n in build_nests(parse_file(p)[0])[0]]


@pytest.mark.gcc
@gcc
@pytest.mark.parametrize("name,function", sorted(set(_corpus_nests())))
def test_corpus_dependences_equal_the_gcc_trace(name, function):
    """Every corpus nest the trace can run (modelled, its arrays parameters): the dependences on the
    arrays at small sizes equal the ones gcc's execution shows."""
    path = os.path.join(CORPUS, name)
    unit, _ = parse_file(path)
    fn = next(f for f in unit.functions if f.name == function)
    params = [(p.name, p.type_name, bool(p.pointer or p.dims)) for p in fn.params]
    arrays = {n for n, _t, ptr in params if ptr}
    src = open(path, encoding="utf-8").read()
    for nest in build_nests(unit)[0]:
        if nest.function != function:
            continue
        r = dependences(nest, at={p: CORPUS_AT for p in nest.params})
        if not r.complete or any(s.domain is None for s in nest.statements):
            continue
        got = {(d.loop, d.kind, d.array, d.source, d.sink)
               for v in r.loops for d in v.carried if d.example is not None and d.array in arrays}
        got |= {(None, d.kind, d.array, d.source, d.sink) for d in r.independent
                if d.example is not None and d.array in arrays}
        try:
            # every integer parameter sized (an extent need not be a loop bound); run in order, as
            # the nest's sequential semantics is what the dependences describe
            want = _brute_force(function, nest, src, params, {n: CORPUS_AT for n, _t, ptr in params if not ptr},
                                openmp=False)
        except OracleError as exc:
            pytest.skip(f"the trace cannot run {function}: {exc}")
        assert got == want, nest.span.line


def test_openmp_clauses_cover_what_they_name():
    assert covered_names("#pragma omp parallel for reduction(+: s, t) private(x) schedule(static)") == {
        "s", "t", "x"}
    src = """
void f(int n, double *a, double *s) {
  double acc = 0;
#pragma omp parallel for reduction(+: acc)
  for (int i = 0; i < n; i++) acc += a[i];
#pragma omp parallel for
  for (int i = 1; i < n; i++) a[i] = a[i - 1] + 1.0;
  s[0] = acc;
}
"""
    tu, _ = parse_text(src, "f.c")
    nests, _ = build_nests(tu)
    first, second = nests
    assert unsafe_parallel(first, dependences(first), first.loops[0]) == ()
    (race,) = unsafe_parallel(second, dependences(second, at={"n": 4}), second.loops[0])
    assert (race.kind, race.array, race.example) == ("flow", "a", ({"i": 1}, {"i": 2}))


# ---------------------------------------------------------------- random nests against direct execution
# Nests of depth 1-3 over arrays A and B with affine subscripts, executed here
# statement instance by statement instance (reads before the write, as C
# evaluates `x = e` for these statements); the dependences of the execution
# are derived as above and compared with the analysis at the same size.

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

VARS = "ijk"


@st.composite
def _nest(draw):
    depth = draw(st.integers(1, 3))
    loops = []
    for d in range(depth):
        lo = draw(st.sampled_from(["0", "1"] + [VARS[e] for e in range(d)]))
        hi = draw(st.sampled_from(["N", "N - 1"] + [f"{VARS[e]} + 2" for e in range(d)]))
        down = draw(st.booleans())
        loops.append((VARS[d], lo, hi, down))

    def sub():
        terms = [f"{draw(st.sampled_from([-1, 1, 2]))}*{VARS[e]}" for e in range(depth) if draw(st.booleans())]
        return " + ".join(terms + [str(draw(st.integers(0, 3)))])

    stmts = []
    for _ in range(draw(st.integers(1, 2))):
        w = draw(st.sampled_from("AB"))
        r = draw(st.sampled_from("AB"))
        stmts.append((w, (sub(), sub()), r, (sub(), sub())))
    return loops, stmts


def _c_text(loops, stmts) -> str:
    head = ""
    for v, lo, hi, down in loops:
        head += (f"for (int {v} = ({hi}) - 1; {v} >= {lo}; {v}--) " if down
                 else f"for (int {v} = {lo}; {v} < {hi}; {v}++) ")
    body = " ".join(f"{w}[{a}][{b}] = {r}[{c}][{d}] + 1.0;" for w, (a, b), r, (c, d) in stmts)
    return ("void f(int N, double A[64][64], double B[64][64]) {\n  " + head + "{ " + body + " }\n}\n")


def _run(loops, stmts, n: int):
    """(statement, iteration, array, element, is write) in execution order."""
    events = []

    def rec(d, env):
        if d == len(loops):
            for k, (w, ws, r, rs) in enumerate(stmts):
                it = tuple(env[v] for v, *_ in loops)
                events.append((k, it, r, tuple(eval(x, {}, env) for x in rs), False))
                events.append((k, it, w, tuple(eval(x, {}, env) for x in ws), True))
            return
        v, lo, hi, down = loops[d]
        a, b = eval(lo, {}, env), eval(hi, {}, env)
        for x in (range(b - 1, a - 1, -1) if down else range(a, b)):
            rec(d + 1, {**env, v: x})

    rec(0, {"N": n})
    return events


@settings(max_examples=1000, deadline=None, derandomize=True)
@given(_nest(), st.integers(2, 5))
def test_random_nests_against_direct_execution(gen, n):
    loops, stmts = gen
    tu, _ = parse_text(_c_text(loops, stmts), "rand.c")
    (nest,) = build_nests(tu)[0]
    r = dependences(nest, at={"N": n})
    assert r.complete
    got = {(d.loop, d.kind, d.array, d.source, d.sink)
           for v in r.loops for d in v.carried if d.example is not None}
    got |= {(None, d.kind, d.array, d.source, d.sink) for d in r.independent if d.example is not None}
    events = _run(loops, stmts, n)
    by_elem: dict[tuple, list] = {}
    for e in events:
        by_elem.setdefault((e[2], e[3]), []).append(e)
    want = set()
    for (array, _), evs in by_elem.items():
        for x in range(len(evs)):
            for y in range(x + 1, len(evs)):
                a, b = evs[x], evs[y]
                if not (a[4] or b[4]) or (a[0], a[1]) == (b[0], b[1]):
                    continue
                level = next((k for k in range(len(loops)) if a[1][k] != b[1][k]), None)
                kind = "flow" if a[4] and not b[4] else "anti" if b[4] and not a[4] else "output"
                want.add((level, kind, array, f"S{a[0] + 1}", f"S{b[0] + 1}"))
    assert got == want


# ---------------------------------------------------------------- through the driver


FORWARD = """\
void tide_forward_par(int n, double L[n][n], double b[n], double x[n])
{
#pragma omp parallel for schedule(static)
    for (int i = 0; i < n; i++) {
        x[i] = b[i];
        for (int j = 0; j < i; j++)
            x[i] -= L[i][j] * x[j];
        x[i] = x[i] / L[i][i];
    }
}
"""


def test_a_parallel_recurrence_is_a_warning_and_gets_no_schedule_advice():
    from tripcount.options import Options
    from tripcount.pipeline import analyze_text

    fr = analyze_text(FORWARD, "fwd.c", Options(at={"n": 100}))
    (nr,) = fr.nests
    codes = [d.code for d in fr.all_diagnostics()]
    assert "TC507" in codes and "TC501" not in codes  # the imbalance advice is withheld
    (race,) = [d for d in fr.all_diagnostics() if d.code == "TC507"]
    assert "flow dependence on x" in race.message and "S1 at i=0 writes what S2 at i=1, j=0 reads" in race.message
    bal = nr.loops[0].extras["parallel"]
    assert bal.recommendation.startswith("no schedule advice") and bal.alternatives == []
    assert nr.extras["dependences"].summary == "i sequential (flow on x), j sequential (flow on x)"
    assert nr.loops[0].extras["dependences"].to_json()["verdict"] == "sequential"


def test_the_outermost_parallel_loop_of_a_sequential_nest_is_a_note():
    from tripcount.options import Options
    from tripcount.pipeline import analyze_text

    fr = analyze_text(SRC, "velin_deps.c", Options())
    notes = {(d.span.line, d.args["var"]) for d in fr.all_diagnostics() if d.code == "TC508"}
    assert (6, "i") in notes  # crane product: i
    assert (16, "i") in notes  # LU: k is sequential, i holds every statement and is parallel
    assert not any(line in (27, 28, 29) for line, _ in notes)  # Gauss-Seidel: none
    reduced = [d for d in fr.all_diagnostics() if d.code == "TC508" and d.args["var"] == "i"
               and d.span.line == 81]
    assert reduced and "reduction clause for acc" in reduced[0].message


def test_an_array_used_with_two_ranks_leaves_the_loops_undecided():
    tu, _ = parse_text("void f(int n, double A[n][4]) {\n  for (int i = 1; i < n; i++) {\n"
                       "    A[i][0] = 1.0;\n    A[i - 1] = 0;\n  }\n}\n", "ranks.c")
    (nest,) = build_nests(tu)[0]
    r = dependences(nest)
    assert not r.complete and [v.verdict for v in r.loops] == ["unknown"]
