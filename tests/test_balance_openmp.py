# Balance of parallel loops against the real runtime.
#
# Reference: the GNU OpenMP runtime (libgomp, linked by gcc). Each kernel of
# tests/inputs/balance/ and each corpus kernel with `#pragma omp` is compiled
# with `gcc -fopenmp` by tests/oracle.py, which replaces every statement by a
# counter of its executions per omp_get_thread_num() and runs it with
# OMP_NUM_THREADS fixed (4, and 3 where 3 does not divide the trip counts).
# Replacing the statement by a counter leaves the schedule unchanged: which
# thread runs which iteration depends only on the loop bounds, the schedule
# clause and the team size. The per-thread work tripcount predicts for static
# schedules (unchunked, chunked, collapse(2), downward and strided loops, an
# inner parallel loop entered many times) must equal the runtime's counts.

from __future__ import annotations

import os
from pathlib import Path

import pytest

try:
    from tests import oracle
except ImportError:  # tests/ is not a package: pytest put tests/ on sys.path
    import oracle

from tripcount.options import Options
from tripcount.pipeline import analyze_text

HERE = Path(__file__).resolve().parent
INPUTS = HERE / "inputs" / "balance"
CORPUS = HERE.parent / "corpus"

needs_openmp = pytest.mark.skipif(not oracle.openmp_available(), reason="gcc with OpenMP not available")
pytestmark = [needs_openmp, pytest.mark.gcc]

SIZES = [{"N": 10, "M": 7, "T": 3}, {"N": 23, "M": 5, "T": 2}]


def _param_types(fn) -> list[tuple[str, str, bool]]:
    return [(p.name, p.type_name, bool(p.pointer or p.dims)) for p in fn.params]


def _parallel_loops(text: str, path: str, at: dict[str, int], threads: int):
    """(function IR, nest, loop, balance extra) of every modelled parallel loop."""
    from tripcount.frontend import parse_text

    unit, _ = parse_text(text, path=path)
    functions = {f.name: f for f in unit.functions}
    fr = analyze_text(text, path, Options(at=at, threads=threads))
    for nr in fr.nests:
        for lr in nr.loops:
            bal = lr.extras.get("parallel")
            if bal is not None:
                yield functions[nr.nest.function], nr, lr.loop, bal


def _runtime_per_thread(text: str, fn, nr, loop, points: list[dict[str, int]], threads: int) -> list[list[int]]:
    """Statement executions inside `loop`, per point and thread, as libgomp runs the function."""
    stmts = [s for s in nr.nest.statements if loop.index in s.loops]
    spans = [(s.span.line, s.span.column, s.span.end_line, s.span.end_column) for s in stmts]
    pts = [{p.name: at[p.name] for p in fn.params if p.name in at} for at in points]
    table = oracle.count_per_thread(text, fn.name, spans, _param_types(fn), pts, threads=threads)
    return [[sum(r) for r in rows] for rows in table]


def _check(text: str, path: str, sizes: list[dict[str, int]], threads: int) -> list[str]:
    """Compare every static parallel loop with the runtime at every size; returns what was checked."""
    found: dict[tuple[str, int], list] = {}
    for at in sizes:
        for fn, nr, loop, bal in _parallel_loops(text, path, at, threads):
            if bal.schedule == "static":
                assert bal.per_thread is not None, f"{fn.name}: no per-thread values at {at}"
                found.setdefault((fn.name, loop.index), []).append((fn, nr, loop, bal, at))
    checked = []
    for (name, _), items in found.items():
        fn, nr, loop = items[0][:3]
        runtime = _runtime_per_thread(text, fn, nr, loop, [it[4] for it in items], threads)
        for (_, _, _, bal, at), want in zip(items, runtime, strict=True):
            got = [int(v) for v in bal.per_thread] + [0] * (len(want) - len(bal.per_thread))
            assert got == want, f"{path}:{loop.header.line} {name} at {at}, {threads} threads"
            f = bal.per_thread_formula
            if f is not None and f.formula is not None:
                vals = {p: at[p] for p in f.formula.params if p in at}
                by_formula = [f.formula.evaluate({**vals, bal.thread_param: t}) for t in range(bal.threads)]
                assert by_formula == [int(v) for v in bal.per_thread], f"formula of {name} at {at}"
        checked.append(f"{name}:{loop.header.line}")
    return checked


@pytest.mark.parametrize("threads", [4, 3])
@pytest.mark.parametrize("path", sorted(INPUTS.glob("*.c")), ids=lambda p: p.name)
def test_static_per_thread_matches_libgomp(path: Path, threads: int):
    """Reference: the GNU OpenMP runtime (libgomp, linked by gcc), per-thread statement counts."""
    text = path.read_text(encoding="utf-8")
    checked = _check(text, str(path), SIZES, threads)
    assert len(checked) == text.count("#pragma omp"), checked


CORPUS_OMP = sorted(p for p in CORPUS.glob("*.c") if "#pragma omp" in p.read_text(encoding="utf-8"))


@pytest.mark.parametrize("path", CORPUS_OMP, ids=lambda p: p.name)
def test_corpus_static_per_thread_matches_libgomp(path: Path):
    """Reference: the GNU OpenMP runtime (libgomp, linked by gcc), on the corpus kernels."""
    text = path.read_text(encoding="utf-8")
    sizes = [{"N": 13, "M": 6, "K": 3, "C": 9, "L": 11, "H": 10, "W": 7, "T": 2, "D": 6},
             {"N": 8, "M": 9, "K": 2, "C": 5, "L": 17, "H": 9, "W": 4, "T": 1, "D": 7}]
    _check(text, str(path), sizes, 4)


SCHEDULE_PROBE = """
#include <omp.h>
void probe(int n, int *kind, int *chunk)
{
    omp_sched_t k;
    omp_get_schedule(&k, chunk);
    *kind = (int)k;
    (void)n;
}
"""


def test_runtime_schedule_default_is_dynamic_1():
    """Reference: libgomp itself: with OMP_SCHEDULE unset, schedule(runtime) is (dynamic, 1),
    which is how tripcount models schedule(runtime)."""
    import shutil
    import subprocess
    import tempfile

    gcc = shutil.which("gcc")
    prog = SCHEDULE_PROBE + """
#include <stdio.h>
int main(void) { int k, c; probe(0, &k, &c); printf("%d %d %d\\n", k, c, (int)omp_sched_dynamic); return 0; }
"""
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "probe.c")
        exe = os.path.join(tmp, "probe")
        with open(src, "w") as f:
            f.write(prog)
        subprocess.run([gcc, "-fopenmp", src, "-o", exe], check=True, capture_output=True, timeout=60)
        env = {k: v for k, v in os.environ.items() if k != "OMP_SCHEDULE"}
        out = subprocess.run([exe], check=True, capture_output=True, text=True, env=env, timeout=60).stdout
    kind, chunk, dynamic = (int(x) for x in out.split())
    assert (kind, chunk) == (dynamic, 1)
