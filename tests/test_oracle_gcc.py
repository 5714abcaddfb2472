# The oracle test of the product: gcc executing the loops is the reference.
#
# For every file of the bundled corpus the pipeline (front end, model,
# engine) gives each statement an iteration domain; its count must equal the
# number of times the statement runs when gcc compiles and runs the function
# (tests/oracle.py), at several sizes: all parameters 0, 1, 2, 3, 7, and mixed
# points (13/20/5, 37/4/11 that crosses a 32-wide tile, 70/33, and one with a
# negative size). Both the engine's formula and its enumeration are checked.
#
# A product that does not import fails these tests (it never skips them). The
# corpus checks below them (it compiles cleanly; every function runs to
# completion under the oracle; a handbook count) need only gcc.

from __future__ import annotations

import itertools
import re
import subprocess
from pathlib import Path

import pytest

try:
    from tests import oracle
except ImportError:  # tests/ is not a package: pytest put tests/ itself on sys.path
    import oracle

from tripcount import engine
from tripcount.frontend import parse_file
from tripcount.model import build_nests

CORPUS = Path(__file__).resolve().parent.parent / "corpus"
FILES = sorted(CORPUS.glob("*.c"))

needs_gcc = pytest.mark.skipif(not oracle.gcc_available(), reason="gcc not available")

# Values given to the free parameters of a function (sorted by name, cycled).
UNIFORM = [0, 1, 2, 3, 7]
MIXED = [(13, 20, 5), (37, 4, 11), (70, 33), (-1, 5, 2)]
# Enumeration is only asked for below this count (the formula is checked at every point).
ENUMERATE_LIMIT = 20_000

_C_WORDS = frozenset("sizeof int long char short unsigned signed float double const".split())


def _points(names: list[str]) -> list[dict[str, int]]:
    pts = [{n: v for n in names} for v in UNIFORM]
    for vals in MIXED:
        pts.append({n: v for n, v in zip(names, itertools.cycle(vals))})
    return pts


# --------------------------------------------------------------------------
# The product's own stages


def _pipeline(path: Path):
    """(translation unit, nests, text) of one corpus file, through the product's own stages."""
    text = path.read_text(encoding="utf-8")
    unit, _ = parse_file(str(path))
    nests, _ = build_nests(unit, path=str(path))
    return unit, list(nests), text


# --------------------------------------------------------------------------
# How each nest parameter gets its value at a point.


def _resolve(nest, int_params: set[str], macros: set[str]):
    """(free names, derived {name: C text}, substituted {name: C text}) or a reason to skip."""
    free, derived, subst = [], {}, {}
    for name in nest.params:
        if name in int_params:
            free.append(name)
            continue
        text = nest.symbolic.get(name)
        if text is None:
            return f"parameter {name!r} is neither a function parameter nor symbolic"
        idents = set(re.findall(r"[A-Za-z_]\w*", text)) - macros - _C_WORDS
        calls = set(re.findall(r"([A-Za-z_]\w*)\s*\(", text)) - macros
        if idents <= int_params and not calls:
            derived[name] = text  # e.g. n / 2 or MIN(n, 64): gcc computes it from the sizes
        elif calls:
            subst[name] = text  # e.g. count_samples(buf): the driver sets it
        else:
            return f"symbolic parameter {name!r} = {text!r} cannot be set from the sizes"
    return free, derived, subst


def _in_context(context, point: dict[str, int]) -> bool:
    import islpy as isl

    s = context
    for i in range(s.dim(isl.dim_type.param)):
        name = s.get_dim_name(isl.dim_type.param, i)
        if name in point:
            s = s.fix_val(isl.dim_type.param, i, isl.Val.int_from_si(s.get_ctx(), point[name]))
    return not s.is_empty()


def _macros(text: str) -> set[str]:
    return set(re.findall(r"^\s*#\s*define\s+([A-Za-z_]\w*)", text, re.M))


@needs_gcc
@pytest.mark.gcc
@pytest.mark.parametrize("path", FILES, ids=lambda p: f"gcc-reference-{p.name}")
def test_statement_counts_match_gcc(path: Path):
    """Every statement count (formula and enumeration) equals gcc's execution count."""
    unit, nests, text = _pipeline(path)
    functions = {f.name: f for f in unit.functions}
    macros = _macros(text)
    limit_error = getattr(engine, "EngineLimit", ())
    failures: list[str] = []
    checked = 0
    skipped: list[str] = []
    by_function: dict[str, list] = {}
    for nest in nests:
        by_function.setdefault(nest.function, []).append(nest)
    for fname, fnests in by_function.items():
        fn = functions[fname]
        ptypes = [(p.name, p.type_name, bool(p.pointer or p.dims)) for p in fn.params]
        int_params = {n for n, t, is_ptr in ptypes if not is_ptr and not re.search(r"float|double", t)}
        stmts, owners, free_names, derived, subst = [], [], set(), {}, {}
        for nest in fnests:
            r = _resolve(nest, int_params, macros)
            if isinstance(r, str):
                skipped.append(f"{fname}: {r}")
                continue
            f, d, s = r
            free_names.update(f)
            derived.update(d)
            subst.update(s)
            for st in nest.statements:
                if st.domain is not None:
                    stmts.append(st)
                    owners.append(nest)
        if not stmts:
            continue
        names = sorted(free_names | set(subst))
        points = _points(names)
        spans = [(s.span.line, s.span.column, s.span.end_line, s.span.end_column) for s in stmts]
        gcc_counts = oracle.count_statements(text, fname, spans, ptypes, points,
                                             symbols=subst or None, path=str(path))
        if derived:
            values = oracle.evaluate_c(text, list(derived.values()), ptypes, points)
            for pt, row in zip(points, values, strict=True):
                pt.update(dict(zip(derived, row, strict=True)))
        formulas: dict[int, object] = {}
        for k, (st, nest) in enumerate(zip(stmts, owners, strict=True)):
            where = f"{fname} {st.id} line {st.span.line} `{' '.join(st.text.split())}`"
            try:
                formulas[k] = engine.count(st.domain, nest.context)
            except limit_error as exc:  # no formula within the limits: enumeration still checked
                formulas[k] = None
                skipped.append(f"{where}: formula limit ({exc})")
            except Exception as exc:  # report every statement, not just the first crash
                formulas[k] = None
                failures.append(f"{where}: engine.count raised {type(exc).__name__}: {exc}")
            for pt, row in zip(points, gcc_counts, strict=True):
                values = {n: pt[n] for n in nest.params}
                if not _in_context(nest.context, values):
                    continue
                want = row[k]
                checked += 1
                try:
                    if formulas[k] is not None:
                        got = formulas[k].evaluate(values)
                        if got != want:
                            failures.append(f"{where} at {values}: formula {got}, gcc {want}")
                    if want <= ENUMERATE_LIMIT:
                        got = engine.enumerate_count(st.domain, values)
                        if got != want:
                            failures.append(f"{where} at {values}: enumeration {got}, gcc {want}")
                except Exception as exc:
                    failures.append(f"{where} at {values}: {type(exc).__name__}: {exc}")
                    break
    assert not failures, "counts differ from gcc executing the loops:\n" + "\n".join(failures)
    if not checked:
        pytest.skip("no statement with a domain could be checked: " + "; ".join(skipped or ["no nests"]))


# --------------------------------------------------------------------------
# The corpus itself, with gcc only.

_FUNC_RE = re.compile(
    r"^(?:static\s+)?(?:inline\s+)?(?:void|int|long|double|float)\s+(\w+)\s*\(([^)]*)\)\s*\{",
    re.M)


def _corpus_functions(text: str) -> list[tuple[str, list[tuple[str, str, bool]]]]:
    """Function names and parameter types of a corpus file (enough for its plain C99 style)."""
    out = []
    for m in _FUNC_RE.finditer(text):
        params = []
        for p in m.group(2).split(","):
            p = " ".join(p.split())
            if not p or p == "void":
                continue
            head = p.split("[", 1)[0]
            name = re.findall(r"[A-Za-z_]\w*", head)[-1]
            ctype = head[: head.rindex(name)].replace("*", " ").strip()
            params.append((name, ctype, "*" in head or "[" in p))
        out.append((m.group(1), params))
    return out


def test_corpus_has_enough_kernels():
    """The bundled corpus: at least 14 kernels, each file listed in corpus/README.md."""
    readme = (CORPUS / "README.md").read_text(encoding="utf-8")
    kernels = [f for p in FILES for f, _ in _corpus_functions(p.read_text(encoding="utf-8"))]
    assert len(kernels) >= 14
    for p in FILES:
        assert p.name in readme
    for k in kernels:
        assert k in readme, f"{k} missing from corpus/README.md"


@needs_gcc
@pytest.mark.gcc
@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_corpus_compiles_cleanly_with_gcc(path: Path, tmp_path: Path):
    """Ordinary C99 with OpenMP: gcc -std=c99 -fopenmp -c -Wall -Wextra gives no warning."""
    flags = ["-fopenmp"] if oracle.openmp_available() else ["-Wno-unknown-pragmas"]
    r = subprocess.run(["gcc", "-std=c99", *flags, "-Wall", "-Wextra", "-c", str(path),
                        "-o", str(tmp_path / "k.o")], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0 and not r.stderr, r.stderr


@needs_gcc
@pytest.mark.gcc
@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_corpus_functions_terminate_under_the_oracle(path: Path):
    """Every corpus function runs to completion on zeroed buffers at all test sizes.

    (Otherwise a refused loop such as `for (;;)` could hang the product test.)
    """
    text = path.read_text(encoding="utf-8")
    for fname, ptypes in _corpus_functions(text):
        names = sorted(n for n, t, p in ptypes if not p and not re.search(r"float|double", t))
        got = oracle.count_statements(text, fname, [], ptypes, _points(names), path=str(path), timeout=30)
        assert len(got) == len(UNIFORM) + len(MIXED)


def _line_span(text: str, stmt: str) -> tuple[int, int, int, int]:
    start = text.index(stmt)
    line = text.count("\n", 0, start) + 1
    col = start - (text.rfind("\n", 0, start) + 1) + 1
    return (line, col, line, col + len(stmt))


@needs_gcc
@pytest.mark.gcc
def test_lu_update_count_is_handbook_value():
    """LU without pivoting, kij form: the update runs sum_k (n-k-1)^2 = (n-1)n(2n-1)/6 times.

    Golub & Van Loan, Matrix Computations, Algorithm 3.2.1 (outer-product
    Gaussian elimination, 2n^3/3 flops: two per update, from memory); the sum of
    squares is OEIS A000330 (from memory). The division runs n(n-1)/2 times.
    """
    path = CORPUS / "sediment_lu.c"
    text = path.read_text(encoding="utf-8")
    ptypes = dict(_corpus_functions(text))["sediment_lu_factor"]
    spans = [_line_span(text, "A[i][j] -= A[i][k] * A[k][j]"), _line_span(text, "A[i][k] = A[i][k] / A[k][k]")]
    sizes = [0, 1, 2, 3, 7, 20]
    got = oracle.count_statements(text, "sediment_lu_factor", spans, ptypes, [{"N": n} for n in sizes])
    assert got == [[(n - 1) * n * (2 * n - 1) // 6, n * (n - 1) // 2] if n > 0 else [0, 0] for n in sizes]
