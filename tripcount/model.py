# Stage 4 of the pipeline: the integer-set model.
#
# Turns the affine loop nests found by `tripcount.affine` into isl objects:
# for every statement its iteration domain (a parametric integer set over the
# enclosing loop variables, guards included, strides and C integer division
# represented exactly), for every array reference an access map from that
# domain to the array's index space, and for every loop the set of its
# iterations. The counting engine and the analyses consume only this module's
# dataclasses; nothing here knows about reporting.
#
# Naming contract (relied on by the engine and the analyses):
#   * parameters of every isl object are named with the nest's parameter
#     names (valid C/isl identifiers; see Nest.params);
#   * set dimensions of a statement domain are named with the enclosing loop
#     variables, outermost first (Statement.loop_vars), and the tuple name is
#     the statement id ("S1", ...); a loop's domain has tuple name "L<index>";
#   * loop variables never collide with parameter names.
#
# One check needs isl and therefore lives here: a loop whose iteration set is
# unbounded for some parameter values allowed by the context (e.g. `i != n`
# stepping past n) is refused, since C would not terminate.

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import reduce
from typing import TYPE_CHECKING, Any

import islpy as isl

from tripcount import affine as af
from tripcount.diagnostics.internal import InternalError
from tripcount.diagnostics.model import BadAssumption, NonAffineSubscript, UnboundedLoop
from tripcount.ir import NO_SPAN, OmpClauses, Span, Stmt, TranslationUnit

if TYPE_CHECKING:
    from tripcount.diagnostics import Diagnostic


@dataclass(frozen=True)
class Access:
    """One array reference of a statement."""

    array: str
    kind: str  # "read" or "write" (a compound assignment `A[i] += ...` gives both)
    map: isl.Map | None  # [params] -> { S1[i, j] -> A[a0, a1] }; None when a subscript is not affine
    subscripts: tuple[str, ...]  # as written, for display
    span: Span
    elem_type: str | None  # base C type ("double"), None when undeclared
    elem_size: int | None  # bytes, None when unknown
    extents: tuple[str | None, ...] = ()  # declared extents as C text ("N", "64"), None for []


@dataclass(frozen=True)
class Statement:
    """A statement inside a nest, with its exact iteration domain."""

    id: str  # "S1", "S2", ... in source order within the nest
    span: Span
    text: str
    loop_vars: tuple[str, ...]  # enclosing loop variables, outermost first
    loops: tuple[int, ...]  # indices into Nest.loops of the enclosing loops, outermost first
    domain: isl.Set | None  # None when the statement was refused (count unknown)
    accesses: tuple[Access, ...] = ()
    ir: Stmt | None = None  # the IR statement (for flop counting)
    refusal: Diagnostic | None = None  # why domain is None


@dataclass(frozen=True)
class Loop:
    """A `for` loop of a nest."""

    index: int
    var: str  # isl name of the loop variable (dims of the domains)
    depth: int  # 0 for the outermost loop
    span: Span  # from the `for` keyword to the end of the body
    header: Span  # `for (...)`
    parent: int | None
    domain: isl.Set | None  # iterations of the body: { L3[i0, ..., i_depth] : ... }; None if refused
    step: int = 1
    omp: OmpClauses | None = None
    children: tuple[int, ...] = ()  # indices of directly nested loops
    display: str = ""  # the variable as written in C (differs from var when renamed)
    refusal: Diagnostic | None = None  # why domain is None


@dataclass
class Nest:
    """One outermost `for` loop and everything inside it."""

    path: str
    function: str
    span: Span
    params: tuple[str, ...]  # size parameters, sorted
    context: isl.Set  # parameter assumptions (from --assume/config), params-only set
    loops: tuple[Loop, ...]
    statements: tuple[Statement, ...]
    diagnostics: list[Diagnostic] = field(default_factory=list)
    symbolic: dict[str, str] = field(default_factory=dict)  # parameter name -> C text it stands for
    source: str = ""  # source text of the nest (for hashing/caching)
    names: dict[str, str] = field(default_factory=dict)  # C name of a parameter -> its isl name
    scalar_types: dict[str, str] = field(default_factory=dict)  # C types of scalars visible at the nest


# --------------------------------------------------------------------------
# Lin/Cond -> isl


class _Space:
    """Variables of one set space (named set dims + the nest's parameters)."""

    def __init__(self, dims: tuple[str, ...], params: tuple[str, ...], names: Mapping[Any, str]) -> None:
        self.vars = isl.make_zero_and_vars(list(dims), list(params))
        self.zero = self.vars[0]
        self.names = names

    def pw(self, x: af.Lin) -> isl.PwAff:
        """The PwAff of a Lin (C division and remainder exact for every sign)."""
        # through isl.Val: Python ints beyond 64 bits are exact there, not in `+ int`
        ctx = self.zero.get_ctx()
        out = self.zero.add_constant_val(isl.Val.read_from_str(ctx, str(x.const)))
        for a, k in x.terms:
            out = out + self._atom(a).scale_val(isl.Val.read_from_str(ctx, str(k)))
        return out

    def _val(self, k: int) -> isl.Val:
        # divisors too may pass 64 bits (0x7fffffffffffffff2): exact through text
        return isl.Val.read_from_str(self.zero.get_ctx(), str(k))

    def _atom(self, a: af.Atom) -> isl.PwAff:
        if isinstance(a, af.Var):
            return self.vars[self.names[a.key]]
        if isinstance(a, af.CDiv):
            return self.pw(a.arg).tdiv_q(self.zero.add_constant_val(self._val(a.d)))
        if isinstance(a, af.CMod):
            return self.pw(a.arg).tdiv_r(self.zero.add_constant_val(self._val(a.d)))
        if isinstance(a, af.FDiv):
            return self.pw(a.arg).scale_down_val(self._val(a.d)).floor()
        if isinstance(a, af.FMod):
            return self.pw(a.arg).mod_val(self._val(a.d))
        if isinstance(a, af.Extremum):
            parts = [self.pw(y) for y in a.args]
            return reduce(lambda p, q: p.min(q) if a.op == "min" else p.max(q), parts)
        c = self.set(a.cond)
        return self.pw(a.then).intersect_domain(c).union_add(self.pw(a.other).intersect_domain(c.complement()))

    def set(self, c: af.Cond) -> isl.Set:
        """The Set of a condition."""
        if isinstance(c, af.BoolConst):
            space = self.zero.get_domain_space()
            return isl.Set.universe(space) if c.value else isl.Set.empty(space)
        if isinstance(c, af.Rel):
            e = self.pw(c.expr)
            if c.kind == "ge":
                return e.ge_set(self.zero)
            if c.kind == "eq":
                return e.eq_set(self.zero)
            return e.ne_set(self.zero)
        parts = [self.set(a) for a in c.args]
        if isinstance(c, af.And):
            return reduce(lambda s, t: s.intersect(t), parts)
        return reduce(lambda s, t: s.union(t), parts)


def _universe_params(params: tuple[str, ...]) -> isl.Set:
    space = isl.Space.create_from_names(isl.DEFAULT_CONTEXT, set=[], params=list(params))
    return isl.Set.universe(space).params()


# --------------------------------------------------------------------------
# Assumptions: `N >= 16, M >= N`, `0 <= t < T && T % 2 == 0`...

_TOKEN = re.compile(r"\s*(?:(\d+)|([A-Za-z_][A-Za-z0-9_]*)|(<=|>=|==|!=|&&|[-+*/%()<>=,]))")


def _tokens(text: str) -> list[str]:
    out, pos = [], 0
    text = text.rstrip()
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            raise ValueError(f"unexpected character {text[pos:].lstrip()[:1]!r} at column {pos + 1}")
        out.append(m.group(0).strip())
        pos = m.end()
    return out


class _AssumptionParser:
    """Comma- or &&-separated comparisons (chains allowed) of affine integer expressions."""

    def __init__(self, text: str) -> None:
        self.toks = _tokens(text)
        self.pos = 0
        self.names: list[str] = []

    def peek(self) -> str | None:
        return self.toks[self.pos] if self.pos < len(self.toks) else None

    def take(self) -> str:
        t = self.peek()
        if t is None:
            raise ValueError("unexpected end of the assumption")
        self.pos += 1
        return t

    def parse(self) -> af.Cond:
        conds = [self.comparison()]
        while self.peek() in (",", "&&"):
            self.take()
            conds.append(self.comparison())
        if self.peek() is not None:
            raise ValueError(f"unexpected {self.peek()!r}")
        return af.conj(conds)

    def comparison(self) -> af.Cond:
        left = self.expr()
        parts = []
        while self.peek() in ("<", "<=", ">", ">=", "==", "=", "!="):
            op = self.take()
            right = self.expr()
            parts.append(_compare(op, left, right))
            left = right
        if not parts:
            raise ValueError("each assumption must be a comparison such as 'N >= 16'")
        return af.conj(parts)

    def expr(self) -> af.Lin:
        out = self.term()
        while self.peek() in ("+", "-"):
            op = self.take()
            t = self.term()
            out = af.add(out, t) if op == "+" else af.sub(out, t)
        return out

    def term(self) -> af.Lin:
        out = self.factor()
        while self.peek() in ("*", "/", "%"):
            op = self.take()
            f = self.factor()
            if op == "*":
                if out.is_const:
                    out = af.scale(f, out.const)
                elif f.is_const:
                    out = af.scale(out, f.const)
                else:
                    raise ValueError("a product of two names is not affine")
            else:
                if not f.is_const or f.const <= 0:
                    raise ValueError(f"'{op}' needs a positive integer constant on its right")
                out = af.cdiv(out, f.const) if op == "/" else af.cmod(out, f.const)
        return out

    def factor(self) -> af.Lin:
        t = self.take()
        if t == "(":
            e = self.expr()
            if self.take() != ")":
                raise ValueError("missing ')'")
            return e
        if t == "-":
            return af.scale(self.factor(), -1)
        if t == "+":
            return self.factor()
        if t.isdigit():
            return af.const(int(t))
        if re.match(r"[A-Za-z_]", t):
            if t not in self.names:
                self.names.append(t)
            return af.var(("param", t), t)
        raise ValueError(f"unexpected {t!r}")


def _compare(op: str, a: af.Lin, b: af.Lin) -> af.Cond:
    if op == "<":
        return af.gt(b, a)
    if op == "<=":
        return af.ge(b, a)
    if op == ">":
        return af.gt(a, b)
    if op == ">=":
        return af.ge(a, b)
    if op in ("==", "="):
        return af.eq(a, b)
    return af.ne(a, b)


def _parse_assumption_text(text: str) -> tuple[af.Cond, list[str]]:
    p = _AssumptionParser(text)
    if not p.toks:
        return af.TRUE, []
    return p.parse(), p.names


def _assumption_set(cond: af.Cond, names: list[str], params: Mapping[str, str]) -> tuple[isl.Set, int]:
    """Set over the given parameters followed by the unknown names; returns (set, number known)."""
    isl_names = dict(params)
    known = list(dict.fromkeys(params.values()))
    taken = set(known)
    extra: list[str] = []
    for n in names:
        if n in isl_names:
            continue
        if n in taken:  # already an isl name of the nest (e.g. a symbolic parameter)
            isl_names[n] = n
            continue
        base, k, name = af.mangle(n), 1, af.mangle(n)
        while name in taken:
            k += 1
            name = f"{base}_{k}"
        taken.add(name)
        extra.append(name)
        isl_names[n] = name
    space = _Space((), tuple(known + extra), {("param", c): i for c, i in isl_names.items()})
    return space.set(cond).params(), len(known)


def parse_assumptions(text: str, params: Iterable[str] | Mapping[str, str] = ()) -> isl.Set:
    """The parameter set described by `text` ('N >= 16, M >= N', comma or && separated).

    `params` are the known parameters (isl names, or a mapping C name -> isl
    name); other names in the text become additional parameters. Raises
    ValueError with a readable message on bad syntax or non-affine terms.
    """
    mapping = dict(params) if isinstance(params, Mapping) else {p: p for p in params}
    cond, names = _parse_assumption_text(text)
    s, _ = _assumption_set(cond, names, mapping)
    return s


# --------------------------------------------------------------------------
# Nests


def build_nests(
    unit: TranslationUnit, assume: str | None = None, path: str | None = None
) -> tuple[list[Nest], list[Diagnostic]]:
    """The isl model of every outermost `for` of `unit`, plus file-level diagnostics.

    `assume` holds parameter assumptions ('N >= 16, M >= N') that become each
    nest's context. Never raises: a failure inside one nest becomes an
    InternalError diagnostic of that nest.
    """
    path = path or unit.path
    file_diags: list[Diagnostic] = []
    assumption: tuple[af.Cond, list[str]] | None = None
    if assume and assume.strip():
        try:
            assumption = _parse_assumption_text(assume)
        except ValueError as exc:
            file_diags.append(BadAssumption(NO_SPAN, path=path, text=assume, reason=str(exc)))
    try:
        anests, more = af.extract_nests(unit, path)
    except Exception as exc:  # pragma: no cover - extract_nests already guards itself
        return [], file_diags + [InternalError(unit.span, path=path, what=f"{type(exc).__name__}: {exc}")]
    file_diags.extend(more)
    nests = []
    for an in anests:
        try:
            nests.append(_model_nest(an, assumption))
        except Exception as exc:
            err = InternalError(an.span, path=path, what=f"{type(exc).__name__}: {exc}")
            nests.append(_refused_nest(an, err))
    return nests, file_diags


def _c_names(an: af.ANest) -> dict[str, str]:
    return {k[1]: n for k, n in an.names.items() if k[0] == "param"}


def _context(an: af.ANest, assumption: tuple[af.Cond, list[str]] | None) -> isl.Set:
    ctx = _universe_params(an.params)
    if assumption is None:
        return ctx
    mapping = _c_names(an)
    mapping.update({n: n for n in an.params})
    cond, names = assumption
    s, known = _assumption_set(cond, names, mapping)
    extra = s.dim(isl.dim_type.param) - known
    if extra:
        # Facts about names the nest does not use still constrain the ones it
        # uses (N >= 16 and M >= N give M >= 16): eliminate them existentially.
        s = s.project_out(isl.dim_type.param, known, extra)
    return ctx.intersect(s.align_params(ctx.get_space()))


def _model_nest(an: af.ANest, assumption: tuple[af.Cond, list[str]] | None) -> Nest:
    params = an.params
    context = _context(an, assumption)
    diags = list(an.diagnostics)
    names = an.names
    spaces: dict[tuple[str, ...], _Space] = {}

    def space(dims: tuple[str, ...]) -> _Space:
        if dims not in spaces:
            spaces[dims] = _Space(dims, params, names)
        return spaces[dims]

    def path_of(index: int) -> list[int]:
        out = []
        p: int | None = index
        while p is not None:
            out.append(p)
            p = an.loops[p].parent
        return out[::-1]

    domains: dict[int, isl.Set | None] = {}
    refusals: dict[int, Diagnostic | None] = {}
    loops: list[Loop] = []
    for lp in an.loops:
        path = path_of(lp.index)
        dims = tuple(names[("loop", k)] for k in path)
        parent_ref = refusals.get(lp.parent) if lp.parent is not None else None
        refusal = parent_ref or lp.refusal
        dom: isl.Set | None = None
        if refusal is None and lp.constraint is not None:
            sp = space(dims)
            dom = reduce(
                lambda s, t: s.intersect(t),
                [sp.set(an.loops[k].guard).intersect(sp.set(an.loops[k].constraint)) for k in path],
            )
            if not dom.intersect_params(context).is_bounded():
                label = af.loop_label(lp.display, lp.header)
                if lp.unbounded_detail:
                    detail = lp.unbounded_detail
                elif lp.uses_ne:
                    detail = (
                        f"the condition '{lp.cond_text}' need not become false ('{lp.display}' can start "
                        "past the value it is compared with, or step over it; state the missing "
                        "assumption with --assume)"
                    )
                else:
                    detail = f"the condition '{lp.cond_text}' need not become false for some parameter values"
                refusal = UnboundedLoop(lp.header, path=an.path, loop=label, detail=detail)
                diags.append(refusal)
                dom = None
        elif refusal is None:
            refusal = lp.refusal
        domains[lp.index] = dom
        refusals[lp.index] = refusal if dom is None else None
        loops.append(
            Loop(
                index=lp.index,
                var=names[("loop", lp.index)],
                depth=lp.depth,
                span=lp.span,
                header=lp.header,
                parent=lp.parent,
                domain=dom.set_tuple_name(f"L{lp.index}") if dom is not None else None,
                step=lp.step,
                omp=lp.omp,
                children=tuple(lp.children),
                display=lp.display,
                refusal=refusals[lp.index],
            )
        )
    statements = []
    for st in an.stmts:
        dims = tuple(names[("loop", k)] for k in st.loops)
        sp = space(dims)
        refusal = st.refusal
        inner = st.loops[-1] if st.loops else None
        if refusal is None and inner is not None:
            refusal = refusals.get(inner)
        dom = None
        if refusal is None and inner is not None and domains.get(inner) is not None:
            d = domains[inner]
            assert d is not None
            dom = d.intersect(sp.set(st.guard)).set_tuple_name(st.id)
        accesses = tuple(_access(a, st.id, sp, dom) for a in st.accesses)
        for a, acc in zip(st.accesses, accesses, strict=True):
            if a.flat is None or acc.map is not None or dom is None:
                continue
            if a.kind == "write" and any(b.kind == "read" and b.span == a.span for b in st.accesses):
                continue  # `a[...] += x`: one note for the reference
            diags.append(NonAffineSubscript(
                    a.span, path=an.path, text=f"{a.array}[{a.texts[0]}]", pos=a.span,
                    detail="a flattened subscript whose part beside the multiple of the row length is not "
                           "provably within 0 and the row length on the domain"))
        statements.append(
            Statement(
                id=st.id,
                span=st.span,
                text=st.text,
                loop_vars=dims,
                loops=st.loops,
                domain=dom,
                accesses=accesses,
                ir=st.node,
                refusal=refusal if dom is None else None,
            )
        )
    return Nest(
        path=an.path,
        function=an.function,
        span=an.span,
        params=params,
        context=context,
        loops=tuple(loops),
        statements=tuple(statements),
        diagnostics=diags,
        symbolic=dict(an.symbolic),
        source=an.source,
        names=_c_names(an),
        scalar_types=dict(an.scalar_types),
    )


def _size_text(x: af.Lin) -> str | None:
    """C text of an affine size expression of parameters and constants (None with anything else)."""
    parts = []
    for atom, coef in x.terms:
        if not isinstance(atom, af.Var):
            return None
        parts.append(f"{coef}*({atom.display})")
    if x.const or not parts:
        parts.append(str(x.const))
    return " + ".join(parts)


def _access(a: af.AAccess, sid: str, sp: _Space, dom: isl.Set | None) -> Access:
    m = None
    subs = a.subscripts
    extents = a.extents
    if subs is None and a.flat is not None and dom is not None:
        # P*X + R is the element [X][R] of rows of length P when 0 <= R < P on the domain
        x, r, p = a.flat
        inside = sp.set(af.conj([af.ge(r, af.const(0)), af.gt(p, r)])).set_tuple_name(dom.get_tuple_name())
        if dom.is_subset(inside):
            subs = (x, r)
            # the block is packed: rows of P elements, one after the other
            extents = (extents[0] if extents else None, _size_text(p))
    if subs:
        maps = [isl.Map.from_pw_aff(sp.pw(x)) for x in subs]
        m = reduce(lambda p, q: p.flat_range_product(q), maps)
        m = m.set_tuple_name(isl.dim_type.in_, sid).set_tuple_name(isl.dim_type.out, af.mangle(a.array))
        if dom is not None:
            m = m.intersect_domain(dom)
    return Access(
        array=a.array,
        kind=a.kind,
        map=m,
        subscripts=a.texts,
        span=a.span,
        elem_type=a.elem_type,
        elem_size=a.elem_size,
        extents=extents,
    )


def _refused_nest(an: af.ANest, err: Diagnostic) -> Nest:
    """A nest whose modelling failed: structure kept, nothing countable."""
    loops = tuple(
        Loop(
            index=lp.index,
            var=an.names.get(("loop", lp.index), af.mangle(lp.display)),
            depth=lp.depth,
            span=lp.span,
            header=lp.header,
            parent=lp.parent,
            domain=None,
            step=lp.step,
            omp=lp.omp,
            children=tuple(lp.children),
            display=lp.display,
            refusal=err,
        )
        for lp in an.loops
    )
    stmts = tuple(
        Statement(
            id=st.id,
            span=st.span,
            text=st.text,
            loop_vars=tuple(an.names.get(("loop", k), "?") for k in st.loops),
            loops=st.loops,
            domain=None,
            ir=st.node,
            refusal=err,
        )
        for st in an.stmts
    )
    try:
        context = _universe_params(an.params)
    except Exception:  # pragma: no cover - defensive
        context = _universe_params(())
    return Nest(
        path=an.path,
        function=an.function,
        span=an.span,
        params=an.params,
        context=context,
        loops=loops,
        statements=stmts,
        diagnostics=list(an.diagnostics) + [err],
        symbolic=dict(an.symbolic),
        source=an.source,
        names=_c_names(an),
    )
