# Analysis: data dependences between the statement instances of a nest, and
# which loops may run in parallel.
#
# Method: memory-based dependence analysis on the integer sets of the model
# (the textbook construction; see e.g. Allen & Kennedy, "Optimizing Compilers
# for Modern Architectures", ch. 2-3). Two accesses of the same array element,
# at least one a write, by instances S[i] and T[j] with S[i] executed first,
# make a dependence: flow (write then read), anti (read then write) or output
# (write then write). Execution order is the nest's schedule: the loop
# variables (negated for loops that count down) interleaved with the textual
# position of each loop and statement in its parent. A dependence is carried
# by the loop at level k when both instances agree on the enclosing loops'
# variables above k and differ at k; it is loop-independent when they agree on
# every common loop.
#
# Memory-based flow dependences include pairs that an intermediate write
# overwrites (value-based analysis would drop them); the parallel verdicts are
# the same either way: when a carried flow dependence is overwritten inside
# the sink's iteration, the overwriting write makes a carried output
# dependence. Scalars written in the nest are arrays of no dimension; a scalar
# declared inside a loop body is a new variable in every iteration of that
# loop (and of the loops around it), so it is indexed by their variables.
#
# A loop is "reduction" when every dependence it carries is a statement's
# compound update `x op= e` (op one of + * & | ^, also min/max written as such
# is not recognised) of one element with itself, and no other access to that
# array or scalar occurs in the loop; "parallel" when it carries none;
# "sequential" otherwise.

from __future__ import annotations

import re
import time
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import islpy as isl

from tripcount import ir
from tripcount.analysis.balance.space import targets
from tripcount.diagnostics.balance import ParallelCandidate, ParallelLoopCarriesDependence
from tripcount.model import Loop, Nest, Statement
from tripcount.options import Options

if TYPE_CHECKING:
    from tripcount.analysis.results import NestResult
    from tripcount.budget import Budget

_dt = isl.dim_type
MAX_LISTED = 8  # dependences listed per loop in the JSON
REDUCTION_OPS = frozenset({"+=", "-=", "*=", "&=", "|=", "^="})
_KIND_ORDER = {"flow": 0, "anti": 1, "output": 2}
TIME_S = 2.0  # dependence analysis of one nest; past it, the loops not decided are "unknown"


@dataclass(frozen=True)
class Dependence:
    """One dependence between two accesses, carried by `loop` (None: loop-independent).

    `source`/`sink`: statement ids; `example`: one pair of iterations (loop variable -> value of the
    source's and the sink's enclosing loops) at the sizes given, when there were sizes to give.
    `distance`: per common loop, the constant difference sink - source of its variable, None where it
    varies.
    """

    kind: str  # "flow", "anti" or "output"
    array: str
    source: str
    sink: str
    loop: int | None
    distance: tuple[int | None, ...]
    reduction: bool
    example: tuple[dict[str, int], dict[str, int]] | None = None
    # per common loop, the least and largest sink - source difference of its variable (None: unbounded
    # that way), in the order of the loop variable's values (not of the loop's direction)
    bounds: tuple[tuple[int | None, int | None], ...] = ()

    def to_json(self) -> dict[str, Any]:
        """kind, array, source, sink, loop index, distance, direction, reduction, example pair."""
        return {"kind": self.kind, "array": self.array, "source": self.source, "sink": self.sink,
                "loop": self.loop, "distance": list(self.distance), "direction": direction(self.bounds),
                "reduction": self.reduction,
                "example": None if self.example is None else
                {"source": dict(self.example[0]), "sink": dict(self.example[1])}}


@dataclass(frozen=True)
class LoopVerdict:
    """Whether one loop may run its iterations in parallel, and the dependences that say so."""

    loop: int
    verdict: str  # "parallel", "reduction", "sequential" or "unknown"
    carried: tuple[Dependence, ...]
    why: str = ""  # for "unknown"

    def to_json(self) -> dict[str, Any]:
        """The loop's verdict and the dependences it carries (the first few)."""
        return {"verdict": self.verdict, "why": self.why or None,
                "carried": [d.to_json() for d in self.carried[:MAX_LISTED]],
                "carried_total": len(self.carried)}


@dataclass(frozen=True)
class Dependences:
    """Result of the dependence analysis of one nest."""

    loops: tuple[LoopVerdict, ...]
    independent: tuple[Dependence, ...]  # loop-independent dependences
    complete: bool  # False when a statement or access is not modelled (verdicts then say "unknown")
    note: str = ""
    summary: str = ""  # one line of the verdicts, with the loops' names (summary_text)
    timed_out: bool = False  # the pairs were not all examined within the time given

    def to_json(self) -> dict[str, Any]:
        """Completeness, the method note, and the loop-independent dependences (the first few)."""
        return {"complete": self.complete, "note": self.note, "summary": self.summary,
                "independent": [d.to_json() for d in self.independent[:MAX_LISTED]]}

    def text_lines(self) -> list[str]:
        """The report's line: every loop's verdict."""
        return [f"dependences: {self.summary} ({self.note})"] if self.summary else []

    def verdict(self, loop: int) -> LoopVerdict | None:
        """The verdict of the loop with this index."""
        return next((v for v in self.loops if v.loop == loop), None)


# --------------------------------------------------------------------------
# Accesses, scalars included


@dataclass(frozen=True)
class _Ref:
    stmt: Statement
    array: str
    write: bool
    rel: isl.Map  # { S[i] -> element } on the statement's domain
    update: str | None  # the compound operator when this access is `x op= e`'s target


def _scalar_refs(stmt: Statement, nest: Nest) -> list[tuple[str, bool, str | None]]:
    """(scalar name, is write, compound op) of the scalars a statement uses that the nest writes."""
    node = stmt.ir
    if node is None:
        return []
    out: list[tuple[str, bool, str | None]] = []
    loop_vars = {lp.var for lp in nest.loops} | {lp.display for lp in nest.loops}
    skip = loop_vars | set(nest.params) | set(nest.names)

    def target_name(e: ir.Expr) -> str | None:
        while isinstance(e, ir.Cast):
            e = e.operand
        return e.name if isinstance(e, ir.Name) else None

    targets: set[int] = set()
    for n in ir.walk(node):
        if isinstance(n, ir.Assign):
            name = target_name(n.target)
            if name is not None and name not in skip:
                targets.add(id(n.target))
                out.append((name, True, n.op if n.op != "=" else None))
                if n.op != "=":
                    out.append((name, False, n.op))
        elif isinstance(n, ir.IncDec):
            name = target_name(n.target)
            if name is not None and name not in skip:
                targets.add(id(n.target))
                out.append((name, True, "+=" if n.op == "++" else "-="))
                out.append((name, False, "+=" if n.op == "++" else "-="))
        elif isinstance(n, ir.Decl):
            for d in n.declarators:
                if d.init is not None and not d.dims:
                    out.append((d.name, True, None))
    for n in ir.walk(node):
        if isinstance(n, ir.Name) and id(n) not in targets and n.name not in skip:
            out.append((n.name, False, None))
    return out


def _refs(nest: Nest) -> tuple[list[_Ref], bool]:
    """Every access of the nest as a relation of the statement's instances; False when one is missing."""
    complete = True
    private_depth: dict[str, int] = {}
    for s in nest.statements:
        if isinstance(s.ir, ir.Decl):
            for d in s.ir.declarators:
                private_depth[d.name] = len(s.loops)
    scalar_uses = {s.id: _scalar_refs(s, nest) for s in nest.statements}
    written = {name for uses in scalar_uses.values() for name, w, _ in uses if w}
    refs: list[_Ref] = []
    for s in nest.statements:
        if s.domain is None:
            complete = False
            continue
        update_target = _update(s)
        for a in s.accesses:
            if a.map is None:
                complete = False
                continue
            op = update_target[1] if update_target and update_target[0] == a.array else None
            refs.append(_Ref(s, a.array, a.kind == "write", a.map.intersect_domain(s.domain), op))
        for name, w, op in scalar_uses[s.id]:
            if name not in written:
                continue
            refs.append(_Ref(s, "scalar " + name, w, _scalar_map(s, private_depth.get(name, 0)), op))
    return refs, complete


def _update(s: Statement) -> tuple[str, str] | None:
    """(array or scalar name, operator) when the statement is one compound update `x op= e`."""
    node = s.ir
    if not isinstance(node, ir.ExprStmt) or not isinstance(node.expr, (ir.Assign, ir.IncDec)):
        return None
    e = node.expr
    op = e.op if isinstance(e, ir.Assign) else ("+=" if e.op == "++" else "-=")
    if op not in REDUCTION_OPS:
        return None
    t = e.target
    while isinstance(t, ir.Cast):
        t = t.operand
    if isinstance(t, ir.ArrayRef):
        return t.array, op
    if isinstance(t, ir.Name):
        return t.name, op
    return None


def _scalar_map(s: Statement, depth: int) -> isl.Map:
    """{ S[i] -> [i_0 .. i_{depth-1}] }: a scalar, one per iteration of the loops around its declaration."""
    dom = s.domain
    assert dom is not None
    n = dom.dim(_dt.set)
    depth = min(depth, n)
    space = isl.Space.alloc(dom.get_ctx(), dom.dim(_dt.param), n, depth)
    for k in range(dom.dim(_dt.param)):
        space = space.set_dim_name(_dt.param, k, dom.get_dim_name(_dt.param, k))
    space = space.set_tuple_name(_dt.in_, dom.get_tuple_name())
    m = isl.Map.universe(space)
    for k in range(depth):
        c = isl.Constraint.alloc_equality(isl.LocalSpace.from_space(space))
        c = c.set_coefficient_val(_dt.in_, k, 1).set_coefficient_val(_dt.out, k, -1)
        m = m.add_constraint(c)
    return m.intersect_domain(dom)


# --------------------------------------------------------------------------
# Order


def _positions(nest: Nest) -> dict[tuple[str, int], int]:
    """Textual position of every loop and statement among the items of its parent loop."""
    items: dict[int | None, list[tuple[tuple[int, int], str, int]]] = {}
    for lp in nest.loops:
        items.setdefault(lp.parent, []).append(((lp.span.line, lp.span.column), "loop", lp.index))
    for k, s in enumerate(nest.statements):
        parent = s.loops[-1] if s.loops else None
        items.setdefault(parent, []).append(((s.span.line, s.span.column), "stmt", k))
    out: dict[tuple[str, int], int] = {}
    for lst in items.values():
        for pos, (_, kind, idx) in enumerate(sorted(lst)):
            out[(kind, idx)] = pos
    return out


def _common(a: Statement, b: Statement) -> int:
    n = 0
    for x, y in zip(a.loops, b.loops, strict=False):
        if x != y:
            break
        n += 1
    return n


def _ordered(rel: isl.Map, level: int | None, common: int, signs: Sequence[int],
             textual_before: bool) -> isl.Map:
    """Pairs of `rel` (source -> sink instances) that agree on the first loops and are ordered at
    `level` (the source's variable first in that loop's direction), or, with level None, agree on every
    common loop with the source textually first."""
    space = rel.get_space()
    ls = isl.LocalSpace.from_space(space)
    upto = common if level is None else level
    for k in range(upto):
        c = isl.Constraint.alloc_equality(ls).set_coefficient_val(_dt.in_, k, 1).set_coefficient_val(_dt.out, k, -1)
        rel = rel.add_constraint(c)
    if level is None:
        return rel if textual_before else rel.subtract(rel)
    sg = signs[level]
    # sg * (sink - source) >= 1
    c = (isl.Constraint.alloc_inequality(ls).set_coefficient_val(_dt.out, level, sg)
         .set_coefficient_val(_dt.in_, level, -sg).set_constant_val(isl.Val(-1)))
    return rel.add_constraint(c)


# --------------------------------------------------------------------------
# The analysis


def dependences(nest: Nest, at: dict[str, int] | None = None, time_s: float = TIME_S) -> Dependences:
    """Dependences of a nest and the parallel verdict of each loop (see the module header)."""
    deadline = time.monotonic() + time_s
    refs, complete = _refs(nest)
    pos = _positions(nest)
    index = {s.id: k for k, s in enumerate(nest.statements)}
    signs_of = {lp.index: (1 if lp.step > 0 else -1) for lp in nest.loops}
    carried: dict[int, list[Dependence]] = {lp.index: [] for lp in nest.loops}
    independent: list[Dependence] = []
    timed_out = False
    for src, snk in _pairs(refs):
        if time.monotonic() > deadline:
            timed_out = True
            break
        s, t = src.stmt, snk.stmt
        if src.rel.dim(_dt.out) != snk.rel.dim(_dt.out):
            # one array used with different numbers of subscripts (A[i][j] and A[i]): its elements
            # cannot be matched, so the loops stay undecided
            complete = False
            continue
        kind = "flow" if src.write and not snk.write else "anti" if snk.write and not src.write else "output"
        rel = src.rel.apply_range(snk.rel.reverse())  # { S[i] -> T[j] : same element }
        if rel.is_empty():
            continue
        m = _common(s, t)
        signs = [signs_of[s.loops[k]] for k in range(m)]
        for level in range(m):
            d = _ordered(rel, level, m, signs, False)
            if d.is_empty():
                continue
            red = (s.id == t.id and src.update is not None and snk.update is not None
                   and _only_update_in_loop(refs, src, s.loops[level], nest))
            carried[s.loops[level]].append(_dependence(kind, src, snk, s.loops[level], d, m, at, red))
        if m == len(s.loops) and m == len(t.loops):
            before = pos[("stmt", index[s.id])] < pos[("stmt", index[t.id])]
        else:
            # the one nested deeper: compare the positions of the items below the common loops
            before = _text_before(nest, s, t, m, pos)
        if before:
            d = _ordered(rel, None, m, signs, True)
            if not d.is_empty():
                independent.append(_dependence(kind, src, snk, None, d, m, at, False))
    verdicts = []
    for lp in nest.loops:
        # flow first, then anti, then output; constant distances before varying ones
        deps = sorted(carried[lp.index], key=lambda d: (_KIND_ORDER[d.kind], None in d.distance))
        if timed_out or not complete:
            if deps and not all(d.reduction for d in deps):
                verdicts.append(LoopVerdict(lp.index, "sequential", tuple(deps)))
            else:
                why = ("time limit of the dependence analysis reached" if timed_out
                       else "a statement or subscript is not modelled")
                verdicts.append(LoopVerdict(lp.index, "unknown", tuple(deps), why))
        elif not deps:
            verdicts.append(LoopVerdict(lp.index, "parallel", ()))
        elif all(d.reduction for d in deps):
            verdicts.append(LoopVerdict(lp.index, "reduction", tuple(deps)))
        else:
            verdicts.append(LoopVerdict(lp.index, "sequential", tuple(deps)))
    note = "memory-based; a scalar declared in a loop is private to it"
    return Dependences(tuple(verdicts), tuple(independent), complete and not timed_out, note, timed_out=timed_out)


def _pairs(refs: Sequence[_Ref]) -> Iterator[tuple[_Ref, _Ref]]:
    """Ordered pairs of accesses of one array with a write among them (source first, sink second)."""
    by_array: dict[str, list[_Ref]] = {}
    for r in refs:
        by_array.setdefault(r.array, []).append(r)
    for lst in by_array.values():
        if not any(r.write for r in lst):
            continue
        for a in lst:
            for b in lst:
                if a.write or b.write:
                    yield a, b


def _text_before(nest: Nest, s: Statement, t: Statement, m: int, pos: dict[tuple[str, int], int]) -> bool:
    """Whether s comes first in the text below their m common loops."""
    def item(x: Statement) -> int:
        if len(x.loops) > m:
            return pos[("loop", x.loops[m])]
        return pos[("stmt", nest.statements.index(x))]
    a, b = item(s), item(t)
    if a != b:
        return a < b
    return (s.span.line, s.span.column) < (t.span.line, t.span.column)


def _only_update_in_loop(refs: Sequence[_Ref], ref: _Ref, loop: int, nest: Nest) -> bool:
    """Whether the array or scalar of `ref` is used in `loop` only as the target of its compound update."""
    for r in refs:
        if r.array != ref.array or loop not in r.stmt.loops:
            continue
        if r.stmt.id != ref.stmt.id or r.update is None:
            return False
    # the update's value must not read the target (`s += s * x` is not a reduction)
    node = ref.stmt.ir
    if isinstance(node, ir.ExprStmt) and isinstance(node.expr, ir.Assign):
        name = ref.array.removeprefix("scalar ")
        for n in ir.walk(node.expr.value):
            if (isinstance(n, ir.Name) and n.name == name) or (isinstance(n, ir.ArrayRef) and n.array == name):
                return False
    return True


def _dependence(kind: str, src: _Ref, snk: _Ref, loop: int | None, d: isl.Map, common: int,
                at: dict[str, int] | None, reduction: bool) -> Dependence:
    bounds = _bounds(d, common)
    deltas = tuple(lo if lo is not None and lo == hi else None for lo, hi in bounds)
    example = _example(d, src.stmt, snk.stmt, at) if at is not None else None
    return Dependence(kind, src.array.removeprefix("scalar "), src.stmt.id, snk.stmt.id, loop, deltas,
                      reduction, example, bounds)


def direction(bounds: Sequence[tuple[int | None, int | None]]) -> list[str]:
    """Direction vector of distance bounds: per loop "0", "+", "-", "0+", "0-" or "*" (any sign)."""
    out = []
    for lo, hi in bounds:
        if lo is not None and hi is not None and lo == hi == 0:
            out.append("0")
        elif lo is not None and lo > 0:
            out.append("+")
        elif hi is not None and hi < 0:
            out.append("-")
        elif lo is not None and lo == 0:
            out.append("0+")
        elif hi is not None and hi == 0:
            out.append("0-")
        else:
            out.append("*")
    return out


def _bounds(d: isl.Map, common: int) -> tuple[tuple[int | None, int | None], ...]:
    """Per common loop, the least and largest sink - source difference of its variable over every size."""
    out: list[tuple[int | None, int | None]] = []
    for k in range(common):
        diff = d.project_out(_dt.in_, k + 1, d.dim(_dt.in_) - k - 1).project_out(_dt.in_, 0, k)
        diff = diff.project_out(_dt.out, k + 1, diff.dim(_dt.out) - k - 1).project_out(_dt.out, 0, k)
        delta = diff.deltas()
        delta = delta.project_out(_dt.param, 0, delta.dim(_dt.param)) if not delta.is_empty() else delta
        if delta.is_empty():
            out.append((None, None))
            continue
        lo, hi = delta.dim_min_val(0), delta.dim_max_val(0)
        out.append((int(lo.to_python()) if lo.is_int() else None, int(hi.to_python()) if hi.is_int() else None))
    return tuple(out)


def _example(d: isl.Map, s: Statement, t: Statement,
             at: dict[str, int]) -> tuple[dict[str, int], dict[str, int]] | None:
    """One pair of instances of the dependence at the sizes `at` (the lexicographically first)."""
    w = d.wrap()
    for k in range(w.dim(_dt.param)):
        name = w.get_dim_name(_dt.param, k)
        if name in at:
            w = w.fix_val(_dt.param, k, isl.Val(at[name]))
    if w.is_empty():
        return None
    w = w.lexmin()
    try:
        p = w.sample_point()
    except isl.Error:
        return None
    vals = [int(p.get_coordinate_val(_dt.set, k).to_python()) for k in range(w.dim(_dt.set))]
    n = len(s.loop_vars)
    return dict(zip(s.loop_vars, vals[:n], strict=True)), dict(zip(t.loop_vars, vals[n:], strict=True))


# --------------------------------------------------------------------------
# Texts for the report


def pair_text(d: Dependence) -> str:
    """'S1 at i=1 writes, S2 at i=2 reads' style description of a dependence's example (or its shape)."""
    acts = {"flow": ("writes", "reads"), "anti": ("reads", "writes"), "output": ("writes", "writes")}[d.kind]
    if d.example is None:
        return f"{d.source} {acts[0]} and a later iteration's {d.sink} {acts[1]} the same element"

    def at(it: dict[str, int]) -> str:
        return ", ".join(f"{k}={v}" for k, v in it.items())
    return f"{d.source} at {at(d.example[0])} {acts[0]} what {d.sink} at {at(d.example[1])} {acts[1]}"


def summary_text(nest: Nest, result: Dependences) -> str:
    """One line: each loop's verdict, with the first carried dependence of a sequential loop."""
    if result.loops and all(v.verdict == "unknown" for v in result.loops):
        return "not decided (" + result.loops[0].why + ")"
    parts = []
    for v in result.loops:
        var = nest.loops[v.loop].display or nest.loops[v.loop].var
        if v.verdict == "sequential" and v.carried:
            d = v.carried[0]
            dist = ""
            k = nest.loops[v.loop].depth
            if k < len(d.distance) and d.distance[k] is not None:
                dist = f", distance {d.distance[k]}"
            parts.append(f"{var} sequential ({d.kind} on {d.array}{dist})")
        elif v.verdict == "reduction":
            parts.append(f"{var} reduction ({', '.join(sorted({d.array for d in v.carried}))})")
        else:
            parts.append(f"{var} {v.verdict}")
    return ", ".join(parts)


# --------------------------------------------------------------------------
# OpenMP clauses that make a carried dependence harmless


_CLAUSE = re.compile(r"\b(reduction|private|lastprivate|firstprivate|linear)\s*\(([^)]*)\)")


def covered_names(pragma: str) -> set[str]:
    """Names listed in the reduction/private/lastprivate/firstprivate/linear clauses of a pragma."""
    out: set[str] = set()
    for _, body in _CLAUSE.findall(pragma):
        body = body.split(":", 1)[1] if ":" in body else body
        out.update(x.strip() for x in body.split(",") if x.strip())
    return out


def unsafe_parallel(nest: Nest, result: Dependences, loop: Loop) -> tuple[Dependence, ...]:
    """The dependences carried by an OpenMP work-sharing loop that its clauses do not cover."""
    v = result.verdict(loop.index)
    if v is None:
        return ()
    covered = covered_names(loop.omp.text) if loop.omp is not None else set()
    return tuple(d for d in v.carried if d.array not in covered)


# --------------------------------------------------------------------------
# The analysis unit (analysis/protocol.py): results and diagnostics


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Dependences of the nest (extra "dependences" on the nest and each loop); a parallel loop that
    carries an uncovered dependence is TC507, and the outermost loop that could run in parallel, in a
    nest with no parallel loop, is TC508."""
    nest = result.nest
    if not nest.loops:
        return
    at = {k: v for k, v in options.at.items() if k in nest.params}
    full = options.sizes(nest.params)
    if full is not None:
        at = full
    time_s = TIME_S if budget is None else max(0.05, min(TIME_S, budget.remaining()))
    # a nest without size parameters has its examples at no sizes at all
    r = dependences(nest, at if at or not nest.params else None, time_s)
    if r.timed_out and budget is not None:
        budget.mark_time_cut()
    r = replace(r, summary=summary_text(nest, r))
    result.extras["dependences"] = r
    loops = {lr.loop.index: lr for lr in result.loops}
    for v in r.loops:
        if v.loop in loops:
            loops[v.loop].extras["dependences"] = v
    found = targets(nest, options)
    for loop, omp, _origin in found:
        deps = list(unsafe_parallel(nest, r, loop))
        cur = loop
        for _ in range(max(1, omp.collapse) - 1):  # the collapsed loops run in parallel too
            if len(cur.children) != 1:
                break
            cur = nest.loops[cur.children[0]]
            deps += [d for d in unsafe_parallel(nest, r, cur) if d not in deps]
        if deps:
            d = deps[0]
            result.diagnostics.append(ParallelLoopCarriesDependence(
                loop.span, var=loop.display or loop.var, loop_at=loop.header, kind=d.kind, array=d.array,
                pair=pair_text(d)))
    if not found and r.complete:
        cand = _candidate(nest, r)
        if cand is not None:
            loop, v = cand
            scalars = sorted({d.array for d in v.carried})
            result.diagnostics.append(ParallelCandidate(
                loop.span, var=loop.display or loop.var, loop_at=loop.header,
                how=" but reductions" if v.verdict == "reduction" else "",
                clause=(f" with a reduction clause for {', '.join(scalars)}" if scalars else "")))


def _candidate(nest: Nest, r: Dependences) -> tuple[Loop, LoopVerdict] | None:
    """The outermost loop holding every statement of the nest whose iterations may run in parallel
    (reductions allowed on scalars only: an array reduction needs more than a clause)."""
    everywhere = [lp for lp in nest.loops if all(lp.index in s.loops for s in nest.statements)]
    scalars = {s_name for s in nest.statements for s_name in _written_scalars(s, nest)}
    for lp in sorted(everywhere, key=lambda x: x.depth):
        v = r.verdict(lp.index)
        if v is None:
            return None
        if v.verdict == "parallel":
            return lp, v
        if v.verdict == "reduction" and all(d.array in scalars for d in v.carried):
            return lp, v
    return None


def _written_scalars(s: Statement, nest: Nest) -> set[str]:
    return {name for name, w, _ in _scalar_refs(s, nest) if w}
