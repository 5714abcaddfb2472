# Affine stage: the declarations visible at a point of a function (scopes, types, writes between two points).

from __future__ import annotations

from dataclasses import dataclass

from tripcount import ir
from tripcount.affine.depth import DeepCut
from tripcount.affine.writes import collect_writes, unparsed_writes
from tripcount.ir import Span

# --------------------------------------------------------------------------
# Declarations visible to a function


@dataclass(frozen=True)
class VarDecl:
    """A declared name: scalar, array or pointer."""

    name: str
    type_name: str
    pointer: int
    dims: tuple[ir.Expr | None, ...]
    init: ir.Expr | None
    scope: str  # "global", "param" or "local"
    span: Span

    @property
    def is_array(self) -> bool:
        """Arrays and pointers (subscriptable)."""
        return bool(self.dims) or self.pointer > 0

    @property
    def is_const(self) -> bool:
        """Declared `const`."""
        return "const" in self.type_name.split()


def _before(a: Span, b: Span) -> bool:
    return (a.line, a.column) < (b.line, b.column)


class FunctionInfo:
    """Declarations and assignments of one function (plus the globals)."""

    def __init__(self, fn: ir.Function, globals_: list[VarDecl], cuts: list[DeepCut] | None = None) -> None:
        self.fn = fn
        self.globals = {g.name: g for g in globals_}
        self.cuts = {id(c.node): c for c in cuts or ()}  # code cut for its depth, by its ir.Unparsed
        self.cuts_reported: set[int] = set()
        self.params = {
            p.name: VarDecl(p.name, p.ctype, p.pointer, p.dims, None, "param", p.span)
            for p in fn.params
        }
        # (declaration, span of the block or `for` it is visible in)
        self.locals: list[tuple[VarDecl, Span]] = []
        for n in ir.walk(fn.body):
            scope = n.span
            decls: list[ir.Decl] = []
            if isinstance(n, ir.Block):
                decls = [x for x in n.body if isinstance(x, ir.Decl)]
            elif isinstance(n, ir.For) and isinstance(n.init, ir.Decl):
                decls = [n.init]
            for x in decls:
                for d in x.declarators:
                    self.locals.append((VarDecl(d.name, x.ctype, d.pointer, d.dims, d.init, "local", d.span), scope))
        self.locals.sort(key=lambda t: (t[0].span.line, t[0].span.column))
        self.writes = collect_writes(fn.body)

    def lookup(self, name: str, at: Span) -> VarDecl | None:
        """The declaration of `name` visible at `at` (latest local before it, else parameter, else global)."""
        best = None
        for d, scope in self.locals:
            if d.name == name and _before(d.span, at) and _inside(at, scope):
                best = d
        if best is not None:
            return best
        return self.params.get(name) or self.globals.get(name)

    def scalar_types(self, at: Span) -> dict[str, str]:
        """C types of the scalars (not arrays or pointers) visible at `at`."""
        out: dict[str, str] = {}
        for d in list(self.globals.values()) + list(self.params.values()):
            if not d.is_array:
                out[d.name] = d.type_name
        for d, scope in self.locals:
            if not d.is_array and _before(d.span, at) and _inside(at, scope):
                out[d.name] = d.type_name
        return out

    def written_between(self, name: str, start: Span, end: Span) -> bool:
        """Whether `name` is (or may be, in unread code) assigned in the function between two positions."""
        stop = Span.point(end.end_line, end.end_column)
        for s in self.writes.scalars.get(name, ()):
            if _before(start, s) and _before(s, stop):
                return True
        for text, at in zip(self.writes.unparsed, self.writes.unparsed_at, strict=True):
            if _before(start, at) and _before(at, stop) and unparsed_writes(text, name):
                return True
        return False


def _inside(at: Span, scope: Span) -> bool:
    return not _before(at, scope) and _before(Span.point(at.line, at.column), Span.point(scope.end_line, scope.end_column))


def global_decls(unit: ir.TranslationUnit) -> list[VarDecl]:
    """Global declarations of a translation unit."""
    out = []
    for g in unit.globals:
        for d in g.declarators:
            out.append(VarDecl(d.name, g.ctype, d.pointer, d.dims, d.init, "global", d.span))
    return out
