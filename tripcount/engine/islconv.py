# Conversions between isl objects and the engine's own affine expressions.
#
# isl gives bounds as quasi-affine functions (Aff, with integer divisions as
# "divs") and domains as sets of constraints over parameters and divs. Here they
# become Lin values (dict atom -> Fraction, constant) over named variables and
# canonical Floor atoms, so that the engine can evaluate, compare and print them
# in its own notation. Also the reverse direction for affine conditions
# (isl input syntax, used only to build sets internally, never shown to users).

from __future__ import annotations

from fractions import Fraction

import islpy as isl

from tripcount.engine.qpoly import Floor, Lin, floor_of, lin_add

_dt = isl.dim_type


# the values met almost always (coefficients and small constants), ready made:
# reading a Fraction from text is the costly part of converting constraints
_SMALL = {str(i): Fraction(i) for i in range(-256, 257)}
_SMALL_INT = {i: Fraction(i) for i in range(-256, 257)}


def val_int(v: isl.Val) -> int:
    """Exact value of an integer isl Val (ValueError for a fraction or infinity).

    Read with get_num_si when it fits: islpy's to_python() and to_str() leak the
    C string isl returns (about 32 bytes a call, measured with islpy 2026.2.2),
    which point scans call once per coordinate -- hundreds of MB over a large run.
    """
    if not v.is_int():
        raise ValueError(f"not an integer: {v}")
    if v.n_abs_num_chunks(4) <= 1:  # |v| < 2^32 (chunks of 4 bytes): exact in a C long
        return v.get_num_si()
    return int(v.to_str())


def val_frac(v: isl.Val) -> Fraction:
    """Exact rational value of an isl Val."""
    if v.is_int() and v.n_abs_num_chunks(4) <= 1:
        n = v.get_num_si()
        small = _SMALL_INT.get(n)
        return small if small is not None else Fraction(n)
    s = v.to_str()
    f = _SMALL.get(s)
    if f is None:
        f = Fraction(s) if "/" in s else Fraction(int(s))
    return f


def aff_to_lin(aff: isl.Aff) -> Lin:
    """Affine expression (with canonical floors) of an isl Aff; names from its space."""
    sp = aff.get_space()
    d: dict = {}
    const = val_frac(aff.get_constant_val())
    for t in (_dt.param, _dt.in_):
        for i in range(aff.dim(t)):
            c = aff.get_coefficient_val(t, i)
            if not c.is_zero():
                name = sp.get_dim_name(t, i)
                d[name] = d.get(name, 0) + val_frac(c)
    acc: Lin = (d, const)
    for k in range(aff.dim(_dt.div)):
        c = aff.get_coefficient_val(_dt.div, k)
        if c.is_zero():
            continue
        inner = aff_to_lin(aff.get_div(k))
        acc = lin_add(acc, floor_of(inner[0], inner[1], 1), val_frac(c))
    return acc


def bset_divs(bset: isl.BasicSet) -> list[Lin]:
    """Each div of a basic set as an affine expression of canonical floors."""
    ls = bset.get_local_space()
    out = []
    for k in range(ls.dim(_dt.div)):
        inner = aff_to_lin(ls.get_div(k))
        out.append(floor_of(inner[0], inner[1], 1))
    return out


def bset_constraints(bset: isl.BasicSet, divs: list[Lin] | None = None) -> list[tuple[Lin, bool]]:
    """Constraints (lin, is_equality) meaning lin == 0 or lin >= 0."""
    if divs is None:
        divs = bset_divs(bset)
    sp = bset.get_space()
    names = {
        _dt.param: [sp.get_dim_name(_dt.param, i) for i in range(bset.dim(_dt.param))],
        _dt.set: [sp.get_dim_name(_dt.set, i) for i in range(bset.dim(_dt.set))],
    }
    out = []
    for c in bset.get_constraints():
        d: dict = {}
        for t in (_dt.param, _dt.set):
            for i, nm in enumerate(names[t]):
                v = c.get_coefficient_val(t, i)
                if not v.is_zero():
                    d[nm] = val_frac(v)
        acc: Lin = (d, val_frac(c.get_constant_val()))
        for k, dv in enumerate(divs):
            v = c.get_coefficient_val(_dt.div, k)
            if not v.is_zero():
                acc = lin_add(acc, dv, val_frac(v))
        acc = ({a: x for a, x in acc[0].items() if x}, acc[1])
        out.append((acc, c.is_equality()))
    return out


def exceeds(s: isl.Set, max_basic: int, max_divs: int) -> bool:
    """True when s, as written, has more than `max_basic` basic sets or more than
    `max_divs` existentials in all: past such a size some isl calls (hulls,
    subset tests) run for minutes in one call that no limit can interrupt."""
    bsets = s.get_basic_sets()
    return len(bsets) > max_basic or sum(b.dim(_dt.div) for b in bsets) > max_divs


def set_conditions(s: isl.Set) -> list[list[tuple[Lin, bool]]]:
    """Disjunctive normal form of a set: one constraint list per basic set."""
    s = s.compute_divs()
    return [bset_constraints(b) for b in s.get_basic_sets()]


# ---------------------------------------------------------------------------
# isl input syntax for our affine expressions (internal use only)


def atom_isl(a) -> str:
    if isinstance(a, str):
        return a
    return f"floor(({lin_isl((dict(a.terms), a.const))})/{a.den})"


def lin_isl(lin: Lin) -> str:
    """isl input syntax of an integer-coefficient affine expression."""
    parts = []
    for a, c in sorted(lin[0].items(), key=lambda it: str(it[0])):
        parts.append(f"{c}*{atom_isl(a)}")
    parts.append(f"{lin[1]}")
    return " + ".join(parts)


def params_set(ctx: isl.Context, params: tuple[str, ...], cond: str) -> isl.Set:
    """A parameter set from an isl-syntax condition over `params`."""
    return isl.Set.read_from_str(ctx, f"[{', '.join(params)}] -> {{ : {cond} }}")


def is_floor(a) -> bool:
    return isinstance(a, Floor)
