# Affine stage: its output, affine loop nests (loops, statements, accesses).

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from tripcount import ir
from tripcount.affine.lin import TRUE, Cond, Lin
from tripcount.diagnostics import Diagnostic
from tripcount.ir import Span

# --------------------------------------------------------------------------
# Affine nests: the output of this stage


@dataclass
class AAccess:
    """One array reference; subscripts None when not affine."""

    array: str
    kind: str
    subscripts: tuple[Lin, ...] | None
    texts: tuple[str, ...]
    span: Span
    elem_type: str | None
    elem_size: int | None
    extents: tuple[str | None, ...] = ()
    # a flattened subscript P*X + R (see flatten.py): (X, R, P), read as [X][R] where 0 <= R < P is proven
    flat: tuple[Lin, Lin, Lin] | None = None


@dataclass
class ALoop:
    """A `for` loop: its iteration constraint over the enclosing variables and its own."""

    index: int
    display: str
    depth: int
    parent: int | None
    span: Span
    header: Span
    omp: ir.OmpClauses | None
    guard: Cond = TRUE  # conditions between the parent's body and this loop
    constraint: Cond | None = None  # own iterations; None when refused
    step: int = 1
    refusal: Diagnostic | None = None  # why this loop (or an enclosing construct) is not counted
    children: list[int] = field(default_factory=list)
    uses_ne: bool = False  # the condition used `!=` (termination must be checked)
    unbounded_detail: str = ""  # set when no part of the condition limits the variable
    cond_text: str = ""

    @property
    def key(self) -> tuple[Any, ...]:
        """The variable key of this loop."""
        return ("loop", self.index)


@dataclass
class AStmt:
    """A statement with the guard that leads to it from its innermost loop's body."""

    id: str
    node: ir.Stmt
    span: Span
    text: str
    loops: tuple[int, ...]
    guard: Cond = TRUE
    refusal: Diagnostic | None = None
    accesses: list[AAccess] = field(default_factory=list)


@dataclass
class ANest:
    """One outermost loop with everything inside, in the affine language."""

    path: str
    function: str
    span: Span
    loops: list[ALoop]
    stmts: list[AStmt]
    diagnostics: list[Diagnostic]
    names: dict[tuple[Any, ...], str]  # variable key -> isl name
    params: tuple[str, ...]  # isl names of the size parameters, sorted
    symbolic: dict[str, str]  # isl name -> C text it stands for (symbols and mangled names)
    source: str = ""
    scalar_types: dict[str, str] = field(default_factory=dict)  # C types of scalars visible at the nest
