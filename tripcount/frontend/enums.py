# Front end: the constants of a file-scope `enum { A = 8, B = A * 2, C };`.
#
# C code names its tile sizes and vector widths with enumerators as often as
# with #define. An enumerator is an integer constant, so a loop bounded by one
# has a fixed trip count, not a size parameter. The enumerators are handed to
# the model as `const int NAME = value;` declarations at the enumerator's
# position; a value that cannot be read (a call, a name not known here) leaves
# that enumerator, and the ones counting on from it, out: they stay names.

from __future__ import annotations

from tripcount.frontend.lexer import Tok, char_value, int_value
from tripcount.frontend.ppexpr import CondEvalError, CondEvaluator

MAX_ENUMERATORS = 4096  # a longer list is a table, not sizes


def enum_constants(toks: list[Tok], known: dict[str, int] | None = None) -> list[tuple[Tok, int]]:
    """The (name token, value) pairs of the enumerator list in one declaration's tokens.

    `toks` is a whole top-level declaration (`[typedef] enum [tag] { ... } [names];`);
    `known` holds enumerators of earlier declarations (they may appear in values).
    Returns [] when the tokens hold no enumerator list.
    """
    k = next((i for i, t in enumerate(toks) if t.kind == "id" and t.value == "enum"), -1)
    if k < 0:
        return []
    k += 1
    if k < len(toks) and toks[k].kind == "id":
        k += 1  # the tag
    if k < len(toks) and toks[k].value == ":":  # C23/C++ fixed underlying type
        while k < len(toks) and toks[k].value != "{":
            k += 1
    if k >= len(toks) or toks[k].value != "{":
        return []
    values = dict(known or {})
    out: list[tuple[Tok, int]] = []
    nxt: int | None = 0
    i = k + 1
    while i < len(toks) and toks[i].value != "}" and len(out) < MAX_ENUMERATORS:
        name = toks[i]
        if name.kind != "id":
            return out
        j = i + 1
        expr: list[Tok] = []
        if j < len(toks) and toks[j].value == "=":
            depth = 0
            j += 1
            while j < len(toks) and not (depth == 0 and toks[j].value in (",", "}")):
                depth += {"(": 1, ")": -1}.get(toks[j].value, 0)
                expr.append(toks[j])
                j += 1
            value = _value(expr, values)
        else:
            value = nxt
        if value is not None:
            values[name.value] = value
            out.append((name, value))
        nxt = None if value is None else value + 1
        i = j + 1 if j < len(toks) and toks[j].value == "," else j
    return out


def _value(expr: list[Tok], known: dict[str, int]) -> int | None:
    """An integer constant expression of literals and known enumerators, or None."""
    vals: list[int | str] = []
    for t in expr:
        if t.kind == "num":
            v = int_value(t.value)
        elif t.kind == "chr":
            v = char_value(t.value)
        elif t.kind == "id":
            v = known.get(t.value)
        elif t.kind == "punct":
            vals.append(t.value)
            continue
        else:
            v = None
        if v is None:
            return None
        vals.append(v)
    if not vals:
        return None
    ev = CondEvaluator(vals)
    try:
        v = ev.ternary()
    except (CondEvalError, ZeroDivisionError, IndexError, TypeError, ValueError, RecursionError):
        return None
    return v if ev.pos == len(vals) else None
