# Affine stage: building one nest -- the walk over its statements (guards,
# `continue`, refusals at the smallest scope), accesses, and the final naming
# of parameters and loop variables; and the entry point over a translation unit.

from __future__ import annotations

import re
from dataclasses import replace
from typing import Any

from tripcount import ir
from tripcount.affine.convert import Converter, NotAffine
from tripcount.affine.ctext import loop_label, mangle, stmt_text, symbol_base
from tripcount.affine.decls import FunctionInfo, global_decls
from tripcount.affine.depth import DEEP_TEXT, cut_deep_function, cut_deep_globals, is_deep_cut
from tripcount.affine.flatten import split_flat
from tripcount.affine.lin import Cond, Lin, Var, cond_vars, conj, lin_vars, negate, var
from tripcount.affine.loops import loop_header, loop_var_guess
from tripcount.affine.nests import AAccess, ALoop, ANest, AStmt
from tripcount.affine.walkctx import _Body, _Ctx, _Resolver
from tripcount.affine.whiles import rewrite_whiles, uncounted_whiles
from tripcount.affine.writes import (
    collect_outer_writes,
    collect_writes,
    find_jumps,
    find_var_write,
    walk_exprs,
)
from tripcount.ctable import base_type, is_floating_type, type_size
from tripcount.diagnostics import Diagnostic, LoopRef, Phrase
from tripcount.diagnostics.internal import InternalError
from tripcount.diagnostics.model import (
    EarlyBreak,
    JumpInNest,
    LoopVarModified,
    NonAffineGuard,
    NonAffineSubscript,
    SwitchInNest,
    SymbolicParameter,
    UnmodelledContinue,
    UnreadStatement,
    WhileInNest,
)
from tripcount.ir import Span, c_text

# Names of class members by the usual conventions (`n_`, `m_rows`).
_MEMBER = re.compile(r"[A-Za-z]\w*_\Z|m_\w+\Z")
# `v.size()`: a container's size, a loop-invariant parameter unless the nest resizes it.
_SIZE_QUERY = re.compile(r"([A-Za-z_]\w*)\s*(?:\.|->)\s*(?:size|length)\s*\(\s*\)\Z"
                         r"|(?:std::)?size\(\s*([A-Za-z_]\w*)\s*\)\Z")
RESIZERS = ("push_back", "emplace_back", "pop_back", "resize", "clear", "insert", "erase", "assign",
            "swap", "emplace", "push_front", "pop_front")


class _NestBuilder:
    def __init__(self, info: FunctionInfo, node: ir.For, path: str) -> None:
        self.info = info
        self.node = node
        self.path = path
        self.loops: list[ALoop] = []
        self.stmts: list[AStmt] = []
        self.diags: list[Diagnostic] = []
        self.nest_writes = collect_writes(node)  # by name, for variables declared in the nest
        self.outer_writes = collect_outer_writes(node)  # variables from outside the nest
        self.symbols_noted: set[tuple[Any, ...]] = set()
        self.outer_cache: dict[str, Lin] = {}
        self.outer_busy: set[str] = set()
        self.local_texts: dict[str, str] = {}  # invariant local -> its non-affine initializer
        self.cut_refused = False  # the nest holds code cut for its depth (see build)

    # ---- diagnostics

    def diag(self, cls: type[Diagnostic], span: Span, **args: Any) -> Diagnostic:
        d = cls(span, path=self.path, **args)
        self.diags.append(d)
        return d

    # ---- names outside the nest

    def outer_name(self, node: ir.Name) -> Lin:
        """A name not bound inside the nest: invariant local, constant global or parameter."""
        n = node.name
        if n in self.outer_cache:
            return self.outer_cache[n]
        d = self.info.lookup(n, self.node.span)
        value = var(("param", n), n)
        if (d is None or (d.scope == "global" and not d.is_const)) and _MEMBER.match(n):
            # a class member (`n_`, `m_rows`): invariant in the nest, so a size parameter; say so
            self.diag(SymbolicParameter, node.span, text=n, name=n)
        if d is not None:
            if d.is_array:
                raise NotAffine("array", node, f"array '{n}' used as a value")
            if is_floating_type(d.type_name):
                raise NotAffine("float", node, f"'{n}' is a floating-point variable")
            substitutable = (
                d.init is not None
                and n not in self.outer_busy
                and (
                    (d.scope == "local" and not self.info.written_between(n, d.span, self.node.span))
                    or (d.scope == "global" and d.is_const)
                )
            )
            if substitutable and d.init is not None:
                # The initializer's names must keep their values until the nest starts.
                names = {x.name for x in walk_exprs(d.init) if isinstance(x, ir.Name)}
                if d.scope == "local" and any(
                    self.info.written_between(m, d.span, self.node.span) for m in names
                ):
                    substitutable = False
            if substitutable and d.init is not None:
                self.outer_busy.add(n)
                try:
                    value = Converter(_Resolver(self, None)).lin(d.init)
                    if d.scope == "global" and not value.is_const:
                        value = var(("param", n), n)
                except NotAffine:
                    # invariant but not affine: its value is a parameter standing for the initializer
                    value = var(("param", n), n)
                    if d.scope == "local":
                        self.local_texts[n] = c_text(d.init)
                finally:
                    self.outer_busy.discard(n)
        self.outer_cache[n] = value
        return value

    def _passed(self, name: str) -> bool:
        """An array handed to a call inside the nest, unless declared const (then it is read-only)."""
        if name not in self.nest_writes.passed:
            return False
        d = self.info.lookup(name, self.node.span)
        return d is None or not d.is_const

    def symbol(self, node: ir.Expr, text: str, res: _Resolver) -> Lin:
        """A loop-invariant non-affine expression as a named parameter."""
        names = {x.name for x in walk_exprs(node) if isinstance(x, ir.Name)}
        names |= {x.array for x in walk_exprs(node) if isinstance(x, ir.ArrayRef)}
        if isinstance(node, ir.Opaque):
            names |= set(re.findall(r"[A-Za-z_][A-Za-z0-9_]*", node.text))
        sized = _SIZE_QUERY.match(text)
        for n in sorted(names):
            if sized and n == (sized.group(1) or sized.group(2)):
                # writing elements of a container leaves its size alone; a call that resizes it does not
                if self._resized(n):
                    raise NotAffine("written", node, f"'{text}' changes: '{n}' is resized in the nest", name=n)
                if not self.outer_writes.writes(n):
                    continue
            entry = res.env.get(n)
            if entry is not None and entry[0] == "loop":
                raise NotAffine("call", node, f"'{text}' changes with the loop variable '{n}'", name=n)
            if entry is not None and entry[0] in ("subst", "error", "plain"):
                raise NotAffine("call", node, f"'{text}' depends on '{n}', which is computed inside the nest", name=n)
            if self.outer_writes.writes(n) or n in self.nest_writes.arrays or self._passed(n):
                raise NotAffine("written", node, f"'{text}' depends on '{n}', which is assigned in the nest", name=n)
        key = ("sym", text, symbol_base(text))
        if key not in self.symbols_noted:
            self.symbols_noted.add(key)
            self._pending_symbols.append((key, node.span))
        return var(key, text)

    def _resized(self, name: str) -> bool:
        pat = re.compile(rf"\b{re.escape(name)}\s*(?:\.|->)\s*(?:{'|'.join(RESIZERS)})\b")
        return any(isinstance(x, (ir.Opaque, ir.Unparsed)) and pat.search(x.text) for x in ir.walk(self.node))

    # ---- the walk

    def build(self) -> ANest:
        """Walk the nest and name its variables."""
        self._pending_symbols: list[tuple[tuple[Any, ...], Span]] = []
        unknown = None
        first = self.node
        # Code cut for its depth may do anything (assign a bound, jump out): nothing in the nest is certain.
        # One diagnostic, at the first cut, says so.
        cuts = self.info.cuts
        for n in ir.walk(first) if cuts else ():
            if is_deep_cut(n) and id(n) in cuts:
                self.info.cuts_reported.add(id(n))
                if unknown is None:
                    unknown = cuts[id(n)].diagnostic(self.path, in_nest=True)
                    self.diags.append(unknown)
        self.cut_refused = unknown is not None
        if unknown is not None:  # refused already: "may write anything" would only add noise to the walk
            for w in (self.nest_writes, self.outer_writes):
                keep = [k for k, t in enumerate(w.unparsed) if t != DEEP_TEXT]
                w.unparsed = [w.unparsed[k] for k in keep]
                w.unparsed_at = [w.unparsed_at[k] for k in keep]
        # After a return or goto nothing later in the nest is certain: all of it is unknown.
        jumps = find_jumps(first, {"return", "goto"}, into_loops=True)
        if jumps and unknown is None:
            j = jumps[0]
            if isinstance(j, ir.Jump):
                kind = j.kind
            else:
                kind = "return" if re.search(r"\breturn\b", getattr(j, "text", "")) else "goto"
            label = loop_label(loop_var_guess(first), first.header)
            unknown = self.diag(JumpInNest, j.span, kind=kind, pos=j.span, loop=label)
        self.walk(first, _Ctx((), (), unknown, {}, _Body()))
        return self.finish()

    def walk(self, s: ir.Stmt, ctx: _Ctx) -> None:
        if isinstance(s, ir.Block):
            inner = _Ctx(ctx.loops, ctx.guards, ctx.unknown, dict(ctx.env), ctx.body)
            for x in s.body:
                self.walk(x, inner)
        elif isinstance(s, ir.For):
            self.walk_for(s, ctx)
        elif isinstance(s, ir.If):
            self.walk_if(s, ctx)
        elif isinstance(s, (ir.While, ir.DoWhile)):
            kind = "while" if isinstance(s, ir.While) else "do"
            d = ctx.unknown
            if d is None:
                d = self.diag(WhileInNest, s.span, kind=kind, pos=s.span, loop=self.loop_name(ctx))
            # break/continue inside belong to this loop, not to ours
            inner = _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), _Body(foreign=True))
            self.walk(s.body, inner)
        elif isinstance(s, ir.Switch):
            d = ctx.unknown or ctx.body.dead
            if d is None:
                d = self.diag(SwitchInNest, s.span, pos=s.span)
            if ctx.body.dead is None and find_jumps(s.body, {"continue"}, into_loops=False):
                ctx.body.dead = self.diag(
                    UnmodelledContinue, s.span, pos=s.span, loop=self.loop_name(ctx)
                )
            self.walk(s.body, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
        elif isinstance(s, ir.Labeled):
            self.walk(s.stmt, ctx)
        elif isinstance(s, ir.Jump):
            if s.kind == "continue" and not ctx.body.foreign:
                if ctx.unknown is not None:
                    if ctx.body.dead is None:
                        ctx.body.dead = self.diag(
                            UnmodelledContinue, s.span, pos=s.span, loop=self.loop_name(ctx)
                        )
                else:
                    ctx.body.kills.append(conj(list(ctx.guards)))
        elif isinstance(s, ir.Empty):
            return
        elif is_deep_cut(s):  # reported where it was cut; the nest is refused (see build)
            self.add_stmt(s, ctx, s.text, accesses=False)
        elif isinstance(s, ir.Unparsed):
            reason = Phrase((" (", s.reason, ")")) if s.reason else ""
            self.diag(UnreadStatement, s.span, pos=s.span, reason=reason)
            if re.search(r"\bcontinue\b", s.text) and ctx.body.dead is None:
                ctx.body.dead = self.diag(UnmodelledContinue, s.span, pos=s.span, loop=self.loop_name(ctx))
            self.add_stmt(s, ctx, s.text, accesses=False)
        elif isinstance(s, ir.Decl):
            for d in s.declarators:
                if d.dims or d.pointer:
                    ctx.env[d.name] = ("array",)
                elif d.init is None:
                    ctx.env[d.name] = ("plain",)
                elif is_floating_type(s.ctype):
                    ctx.env[d.name] = ("error", NotAffine("float", d, f"'{d.name}' is a floating-point variable"))
                else:
                    try:
                        ctx.env[d.name] = ("subst", Converter(_Resolver(self, ctx.env)).lin(d.init))
                    except NotAffine as err:
                        ctx.env[d.name] = ("error", err)
            if any(d.init is not None for d in s.declarators):
                self.add_stmt(s, ctx, s.text or stmt_text(s))
        elif isinstance(s, ir.ExprStmt):
            self.add_stmt(s, ctx, s.text or c_text(s.expr))
        else:
            self.add_stmt(s, ctx, stmt_text(s))

    def loop_name(self, ctx: _Ctx) -> str | LoopRef:
        if not ctx.loops:
            return "the nest"
        lp = self.loops[ctx.loops[-1]]
        return loop_label(lp.display, lp.header)

    def current_guard(self, ctx: _Ctx) -> Cond:
        return conj(list(ctx.guards) + [negate(k) for k in ctx.body.kills])

    def walk_if(self, s: ir.If, ctx: _Ctx) -> None:
        try:
            c = Converter(_Resolver(self, ctx.env)).cond(s.cond)
        except NotAffine as err:
            d = ctx.unknown
            if d is None:
                d = self.diag(
                    NonAffineGuard,
                    s.cond.span,
                    text=c_text(s.cond),
                    pos=s.cond.span,
                    detail=err.detail,
                )
            self.walk(s.then, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
            if s.other is not None:
                self.walk(s.other, _Ctx(ctx.loops, ctx.guards, d, dict(ctx.env), ctx.body))
            return
        self.walk(s.then, _Ctx(ctx.loops, ctx.guards + (c,), ctx.unknown, dict(ctx.env), ctx.body))
        if s.other is not None:
            self.walk(s.other, _Ctx(ctx.loops, ctx.guards + (negate(c),), ctx.unknown, dict(ctx.env), ctx.body))

    def add_stmt(self, s: ir.Stmt, ctx: _Ctx, text: str, accesses: bool = True) -> None:
        sid = f"S{len(self.stmts) + 1}"
        st = AStmt(
            id=sid,
            node=s,
            span=s.span,
            text=text.strip(),
            loops=ctx.loops,
            guard=self.current_guard(ctx),
            refusal=ctx.unknown or ctx.body.dead,
        )
        if accesses:
            st.accesses = self.accesses(s, ctx)
        self.stmts.append(st)

    # ---- loops

    def walk_for(self, s: ir.For, ctx: _Ctx) -> None:
        idx = len(self.loops)
        parent = ctx.loops[-1] if ctx.loops else None
        lp = ALoop(
            index=idx,
            display=loop_var_guess(s),
            depth=len(ctx.loops),
            parent=parent,
            span=s.span,
            header=s.header,
            omp=s.omp,
            guard=self.current_guard(ctx),
        )
        self.loops.append(lp)
        if parent is not None:
            self.loops[parent].children.append(idx)
        env = dict(ctx.env)
        own = loop_header(self, s, lp, ctx, env)
        if own is not None and lp.display != "?":
            env[lp.display] = ("loop", idx)  # the body still refers to this loop's variable
        label = loop_label(lp.display, lp.header)
        if own is None:
            brk = find_jumps(s, {"break"}, into_loops=False)
            if brk:
                own = self.diag(EarlyBreak, brk[0].span, pos=brk[0].span, loop=label)
        if own is None and not self.cut_refused:  # cut code "writes" every variable: no news there
            w = find_var_write(s.body, lp.display)
            if w is not None:
                own = self.diag(LoopVarModified, w, loop=label, var=lp.display, pos=w)
        if own is not None:
            lp.constraint = None
        lp.refusal = ctx.unknown or ctx.body.dead or own
        body = _Body(loop=idx)
        self.walk(s.body, _Ctx(ctx.loops + (idx,), (), lp.refusal, env, body))


    def accesses(self, s: ir.Stmt, ctx: _Ctx) -> list[AAccess]:
        refs: list[tuple[ir.ArrayRef, str]] = []

        def visit(e: ir.Expr | None) -> None:
            if e is None:
                return
            if isinstance(e, ir.Assign):
                target(e.target, ("write",) if e.op == "=" else ("read", "write"))
                visit(e.value)
            elif isinstance(e, ir.IncDec):
                target(e.target, ("read", "write"))
            elif isinstance(e, ir.ArrayRef):
                refs.append((e, "read"))
                for x in e.indices:
                    visit(x)
            elif isinstance(e, ir.Unary) and e.op == "&" and isinstance(e.operand, ir.ArrayRef):
                for x in e.operand.indices:  # address only: no access
                    visit(x)
            else:
                for c in ir.children(e):
                    if isinstance(c, ir.Expr):
                        visit(c)

        def target(t: ir.Expr, kinds: tuple[str, ...]) -> None:
            while isinstance(t, ir.Cast):
                t = t.operand
            if isinstance(t, ir.ArrayRef):
                for k in kinds:
                    refs.append((t, k))
                for x in t.indices:
                    visit(x)
            elif not isinstance(t, ir.Name):
                visit(t)

        if isinstance(s, ir.ExprStmt):
            visit(s.expr)
        elif isinstance(s, ir.Decl):
            for d in s.declarators:
                visit(d.init)
        out: list[AAccess] = []
        conv = Converter(_Resolver(self, ctx.env))
        for ref, kind in refs:
            texts = tuple(c_text(x) for x in ref.indices)
            subs: tuple[Lin, ...] | None
            flat = None
            try:
                subs = tuple(conv.lin(x) for x in ref.indices)
            except NotAffine as err:
                subs = None
                flat = split_flat(conv, ref.indices[0]) if len(ref.indices) == 1 else None
                if flat is None and (kind != "write" or not any(r is ref and k == "read" for r, k in refs)):
                    self.diag(NonAffineSubscript, ref.span, text=c_text(ref), pos=ref.span, detail=err.detail)
            etype, esize, extents = self.elem_info(ref, ctx)
            out.append(AAccess(ref.array, kind, subs, texts, ref.span, etype, esize, extents, flat))
        return out

    def elem_info(self, ref: ir.ArrayRef, ctx: _Ctx) -> tuple[str | None, int | None, tuple[str | None, ...]]:
        d = self.info.lookup(ref.array, ref.span)
        if d is None or not d.is_array:
            return None, None, ()
        extents = tuple(None for _ in range(d.pointer)) + tuple(
            c_text(x) if x is not None else None for x in d.dims
        )
        if len(ref.indices) != d.pointer + len(d.dims):
            return None, None, extents
        bt = base_type(d.type_name)
        return bt or None, type_size(d.type_name), extents

    # ---- final naming

    def finish(self) -> ANest:
        used: set[Var] = set()
        for lp in self.loops:
            used |= cond_vars(lp.guard)
            if lp.constraint is not None:
                used |= cond_vars(lp.constraint)
        for st in self.stmts:
            used |= cond_vars(st.guard)
            for a in st.accesses:
                for x in a.subscripts or a.flat or ():
                    used |= lin_vars(x)
        names: dict[tuple[Any, ...], str] = {}
        symbolic: dict[str, str] = {}
        taken: set[str] = set()
        pkeys = sorted({v.key for v in used if v.key[0] == "param"}, key=lambda k: k[1])
        skeys = sorted({v.key for v in used if v.key[0] == "sym"}, key=lambda k: k[1])
        for k in pkeys + skeys:
            base = mangle(k[1]) if k[0] == "param" else k[2]
            name, n = base, 1
            while name in taken:
                n += 1
                name = f"{base}_{n}"
            taken.add(name)
            names[k] = name
            if k[0] == "sym" or name != k[1]:
                symbolic[name] = k[1]
            elif k[1] in self.local_texts:
                symbolic[name] = self.local_texts[k[1]]
        used_keys = {v.key for v in used}
        for key, span in self._pending_symbols:
            if key in used_keys:
                self.diags.append(SymbolicParameter(span, path=self.path, text=key[1], name=names[key]))
        params = set(taken)
        for lp in self.loops:
            base = mangle(lp.display)
            anc = set()
            p = lp.parent
            while p is not None:
                anc.add(names[("loop", p)])
                p = self.loops[p].parent
            name, n = base, 0
            while name in params or name in anc:
                n += 1
                name = f"{base}_{n}"
            names[("loop", lp.index)] = name
        return ANest(
            path=self.path,
            function=self.info.fn.name,
            span=self.node.span,
            loops=self.loops,
            stmts=self.stmts,
            diagnostics=self.diags,
            names=names,
            params=tuple(sorted(taken)),
            symbolic=symbolic,
            source=stmt_text(self.node),
            scalar_types=self.info.scalar_types(self.node.span),
        )



# --------------------------------------------------------------------------
# Entry point


def outermost_fors(s: ir.Stmt) -> list[ir.For]:
    """`for` statements not inside another `for` (they may sit in ifs, blocks, whiles)."""
    return [n for n in ir.walk(s, lambda n: not isinstance(n, (ir.For, ir.Expr))) if isinstance(n, ir.For)]


def extract_nests(unit: ir.TranslationUnit, path: str | None = None) -> tuple[list[ANest], list[Diagnostic]]:
    """Affine nests of every outermost `for` of every function, in source order.

    Never raises on any IR: a failure inside one nest becomes an InternalError
    diagnostic of that (empty) nest.
    """
    path = path or unit.path
    nests: list[ANest] = []
    file_diags: list[Diagnostic] = []
    try:
        kept, cuts = cut_deep_globals(unit.globals)
        file_diags.extend(c.diagnostic(path, in_nest=False) for c in cuts)
        globs = global_decls(replace(unit, globals=kept))
    except Exception as exc:  # pragma: no cover - defensive
        globs = []
        file_diags.append(InternalError(unit.span, path=path, what=f"globals: {type(exc).__name__}: {exc}"))
    for fn in unit.functions:
        try:
            fn, cuts = cut_deep_function(fn)
            fn = rewrite_whiles(fn)
            whiles, per_while = uncounted_whiles(fn, path)
            file_diags.extend(whiles)
            info = FunctionInfo(fn, globs, cuts)
            fors = outermost_fors(fn.body)
        except Exception as exc:
            file_diags.append(InternalError(fn.span, path=path, what=f"function {fn.name}: {type(exc).__name__}: {exc}"))
            continue
        for f in fors:
            try:
                nests.append(_NestBuilder(info, f, path).build())
                if id(f) in per_while:
                    nests[-1].diagnostics.append(per_while[id(f)])
            except Exception as exc:
                err = InternalError(f.span, path=path, what=f"{type(exc).__name__}: {exc}")
                nests.append(ANest(path, fn.name, f.span, [], [], [err], {}, (), {}, ""))
        # cuts outside every nest: the first one of the function is reported for the file
        outside = [c for c in cuts if id(c.node) not in info.cuts_reported]
        if outside:
            file_diags.append(outside[0].diagnostic(path, in_nest=False))
    return nests, file_diags
