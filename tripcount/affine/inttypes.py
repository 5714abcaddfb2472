# Affine stage: C's integer types in loop headers. The model counts with
# mathematical integers; C compares and steps in types of fixed width. This
# module finds where the two differ for one loop and says what to do:
#   * a comparison done in unsigned arithmetic (C11 6.3.1.8, the usual
#     arithmetic conversions) turns a negative bound E into E + 2^w; that is
#     modelled exactly, as a second case of the condition, with a note;
#   * a loop variable that would step past the range of its type (an
#     `unsigned char` below 300, an `int` below 10^30, an unsigned variable
#     stepping down past 0) wraps around (unsigned) or overflows (signed,
#     undefined behaviour): when that happens for every parameter value the
#     loop is refused (it never ends in C); otherwise a warning gives the
#     condition and the loop is counted under the assumption that it does not
#     happen (the condition joins the loop's domain).
# Widths are those of the LP64 ABI (common practice); plain char is signed as
# on x86-64 Linux (common practice; it is unsigned on AArch64 Linux).

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

from tripcount import ir
from tripcount.affine.convert import Converter, NotAffine
from tripcount.affine.lin import (
    Cond,
    Lin,
    Var,
    add,
    cmod,
    conj,
    const,
    disj,
    ge,
    gt,
    lin_vars,
    negate,
    sub,
)
from tripcount.ctable import base_type, type_size
from tripcount.ir import c_text

_UNSIGNED_STD = frozenset({"size_t", "uintptr_t", "uintmax_t", "std::size_t"})
_SIGNED_STD = frozenset({"ssize_t", "ptrdiff_t", "intptr_t", "intmax_t", "off_t", "time_t", "clock_t",
                         "std::ptrdiff_t"})


@dataclass(frozen=True)
class IntType:
    """A C integer type by width in bits and signedness."""

    bits: int
    unsigned: bool

    @property
    def lo(self) -> int:
        """Smallest value."""
        return 0 if self.unsigned else -(1 << (self.bits - 1))

    @property
    def hi(self) -> int:
        """Largest value."""
        return (1 << self.bits) - 1 if self.unsigned else (1 << (self.bits - 1)) - 1

    def describe(self, spelled: str) -> str:
        """`unsigned char (0..255)`."""
        return f"{spelled} ({self.lo}..{self.hi})"


INT = IntType(32, False)


def int_type(type_name: str | None) -> IntType | None:
    """Width and signedness of an integer type name (LP64), None if not an integer type we know."""
    if not type_name or "*" in type_name:
        return None
    bt = base_type(type_name)
    if bt in ("_Bool", "bool"):
        return None
    size = type_size(bt)
    words = bt.split()
    if bt in _UNSIGNED_STD or re.fullmatch(r"(?:std::)?uint(?:_least|_fast)?\d+_t", bt):
        unsigned = True
    elif bt in _SIGNED_STD or re.fullmatch(r"(?:std::)?int(?:_least|_fast)?\d+_t", bt):
        unsigned = False
    elif words and all(w in ("char", "short", "int", "long", "signed", "unsigned", "__int128") for w in words):
        unsigned = "unsigned" in words
    else:
        return None
    if size is None:
        m = re.search(r"(\d+)_t$", bt)
        if not m:
            return None
        size = int(m.group(1)) // 8
    return IntType(size * 8, unsigned)


def promote(t: IntType) -> IntType:
    """Integer promotion: types narrower than int compute as int."""
    return INT if t.bits < 32 else t


def common(a: IntType, b: IntType) -> IntType:
    """The type both operands convert to (usual arithmetic conversions, LP64)."""
    a, b = promote(a), promote(b)
    if a.unsigned == b.unsigned:
        return a if a.bits >= b.bits else b
    u, s = (a, b) if a.unsigned else (b, a)
    if u.bits >= s.bits:
        return u
    return s  # the wider signed type holds every value of the unsigned one


def expr_type(e: ir.Expr, lookup: Callable[[str], str | None]) -> IntType:
    """The integer type of an expression (int where unknown), by the usual arithmetic conversions."""
    if isinstance(e, ir.Name):
        return promote(int_type(lookup(e.name)) or INT)
    if isinstance(e, ir.Cast):
        return promote(int_type(e.ctype) or INT)
    if isinstance(e, ir.Unary) and e.op in "-+~":
        return expr_type(e.operand, lookup)
    if isinstance(e, ir.Binary) and e.op in ("+", "-", "*", "/", "%", "&", "|", "^"):
        return common(expr_type(e.left, lookup), expr_type(e.right, lookup))
    if isinstance(e, ir.Binary) and e.op in ("<<", ">>"):
        return expr_type(e.left, lookup)
    if isinstance(e, ir.Ternary):
        return common(expr_type(e.then, lookup), expr_type(e.other, lookup))
    if is_size(e):
        return IntType(64, True)
    if isinstance(e, ir.Call) and e.func in ("std::min", "std::max", "min", "max") and e.args:
        t = expr_type(e.args[0], lookup)
        for a in e.args[1:]:
            t = common(t, expr_type(a, lookup))
        return t
    return INT


def is_size(e: ir.Expr) -> bool:
    """`sizeof(...)`, `v.size()` or `size(v)`: a size_t value."""
    if isinstance(e, ir.Opaque):
        return e.text.startswith("sizeof") or re.search(r"\.\s*size\s*\(\s*\)$", e.text) is not None
    return isinstance(e, ir.Call) and e.func == "size" and len(e.args) == 1


def nonnegative_names(e: ir.Expr, lookup: Callable[[str], str | None]) -> bool:
    """True when e is built from unsigned names and nonnegative constants by + and * only (never below 0)."""
    if isinstance(e, ir.IntLit):
        return e.value >= 0
    if isinstance(e, ir.Name):
        t = int_type(lookup(e.name))
        return t is not None and t.unsigned
    if is_size(e):
        return True
    if isinstance(e, ir.Binary) and e.op in ("+", "*", "/", "%"):
        return nonnegative_names(e.left, lookup) and nonnegative_names(e.right, lookup)
    return False


RELATIONS = {"<": ">", "<=": ">=", ">": "<", ">=": "<="}


def comparison_with(e: ir.Expr, v: str) -> tuple[str, ir.Expr] | None:
    """For `v OP E` or `E OP v` (OP relational): (OP as seen from v, E); else None."""
    if not isinstance(e, ir.Binary) or e.op not in RELATIONS:
        return None
    if isinstance(e.left, ir.Name) and e.left.name == v:
        return e.op, e.right
    if isinstance(e.right, ir.Name) and e.right.name == v:
        return RELATIONS[e.op], e.left
    return None


def conjuncts(e: ir.Expr) -> list[ir.Expr]:
    """The operands of a top-level `&&` chain."""
    out: list[ir.Expr] = []
    stack = [e]
    while stack:
        x = stack.pop()
        if isinstance(x, ir.Binary) and x.op == "&&":
            stack.extend((x.right, x.left))
        else:
            out.append(x)
    return out


def power_of_two(n: int) -> bool:
    """True for 1, 2, 4, 8, ..."""
    return n > 0 and n & (n - 1) == 0


# --------------------------------------------------------------------------
# The loop header under C's integer semantics


def _with_bound(p: ir.Binary, v: str, bound: ir.Expr) -> ir.Binary:
    """The comparison `p` (between v and some E) with E replaced by `bound`."""
    if isinstance(p.left, ir.Name) and p.left.name == v:
        return ir.Binary(p.span, p.op, p.left, bound)
    return ir.Binary(p.span, p.op, bound, p.right)


def unsigned_condition(conv: Converter, cond: ir.Expr, v: str, vt: IntType | None,
                       lookup: Callable[[str], str | None]) -> tuple[Cond, list[tuple[ir.Expr, IntType]]]:
    """The loop condition with comparisons done in unsigned arithmetic modelled exactly.

    `v < E` compared as unsigned of width w reads E + 2^w where E < 0. Returns
    the condition and the bounds E (with the comparison type) that may wrap.
    NotAffine propagates.
    """
    conds: list[Cond] = []
    wrapped: list[tuple[ir.Expr, IntType]] = []
    for p in conjuncts(cond):
        c = conv.cond(p)
        cmp = comparison_with(p, v) if vt is not None else None
        if cmp is not None and isinstance(p, ir.Binary):
            bound = cmp[1]
            ct = common(vt, expr_type(bound, lookup))
            if ct.unsigned and not nonnegative_names(bound, lookup):
                e = conv.lin(bound)
                if not mentions_loop(e):
                    shifted = ir.Binary(bound.span, "+", bound, ir.IntLit(bound.span, 1 << ct.bits))
                    w = conv.cond(_with_bound(p, v, shifted))
                    if e.is_const:
                        c = c if e.const >= 0 else w
                    else:
                        c = disj([conj([ge(e, const(0)), c]), conj([gt(const(0), e), w])])
                    if not e.is_const or e.const < 0:
                        wrapped.append((bound, ct))
                    # an unsigned size is never negative: say so, so that the pieces
                    # of the count are those of the values C can give it
                    for n in ir.walk(bound):
                        t = int_type(lookup(n.name)) if isinstance(n, ir.Name) else None
                        if t is not None and t.unsigned:
                            conds.append(ge(conv.lin(n), const(0)))
        conds.append(c)
    return conj(conds), wrapped


def mentions_loop(e: Lin) -> bool:
    """Whether an affine value reads a loop variable (its range is not that of a parameter)."""
    return any(isinstance(a, Var) and a.key[0] == "loop" for a in lin_vars(e))


@dataclass
class RangeIssue:
    """A loop variable that leaves the range of its type: when, and what happens then."""

    bound: ir.Expr
    when: str  # C condition on the sizes, "" when always
    assume: Cond | None  # the domain part that excludes it (None: refuse)
    what: str


def range_issues(conv: Converter, cond: ir.Expr, v: str, vt: IntType, spelled: str, start: Lin,
                 start_text: str, step: int, lookup: Callable[[str], str | None]) -> list[RangeIssue]:
    """Where stepping `v` would leave its type's range before the condition stops it."""
    out: list[RangeIssue] = []
    s = abs(step)
    desc = vt.describe(spelled)
    for p in conjuncts(cond):
        cmp = comparison_with(p, v)
        if cmp is None:
            continue
        op, bound = cmp
        try:
            e = conv.lin(bound)
        except NotAffine:
            continue
        if mentions_loop(e):
            continue
        if step > 0 and op in ("<", "<="):
            # the value tested after the last iteration is at most E - 1 + s (E + s for <=)
            limit = vt.hi - s + (1 if op == "<" else 0)  # E <= limit keeps it in range
            what = ("wraps around to 0, so the loop never ends" if vt.unsigned
                    else "overflows (undefined behaviour in C)")
            if e.is_const:
                hi_end = e.const - (1 if op == "<" else 0)  # largest value the condition admits
                if start.is_const:
                    if start.const > hi_end:
                        continue  # the loop does not run
                    hi_end = start.const + (hi_end - start.const) // s * s
                if hi_end + s > vt.hi:
                    out.append(RangeIssue(bound, "", None, f"'{v}' is {desc}, so '{c_text(p)}' holds for every "
                                          f"value it can take: stepping past {vt.hi} it {what}"))
                continue
            et = expr_type(bound, lookup)
            if et.hi <= vt.hi:
                continue  # the bound's own type keeps it within range (its last few values aside)
            out.append(RangeIssue(bound, f"{c_text(bound)} > {limit}", ge(const(limit), e),
                                  f"'{v}' is {desc}: stepping past {vt.hi} it {what}"))
        elif step < 0 and vt.unsigned and op in (">", ">="):
            # the last value l is in (K, K + s]; the next one, l - s, wraps when l < s
            k = e if op == ">" else sub(e, const(1))
            last = add(k, const(1), cmod(sub(start, add(k, const(1))), s))
            runs = gt(start, k)
            wraps = conj([runs, gt(const(s), last)])
            if s == 1 and not k.is_const:
                continue  # wraps only at `v >= 0`, read as always true where it is written
            if k.is_const and start.is_const:
                if start.const > k.const and k.const + 1 + (start.const - k.const - 1) % s < s:
                    out.append(RangeIssue(bound, "", None, _down_what(v, desc, s)))
                continue
            kt = c_text(bound) if op == ">" else f"{c_text(bound, 12)} - 1"
            if k.is_const:
                when = f"{start_text} > {k.const} && ({start_text} - {k.const + 1}) % {s} < {s - k.const - 1}"
            else:
                when = f"{start_text} > {kt} && ({start_text} - ({kt}) - 1) % {s} < {s} - ({kt}) - 1"
            out.append(RangeIssue(bound, when, negate(wraps), _down_what(v, desc, s)))
    return out


def _down_what(v: str, desc: str, s: int) -> str:
    ends = "never ends" if power_of_two(s) else "runs on for about 2^w/step more iterations"
    return f"'{v}' is {desc} and steps down by {s}: it passes below 0, wraps to a huge value and the loop {ends}"
