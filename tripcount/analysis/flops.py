# Analysis: floating-point work, loads and stores of every statement.
#
# From the IR of a statement (an expression statement or a declaration with
# initializers) this module counts, per execution, the floating-point
# operations by kind -- add (additions and subtractions), mul, div, and
# "other" for math-library calls, kept by call name -- and the array element
# loads and stores. Multiplying by the statement's execution count (an engine
# Piecewise) gives the work as a formula; the nest total is the sum.
#
# What counts as a flop (common practice in dense linear algebra operation
# counts, e.g. Golub & Van Loan's):
#   * an arithmetic operator whose operands are floating (`+ - * /`), a
#     compound assignment (`+=` is one add), `++`/`--` on a floating variable;
#   * a call to a math-library function (sqrt, exp, fabs, ...) counts once as
#     "other" under its name; fma() counts as one mul plus one add;
#   * never: subscripts (address arithmetic), integer-typed arithmetic, casts,
#     unary minus, comparisons and logical operators, calls of unknown functions.
# Types come from the declared element types of arrays, the declarations seen
# in the nest, literals, and the loop variables and size parameters (integers).
# When the type of an operation is unknown (snippets without declarations) it
# is counted unless the statement's target is known to be an integer.
# Loads and stores are array element references; repeated identical references
# within one statement count once (a compiler keeps them in a register), and
# scalar variables are registers (common practice), so they are not memory
# traffic.

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

from tripcount import ir
from tripcount.analysis.results import Count, NestResult, StatementResult
from tripcount.ctable import FUSED_CALLS, INT_CALLS, math_call, scalar_kind
from tripcount.model import Statement

KINDS = ("add", "mul", "div", "other")


def type_class(type_name: str | None) -> str | None:
    """'float' or 'int' for a C type name, None when unknown (pointers count as their base type)."""
    return scalar_kind(type_name)


@dataclass
class OpCounts:
    """Floating-point operations of one execution of a statement."""

    add: int = 0
    mul: int = 0
    div: int = 0
    calls: dict[str, int] = field(default_factory=dict)  # "other": math calls by name
    notes: list[str] = field(default_factory=list)

    @property
    def other(self) -> int:
        """Math-library calls, all names together."""
        return sum(self.calls.values())

    def total(self) -> int:
        """All flops of one execution."""
        return self.add + self.mul + self.div + self.other

    def by_kind(self) -> dict[str, int]:
        """{'add': .., 'mul': .., 'div': .., 'other': ..}."""
        return {"add": self.add, "mul": self.mul, "div": self.div, "other": self.other}

    def merge(self, other: OpCounts) -> None:
        """Add another statement's (or branch's) counts to these."""
        self.add += other.add
        self.mul += other.mul
        self.div += other.div
        for k, v in other.calls.items():
            self.calls[k] = self.calls.get(k, 0) + v
        for n in other.notes:
            if n not in self.notes:
                self.notes.append(n)


class _Counter:
    """Walks one statement's IR: infers operand types and counts floating operations."""

    def __init__(self, types: Mapping[str, str | None], arrays: Mapping[str, str | None],
                 int_names: Iterable[str]) -> None:
        self.types = types
        self.arrays = arrays
        self.int_names = set(int_names)
        self.ops = OpCounts()
        self.target_int = False  # the statement assigns an integer: unknown-typed ops do not count

    # --- types
    def tclass(self, e: ir.Expr) -> str | None:
        """'float', 'int' or None (unknown) for an expression."""
        if isinstance(e, ir.FloatLit):
            return "float"
        if isinstance(e, ir.IntLit):
            return "int"
        if isinstance(e, ir.Name):
            if e.name in self.int_names:
                return "int"
            if e.name in self.types:
                return type_class(self.types[e.name])
            return None
        if isinstance(e, ir.ArrayRef):
            return type_class(self.arrays.get(e.array))
        if isinstance(e, ir.Cast):
            return type_class(e.ctype)
        if isinstance(e, ir.Unary):
            if e.op in ("!",):
                return "int"
            return self.tclass(e.operand)
        if isinstance(e, ir.Binary):
            if e.op in ("<", "<=", ">", ">=", "==", "!=", "&&", "||", "%", "<<", ">>", "&", "|", "^"):
                return "int"
            if e.op == ",":
                return self.tclass(e.right)
            return _combine(self.tclass(e.left), self.tclass(e.right))
        if isinstance(e, ir.Ternary):
            return _combine(self.tclass(e.then), self.tclass(e.other))
        if isinstance(e, ir.Call):
            if e.func in INT_CALLS:
                return "int"
            if math_call(e.func):
                return "float"
            return None
        if isinstance(e, ir.Assign):
            return self.tclass(e.target)
        if isinstance(e, ir.IncDec):
            return self.tclass(e.target)
        return None

    def counts(self, t: str | None) -> bool:
        """Whether an operation of type class `t` is a flop under the rules above."""
        return t == "float" or (t is None and not self.target_int)

    # --- counting
    def stmt(self, s: ir.Stmt) -> None:
        """Count one IR statement (expression statement or declaration)."""
        if isinstance(s, ir.ExprStmt):
            self.target_int = self._target_is_int(s.expr)
            self.expr(s.expr)
        elif isinstance(s, ir.Decl):
            self.target_int = type_class(s.ctype) == "int"
            for d in s.declarators:
                if d.init is not None and not d.pointer:
                    self.expr(d.init)
        elif isinstance(s, ir.Block):
            for inner in s.body:
                self.stmt(inner)

    def _target_is_int(self, e: ir.Expr) -> bool:
        if isinstance(e, ir.Assign | ir.IncDec):
            return self.tclass(e.target) == "int"
        return False

    def expr(self, e: ir.Expr) -> None:
        """Count the operations of an expression (subscripts are skipped: address arithmetic)."""
        if isinstance(e, ir.Binary):
            self.expr(e.left)
            self.expr(e.right)
            kind = {"+": "add", "-": "add", "*": "mul", "/": "div"}.get(e.op)
            if kind and self.counts(self.tclass(e)):
                self._add(kind)
        elif isinstance(e, ir.Unary | ir.Cast):
            self.expr(e.operand)
        elif isinstance(e, ir.Assign):
            if not isinstance(e.target, ir.ArrayRef):
                self.expr(e.target)
            self.expr(e.value)
            kind = {"+=": "add", "-=": "add", "*=": "mul", "/=": "div"}.get(e.op)
            if kind and self.counts(_combine(self.tclass(e.target), self.tclass(e.value))):
                self._add(kind)
        elif isinstance(e, ir.IncDec):
            if self.tclass(e.target) == "float":  # counters on unknown types are integers in practice
                self._add("add")
        elif isinstance(e, ir.Call):
            for a in e.args:
                self.expr(a)
            name = math_call(e.func)
            if name in FUSED_CALLS:
                for kind in FUSED_CALLS[name]:
                    self._add(kind)
            elif name is not None:
                self.ops.calls[name] = self.ops.calls.get(name, 0) + 1
            elif e.func not in INT_CALLS:
                note = f"call of {e.func}() not counted (not a math-library function)"
                if note not in self.ops.notes:
                    self.ops.notes.append(note)
        elif isinstance(e, ir.Ternary):
            self.expr(e.cond)
            a, b = self._branch(e.then), self._branch(e.other)
            self.ops.merge(a if a.total() >= b.total() else b)
            if a.total() != b.total():
                note = "conditional expression: the costlier branch is counted"
                if note not in self.ops.notes:
                    self.ops.notes.append(note)
        # ArrayRef: the subscripts are integer address arithmetic; Name, literals, Opaque: nothing

    def _branch(self, e: ir.Expr) -> OpCounts:
        saved = self.ops
        self.ops = OpCounts()
        self.expr(e)
        out, self.ops = self.ops, saved
        return out

    def _add(self, kind: str) -> None:
        setattr(self.ops, kind, getattr(self.ops, kind) + 1)


def _combine(a: str | None, b: str | None) -> str | None:
    """Usual arithmetic conversions, reduced to float/int/unknown."""
    if a == "float" or b == "float":
        return "float"
    if a == "int" and b == "int":
        return "int"
    return None


def declared_types(statements: Iterable[Statement]) -> dict[str, str]:
    """Scalar names declared by the nest's own statements (`double r = ...`), with their types."""
    out: dict[str, str] = {}
    for s in statements:
        if isinstance(s.ir, ir.Decl):
            for d in s.ir.declarators:
                if not d.dims:
                    out[d.name] = s.ir.ctype + ("*" * d.pointer)
    return out


def statement_ops(stmt: ir.Stmt | None, types: Mapping[str, str | None] | None = None,
                  arrays: Mapping[str, str | None] | None = None,
                  int_names: Iterable[str] = ()) -> OpCounts:
    """Floating-point operations of one execution of an IR statement.

    `types`: scalar name -> C type; `arrays`: array name -> element type;
    `int_names`: names known to be integers (loop variables, size parameters).
    """
    c = _Counter(types or {}, arrays or {}, int_names)
    if stmt is not None:
        c.stmt(stmt)
    return c.ops


def memory_refs(stmt: Statement) -> tuple[int, int]:
    """(loads, stores) of one execution: distinct array element references by kind."""
    reads = {(a.array, a.subscripts) for a in stmt.accesses if a.kind == "read"}
    writes = {(a.array, a.subscripts) for a in stmt.accesses if a.kind == "write"}
    return len(reads), len(writes)


# --------------------------------------------------------------------------
# Results attached to statements and nests


def scaled(count: Count, weight: int) -> Count:
    """`weight` times a statement count (formula and value)."""
    formula = count.formula.scale(weight) if count.formula is not None else None
    value = count.value * weight if count.value is not None else None
    note = None if formula is not None or count.formula is not None else count.note
    return Count(value=_norm(value), formula=formula, note=note, exact=count.exact)


def add_counts(counts: list[Count]) -> Count:
    """Sum of counts; the formula is dropped (with a note) when one is missing."""
    value: int | Fraction | None = 0
    for c in counts:
        if value is not None:
            value = None if c.value is None else value + c.value
    formula: Any = None
    note = None
    if any(c.formula is None for c in counts):
        note = "formula not available for every statement"
    elif counts:
        from tripcount.engine import add_all

        formula = add_all([c.formula for c in counts])
    if not counts:
        value = 0
    return Count(value=_norm(value), formula=formula, note=note)


def _norm(v: int | Fraction | None) -> int | Fraction | None:
    if isinstance(v, Fraction) and v.denominator == 1:
        return int(v)
    return v


@dataclass
class WorkCount:
    """A per-execution weight times the statement count(s): one flop kind, loads or stores."""

    per_execution: int | None
    count: Count

    def to_json(self) -> dict[str, Any]:
        """Count object plus `per_execution` (None for nest totals)."""
        out = self.count.to_json()
        if self.per_execution is not None:
            out["per_execution"] = self.per_execution
        return out


@dataclass
class Flops:
    """Flops of a statement (per execution and in total) or of a whole nest, by kind."""

    ops: OpCounts
    total: WorkCount
    kinds: dict[str, WorkCount]
    calls: dict[str, WorkCount]
    per_statement: bool = True

    @property
    def count(self) -> Count:
        """The total flop count (formula and value), for other analyses (balance)."""
        return self.total.count

    @property
    def per_execution(self) -> int:
        """Flops of one execution (statement) -- the weight of the statement count."""
        return self.ops.total()

    def to_json(self) -> dict[str, Any]:
        """Count object plus `per_execution`, `by_kind` (add, mul, div, other with calls) and notes."""
        out = self.total.to_json()
        by_kind: dict[str, Any] = {k: self.kinds[k].to_json() for k in KINDS}
        by_kind["other"]["calls"] = {name: wc.to_json() for name, wc in sorted(self.calls.items())}
        out["by_kind"] = by_kind
        if self.ops.notes:
            out["notes"] = list(self.ops.notes)
        return out

    def text_lines(self) -> list[str]:
        """One line under the statement: flops per run and by kind."""
        if not self.per_statement or self.ops.total() == 0:
            return []
        parts = [f"{v} {k}" for k, v in self.ops.by_kind().items() if v and k != "other"]
        parts += [f"{v} {name}" for name, v in sorted(self.ops.calls.items())]
        return [f"flops {self.ops.total()} per run ({', '.join(parts)})"]


def statement_flops(sr: StatementResult, types: Mapping[str, str | None], arrays: Mapping[str, str | None],
                    int_names: Iterable[str]) -> Flops:
    """Flops of one statement: per execution from the IR, times its execution count."""
    ops = statement_ops(sr.stmt.ir, types, arrays, int_names)
    if sr.stmt.ir is None:
        ops.notes.append("statement text not available: flops not counted")
    total = WorkCount(ops.total(), scaled(sr.count, ops.total()))
    kinds = {k: WorkCount(v, scaled(sr.count, v)) for k, v in ops.by_kind().items()}
    calls = {name: WorkCount(v, scaled(sr.count, v)) for name, v in ops.calls.items()}
    return Flops(ops, total, kinds, calls)


def nest_flops(items: list[Flops]) -> Flops:
    """Total flops of a nest: the sum of its statements', by kind."""
    ops = OpCounts()
    for f in items:
        ops.merge(f.ops)
    total = WorkCount(None, add_counts([f.total.count for f in items]))
    kinds = {k: WorkCount(None, add_counts([f.kinds[k].count for f in items])) for k in KINDS}
    names = sorted({n for f in items for n in f.calls})
    calls = {n: WorkCount(None, add_counts([f.calls[n].count for f in items if n in f.calls])) for n in names}
    return Flops(ops, total, kinds, calls, per_statement=False)


def analyze(result: NestResult, options: Any = None, budget: Any = None) -> Flops:
    """Attach `flops`, `loads`, `stores` to every statement; returns the nest total flops.

    Also sets the nest extras `flops`, `loads` and `stores` (totals). The C
    types of scalars declared outside the nest come from the nest
    (Nest.scalar_types). No isl work: `budget` is not needed.
    """
    nest = result.nest
    types: dict[str, str | None] = dict(getattr(nest, "scalar_types", None) or {})
    types.update(declared_types(nest.statements))
    arrays: dict[str, str | None] = {}
    for s in nest.statements:
        for a in s.accesses:
            if a.elem_type and not arrays.get(a.array):
                arrays[a.array] = a.elem_type
    # loop variables and size parameters are integers (under their C names too)
    int_names = set(nest.params) | set(getattr(nest, "names", None) or {}) | {lp.var for lp in nest.loops}
    per_stmt: list[Flops] = []
    loads: list[Count] = []
    stores: list[Count] = []
    for sr in result.statements:
        f = statement_flops(sr, types, arrays, int_names)
        nl, ns = memory_refs(sr.stmt)
        sr.extras["flops"] = f
        sr.extras["loads"] = WorkCount(nl, scaled(sr.count, nl))
        sr.extras["stores"] = WorkCount(ns, scaled(sr.count, ns))
        per_stmt.append(f)
        loads.append(sr.extras["loads"].count)
        stores.append(sr.extras["stores"].count)
    total = nest_flops(per_stmt)
    result.extras["flops"] = total
    result.extras["loads"] = WorkCount(None, add_counts(loads))
    result.extras["stores"] = WorkCount(None, add_counts(stores))
    return total
