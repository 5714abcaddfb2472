# Front end: the C vocabulary of the parser -- keyword spellings, words to
# drop or skip, type and qualifier words, OpenMP directives -- and its limits.

from __future__ import annotations

import re

from tripcount.ctable import IDENTIFIER_TYPES

# Statement nesting the recovery follows before giving up on the inner part.
MAX_RECOVERY_DEPTH = 120
# Longest top-level declaration worth parsing (huge initializer tables are skipped).
MAX_GLOBAL_TOKENS = 4000
# Past this many tokens in a file, bodies without any `for` are not parsed.
LARGE_FILE_TOKENS = 400_000
# Function-body tokens of one file that go through the grammar; the bodies
# after that are recorded empty (with one diagnostic), so that a huge
# generated file is read in seconds rather than minutes.
GRAMMAR_TOKEN_BUDGET = 1_000_000

KEYWORD_ALIASES = {
    "__restrict": "restrict", "__restrict__": "restrict", "__inline": "inline",
    "__inline__": "inline", "__const": "const", "__volatile": "volatile",
    "__volatile__": "volatile", "__signed": "signed", "__signed__": "signed",
    "__thread": "_Thread_local", "__forceinline": "inline",
    "constexpr": "const",  # C23 and C++: a constant like any const object for tripcount
}
# Words followed by a parenthesised argument that carry nothing for tripcount.
SKIP_WITH_PARENS = {"__attribute__", "__attribute", "__declspec", "_Alignas", "alignas"}
DROP_WORDS = {"__extension__", "__cdecl", "__stdcall"}
# Type names from standard headers (never read: #include is ignored).
KNOWN_TYPES = set(IDENTIFIER_TYPES)
# Specifier words that name a type (not qualifiers or storage classes).
TYPE_WORDS = {"void", "char", "short", "int", "long", "float", "double", "signed", "unsigned",
              "_Bool", "_Complex", "__int128"}
QUALIFIERS = {"const", "volatile", "restrict", "_Atomic"}
STORAGE = {"static", "extern", "register", "auto", "inline", "typedef", "_Thread_local",
           "_Noreturn"}
SPEC_WORDS = TYPE_WORDS | QUALIFIERS | STORAGE
OMP_DIRECTIVES = {("parallel",), ("parallel", "for"), ("parallel", "for", "simd"),
                  ("for",), ("for", "simd")}
SCHEDULE_KINDS = {"static", "dynamic", "guided", "auto", "runtime"}

FLOAT_RE = re.compile(
    r"(?:[0-9]+\.[0-9]*|\.[0-9]+|[0-9]+(?=[eE]))(?:[eE][+-]?[0-9]+)?[fFlL]?$"
    r"|0[xX](?:[0-9a-fA-F]+\.?[0-9a-fA-F]*|\.[0-9a-fA-F]+)[pP][+-]?[0-9]+[fFlL]?$")
INT_RE = re.compile(r"(?:0[xX][0-9a-fA-F]+|0[bB][01]+|[0-9]+)(?:[uU](?:ll|LL|[lLzZ])?|(?:ll|LL|[lLzZ])[uU]?)?$")
