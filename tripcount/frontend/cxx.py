# Front end: the C++ subset, read by rewriting preprocessed tokens into the C
# the rest of the front end reads. What is understood:
#   * namespaces, classes (and structs with member functions) around
#     functions: their braces are dropped, members become file-level names,
#     access specifiers go; `template <...>` heads go (template parameters
#     become free names, hence size parameters); qualified names `a::b` keep
#     their last part (`std::min` is `min`, `std::size_t` is `size_t`,
#     `Basin::relax` is `relax`);
#   * `std::vector<T>` / `std::array<T, N>` / `std::valarray<T>` become a
#     pointer to T (so `v[i]` is an access with element type T);
#   * explicit template arguments of library value functions go
#     (`std::min<int>(a, b)` is `min(a, b)`, ctable.VALUE_TEMPLATES);
#   * references `T &x` read as `T x`; `static_cast<T>(e)` as `(T)(e)`;
#     `const`/`override`/`noexcept` after a parameter list go;
#   * range-based `for (auto &x : v) body` becomes
#     `for (size_t x = 0; x < size(v); x++)` with `x` in the body read as
#     `v[x]`: it is counted as v.size() trips (std::size(v)), a size parameter.
# Everything else is left as written: the grammar then refuses it with the
# usual diagnostics (never silently). Synthetic tokens sit at the position of
# the token they stand for, so diagnostics point at the user's text.

from __future__ import annotations

from tripcount.ctable import VALUE_TEMPLATES
from tripcount.frontend.lexer import Tok
from tripcount.frontend.vocab import KNOWN_TYPES, SPEC_WORDS
from tripcount.sources import CXX_SUFFIXES

CONTAINERS = frozenset({"vector", "array", "valarray", "span"})
CASTS = frozenset({"static_cast", "reinterpret_cast", "const_cast"})
AFTER_PARAMS = frozenset({"const", "override", "final", "noexcept", "constexpr"})
ACCESS = frozenset({"public", "private", "protected"})
CONTROL = frozenset({"if", "while", "for", "switch", "return", "sizeof"})
TYPE_LIKE = frozenset(SPEC_WORDS | KNOWN_TYPES | {"auto"})


def is_cxx_path(path: str) -> bool:
    """Whether a file name says C++."""
    return path.endswith(CXX_SUFFIXES)


def looks_cxx(toks: list[Tok]) -> bool:
    """Whether tokens hold constructs only C++ has (`namespace x {`, `template <`, `a::b`).

    A `.h` header is C or C++ by its content: C++ projects name their headers `.h` too.
    """
    for k in range(len(toks) - 2):
        v, w = toks[k].value, toks[k + 1].value
        if (v == "template" and w == "<") or (v == ":" and w == ":" and toks[k + 2].kind == "id"
                                               and toks[k].kind == "punct") or (
                v == "namespace" and toks[k + 1].kind == "id" and toks[k + 2].value == "{"):
            return True
    return False


def _tok(at: Tok, value: str, kind: str = "punct") -> Tok:
    t = at.copy_at(at.start, at.end, at.hide)
    t.kind, t.value, t.bol, t.space = kind, value, False, True
    return t


# How far a template argument list `< ... >` is looked for; how deep range-fors are rewritten.
MAX_ANGLE_TOKENS = 256
MAX_RANGE_FOR_DEPTH = 64


def _pairs(toks: list[Tok]) -> dict[int, int]:
    """Index of the closing token of every bracket `(`, `[`, `{` that is closed (one pass)."""
    out: dict[int, int] = {}
    stack: list[tuple[str, int]] = []
    closing = {")": "(", "]": "[", "}": "{"}
    for k, t in enumerate(toks):
        v = t.value
        if t.kind != "punct":
            continue
        if v in ("(", "[", "{"):
            stack.append((v, k))
        elif v in closing:
            while stack and stack[-1][0] != closing[v]:
                stack.pop()  # an unclosed bracket inside: dropped, as the parser will report it
            if stack:
                out[stack.pop()[1]] = k
    return out


def _match(toks: list[Tok], i: int) -> int:
    """Index of the `>` closing the template argument list opened at toks[i], or -1."""
    depth = 0
    for k in range(i, min(len(toks), i + MAX_ANGLE_TOKENS)):
        v = toks[k].value
        if v == "<":
            depth += 1
        elif v in (">", ">>"):
            depth -= 1 if v == ">" else 2
            if depth <= 0:
                return k
        elif v in (";", "{", "}"):
            return -1
    return -1


def _strip_scopes(toks: list[Tok]) -> list[Tok]:
    """Drop `template <...>`, `a ::` qualifiers, namespace/class braces and access specifiers."""
    drop: set[int] = set()
    pairs = _pairs(toks)
    n = len(toks)
    i = 0
    while i < n:
        t = toks[i]
        v = t.value
        nxt = toks[i + 1].value if i + 1 < n else ""
        if v == "template" and nxt == "<":
            j = _match(toks, i + 1)
            if j > 0:
                drop.update(range(i, j + 1))
                i = j + 1
                continue
        if v == "using" and nxt == "namespace" or (v == "using" and i + 2 < n and toks[i + 2].value == ":"):
            j = i
            while j < n and j < i + MAX_ANGLE_TOKENS and toks[j].value != ";":
                j += 1
            drop.update(range(i, j + 1))
            i = j + 1
            continue
        if v == ":" and nxt == ":":
            drop.update((i, i + 1))
            if i > 0 and toks[i - 1].kind == "id":
                drop.add(i - 1)
            i += 2
            continue
        if v in ACCESS and nxt == ":":
            drop.update((i, i + 1))
            i += 2
            continue
        if v in ("namespace", "class", "struct") and t.kind == "id":
            j = i + 1
            while j < n and j < i + MAX_ANGLE_TOKENS and toks[j].value not in ("{", ";", "(", "="):
                j += 1
            if j < n and toks[j].value == "{":
                close = pairs.get(j, -1)
                unwrap = close > 0 and (v != "struct" or (
                    close + 1 < n and toks[close + 1].value == ";"
                    and any(toks[k].value == "{" for k in range(j + 1, close))))
                if unwrap:
                    drop.update(range(i, j + 1))
                    drop.add(close)
                    if v != "namespace" and close + 1 < n and toks[close + 1].value == ";":
                        drop.add(close + 1)
                    i = j + 1
                    continue
        i += 1
    return [t for k, t in enumerate(toks) if k not in drop]


def _types_and_references(toks: list[Tok], typedefs: dict[str, tuple[str, int]]) -> list[Tok]:
    """Containers to pointer typedefs, casts to C casts, references and trailing qualifiers dropped."""
    out: list[Tok] = []
    n = len(toks)
    i = 0
    while i < n:
        t = toks[i]
        v = t.value
        nxt = toks[i + 1].value if i + 1 < n else ""
        if t.kind == "id" and v in CONTAINERS and nxt == "<":
            j = _match(toks, i + 1)
            inner = toks[i + 2:j] if j > 0 else []
            if v == "array":
                inner = inner[:next((k for k, x in enumerate(inner) if x.value == ","), len(inner))]
            words = [x.value for x in inner]
            if inner and toks[j].value == ">" and all(x.kind == "id" or x.value == "*" for x in inner):
                base = " ".join(w for w in words if w != "*")
                name = "__tc_vec_" + "_".join(w if w != "*" else "p" for w in words)
                typedefs[name] = (base, 1 + words.count("*"))
                out.append(_tok(t, name, "id"))
                i = j + 1
                continue
        if t.kind == "id" and v in VALUE_TEMPLATES and nxt == "<":
            j = _match(toks, i + 1)
            if j > 0 and toks[j].value == ">" and j + 1 < n and toks[j + 1].value == "(":
                out.append(t)  # `min<int>(a, b)` -> `min(a, b)`
                i = j + 1
                continue
        if t.kind == "id" and v in CASTS and nxt == "<":
            j = _match(toks, i + 1)
            if j > 0 and j + 1 < n and toks[j + 1].value == "(":
                out.append(_tok(t, "("))
                out.extend(toks[i + 2:j])
                out.append(_tok(toks[j], ")"))
                i = j + 1
                continue
        if v in ("&", "&&") and out and i + 1 < n and toks[i + 1].kind == "id" and _declares(out, toks, i, typedefs):
            i += 1
            continue
        if t.kind == "id" and v in AFTER_PARAMS and out and out[-1].value in AFTER_PARAMS | {")"}:
            j = i
            while j < n and toks[j].value in AFTER_PARAMS:
                j += 1
            if j < n and toks[j].value in ("{", ";"):
                i = j
                continue
        out.append(t)
        i += 1
    return out


def _declares(out: list[Tok], toks: list[Tok], i: int, typedefs: dict[str, tuple[str, int]]) -> bool:
    """Whether the `&` at toks[i] makes a reference declarator (not an operator)."""
    prev = out[-1]
    if prev.value == ">" or (prev.kind == "id" and (prev.value in TYPE_LIKE or prev.value in typedefs)):
        return True
    after = toks[i + 2].value if i + 2 < len(toks) else ""
    if prev.kind != "id" or after not in (",", ")", "=", ":", ";"):
        return False
    before = out[-2].value if len(out) > 1 else ""
    if before not in ("(", ","):
        return False
    # inside a parameter list: the parenthesis opens after a function name, not a keyword
    depth = 0
    for k in range(len(out) - 2, -1, -1):
        w = out[k].value
        if w == ")":
            depth += 1
        elif w == "(":
            if depth == 0:
                return k > 0 and out[k - 1].kind == "id" and out[k - 1].value not in CONTROL
            depth -= 1
    return False


def _range_for(toks: list[Tok], depth: int = 0) -> list[Tok]:
    """`for (DECL x : v) body` -> `for (size_t x = 0; x < size(v); x++)` with x read as v[x]."""
    if depth > MAX_RANGE_FOR_DEPTH:
        return toks  # left as written: the grammar reports what it cannot read
    pairs = _pairs(toks)
    out: list[Tok] = []
    n = len(toks)
    i = 0
    while i < n:
        t = toks[i]
        if not (t.value == "for" and t.kind == "id" and i + 1 < n and toks[i + 1].value == "("):
            out.append(t)
            i += 1
            continue
        close = pairs.get(i + 1, -1)
        colon = next((k for k in range(i + 2, close) if toks[k].value == ":"), -1) if close > 0 else -1
        if (colon < 0 or any(toks[k].value == ";" for k in range(i + 2, close))
                or toks[colon - 1].kind != "id" or close - colon != 2 or toks[colon + 1].kind != "id"):
            out.append(t)
            i += 1
            continue
        x, v = toks[colon - 1], toks[colon + 1]
        name, cont = x.value, v.value
        # std::size(v) (C++17), spelled as a call so that it reads back without the source text
        out.extend([t, toks[i + 1], _tok(x, "size_t", "id"), x, _tok(x, "="), _tok(x, "0", "num"), _tok(x, ";"),
                    _tok(x, name, "id"), _tok(x, "<"), _tok(v, "size", "id"), _tok(v, "("), _tok(v, cont, "id"),
                    _tok(v, ")"), _tok(v, ";"), _tok(x, name, "id"), _tok(x, "++"), toks[close]])
        # the body: a braced block, or one statement up to its ';'
        b = close + 1
        if b < n and toks[b].value == "{":
            end = pairs.get(b, -1)
        else:
            end, level = b, 0
            while end < n:
                w = toks[end].value
                level += w in ("(", "[", "{")
                level -= w in (")", "]", "}")
                if w == ";" and level == 0:
                    break
                end += 1
        if end < 0:
            end = n - 1
        body: list[Tok] = []
        for k in range(b, min(end + 1, n)):
            y = toks[k]
            if y.kind == "id" and y.value == name and not (k > 0 and toks[k - 1].value in (".", "->")):
                body.extend([_tok(y, cont, "id"), _tok(y, "["), y, _tok(y, "]")])
            else:
                body.append(y)
        out.extend(_range_for(body, depth + 1))  # a range-for inside
        i = end + 1
    return out


def rewrite(toks: list[Tok], typedefs: dict[str, tuple[str, int]]) -> list[Tok]:
    """The tokens of a C++ file rewritten into the C the front end reads (see the header)."""
    toks = _strip_scopes(toks)
    toks = _types_and_references(toks, typedefs)
    return _range_for(toks)
