# Affine stage: state of the walk over one nest (loop bodies, guards, name bindings) and name lookup.

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

from tripcount import ir
from tripcount.affine.convert import NotAffine
from tripcount.affine.lin import Cond, Lin, var
from tripcount.diagnostics import Diagnostic
from tripcount.ir import Span


class Builder(Protocol):
    """What the walk needs of the nest builder (affine/build.py): diagnostics and symbol notes.

    Declared here, below the builder, so that the helpers the builder calls
    do not import it back.
    """

    symbols_noted: set[tuple[Any, ...]]
    _pending_symbols: list[tuple[tuple[Any, ...], Span]]
    info: Any  # the declarations of the function (affine/decls.py)

    def diag(self, cls: type[Diagnostic], span: Span, **args: Any) -> Diagnostic: ...

    def symbol(self, node: ir.Expr, text: str, res: _Resolver) -> Lin: ...


@dataclass
class _Body:
    """State of one loop body during the walk: conditions of `continue`s seen so far."""

    kills: list[Cond] = field(default_factory=list)
    dead: Diagnostic | None = None
    loop: int | None = None
    foreign: bool = False  # the body of a while/do loop: its `continue`s are not ours


@dataclass
class _Ctx:
    loops: tuple[int, ...]
    guards: tuple[Cond, ...]
    unknown: Diagnostic | None
    env: dict[str, tuple[Any, ...]]
    body: _Body


class _Resolver:
    """Name lookup for conversions inside a nest (or before it, for invariant locals)."""

    def __init__(self, builder: Builder, env: dict[str, tuple[Any, ...]] | None, loop_ok: bool = True) -> None:
        self.b = builder
        self.env = env or {}
        self.loop_ok = loop_ok

    def name(self, node: ir.Name) -> Lin:
        n = node.name
        entry = self.env.get(n)
        b = self.b
        if entry is not None:
            if entry[0] == "loop":
                return var(("loop", entry[1]), n)
            if b.nest_writes.writes(n):
                raise NotAffine("written", node, f"'{n}' is assigned in the nest", name=n)
            if entry[0] == "subst":
                return entry[1]
            if entry[0] == "error":
                raise entry[1]
            if entry[0] == "array":
                raise NotAffine("array", node, f"array '{n}' used as a value")
            raise NotAffine("other", node, f"'{n}' has no known value here", name=n)
        if b.outer_writes.writes(n):
            raise NotAffine("written", node, f"'{n}' is assigned in the nest", name=n)
        return b.outer_name(node)

    def opaque(self, node: ir.Expr, text: str) -> Lin:
        return self.b.symbol(node, text, self)
