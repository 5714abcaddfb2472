# Stage 2b of the pipeline: parse-tree callbacks -> IR.
#
# The lark Transformer below runs inside the LALR parser (callbacks fire on
# each reduction, so no parse tree is built and deep nesting needs no Python
# recursion). It only builds ir.py dataclasses. Every rule sees all its
# tokens (the parser keeps punctuation), which gives exact spans; source
# text for ExprStmt/Decl/Opaque is sliced from the user's original file, so
# macro invocations appear as written.

from __future__ import annotations

from dataclasses import replace
from typing import Any

from lark import Token, Transformer

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics import source as d
from tripcount.frontend.lexer import SourceMap, char_value, int_value
from tripcount.frontend.scanner import resolve_typedef

# How deep the OpenMP region rewrite follows nested statements.
MAX_REGION_DEPTH = 200


class PragmaToken(Token):
    """The parser's token for `#pragma omp ...`; `omp` holds the clauses read from it."""

    __slots__ = ("omp",)


def span_of(x: Any) -> ir.Span:
    """The span of a token, an IR node or a helper value."""
    if isinstance(x, Token):
        return ir.Span(x.line, x.column, x.end_line, x.end_column)
    return x.span


def cover(a: Any, b: Any) -> ir.Span:
    """The span from the start of `a` to the end of `b`."""
    return span_of(a).cover(span_of(b))


class _Words:
    """Declaration specifiers (or a struct/union/enum tag) read so far."""

    __slots__ = ("text", "span")

    def __init__(self, text: str, span: ir.Span) -> None:
        self.text = text
        self.span = span


class _Declarator:
    """A declarator before the initializer is known."""

    __slots__ = ("name", "pointer", "dims", "span")

    def __init__(self, name: str, pointer: int, dims: tuple, span: ir.Span) -> None:
        self.name = name
        self.pointer = pointer
        self.dims = dims
        self.span = span


class _Spanned:
    """A punctuation-only part (pointer star, array dimension) with its span."""

    __slots__ = ("value", "span")

    def __init__(self, value: Any, span: ir.Span) -> None:
        self.value = value
        self.span = span


class Context:
    """What the callbacks need to know about the file being read."""

    def __init__(self, smap: SourceMap, diags: list[Diagnostic]) -> None:
        self.smap = smap
        self.diags = diags
        # typedef name -> (the type it stands for, pointer levels it adds), filled by the scanner
        self.typedefs: dict[str, tuple[str, int]] = {}


class IRBuilder(Transformer):
    """Callbacks of the grammar in grammar/loops.lark; each returns an IR node."""

    def __init__(self) -> None:
        super().__init__(visit_tokens=False)
        self.ctx: Context | None = None

    # ------------------------------------------------------------ helpers
    def _text(self, span: ir.Span) -> str:
        return self.ctx.smap.slice(span) if self.ctx else ""

    # ------------------------------------------------------------ entry points
    def body_start(self, ch: list) -> Any:
        return ch[0]

    item_start = expr_start = decl_start = body_start

    # ------------------------------------------------------------ statements
    def compound(self, ch: list) -> ir.Block:
        return ir.Block(cover(ch[0], ch[-1]), tuple(ch[1:-1]))

    def expr_stmt(self, ch: list) -> ir.ExprStmt:
        e = ch[0]
        return ir.ExprStmt(cover(e, ch[1]), e, self._text(e.span))

    def empty_stmt(self, ch: list) -> ir.Empty:
        return ir.Empty(span_of(ch[0]))

    def if_then(self, ch: list) -> ir.If:
        return ir.If(cover(ch[0], ch[4]), ch[2], ch[4], None)

    def if_else(self, ch: list) -> ir.If:
        return ir.If(cover(ch[0], ch[6]), ch[2], ch[4], ch[6])

    def _init_stmt(self, e: ir.Expr | None) -> ir.ExprStmt | None:
        if e is None:
            return None
        return ir.ExprStmt(e.span, e, self._text(e.span))

    def for_expr(self, ch: list) -> ir.For:
        kw, _, init, _, cond, _, step, rpar, body = ch
        return ir.For(cover(kw, body), self._init_stmt(init), cond, step, body, cover(kw, rpar))

    def for_decl(self, ch: list) -> ir.For:
        kw, _, decl, cond, _, step, rpar, body = ch
        return ir.For(cover(kw, body), decl, cond, step, body, cover(kw, rpar))

    def while_stmt(self, ch: list) -> ir.While:
        return ir.While(cover(ch[0], ch[4]), ch[2], ch[4])

    def do_stmt(self, ch: list) -> ir.DoWhile:
        return ir.DoWhile(cover(ch[0], ch[6]), ch[1], ch[4])

    def switch_stmt(self, ch: list) -> ir.Switch:
        return ir.Switch(cover(ch[0], ch[4]), ch[2], ch[4])

    def jump(self, ch: list) -> ir.Jump:
        return ir.Jump(cover(ch[0], ch[-1]), str(ch[0]))

    def jump_return(self, ch: list) -> ir.Jump:
        return ir.Jump(cover(ch[0], ch[-1]), "return", ch[1])

    def jump_goto(self, ch: list) -> ir.Jump:
        return ir.Jump(cover(ch[0], ch[-1]), "goto", None, str(ch[1]))

    def label(self, ch: list) -> ir.Labeled:
        return ir.Labeled(cover(ch[0], ch[2]), str(ch[0]), ch[2])

    def case_label(self, ch: list) -> ir.Labeled:
        return ir.Labeled(cover(ch[0], ch[3]), "case", ch[3])

    def default_label(self, ch: list) -> ir.Labeled:
        return ir.Labeled(cover(ch[0], ch[2]), "default", ch[2])

    def pragma_stmt(self, ch: list) -> ir.Stmt:
        return self.attach_pragma(ch[0], ch[1])

    def attach_pragma(self, pragma: Token, stmt: ir.Stmt) -> ir.Stmt:
        """Attach an OpenMP pragma to the statement after it (see ir.OmpClauses)."""
        omp: ir.OmpClauses | None = getattr(pragma, "omp", None)
        if omp is None:
            return stmt
        if omp.directive == "parallel":
            return _inherit_region(stmt, omp, 0)
        if isinstance(stmt, ir.For):
            if stmt.omp is not None:  # two loop pragmas: the nearer one wins
                return stmt
            return replace(stmt, omp=omp)
        if self.ctx is not None:
            self.ctx.diags.append(d.StrayPragma(omp.span, directive=omp.directive,
                                                where=ir.Span.point(omp.span.line, omp.span.column)))
        return stmt

    # ------------------------------------------------------------ declarations
    def declaration(self, ch: list) -> ir.Decl:
        specs, decls, semi = ch
        declarators = tuple(decls or ())
        last = declarators[-1] if declarators else specs
        resolved, more = self._resolve(specs.text)
        if more:
            declarators = tuple(replace(x, pointer=x.pointer + more) for x in declarators)
        return ir.Decl(cover(specs, semi), specs.text, declarators, self._text(cover(specs, last)),
                       resolved if resolved != specs.text else "")

    def _resolve(self, text: str) -> tuple[str, int]:
        # typedef names become the type they stand for, so that element sizes and
        # flops see `float` where the code says `real` (the source text keeps `real`)
        if self.ctx is None or not self.ctx.typedefs:
            return text, 0
        return resolve_typedef(text, self.ctx.typedefs)

    def decl_specs(self, ch: list) -> _Words:
        words = [c.text if isinstance(c, _Words) else str(c) for c in ch]
        return _Words(" ".join(words), cover(ch[0], ch[-1]))

    def struct_spec(self, ch: list) -> _Words:
        return _Words(f"{ch[0]} {ch[1]}", cover(ch[0], ch[1]))

    def init_declarator_list(self, ch: list) -> list:
        return [c for c in ch if not isinstance(c, Token)]

    def init_declarator(self, ch: list) -> ir.Declarator:
        dcl: _Declarator = ch[0]
        init = ch[2] if len(ch) == 3 else None
        span = cover(dcl, init) if init is not None else dcl.span
        return ir.Declarator(span, dcl.name, dcl.pointer, dcl.dims, init)

    def declarator(self, ch: list) -> _Declarator:
        direct: _Declarator = ch[-1]
        stars = len(ch) - 1
        return _Declarator(direct.name, direct.pointer + stars, direct.dims, cover(ch[0], direct))

    def pointer(self, ch: list) -> _Spanned:
        return _Spanned("*", cover(ch[0], ch[-1]))

    def decl_name(self, ch: list) -> _Declarator:
        dims = tuple(c.value for c in ch[1:])
        return _Declarator(str(ch[0]), 0, dims, cover(ch[0], ch[-1]))

    def decl_paren(self, ch: list) -> _Declarator:
        inner: _Declarator = ch[1]
        dims = inner.dims + tuple(c.value for c in ch[3:])
        return _Declarator(inner.name, inner.pointer, dims, cover(ch[0], ch[-1]))

    def array_dim(self, ch: list) -> _Spanned:
        return _Spanned(ch[1], cover(ch[0], ch[2]))

    def initializer(self, ch: list) -> ir.Expr:
        return ch[0]

    def brace_init(self, ch: list) -> ir.Opaque:
        span = cover(ch[0], ch[-1])
        return ir.Opaque(span, self._text(span))

    def init_list(self, ch: list) -> None:
        return None

    designated = designator = init_list

    def type_name(self, ch: list) -> tuple[str, str]:
        # (as written, resolved): a cast keeps its spelling for messages
        text = ch[0].text
        resolved, more = self._resolve(text)
        if len(ch) > 1:
            text += " " + "*" * (len(ch) - 1)
        if more or len(ch) > 1:
            resolved += " " + "*" * (more + len(ch) - 1)
        return text, resolved

    # ------------------------------------------------------------ expressions
    def binop(self, ch: list) -> ir.Binary:
        left, op, right = ch
        return ir.Binary(cover(left, right), str(op), left, right)

    def assign(self, ch: list) -> ir.Assign:
        target, op, value = ch
        return ir.Assign(cover(target, value), str(op), target, value)

    def ternary(self, ch: list) -> ir.Ternary:
        return ir.Ternary(cover(ch[0], ch[4]), ch[0], ch[2], ch[4])

    def cast(self, ch: list) -> ir.Cast:
        written, resolved = ch[1]
        return ir.Cast(cover(ch[0], ch[3]), written, ch[3], resolved if resolved != written else "")

    def pre_incdec(self, ch: list) -> ir.IncDec:
        return ir.IncDec(cover(ch[0], ch[1]), str(ch[0]), True, ch[1])

    def post_incdec(self, ch: list) -> ir.IncDec:
        return ir.IncDec(cover(ch[0], ch[1]), str(ch[1]), False, ch[0])

    def unop(self, ch: list) -> ir.Unary:
        return ir.Unary(cover(ch[0], ch[1]), str(ch[0]), ch[1])

    def sizeof(self, ch: list) -> ir.Opaque:
        span = cover(ch[0], ch[-1])
        return ir.Opaque(span, self._text(span))

    member = opaque_expr = sizeof

    def index(self, ch: list) -> ir.ArrayRef:
        base, _, sub, rsqb = ch
        span = cover(base, rsqb)
        if isinstance(base, ir.ArrayRef):
            return ir.ArrayRef(span, base.array, base.indices + (sub,))
        if isinstance(base, ir.Name):
            return ir.ArrayRef(span, base.name, (sub,))
        # `s.a[i]`, `(*p)[i]`, `f(x)[i]`: the array is named by its source text
        return ir.ArrayRef(span, self._text(base.span), (sub,))

    def call(self, ch: list) -> ir.Expr:
        func, _, args, rpar = ch
        span = cover(func, rpar)
        if isinstance(func, ir.Name):
            return ir.Call(span, func.name, tuple(args or ()))
        return ir.Opaque(span, self._text(span))

    def args(self, ch: list) -> list:
        return [c for c in ch if not isinstance(c, Token)]

    def name(self, ch: list) -> ir.Name:
        return ir.Name(span_of(ch[0]), str(ch[0]))

    def int_lit(self, ch: list) -> ir.Expr:
        value = int_value(str(ch[0]))
        if value is None:
            return ir.Opaque(span_of(ch[0]), str(ch[0]))
        return ir.IntLit(span_of(ch[0]), value)

    def float_lit(self, ch: list) -> ir.FloatLit:
        return ir.FloatLit(span_of(ch[0]), str(ch[0]))

    def char_lit(self, ch: list) -> ir.Expr:
        value = char_value(str(ch[0]))
        if value is None:
            return ir.Opaque(span_of(ch[0]), str(ch[0]))
        return ir.IntLit(span_of(ch[0]), value)

    def string_lit(self, ch: list) -> ir.Opaque:
        span = cover(ch[0], ch[-1])
        return ir.Opaque(span, self._text(span))

    def paren(self, ch: list) -> ir.Expr:
        # the parentheses belong to the expression's extent
        return replace(ch[1], span=cover(ch[0], ch[2]))


def _inherit_region(stmt: ir.Stmt, region: ir.OmpClauses, depth: int) -> ir.Stmt:
    """Inside `#pragma omp parallel`, loops under `#pragma omp for` take the region's num_threads."""
    if depth > MAX_REGION_DEPTH:
        return stmt
    if isinstance(stmt, ir.For):
        omp = stmt.omp
        if omp is not None and omp.directive.startswith("for"):
            if omp.num_threads is None and region.num_threads is not None:
                return replace(stmt, omp=replace(omp, num_threads=region.num_threads))
            return stmt
        body = _inherit_region(stmt.body, region, depth + 1)
        return stmt if body is stmt.body else replace(stmt, body=body)
    if isinstance(stmt, ir.Block):
        items = tuple(_inherit_region(s, region, depth + 1) for s in stmt.body)
        if all(a is b for a, b in zip(items, stmt.body, strict=True)):
            return stmt
        return replace(stmt, body=items)
    if isinstance(stmt, ir.If):
        then = _inherit_region(stmt.then, region, depth + 1)
        other = _inherit_region(stmt.other, region, depth + 1) if stmt.other else None
        if then is stmt.then and other is stmt.other:
            return stmt
        return replace(stmt, then=then, other=other)
    if isinstance(stmt, (ir.While, ir.DoWhile, ir.Switch)):
        body = _inherit_region(stmt.body, region, depth + 1)
        return stmt if body is stmt.body else replace(stmt, body=body)
    if isinstance(stmt, ir.Labeled):
        inner = _inherit_region(stmt.stmt, region, depth + 1)
        return stmt if inner is stmt.stmt else replace(stmt, stmt=inner)
    return stmt
