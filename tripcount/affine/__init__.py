# Stage 3 of the pipeline (package): from the IR to affine loop nests.
#
# For every outermost `for` of every function this stage decides what can be
# modelled exactly and writes it down in a small affine language of its own
# (Lin: integer linear combinations of loop variables, size parameters and a
# few exact non-linear atoms such as C truncating division, min/max and
# selections; Cond: boolean combinations of `e >= 0`, `e == 0`, `e != 0`).
# It knows C's rules (truncating `/` and `%`, loop termination, `continue`,
# scoping of loop variables) and nothing about isl: `tripcount.model` turns
# the result into integer sets.
#
# What cannot be modelled exactly is refused at the smallest scope that keeps
# the rest exact, with one diagnostic (TC2xx) per reason: a data-dependent
# `break` makes one loop unknown, a `return` the whole nest, a non-affine `if`
# the statements under it. Loop-invariant values that are not affine (a call
# `len(s)`, a member `s->n`) become named size parameters with a note.
#
# Modules, in the order they build on each other (the TC2xx diagnostics are
# in tripcount/diagnostics/model.py): lin (the affine language), ctext (C
# text and isl-safe names), nests (the output), convert (IR expressions ->
# affine), depth (cutting code nested too deeply), writes (scans of the IR),
# decls (declarations in scope), walkctx and loops (the walk's state, loop
# headers; inttypes: C's integer types in them), flatten (flattened
# subscripts), whiles (while loops that are counted loops, and the others),
# build (one nest; the entry).

from tripcount.affine.build import _NestBuilder, extract_nests, outermost_fors
from tripcount.affine.convert import Converter, NotAffine
from tripcount.affine.ctext import loop_label, mangle, symbol_base
from tripcount.affine.depth import MAX_DEPTH
from tripcount.affine.lin import (
    FALSE,
    TRUE,
    And,
    Atom,
    BoolConst,
    CDiv,
    CMod,
    Cond,
    Extremum,
    FDiv,
    FMod,
    Lin,
    Or,
    Rel,
    Select,
    Var,
    add,
    atom,
    c_div,
    c_mod,
    cdiv,
    closure,
    cmod,
    conj,
    const,
    disj,
    eq,
    extremum,
    ge,
    gt,
    monotone,
    ne,
    negate,
    rel,
    scale,
    sub,
    subst,
    var,
)
from tripcount.affine.loops import parse_step
from tripcount.affine.nests import AAccess, ALoop, ANest, AStmt
from tripcount.ctable import base_type, is_floating_type, is_integer_type, type_size

__all__ = [
    "And",
    "Atom",
    "BoolConst",
    "CDiv",
    "CMod",
    "Cond",
    "Extremum",
    "FALSE",
    "FDiv",
    "FMod",
    "Lin",
    "Or",
    "Rel",
    "Select",
    "TRUE",
    "Var",
    "add",
    "atom",
    "c_div",
    "c_mod",
    "cdiv",
    "closure",
    "cmod",
    "conj",
    "const",
    "disj",
    "eq",
    "extremum",
    "ge",
    "gt",
    "monotone",
    "ne",
    "negate",
    "rel",
    "scale",
    "sub",
    "subst",
    "var",
    "loop_label",
    "mangle",
    "symbol_base",
    "base_type",
    "is_floating_type",
    "is_integer_type",
    "type_size",
    "AAccess",
    "ALoop",
    "ANest",
    "AStmt",
    "Converter",
    "NotAffine",
    "MAX_DEPTH",
    "parse_step",
    "_NestBuilder",
    "extract_nests",
    "outermost_fors",
]
