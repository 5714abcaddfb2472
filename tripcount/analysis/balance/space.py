# Balance: which loops are parallel, constant values of clause expressions,
# and the iteration space of a parallel loop (its normalized iteration
# counters, static and chunked slices of threads) as integer sets.

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from fractions import Fraction

import islpy as isl

from tripcount import ir
from tripcount.engine.islconv import val_int
from tripcount.model import Loop, Nest
from tripcount.options import Options

PARAM, SET, IN = isl.dim_type.param, isl.dim_type.set, isl.dim_type.in_

# --------------------------------------------------------------------------
# Which loops


def _is_worksharing(omp: ir.OmpClauses | None) -> bool:
    return omp is not None and "for" in omp.directive.split()


def targets(nest: Nest, options: Options) -> list[tuple[Loop, ir.OmpClauses, str]]:
    """Parallel loops of the nest: pragma'd ones and those named by --parallel LINE."""
    out = []
    for loop in nest.loops:
        if _is_worksharing(loop.omp):
            out.append((loop, loop.omp, "pragma"))
        elif loop.header.line in options.parallel_lines or loop.span.line in options.parallel_lines:
            out.append((loop, ir.OmpClauses(loop.header, directive="parallel for",
                                            text="--parallel"), "--parallel"))
    return out


def _ancestors(nest: Nest, loop: Loop) -> list[Loop]:
    out = []
    p = loop.parent
    while p is not None:
        out.append(nest.loops[p])
        p = nest.loops[p].parent
    return out


# --------------------------------------------------------------------------
# Constant expressions of pragma clauses


def const_value(e: ir.Expr | None, at: Mapping[str, int]) -> int | None:
    """Integer value of a clause expression (C semantics), names from `at`; None if unknown."""
    if e is None:
        return None
    if isinstance(e, ir.IntLit):
        return e.value
    if isinstance(e, ir.Name):
        return at.get(e.name)
    if isinstance(e, ir.Cast):
        return const_value(e.operand, at)
    if isinstance(e, ir.Unary) and e.op in "+-":
        v = const_value(e.operand, at)
        return None if v is None else (v if e.op == "+" else -v)
    if isinstance(e, ir.Binary):
        a, b = const_value(e.left, at), const_value(e.right, at)
        if a is None or b is None:
            return None
        if e.op == "+":
            return a + b
        if e.op == "-":
            return a - b
        if e.op == "*":
            return a * b
        if e.op in ("/", "%") and b != 0:
            q = abs(a) // abs(b) * (1 if (a >= 0) == (b > 0) else -1)  # C truncates toward zero
            return q if e.op == "/" else a - b * q
    if isinstance(e, ir.Ternary):
        c = const_value(e.cond, at)
        if c is None:
            return None
        return const_value(e.then if c else e.other, at)
    return None


# --------------------------------------------------------------------------
# The iteration space of a parallel loop


@dataclass
class Space:
    """The collapsed loops of a parallel loop and the statements inside.

    Sets have anonymous tuples; dims are the `depth` outer loop variables, then
    the `width` collapsed loop variables, then (statements) the inner ones.
    """

    depth: int
    steps: tuple[int, ...]
    domains: tuple[isl.Set, ...]  # domain of each collapsed loop
    stmts: tuple[tuple[isl.Set, int | Fraction], ...]  # (domain, work weight)

    @property
    def width(self) -> int:
        """Number of collapsed loops."""
        return len(self.steps)

    @property
    def domain(self) -> isl.Set:
        """The iterations: domain of the innermost collapsed loop."""
        return self.domains[-1]


def _param_names(s: isl.Set) -> list[str]:
    return [s.get_dim_name(PARAM, i) for i in range(s.dim(PARAM))]


def fix_params(s: isl.Set, at: Mapping[str, int]) -> isl.Set | None:
    """`s` with every parameter replaced by its value (None if one is not given)."""
    for name in _param_names(s):
        if name not in at:
            return None
        s = s.fix_val(PARAM, s.find_dim_by_name(PARAM, name), isl.Val(str(at[name])))
    return s.project_out(PARAM, 0, s.dim(PARAM))


def space_at(sp: Space, at: Mapping[str, int]) -> Space | None:
    """The space at fixed sizes (parameter-free sets), or None if a size is missing."""
    doms = [fix_params(d, at) for d in sp.domains]
    stmts = [(fix_params(s, at), w) for s, w in sp.stmts]
    if any(d is None for d in doms) or any(s is None for s, _ in stmts):
        return None
    return Space(sp.depth, sp.steps, tuple(doms), tuple(stmts))  # type: ignore[arg-type]


def _lift(pa: isl.PwAff, pos: int, n: int) -> isl.PwAff:
    return pa.insert_dims(IN, pos, n) if n else pa


def counters(sp: Space) -> tuple[list[isl.PwAff], list[isl.PwAff]] | None:
    """Per collapsed loop j: its counter k_j = (v_j - first)/step on the loop space, and its
    trip count n_j on the space of the outer (non-collapsed) variables.

    None when an inner collapsed loop's bounds depend on the outer collapsed
    variables (a non-rectangular collapse).
    """
    d, c = sp.depth, sp.width
    ks: list[isl.PwAff] = []
    ns: list[isl.PwAff] = []
    for j in range(c):
        dom = sp.domains[j]
        npar = dom.dim(PARAM)
        local = dom.move_dims(PARAM, npar, SET, 0, d + j)
        lo = local.dim_min(0).move_dims(IN, 0, PARAM, npar, d + j)
        hi = local.dim_max(0).move_dims(IN, 0, PARAM, npar, d + j)
        if d and not j:
            # An inner parallel loop whose extent does not depend on the outer loops: its
            # bounds' domains still do (where the outer loops run); drop that part.
            outer = dom.project_out(SET, d, 1)
            lo_g, hi_g = lo.gist(outer), hi.gist(outer)
            if not lo_g.involves_dims(IN, 0, d) and not hi_g.involves_dims(IN, 0, d):
                lo = lo_g.intersect_params(outer.params())
                hi = hi_g.intersect_params(outer.params())
        if j:
            # Bounds of an inner collapsed loop must not depend on the outer collapsed
            # variables; their domains always do (where the outer loops run), hence the gist.
            outer = dom.project_out(SET, d + j, 1)
            lo, hi = lo.gist(outer), hi.gist(outer)
            if lo.involves_dims(IN, d, j) or hi.involves_dims(IN, d, j):
                return None
        step = abs(sp.steps[j])
        nj = hi.sub(lo).scale_down_val(isl.Val(str(step))).floor()
        nj = nj.add(isl.PwAff.val_on_domain(nj.domain(), isl.Val(1)))
        var = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(sp.domain.get_space()), SET, d + j)
        lo_l, hi_l = _lift(lo, d + j, c - j), _lift(hi, d + j, c - j)
        kj = var.sub(lo_l) if sp.steps[j] > 0 else hi_l.sub(var)
        ks.append(kj.scale_down_val(isl.Val(str(step))).floor())
        ns.append(nj.drop_dims(IN, d, j) if j else nj)
    return ks, ns


def counter(sp: Space) -> tuple[isl.PwAff, isl.PwAff] | None:
    """The normalized iteration counter k (on the loop space) and the trip count n per entry.

    k numbers the iterations of one entry in execution order, 0 .. n-1; for
    collapsed loops it is the linearized index k_0*n_1*...+k_1*n_2*...+... .
    None when that is not affine: collapsed loops whose inner extents depend on
    the outer collapsed variables (non-rectangular), or on the parameters.
    """
    kn = counters(sp)
    if kn is None:
        return None
    ks, ns = kn
    d, c = sp.depth, sp.width
    try:
        k = ks[-1]
        n = ns[0]
        scale: isl.PwAff | None = None
        for j in range(c - 2, -1, -1):
            inner = _lift(ns[j + 1], d, c)
            scale = inner if scale is None else scale.mul(inner)
            k = k.add(ks[j].mul(scale))
        for j in range(1, c):
            n = n.mul(ns[j])
    except isl.Error:  # a product of two non-constant extents: not affine
        return None
    return k, n


def static_slice(k: isl.PwAff, n: isl.PwAff, depth: int, width: int, threads: int, t: int) -> isl.Set:
    """Iterations (on the loop space) that thread t runs under schedule(static)."""
    nl = _lift(n, depth, width)
    q = nl.scale_down_val(isl.Val(str(threads))).floor()
    r = nl.mod_val(isl.Val(str(threads)))

    def start(u: int) -> isl.PwAff:
        cu = isl.PwAff.val_on_domain(nl.domain(), isl.Val(str(u)))
        return q.scale_val(isl.Val(str(u))).add(r.min(cu))

    return k.ge_set(start(t)).intersect(k.lt_set(start(t + 1)))


def _with_param(s: isl.Set, name: str) -> tuple[isl.Set, int]:
    pos = s.dim(PARAM)
    return s.insert_dims(PARAM, pos, 1).set_dim_name(PARAM, pos, name), pos


def chunked_slice(k: isl.PwAff, threads: int, chunk: int, tname: str) -> isl.Set:
    """Iterations thread `tname` (a parameter, 0 <= t < P) runs under schedule(static, chunk)."""
    dom, pos = _with_param(k.domain(), tname)
    kt = k.align_params(dom.get_space().params())
    tv = isl.PwAff.var_on_domain(isl.LocalSpace.from_space(dom.get_space()), PARAM, pos)
    sl = kt.scale_down_val(isl.Val(str(chunk))).floor().mod_val(isl.Val(str(threads))).eq_set(tv)
    return (sl.lower_bound_val(PARAM, sl.find_dim_by_name(PARAM, tname), isl.Val(0))
            .upper_bound_val(PARAM, sl.find_dim_by_name(PARAM, tname), isl.Val(threads - 1)))


def _on_stmt(sl: isl.Set, stmt: isl.Set, prefix: int) -> isl.Set:
    """The statement instances whose first `prefix` dims lie in `sl`."""
    extra = stmt.dim(SET) - prefix
    lifted = sl.insert_dims(SET, prefix, extra) if extra else sl
    return stmt.intersect(lifted)


def _fix(s: isl.Set, values: tuple[int, ...], offset: int = 0) -> isl.Set:
    for i, x in enumerate(values):
        s = s.fix_val(SET, offset + i, isl.Val(x))
    return s


def _points(s: isl.Set) -> list[tuple[int, ...]]:
    n = s.dim(SET)
    out: list[tuple[int, ...]] = []
    s.foreach_point(lambda p: out.append(tuple(val_int(p.get_coordinate_val(SET, i)) for i in range(n))))
    return out


def _sample(s: isl.Set) -> tuple[int, ...] | None:
    p = s.sample_point()
    if p.is_void():
        return None
    return tuple(val_int(p.get_coordinate_val(SET, i)) for i in range(s.dim(SET)))


def _depends(s: isl.Set, context: isl.Set, first: int, count: int) -> bool:
    """Does `s` (parameter-free) depend on dims first..first+count-1 within `context`?

    The dims 0..first+count-1 become parameters; constraints implied by the
    context (the loop space) are dropped before looking.
    """
    m = first + count
    sp = s.move_dims(PARAM, 0, SET, 0, m)
    ctx = context.move_dims(PARAM, 0, SET, 0, m).params()
    return bool(sp.gist_params(ctx).involves_dims(PARAM, first, count))




def sizes_of(options: Options, nest: Nest) -> dict[str, int]:
    """The --at sizes by name, the default `*=V` applied to every parameter of the nest."""
    full = options.sizes(nest.params)
    return {**{k: v for k, v in options.at.items() if k != "*"}, **(full or {})}

