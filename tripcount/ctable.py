# What tripcount knows of C and C++ names without reading any header
# (#include is ignored): the scalar type words, the standard typedef names
# (integer, floating or opaque, and their size), and the math-library
# functions with what one call counts as. One table for every stage that
# needs it -- the front end (which names are types), the affine stage (casts
# that keep integers, floating variables, element sizes) and the flops
# analysis (which arithmetic is floating) -- so that they cannot disagree.
#
# Sizes are those of the usual 64-bit ABIs (LP64: Linux, macOS on x86-64 and
# AArch64; common practice). float_t and double_t are float and double when
# FLT_EVAL_METHOD is 0, as with SSE on x86-64 and on AArch64 (C11 7.12p2,
# from memory).

from __future__ import annotations

# Words that qualify a type or give a storage class: no part of its kind or size.
QUALIFIERS = frozenset({
    "const", "volatile", "restrict", "__restrict", "__restrict__", "static", "extern",
    "register", "inline", "auto", "_Atomic", "__const",
})  # fmt: skip

# Type words of the language (and compiler extensions) that make integer types.
INT_WORDS = frozenset({"char", "short", "int", "long", "signed", "unsigned", "_Bool", "bool", "__int128"})
# Type words that make floating (real or complex) types.
FLOAT_WORDS = frozenset({"float", "double", "_Complex", "complex", "_Float16", "_Float32", "_Float64",
                         "_Float128", "__float128", "__fp16"})
# Floating type words that are plain identifiers to a C lexer (not keywords of the grammar).
EXTENSION_FLOAT_NAMES = frozenset({"_Float16", "_Float32", "_Float64", "_Float128", "__float128", "__fp16"})

# Sizes in bytes of the normalized spellings of the built-in scalar types (see base_type).
BUILTIN_SIZES: dict[str, int] = {
    "char": 1, "signed char": 1, "unsigned char": 1, "_Bool": 1, "bool": 1,
    "short": 2, "unsigned short": 2,
    "int": 4, "unsigned": 4, "float": 4,
    "long": 8, "unsigned long": 8, "long long": 8, "unsigned long long": 8,
    "__int128": 16, "unsigned __int128": 16,
    "double": 8, "long double": 16,
    "_Float16": 2, "__fp16": 2, "_Float32": 4, "_Float64": 8, "_Float128": 16, "__float128": 16,
    "float _Complex": 8, "double _Complex": 16, "long double _Complex": 32,
    "float complex": 8, "double complex": 16,
}  # fmt: skip

# Type names from standard headers: name -> (kind, size in bytes). Kind "int" or
# "float"; None for opaque types (FILE, va_list, vector registers). Size None
# where it differs between C libraries.
STANDARD_TYPES: dict[str, tuple[str | None, int | None]] = {
    # <stddef.h>, <sys/types.h>, <stdint.h>
    "size_t": ("int", 8), "ssize_t": ("int", 8), "ptrdiff_t": ("int", 8),
    "intptr_t": ("int", 8), "uintptr_t": ("int", 8), "intmax_t": ("int", 8), "uintmax_t": ("int", 8),
    "int8_t": ("int", 1), "uint8_t": ("int", 1), "int16_t": ("int", 2), "uint16_t": ("int", 2),
    "int32_t": ("int", 4), "uint32_t": ("int", 4), "int64_t": ("int", 8), "uint64_t": ("int", 8),
    "int_least8_t": ("int", None), "int_least16_t": ("int", None),
    "int_least32_t": ("int", None), "int_least64_t": ("int", None),
    "uint_least8_t": ("int", None), "uint_least16_t": ("int", None),
    "uint_least32_t": ("int", None), "uint_least64_t": ("int", None),
    "int_fast8_t": ("int", None), "int_fast16_t": ("int", None),
    "int_fast32_t": ("int", None), "int_fast64_t": ("int", None),
    "uint_fast8_t": ("int", None), "uint_fast16_t": ("int", None),
    "uint_fast32_t": ("int", None), "uint_fast64_t": ("int", None),
    "wchar_t": ("int", 4), "off_t": ("int", 8), "time_t": ("int", 8), "clock_t": ("int", 8),
    # <math.h>
    "float_t": ("float", 4), "double_t": ("float", 8),
    # opaque
    "FILE": (None, None), "va_list": (None, None), "omp_lock_t": (None, None),
    "__m128": (None, 16), "__m128d": (None, 16), "__m256": (None, 32), "__m256d": (None, 32),
    "__m512": (None, 64), "__m512d": (None, 64),
}  # fmt: skip

# Names a C lexer sees as identifiers that are types without a typedef in the
# file: the standard typedef names, the extension floating types, and `bool`
# (a macro of <stdbool.h> before C23, a keyword of C++).
IDENTIFIER_TYPES = frozenset(STANDARD_TYPES) | EXTENSION_FLOAT_NAMES | {"bool"}

# Math-library functions returning a floating value (C99 <math.h>); the f and l
# suffixed variants are the same function. One call counts as one "other"
# operation under its name, except the fused ones listed in FUSED_CALLS.
MATH_CALLS = frozenset(
    "sqrt cbrt exp exp2 expm1 log log2 log10 log1p pow sin cos tan asin acos atan atan2 sinh cosh "
    "tanh asinh acosh atanh fabs fmin fmax fdim fmod remainder hypot floor ceil round trunc rint "
    "nearbyint erf erfc tgamma lgamma copysign ldexp frexp modf".split())
# Functions whose one call is several arithmetic operations (kinds of the flops analysis).
FUSED_CALLS: dict[str, tuple[str, ...]] = {"fma": ("mul", "add")}
# Library functions with an integer value (<stdlib.h>, <math.h>).
INT_CALLS = frozenset({"abs", "labs", "llabs", "lround", "llround", "lrint", "llrint", "ilogb"})
# Of those, the absolute values (exact for the affine stage).
ABS_CALLS = frozenset({"abs", "labs", "llabs"})
# C++ library function templates whose explicit template arguments change only
# the type the arguments are converted to (`std::min<int>(a, b)` is min(a, b)
# for the integer values a loop bound takes): the C++ reading drops them.
VALUE_TEMPLATES = frozenset({"min", "max", "clamp", "abs", "fmin", "fmax", "sqrt", "exp", "pow"})


def base_type(type_name: str) -> str:
    """The type without qualifiers and storage classes, words normalized ("long int" -> "long")."""
    words = [w for w in type_name.replace("*", " ").split() if w not in QUALIFIERS]
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
    """Size in bytes of a scalar C type on the usual 64-bit ABIs (LP64), or None if unknown."""
    bt = base_type(type_name)
    if bt in BUILTIN_SIZES:
        return BUILTIN_SIZES[bt]
    return STANDARD_TYPES.get(bt, (None, None))[1]


def scalar_kind(type_name: str | None) -> str | None:
    """'float' or 'int' for a C type name, None when unknown (pointers count as their base type)."""
    if not type_name:
        return None
    words = base_type(type_name).split()
    kinds = {STANDARD_TYPES.get(w, (None, None))[0] for w in words}
    if any(w in FLOAT_WORDS for w in words) or "float" in kinds:
        return "float"
    if any(w in INT_WORDS for w in words) or "int" in kinds:
        return "int"
    return None


def is_integer_type(type_name: str) -> bool:
    """True for the integer types (not pointers): a cast to them is transparent to the model."""
    if "*" in type_name:
        return False
    words = base_type(type_name).split()
    if not words:
        return False
    return all(w in INT_WORDS for w in words) or (
        len(words) == 1 and STANDARD_TYPES.get(words[0], (None, None))[0] == "int")


def is_floating_type(type_name: str) -> bool:
    """True for float, double, long double, complex and <math.h>'s float_t/double_t (not pointers)."""
    return "*" not in type_name and scalar_kind(type_name) == "float"


def math_call(func: str) -> str | None:
    """The base name of a math-library call ('sqrtf' -> 'sqrt'), None if not one."""
    if func in MATH_CALLS or func in FUSED_CALLS:
        return func
    if func[-1:] in ("f", "l") and (func[:-1] in MATH_CALLS or func[:-1] in FUSED_CALLS):
        return func[:-1]
    return None
