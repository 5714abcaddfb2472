# Names of size parameters as the model knows them: isl needs plain ASCII
# identifiers that are not words of its own notation; C allows more (universal
# character names, `$`). Mangling is deterministic, so the same source always
# gives the same names, and `--at ñ=3` names the parameter the model made of ñ.

from __future__ import annotations

_RESERVED = {
    "and", "or", "not", "implies", "exists", "mod", "floor", "ceil", "floord", "ceild", "min", "max",
    "infty", "nan", "rat", "true", "false", "div",
}  # fmt: skip - isl reads these words in any letter case (MAX, Floor, ...)


def mangle(name: str) -> str:
    """A valid, unreserved ASCII identifier for a C name (identity for ordinary names)."""
    out = []
    for ch in name:
        if ch.isascii() and (ch.isalnum() or ch == "_"):
            out.append(ch)
        else:
            out.append(f"_u{ord(ch):x}_")
    s = "".join(out) or "_"
    if s[0].isdigit():
        s = "_" + s
    if s.lower() in _RESERVED:
        s += "_"
    return s
