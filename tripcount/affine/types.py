# Affine stage: C scalar types -- normalized names, sizes (LP64), integer or floating.

from __future__ import annotations

import re

# --------------------------------------------------------------------------
# C types

_QUALIFIERS = {
    "const", "volatile", "restrict", "__restrict", "__restrict__", "static", "extern",
    "register", "inline", "auto", "_Atomic", "__const",
}  # fmt: skip
_SIZES = {
    "char": 1, "signed char": 1, "unsigned char": 1, "_Bool": 1, "bool": 1,
    "short": 2, "unsigned short": 2,
    "int": 4, "unsigned": 4, "float": 4,
    "long": 8, "unsigned long": 8, "long long": 8, "unsigned long long": 8,
    "double": 8, "long double": 16,
    "size_t": 8, "ssize_t": 8, "ptrdiff_t": 8, "intptr_t": 8, "uintptr_t": 8,
    "int8_t": 1, "uint8_t": 1, "int16_t": 2, "uint16_t": 2, "int32_t": 4, "uint32_t": 4,
    "int64_t": 8, "uint64_t": 8,
    "float _Complex": 8, "double _Complex": 16, "long double _Complex": 32,
    "float complex": 8, "double complex": 16,
}  # fmt: skip
_INT_WORDS = {"char", "short", "int", "long", "signed", "unsigned", "_Bool", "bool"}
_INT_TYPEDEFS = re.compile(r"u?int(8|16|32|64|ptr|max)?_t\Z|s?size_t\Z|ptrdiff_t\Z|u?int_(fast|least)\d+_t\Z")
_FLOAT_WORDS = {"float", "double", "_Complex", "complex", "_Float16", "_Float32", "_Float64", "__float128"}


def base_type(type_name: str) -> str:
    """The type without qualifiers and storage classes, words normalized ("long int" -> "long")."""
    words = [w for w in type_name.replace("*", " ").split() if w not in _QUALIFIERS]
    if any(w in ("short", "long", "unsigned", "signed") for w in words) and "int" in words:
        words = [w for w in words if w != "int"]
    if "signed" in words and len(words) > 1 and "char" not in words:
        words = [w for w in words if w != "signed"]
    if words == ["signed"]:
        words = ["int"]
    if words and words[0] == "long" and words[1:] == ["long"]:
        return "long long"
    return " ".join(words)


def type_size(type_name: str) -> int | None:
    """Size in bytes of a scalar C type on the usual 64-bit ABIs (LP64, common practice), or None."""
    return _SIZES.get(base_type(type_name))


def is_integer_type(type_name: str) -> bool:
    """True for the integer types (a cast to them is transparent to the model)."""
    if "*" in type_name:
        return False
    words = base_type(type_name).split()
    if not words:
        return False
    return all(w in _INT_WORDS for w in words) or (len(words) == 1 and bool(_INT_TYPEDEFS.match(words[0])))


def is_floating_type(type_name: str) -> bool:
    """True for float, double, long double and complex types (not pointers to them)."""
    return "*" not in type_name and any(w in _FLOAT_WORDS for w in type_name.split())
