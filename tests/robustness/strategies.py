# Hypothesis strategies and invariant checks of the robustness suite.
#
# Three kinds of input: (a) random but valid affine C loop nests, built as a
# small tree that renders to C and that this module can also execute directly
# in Python with C's semantics (truncating `/` and `%`) -- the "direct
# execution" reference, independent of tripcount and isl; (b) C text mutated
# by token deletions, swaps and insertions; (c) raw bytes. The checks are
# shared by the pytest modules and by bench/fuzz_figures.py, which counts
# outcomes instead of failing.
#
# Hypothesis profiles: "ci" (the default of these tests: few derandomized
# examples, so that the suite stays within its CI budget and is reproducible;
# TRIPCOUNT_HYPOTHESIS_PROFILE=slow swaps it) and "slow" (100,000 examples;
# used by the `slow`-marked tests, run by hand with `-m slow`).

from __future__ import annotations

import io
import os
import random
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from internal import assert_no_internal_errors, internal_codes_in

from tripcount.formula import piecewise_value
from tripcount.options import Options

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
CORPUS = os.path.join(ROOT, "corpus")

settings.register_profile(
    "ci", max_examples=25, deadline=None, derandomize=True, print_blob=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much])
settings.register_profile(
    "slow", max_examples=100_000, deadline=None, print_blob=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much])
# Applied per test (not loaded globally, which would change other modules' property tests).
CI = settings.get_profile(os.environ.get("TRIPCOUNT_HYPOTHESIS_PROFILE", "ci"))
SLOW = settings.get_profile("slow")
# Each case is analyzed with a small time limit, so that one hard nest costs seconds.
FUZZ_TIME_LIMIT = 3.0
PARAMS = ("N", "M", "K")
DIRECT_CAP = 20_000  # iterations of direct execution per point; beyond, the point is skipped


# --------------------------------------------------------------------------
# (a) valid affine nests


def c_div(a: int, b: int) -> int:
    """C's truncating integer division."""
    q = abs(a) // abs(b)
    return q if (a >= 0) == (b > 0) else -q


def c_mod(a: int, b: int) -> int:
    """C's remainder (sign of the dividend)."""
    return a - b * c_div(a, b)


@dataclass(frozen=True)
class Aff:
    """sum coef*var + const, optionally divided (C `/`) by `div`."""

    coefs: tuple[tuple[str, int], ...]
    const: int
    div: int = 1

    def c(self) -> str:
        parts = []
        for v, k in self.coefs:
            if k == 0:
                continue
            parts.append(v if k == 1 else f"-{v}" if k == -1 else f"{k} * {v}")
        text = " + ".join(parts) if parts else ""
        if self.const or not text:
            text = f"{text} + {self.const}" if text else str(self.const)
        text = text.replace("+ -", "- ")
        return f"({text}) / {self.div}" if self.div != 1 else text

    def eval(self, env: Mapping[str, int]) -> int:
        v = sum(k * env[n] for n, k in self.coefs) + self.const
        return c_div(v, self.div) if self.div != 1 else v


@dataclass(frozen=True)
class Bound:
    """One affine value, or min/max of several."""

    op: str  # "", "min" or "max"
    args: tuple[Aff, ...]

    def c(self) -> str:
        if not self.op:
            return self.args[0].c()
        return f"{self.op}({', '.join(a.c() for a in self.args)})"

    def eval(self, env: Mapping[str, int]) -> int:
        vals = [a.eval(env) for a in self.args]
        return vals[0] if not self.op else (min(vals) if self.op == "min" else max(vals))


@dataclass(frozen=True)
class Cond:
    """A guard: comparison, residue test, or &&/||/! of guards."""

    kind: str  # "cmp", "mod", "and", "or", "not"
    op: str = ""
    left: Aff | None = None
    right: Aff | None = None
    modulus: int = 0
    residue: int = 0
    args: tuple[Cond, ...] = ()

    def c(self) -> str:
        if self.kind == "cmp":
            return f"{self.left.c()} {self.op} {self.right.c()}"
        if self.kind == "mod":
            return f"({self.left.c()}) % {self.modulus} {self.op} {self.residue}"
        if self.kind == "not":
            return f"!({self.args[0].c()})"
        glue = " && " if self.kind == "and" else " || "
        return glue.join(f"({a.c()})" for a in self.args)

    def eval(self, env: Mapping[str, int]) -> bool:
        if self.kind == "cmp":
            return _cmp(self.op, self.left.eval(env), self.right.eval(env))
        if self.kind == "mod":
            return _cmp(self.op, c_mod(self.left.eval(env), self.modulus), self.residue)
        if self.kind == "not":
            return not self.args[0].eval(env)
        vals = (a.eval(env) for a in self.args)
        return all(vals) if self.kind == "and" else any(vals)


def _cmp(op: str, a: int, b: int) -> bool:
    return {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b, "==": a == b, "!=": a != b}[op]


@dataclass(frozen=True)
class Stmt:
    """A statement: `A[...] += 1.0;` (its line is set when rendering)."""

    text: str


@dataclass(frozen=True)
class If:
    cond: Cond
    body: tuple[Any, ...]


@dataclass(frozen=True)
class Loop:
    """for (int v = lo; v < / <= hi; v += step), or the downward form from hi to lo."""

    var: str
    lo: Bound
    hi: Bound
    inclusive: bool
    step: int
    down: bool
    body: tuple[Any, ...]


class TooBig(Exception):
    """Direct execution would take more than DIRECT_CAP iterations at this point."""


@dataclass
class GenNest:
    """A generated nest: C source, and direct execution of the same nest in Python."""

    params: tuple[str, ...]
    root: Loop
    lines: dict[int, Any] = field(default_factory=dict)  # line -> Loop or Stmt (set by source())

    def source(self) -> str:
        """The C text of a function holding the nest (one loop/statement per line)."""
        out = [f"void kernel({', '.join('int ' + p for p in self.params)}, double *A, double *B)", "{"]
        self.lines = {}
        self._emit(self.root, 1, out)
        out.append("}")
        return "\n".join(out) + "\n"

    def _emit(self, node: Any, depth: int, out: list[str]) -> None:
        pad = "    " * depth
        if isinstance(node, Loop):
            if node.down:
                cmp = ">=" if node.inclusive else ">"
                head = (f"for (int {node.var} = {node.hi.c()}; {node.var} {cmp} {node.lo.c()}; "
                        f"{node.var} -= {node.step})")
            else:
                cmp = "<=" if node.inclusive else "<"
                step = f"{node.var}++" if node.step == 1 else f"{node.var} += {node.step}"
                head = f"for (int {node.var} = {node.lo.c()}; {node.var} {cmp} {node.hi.c()}; {step})"
            out.append(pad + head + " {")
            self.lines[len(out)] = node
            for b in node.body:
                self._emit(b, depth + 1, out)
            out.append(pad + "}")
        elif isinstance(node, If):
            out.append(pad + f"if ({node.cond.c()}) {{")
            for b in node.body:
                self._emit(b, depth + 1, out)
            out.append(pad + "}")
        else:
            out.append(pad + node.text)
            self.lines[len(out)] = node

    def execute(self, values: Mapping[str, int], cap: int = DIRECT_CAP) -> dict[int, int]:
        """Direct execution: how often each loop body and statement runs, by source line."""
        counts = {line: 0 for line in self.lines}
        where = {id(n): line for line, n in self.lines.items()}
        budget = [cap]

        def run(node: Any, env: dict[str, int]) -> None:
            if isinstance(node, Loop):
                lo, hi = node.lo.eval(env), node.hi.eval(env)
                line = where[id(node)]
                if node.down:
                    v = hi
                    while (v >= lo) if node.inclusive else (v > lo):
                        body(node, line, env, v)
                        v -= node.step
                else:
                    v = lo
                    while (v <= hi) if node.inclusive else (v < hi):
                        body(node, line, env, v)
                        v += node.step
            elif isinstance(node, If):
                if node.cond.eval(env):
                    for b in node.body:
                        run(b, env)
            else:
                counts[where[id(node)]] += 1

        def body(node: Loop, line: int, env: dict[str, int], v: int) -> None:
            budget[0] -= 1
            if budget[0] < 0:
                raise TooBig
            counts[line] += 1
            inner = dict(env)
            inner[node.var] = v
            for b in node.body:
                run(b, inner)

        run(self.root, dict(values))
        return counts


def _aff(draw: Any, names: Sequence[str], small: bool = False) -> Aff:
    chosen = draw(st.lists(st.sampled_from(list(names)), max_size=2, unique=True)) if names else []
    coefs = tuple((n, draw(st.integers(-3, 3))) for n in chosen)
    const = draw(st.integers(-4, 6) if not small else st.integers(-2, 3))
    div = draw(st.sampled_from([1, 1, 1, 1, 2, 3]))
    return Aff(coefs, const, div)


def _bound(draw: Any, names: Sequence[str], op: str) -> Bound:
    if draw(st.integers(0, 4)) == 0:
        return Bound(op, tuple(_aff(draw, names) for _ in range(draw(st.integers(2, 3)))))
    return Bound("", (_aff(draw, names),))


def _cond(draw: Any, names: Sequence[str], depth: int = 0) -> Cond:
    k = draw(st.integers(0, 5 if depth < 1 else 2))
    if k <= 1:
        return Cond("cmp", op=draw(st.sampled_from(["<", "<=", ">", ">=", "==", "!="])),
                    left=_aff(draw, names), right=_aff(draw, names, small=True))
    if k == 2:
        m = draw(st.integers(2, 4))
        return Cond("mod", op=draw(st.sampled_from(["==", "!=", "<"])), left=_aff(draw, names),
                    modulus=m, residue=draw(st.integers(0, m - 1)))
    if k == 3:
        return Cond("not", args=(_cond(draw, names, depth + 1),))
    return Cond("and" if k == 4 else "or", args=tuple(_cond(draw, names, depth + 1) for _ in range(2)))


def _mod_cond(draw: Any, names: Sequence[str]) -> Cond:
    m = draw(st.integers(2, 7))
    return Cond("mod", op=draw(st.sampled_from(["==", "!=", "<"])), left=_aff(draw, names),
                modulus=m, residue=draw(st.integers(0, m - 1)))


@st.composite
def affine_nests(draw: Any, max_depth: int = 4, mod_guard: bool = False) -> GenNest:
    """(a) A random valid affine nest: depth 1..max_depth, parameters among N, M, K;
    with `mod_guard`, the innermost statement always sits under a C `%` guard."""
    params = tuple(sorted(draw(st.lists(st.sampled_from(PARAMS), min_size=1, max_size=3, unique=True))))
    depth = draw(st.integers(1, max_depth))
    counter = [0]

    def stmt(vars_: Sequence[str]) -> Stmt:
        counter[0] += 1
        sub = " + ".join(vars_[-2:]) if vars_ else "0"
        arr = draw(st.sampled_from(["A", "B"]))
        return Stmt(f"{arr}[{sub}] += 1.0;")

    def loop(level: int, outer: list[str]) -> Loop:
        var = "ijkl"[level]
        names = list(params) + outer
        inner_vars = [*outer, var]
        body: list[Any] = []
        if level + 1 < depth:
            child: Any = loop(level + 1, inner_vars)
            if draw(st.integers(0, 3)) == 0:
                child = If(_cond(draw, list(params) + inner_vars), (child,))
            body.append(child)
            if draw(st.integers(0, 3)) == 0:
                body.append(stmt(inner_vars))
        else:
            s: Any = stmt(inner_vars)
            if mod_guard:
                s = If(_mod_cond(draw, list(params) + inner_vars), (s,))
            elif draw(st.integers(0, 2)) == 0:
                s = If(_cond(draw, list(params) + inner_vars), (s,))
            body.append(s)
            if draw(st.integers(0, 4)) == 0:
                body.append(stmt(inner_vars))
        return Loop(var, _bound(draw, names, "max"), _bound(draw, names, "min"),
                    inclusive=draw(st.booleans()), step=draw(st.sampled_from([1, 1, 1, 2, 3])),
                    down=draw(st.integers(0, 4)) == 0, body=tuple(body))

    return GenNest(params, loop(0, []))


# --------------------------------------------------------------------------
# (b) mutated C, (c) raw bytes

_TOKEN = re.compile(r"\s+|[A-Za-z_]\w*|\d+|/\*|\*/|//|<<=|>>=|[-+*/%<>=!&|^]=|&&|\|\||\+\+|--|->|.", re.S)
INSERTS = ["{", "}", "(", ")", "[", "]", ";", ",", "for", "if", "else", "while", "#define X X\n",
           "#define F(a) F(a)+F(a)\n", "#if 1\n", "#endif\n", "/*", "*/", "//", "\"", "'", "\\\n",
           "99999999999999999999999999999999", "-2147483648", "0x7fffffffffffffff", "\u00f1", "\u03b1\u03b2",
           "\t", "\r\n", "\r", "\x00", "\ufeff", "#pragma omp parallel for\n", "N", "i", "i++", "+=", "%",
           "/", "?", ":", "min(", "int ", "double ", "return", "goto x;", "break;", "continue;", "...",
           "\U0001f30a"]


def tokens_of(text: str) -> list[str]:
    """A crude C tokenization that keeps whitespace (joining the list gives the text back)."""
    return _TOKEN.findall(text)


@st.composite
def mutated(draw: Any, base: str) -> str:
    """(b) `base` after 1..8 token deletions, swaps and insertions."""
    toks = tokens_of(base)
    for _ in range(draw(st.integers(1, 8))):
        op = draw(st.sampled_from(["delete", "swap", "insert", "duplicate"]))
        if not toks:
            toks = [draw(st.sampled_from(INSERTS))]
            continue
        k = draw(st.integers(0, len(toks) - 1))
        if op == "delete":
            del toks[k]
        elif op == "swap":
            j = draw(st.integers(0, len(toks) - 1))
            toks[k], toks[j] = toks[j], toks[k]
        elif op == "insert":
            toks.insert(k, draw(st.sampled_from(INSERTS)))
        else:
            toks.insert(k, toks[k])
    return "".join(toks)


def corpus_pieces(max_lines: int = 60) -> list[str]:
    """Windows of at most `max_lines` lines of every corpus file (one per function start)."""
    out = []
    for name in sorted(os.listdir(CORPUS)):
        if not name.endswith((".c", ".h")):
            continue
        with open(os.path.join(CORPUS, name), encoding="utf-8") as f:
            lines = f.read().split("\n")
        starts = [k for k, ln in enumerate(lines) if re.match(r"^\w.*\(", ln) and not ln.startswith("#")]
        for k in starts or [0]:
            out.append("\n".join(lines[k:k + max_lines]))
    return out


@st.composite
def mutated_sources(draw: Any) -> str:
    """(b) A mutated corpus window or a mutated generated nest."""
    if draw(st.booleans()):
        base = draw(st.sampled_from(corpus_pieces()))
    else:
        base = draw(affine_nests(max_depth=3)).source()
    return draw(mutated(base))


C_FRAGMENTS = [b"for (int i = 0; i < N; i++) ", b"{", b"}", b"A[i] += 1;", b"#define A(x) A(x)\n",
               b"/*", b"\xff\xfe", b"\xc3\x28", b"\xe2\x82", b"\x00", b"\r\n", b"\t", b"if (i % 2) ",
               b"\xf0\x9f\x8c\x8a", b"\\\n", b"#if\n", b"#pragma omp parallel for schedule(static, 0)\n"]

raw_bytes = st.one_of(
    st.binary(max_size=2000),
    st.lists(st.one_of(st.sampled_from(C_FRAGMENTS), st.binary(max_size=8)), max_size=60).map(b"".join),
)
"""(c) Raw bytes: arbitrary, or C fragments mixed with invalid UTF-8 and control bytes."""


# --------------------------------------------------------------------------
# Invariant checks (raise AssertionError with a short reason)


def fuzz_options(at: Mapping[str, int] | None = None, **kw: Any) -> Options:
    """Options of one fuzz case: a small time limit keeps a hard nest to seconds."""
    return Options(at=dict(at or {}), time_limit=FUZZ_TIME_LIMIT, **kw)


def check_locations(diags: Iterable[Any], text: str) -> None:
    """Every diagnostic has 1 <= line <= lines + 1, column >= 1 and end >= start."""
    n_lines = text.count("\n") + 1
    for d in diags:
        s = d.span
        where = f"{d.code} {s} ({d.message[:80]!r})"
        assert 1 <= s.line <= n_lines + 1, f"line out of range: {where}, {n_lines} lines"
        assert s.column >= 1, f"column < 1: {where}"
        assert (s.end_line, s.end_column) >= (s.line, s.column), f"end before start: {where}"
        assert s.end_line <= n_lines + 1, f"end line out of range: {where}"


def in_context(context: isl.Set | None, point: Mapping[str, int]) -> bool:
    """Whether a parameter point satisfies the nest's assumptions."""
    if context is None:
        return True
    s = context
    for i in range(s.dim(isl.dim_type.param)):
        name = s.get_dim_name(isl.dim_type.param, i)
        if name in point:
            s = s.fix_val(isl.dim_type.param, i, isl.Val.read_from_str(s.get_ctx(), str(point[name])))
    return not s.is_empty()


def _points(params: Sequence[str], rng: random.Random, n: int, lo: int = -2, hi: int = 9) -> list[dict[str, int]]:
    return [{p: rng.randint(lo, hi) for p in params} for _ in range(n)]


def check_formulas(result: Any, rng: random.Random, n_points: int = 4) -> int:
    """Every formula of every nest equals isl enumeration (engine.enumerate_count) at random
    small sizes in the nest's context; returns the number of comparisons made."""
    from tripcount.engine import enumerate_count

    compared = 0
    for nr in result.nests:
        items = [(lr.loop.domain, lr.trips, f"loop {lr.loop.var}") for lr in nr.loops]
        items += [(sr.stmt.domain, sr.count, f"statement {sr.stmt.id}") for sr in nr.statements]
        for dom, cnt, what in items:
            if dom is None or cnt.formula is None:
                continue
            names = [dom.get_dim_name(isl.dim_type.param, i) for i in range(dom.dim(isl.dim_type.param))]
            for pt in _points(names, rng, n_points):
                if not in_context(nr.nest.context, pt):
                    continue
                want = enumerate_count(dom, pt)  # reference: isl enumeration (Set.count_val)
                got = cnt.formula.evaluate(pt)
                assert got == want, f"{what}: formula gives {got}, isl enumeration {want} at {pt}"
                compared += 1
    return compared


@dataclass
class NestOutcome:
    """What one generated nest gave: comparisons made and refusals seen."""

    compared: int = 0
    refused: int = 0
    limited: int = 0
    skipped_points: int = 0


def printed_forms(formula: Any) -> list[tuple[str, list[dict[str, str]]]]:
    """Every text form a report prints for a formula: the gate's (plain_forms: factored
    when short, else expanded), the readable form (JSON pieces, text report, hover),
    and both plain printers whole."""
    from tripcount.engine.fmt import format_expanded, format_qpoly
    from tripcount.engine.readable import format_grouped, plain_forms

    with plain_forms():
        gate = [{"when": p.when, "expr": p.poly.to_expr()} for p in formula.pieces]
    return [
        ("gate", gate),
        ("readable", [{"when": p.when, "expr": p.poly.to_expr()} for p in formula.pieces]),
        ("grouped", [{"when": p.when, "expr": format_grouped(p.poly, format_qpoly)} for p in formula.pieces]),
        ("expanded", [{"when": p.when, "expr": format_expanded(p.poly)} for p in formula.pieces]),
    ]


def check_generated(gen: GenNest, rng: random.Random, n_points: int = 4) -> NestOutcome:
    """(a) Analyze a generated nest; its counts must equal direct execution (the independent
    reference) at the --at point and at random small sizes, and isl enumeration too."""
    from tripcount.engine import enumerate_count
    from tripcount.pipeline import analyze_text

    text = gen.source()
    out = NestOutcome()
    at = {p: rng.randint(0, 7) for p in gen.params}
    try:
        at_counts = gen.execute(at)
    except TooBig:
        at_counts = None
    fr = analyze_text(text, "generated.c", fuzz_options(at))
    assert_no_internal_errors(fr.all_diagnostics(), text)
    check_locations(fr.all_diagnostics(), text)
    codes = {d.code for d in fr.all_diagnostics()}
    if "TC310" in codes or "TC311" in codes or "TC301" in codes:
        out.limited += 1
    assert len(fr.nests) == 1, f"expected one nest, got {len(fr.nests)}: {[d.render() for d in fr.all_diagnostics()]}"
    nr = fr.nests[0]
    entries: list[tuple[int, Any, Any]] = []
    for lr in nr.loops:
        entries.append((lr.loop.span.line, lr.loop.domain, lr.trips))
    for sr in nr.statements:
        entries.append((sr.stmt.span.line, sr.stmt.domain, sr.count))
    lines_seen = {line for line, _, _ in entries}
    assert lines_seen == set(gen.lines), f"loops/statements at lines {sorted(lines_seen)}, generated {sorted(gen.lines)}"
    points = _points(gen.params, rng, n_points, lo=-1, hi=8)
    direct: list[tuple[dict[str, int], dict[int, int]]] = []
    for pt in points:
        try:
            direct.append((pt, gen.execute(pt)))
        except TooBig:
            out.skipped_points += 1
    for line, dom, cnt in entries:
        if cnt.formula is None and cnt.value is None:
            out.refused += 1
        if at_counts is not None and cnt.value is not None:
            # reference: direct execution of the same nest in Python with C semantics
            assert Fraction(cnt.value) == at_counts[line], \
                f"line {line}: value {cnt.value} at {at}, direct execution {at_counts[line]}\n{text}"
            out.compared += 1
        if cnt.formula is None:
            continue
        for pt, counts in direct:
            if not in_context(nr.nest.context, pt):
                continue
            got = cnt.formula.evaluate(pt)
            # reference: direct execution of the same nest in Python with C semantics
            assert got == counts[line], f"line {line}: formula gives {got} at {pt}, direct execution {counts[line]}\n{text}"
            for form, pieces in printed_forms(cnt.formula):
                # the text as printed (JSON pieces and the report; the gate's forms), read
                # back with tripcount.formula under C semantics
                shown = piecewise_value(pieces, pt)
                assert shown == counts[line], \
                    f"line {line}: printed {form} form {pieces} gives {shown} at {pt}, direct execution {counts[line]}\n{text}"
            if dom is not None:
                # reference: isl enumeration (Set.count_val)
                want = enumerate_count(dom, pt)
                assert want == counts[line], f"line {line}: isl enumeration {want} at {pt}, direct {counts[line]}"
            out.compared += 1
    return out


def check_text(text: str, rng: random.Random, path: str = "fuzz.c") -> tuple[Any, int]:
    """(b) Analyze any text: no exception, no internal error, valid locations, formulas equal
    enumeration.

    Returns the file result and the number of formula comparisons made."""
    from tripcount.pipeline import analyze_text

    at = {p: rng.randint(0, 6) for p in PARAMS}
    fr = analyze_text(text, path, fuzz_options(at))
    assert_no_internal_errors(fr.all_diagnostics(), text)
    check_locations(fr.all_diagnostics(), text)
    return fr, check_formulas(fr, rng, n_points=2)


def check_bytes(data: bytes, path: str) -> tuple[Any, int]:
    """(c) Write raw bytes to `path` and analyze the file: the invariants of check_text (the
    locations against the decoded text, without a byte order mark).

    Returns the file result and the number of formula comparisons made."""
    from tripcount.pipeline import analyze_file, decode_source

    with open(path, "wb") as f:
        f.write(data)
    fr = analyze_file(path, fuzz_options({"N": 4, "M": 3, "K": 2}))
    text, _ = decode_source(data)
    assert_no_internal_errors(fr.all_diagnostics(), repr(data[:500]))
    check_locations(fr.all_diagnostics(), text[1:] if text.startswith("\ufeff") else text)
    return fr, check_formulas(fr, random.Random(data), n_points=2)


def run_main(argv: Sequence[str], stdin: str = "") -> tuple[int, str, str]:
    """`main` in-process; an exception escaping it, or an internal error reported in any
    output format, fails the check."""
    from tripcount.cli import main

    out, err = io.StringIO(), io.StringIO()
    status = main(list(argv), stdin=io.StringIO(stdin), stdout=out, stderr=err)
    assert status in (0, 1, 2), f"exit status {status}"
    assert "Traceback" not in err.getvalue(), err.getvalue()[-2000:]
    internal = internal_codes_in(out.getvalue() + err.getvalue())
    assert not internal, f"internal error {internal} in the output of {list(argv)[:3]}:\n{out.getvalue()[-2000:]}"
    return status, out.getvalue(), err.getvalue()
