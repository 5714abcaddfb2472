# Front end: the scanner. It walks the file's tokens at brace depth 0 and cuts
# them into function definitions and top-level declarations, collects typedef
# names, and provides the bracket and comma helpers the parser uses.

from __future__ import annotations

from lark import Token

from tripcount import ir
from tripcount.diagnostics import source as d
from tripcount.frontend.lexer import Tok
from tripcount.frontend.vocab import DROP_WORDS, SKIP_WITH_PARENS, SPEC_WORDS
from tripcount.ir import Span


# ==================================================================== helpers
def name_before_paren(toks: list[Tok]) -> str:
    for k in range(1, len(toks)):
        if toks[k].value == "(" and toks[k - 1].kind == "id":
            return toks[k - 1].value
    return "?"


_str_new = str.__new__


def new_token(cls: type, ty: str, value: str, start: int, line: int, column: int,
               end_line: int, end_column: int, end: int) -> Token:
    """A lark Token, made without lark's argument-checking constructor (it is per token)."""
    tok = _str_new(cls, value)
    tok.type = ty
    tok.value = value
    tok.start_pos = start
    tok.line = line
    tok.column = column
    tok.end_line = end_line
    tok.end_column = end_column
    tok.end_pos = end
    return tok


def _skip_group(toks: list, k: int, opening: str, closing: str, end: int) -> int:
    depth = 0
    for j in range(k, end):
        v = toks[j].value
        if v == opening:
            depth += 1
        elif v == closing:
            depth -= 1
            if depth == 0:
                return j + 1
    return end


def skip_parens(toks: list, k: int, limit: int | None = None) -> int:
    """Index past the parenthesised group opening at `k` (or `k` if it is not '(').

    The search stops at `limit` (default: the end), which it returns when the
    group is not closed before it.
    """
    end = len(toks) if limit is None else min(limit, len(toks))
    if k >= end or toks[k].value != "(":
        return k
    return _skip_group(toks, k, "(", ")", end)


def skip_brackets(toks: list[Tok], k: int) -> int:
    """Index past the bracketed group that starts at or after `k` (the end when unclosed)."""
    return _skip_group(toks, k, "[", "]", len(toks))


def split_commas(toks: list[Tok]) -> list[list[Tok]]:
    """Split at commas outside parentheses/brackets/braces."""
    parts: list[list[Tok]] = [[]]
    depth = 0
    for t in toks:
        v = t.value
        if t.kind == "punct":
            if v in "([{":
                depth += 1
            elif v in ")]}":
                depth -= 1
            elif v == "," and depth == 0:
                parts.append([])
                continue
        parts[-1].append(t)
    if parts == [[]]:
        return []
    return parts


def strip_attributes(toks: list[Tok]) -> list[Tok]:
    out: list[Tok] = []
    i = 0
    while i < len(toks):
        v = toks[i].value
        if toks[i].kind == "id" and v in SKIP_WITH_PARENS:
            i = skip_parens(toks, i + 1)
            continue
        if toks[i].kind == "id" and v in DROP_WORDS:
            i += 1
            continue
        out.append(toks[i])
        i += 1
    return out


def _brace_match(toks: list[Tok]) -> list[int]:
    """For each '{' the index of its '}', -1 when unmatched (other tokens: -1)."""
    match = [-1] * len(toks)
    stack: list[int] = []
    for i, t in enumerate(toks):
        if t.kind == "punct":
            if t.value == "{":
                stack.append(i)
            elif t.value == "}" and stack:
                match[stack.pop()] = i
    return match


def match_brackets(L: list[Token], openers: dict[str, str], closers: set[str]) -> list[int]:
    """Index of the matching closer for each opener in L (-1 when there is none)."""
    match = [-1] * len(L)
    stack: list[int] = []
    for i, t in enumerate(L):
        ty = t.type
        if ty in openers:
            stack.append(i)
        elif ty in closers:
            if stack and openers[L[stack[-1]].type] == ty:
                match[stack.pop()] = i
            elif ty == "RBRACE":
                # a '}' closes any parentheses left open inside its block
                while stack and L[stack[-1]].type != "LBRACE":
                    stack.pop()
                if stack:
                    match[stack.pop()] = i
    return match


CONTROL_WORDS = {"for", "if", "while", "switch", "do", "else", "return", "typedef", "case",
                 "default", "goto", "break", "continue", "sizeof"}


def _open_paren_back(toks: list[Tok], j: int, lo: int) -> int | None:
    """Index of the '(' matching the ')' at `j`, searching back to `lo`; None if unmatched."""
    depth = 0
    for k in range(j, lo - 1, -1):
        v = toks[k].value
        if v == ")":
            depth += 1
        elif v == "(":
            depth -= 1
            if depth == 0:
                return k
    return None


def _old_style_head(toks: list[Tok], items: list[tuple[str, int, int, int]]) -> tuple[int, str] | None:
    """(index in `items`, function name) of an old-style (K&R) definition head among the
    declarations just before a '{' that starts a chunk: `name ( idents ) decl; ... decl;`."""
    k = len(items)
    while k > 0 and items[k - 1][0] == "decl" and len(items) - k < 32:
        k -= 1
        _, a, b, _ = items[k]
        if k + 1 < len(items) and items[k + 1][1] != b:
            return None  # not contiguous
        for r in range(a, b - 2):
            if toks[r].kind == "punct" and toks[r].value == ")" and toks[r + 1].kind == "id":
                head = _function_head(toks, a, r + 1)
                if head is not None:
                    return k, name_before_paren(toks[head:r + 1])
    return None


def _function_head(toks: list[Tok], a: int, b: int) -> int | None:
    """Where the head of a function definition starts, if toks[a:b] (the text before a
    '{' at depth 0) ends with one: `type words name ( params ) [qualifiers]`."""
    j = b - 1
    # words and attributes between the parameter list and the '{'
    while j >= a:
        t = toks[j]
        if t.kind == "id" and t.value not in CONTROL_WORDS:
            j -= 1
            continue
        if t.kind == "punct" and t.value == ")":
            o = _open_paren_back(toks, j, a)
            if o is None:
                return None
            if o > a and toks[o - 1].kind == "id" and toks[o - 1].value in SKIP_WITH_PARENS:
                j = o - 2
                continue
            break
        return None
    if j < a:
        return None
    o = _open_paren_back(toks, j, a)
    name = o - 1 if o is not None else a - 1
    if name < a or toks[name].kind != "id" or toks[name].value in SPEC_WORDS \
            or toks[name].value in CONTROL_WORDS or toks[name].value in SKIP_WITH_PARENS:
        return None
    # the return type: words, stars, `extern "C"` and attributes right before the name
    s = name
    while s > a:
        t = toks[s - 1]
        if (t.kind == "id" and t.value not in CONTROL_WORDS) or t.kind == "str" \
                or (t.kind == "punct" and t.value == "*"):
            s -= 1
            continue
        if t.kind == "punct" and t.value == ")":
            o2 = _open_paren_back(toks, s - 1, a)
            if o2 is not None and o2 > a and toks[o2 - 1].value in SKIP_WITH_PARENS:
                s = o2 - 1
                continue
        break
    return s


def resolve_typedef(text: str, table: dict[str, tuple[str, int]]) -> tuple[str, int]:
    """A type's words with each typedef name replaced by what it stands for, and the pointer levels it adds.

    Chains (`typedef float real; typedef real real2;`) are mostly resolved when
    each is recorded; a name recorded before the typedef it uses (the C++
    rewrite records `std::vector<real>` before the file's typedefs are read)
    is resolved here, a bounded number of rounds (a typedef cycle stops).
    """
    stars = 0
    for _ in range(MAX_TYPEDEF_CHAIN):
        words = text.split()
        if not any(w in table for w in words):
            break
        out: list[str] = []
        for w in words:
            if w in table and table[w][0] != w:
                base, more = table[w]
                out.extend(base.split())
                stars += more
            else:
                out.append(w)
        if out == words:
            break
        text = " ".join(out)
    return text, stars


MAX_TYPEDEF_CHAIN = 16


class Scanner:
    """File-level scanning (a part of UnitParser: reads self.smap, self.diags, self.typedefs,
    self.typedef_types)."""

    def _collect_typedefs(self, toks: list[Tok]) -> None:
        n = len(toks)
        for i, t in enumerate(toks):
            if t.kind != "id" or t.value != "typedef":
                continue
            j = i + 1
            depth = 0
            name = None
            paren_name = None
            while j < n and j < i + 2000:
                v = toks[j].value
                if v == "{":
                    depth += 1
                elif v == "}":
                    depth -= 1
                    if depth < 0:
                        break
                elif depth == 0:
                    if v == ";":
                        break
                    if (v == "(" and j + 3 < n and toks[j + 1].value == "*"
                            and toks[j + 2].kind == "id" and toks[j + 3].value == ")"):
                        paren_name = toks[j + 2].value
                    if toks[j].kind == "id" and v not in SPEC_WORDS:
                        name = v
                j += 1
            chosen = paren_name or name
            if chosen:
                self.typedefs.add(chosen)
                if paren_name is None:
                    self._record_typedef(toks[i + 1:j], chosen)

    def _record_typedef(self, body: list[Tok], name: str) -> None:
        """Remember what `typedef WORDS [*...] name;` stands for (plain types and pointers only).

        Arrays, function types, structs and anything else are left unresolved:
        their element size and kind are not a scalar type's.
        """
        vals = [t.value for t in body]
        if not vals or vals[-1] != name or any(v in ("[", "(", "{", ",") for v in vals):
            return
        words = vals[:-1]
        stars = sum(1 for v in words if v == "*")
        words = [w for w in words if w != "*"]
        if any(w in ("struct", "union", "enum") for w in words):
            return
        text, more = resolve_typedef(" ".join(words), self.typedef_types)
        self.typedef_types[name] = (text, stars + more)

    def _collect_aliases(self, toks: list[Tok]) -> None:
        """C++ `using NAME = TYPE;` at any depth: a typedef by another spelling."""
        n = len(toks)
        for i, t in enumerate(toks):
            if (t.kind != "id" or t.value != "using" or i + 2 >= n or toks[i + 1].kind != "id"
                    or toks[i + 2].value != "="):
                continue
            j = i + 3
            while j < n and j < i + 64 and toks[j].value != ";":
                j += 1
            name = toks[i + 1].value
            self.typedefs.add(name)
            self._record_typedef([*toks[i + 3:j], toks[i + 1]], name)

    def _scan(self, toks: list[Tok], report: bool) -> list[tuple[str, int, int, int]]:
        """Cut the file at depth 0 into ('func', header, open, close) and ('decl', a, b, 0)."""
        match = _brace_match(toks)
        items: list[tuple[str, int, int, int]] = []
        extern_closes: set[int] = set()
        stray: list[Tok] = []
        n = len(toks)
        i = 0
        chunk = 0
        while i < n:
            t = toks[i]
            if t.kind == "pragma":
                if chunk == i:
                    chunk = i + 1
                i += 1
                continue
            if t.kind != "punct":
                i += 1
                continue
            v = t.value
            if v == ";":
                if i > chunk:
                    items.append(("decl", chunk, i + 1, 0))
                chunk = i + 1
            elif v == "{":
                j = match[i]
                if j < 0:
                    if report:
                        line, col = self.smap.position(t.start)
                        self.diags.append(d.UnbalancedBraces(
                            self.smap.span(t.start, t.end), where=Span.point(line, col),
                            reason="this '{' is never closed; the rest of the file is skipped"))
                    break
                head = _function_head(toks, chunk, i)
                if head is not None:
                    # text before the head (an unexpanded macro call, say) is not part of it
                    items.append(("func", head, i, j))
                    chunk = j + 1
                    i = j + 1
                    continue
                kr = _old_style_head(toks, items) if i == chunk else None
                if kr is not None:
                    # `f(a, b) int a; double *b; { ... }`: the parameter declarations were
                    # cut off as declarations; one diagnostic instead of a silent skip
                    if report:
                        k, name = kr
                        span = self.smap.span(toks[items[k][1]].start, toks[j].end)
                        self.diags.append(d.FunctionSkipped(
                            span, name=name, where=ir.Span.point(span.line, span.column),
                            reason="an old-style (K&R) definition, with the parameter types declared "
                                   "between ')' and '{', is not read; declare them inside the parentheses"))
                    del items[k:]
                    chunk = j + 1
                    i = j + 1
                    continue
                if (i - chunk == 2 and toks[chunk].value == "extern"
                        and toks[chunk + 1].kind == "str"):
                    extern_closes.add(j)  # extern "C" { ... }: read what is inside
                    chunk = i + 1
                    i += 1
                    continue
                i = j + 1  # struct body or initializer: part of the declaration
                continue
            elif v == "}":
                if i not in extern_closes:
                    stray.append(t)
                chunk = i + 1
            i += 1
        if stray and report:
            # one diagnostic for all of them: a broken file must not flood the report
            t = stray[0]
            line, col = self.smap.position(t.start)
            more = f" (and {len(stray) - 1} more after it)" if len(stray) > 1 else ""
            self.diags.append(d.UnbalancedBraces(
                self.smap.span(t.start, t.end), where=Span.point(line, col),
                reason=f"this '}}' has no matching '{{'{more}; ignored"))
        return items
