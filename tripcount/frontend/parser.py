# Stage 2a of the pipeline: preprocessed tokens -> IR, with error recovery.
#
# Modules: vocab (words and limits), lalr (the grammar and its parse loop),
# scanner (file-level cuts, token helpers), omp (OpenMP clauses), recovery
# (unreadable bodies), and this one: the parser of one file.
#
# A fast scanner walks the file's tokens at brace depth 0 and cuts them into
# function definitions and top-level declarations; only function bodies (and
# global declarations) go through the LALR grammar in grammar/loops.lark,
# whose callbacks (frontend/build.py) build the IR directly. Identifiers are
# classified as TYPE_NAME or IDENT before parsing (the usual typedef-name
# lexer feedback of C front ends, plus a few heuristics for type names from
# headers we never read). When a body does not parse, it is cut into
# statements and each is parsed alone; a compound statement whose inside is
# broken is rebuilt from its header and its recovered parts, so a bad
# statement costs only itself. All of this is iterative or depth-limited.

from __future__ import annotations

from bisect import bisect_right
from dataclasses import replace

from lark import Token

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics import source as d
from tripcount.frontend.build import PragmaToken, cover
from tripcount.frontend.enums import enum_constants
from tripcount.frontend.lalr import ParseFailure, engine
from tripcount.frontend.lexer import SourceMap, Tok
from tripcount.frontend.omp import omp_clauses
from tripcount.frontend.preprocess import Preprocessed
from tripcount.frontend.recovery import Recovery
from tripcount.frontend.scanner import (
    Scanner,
    match_brackets,
    name_before_paren,
    new_token,
    resolve_typedef,
    skip_brackets,
    skip_parens,
    split_commas,
    strip_attributes,
)
from tripcount.frontend.vocab import (
    DROP_WORDS,
    FLOAT_RE,
    GRAMMAR_TOKEN_BUDGET,
    INT_RE,
    KEYWORD_ALIASES,
    KNOWN_TYPES,
    LARGE_FILE_TOKENS,
    MAX_GLOBAL_TOKENS,
    MAX_RECOVERY_DEPTH,
    QUALIFIERS,
    SKIP_WITH_PARENS,
    SPEC_WORDS,
    STORAGE,
    TYPE_WORDS,
)


class UnitParser(Scanner, Recovery):
    """Parses one preprocessed file (or snippet) into functions and globals."""

    def __init__(self, pre: Preprocessed, diags: list[Diagnostic]) -> None:
        self.pre = pre
        self.smap: SourceMap = pre.source
        self.diags = diags
        self.enumerators: dict[str, int] = {}  # file-scope enum constants read so far
        self.eng = engine()
        t = self.eng.terms
        self.T = t
        self.LPAR, self.RPAR = t["("], t[")"]
        self.LBRACE, self.RBRACE = t["{"], t["}"]
        self.LSQB, self.RSQB = t["["], t["]"]
        self.SEMI, self.COLON, self.COMMA = t[";"], t[":"], t[","]
        self.STAR, self.EQUAL, self.QMARK = t["*"], t["="], t["?"]
        self.FOR, self.IF, self.ELSE = t["for"], t["if"], t["else"]
        self.WHILE, self.DO, self.SWITCH = t["while"], t["do"], t["switch"]
        self.CASE, self.DEFAULT = t["case"], t["default"]
        self.typedefs: set[str] = set()
        # typedef name -> (the type it stands for, pointer levels it adds); shared with the IR builder
        self.typedef_types: dict[str, tuple[str, int]] = {}

    # ================================================================ parsing
    def _parse(self, toks: list[Token], start: str):
        return self.eng.parse(toks, start)

    def parse_expr(self, toks: list[Tok]) -> ir.Expr | None:
        """An expression from preprocessed tokens, or None when it does not parse."""
        lt = self.to_lark(toks)
        if not lt:
            return None
        try:
            return self._parse(lt, "expr_start")
        except ParseFailure:
            return None

    # ================================================================ tokens
    def to_lark(self, toks: list[Tok]) -> list[Token]:
        """Parser tokens for preprocessed tokens (keywords, type names, numbers classified)."""
        terms = self.T
        base: list[list] = []  # [type, value, tok]
        n = len(toks)
        i = 0
        while i < n:
            t = toks[i]
            k = t.kind
            v = t.value
            if k == "punct":
                ty = terms.get(v, "BAD")
            elif k == "id":
                if v in KEYWORD_ALIASES:
                    v = KEYWORD_ALIASES[v]
                elif v in DROP_WORDS:
                    i += 1
                    continue
                elif v in SKIP_WITH_PARENS or (v == "_Pragma" and i + 1 < n and toks[i + 1].value == "("):
                    i = skip_parens(toks, i + 1)
                    continue
                ty = terms.get(v, "?")
            elif k == "num":
                if INT_RE.match(v):
                    ty = "INT_LIT"
                elif FLOAT_RE.match(v):
                    ty = "FLOAT_LIT"
                else:
                    ty = "BAD"
            elif k == "str":
                ty = "STRING"
            elif k == "chr":
                ty = "CHAR_LIT"
            elif k == "pragma":
                ty = "PRAGMA"
            else:
                ty = "BAD"
            base.append([ty, v, t])
            i += 1
        for idx, item in enumerate(base):
            if item[0] == "?":
                item[0] = self._classify(base, idx)
        # positions: tokens come mostly in file order, so walk the line table
        starts = self.smap.line_starts
        nlines = len(starts)
        li = 0
        last_start = last_end = -1
        pos = (0, 0, 0, 0)
        new = new_token
        out: list[Token] = []
        append = out.append
        for ty, v, t in base:
            s0 = t.start
            e0 = t.end
            if s0 != last_start or e0 != last_end:
                if not (starts[li] <= s0 and (li + 1 >= nlines or s0 < starts[li + 1])):
                    if li + 1 < nlines and s0 >= starts[li + 1] and (li + 2 >= nlines or s0 < starts[li + 2]):
                        li += 1
                    else:
                        li = bisect_right(starts, s0) - 1
                lj = li
                while lj + 1 < nlines and e0 >= starts[lj + 1] and e0 > s0:
                    lj += 1
                pos = (li + 1, s0 - starts[li] + 1, lj + 1, e0 - starts[lj] + 1)
                last_start, last_end = s0, e0
            if ty == "PRAGMA":
                p = new(PragmaToken, ty, v, s0, pos[0], pos[1], pos[2], pos[3], e0)
                p.omp = omp_clauses(self, t)
                if p.omp is None:
                    continue  # an OpenMP directive without bearing on loops
                append(p)
            else:
                append(new(Token, ty, v, s0, pos[0], pos[1], pos[2], pos[3], e0))
        return out

    def _classify(self, base: list[list], idx: int) -> str:
        """IDENT or TYPE_NAME for an identifier, from its neighbours."""
        T = self.T
        v = base[idx][1]
        prev = base[idx - 1][0] if idx > 0 else None
        nxt = base[idx + 1][0] if idx + 1 < len(base) else None
        if prev in (T["."], T["->"], T["struct"], T["union"], T["enum"], T["goto"]):
            return "IDENT"
        prev_is_type = prev == "TYPE_NAME" or (prev is not None and base[idx - 1][1] in TYPE_WORDS
                                               and prev != "?")
        if v == "complex" and prev_is_type:
            return T["_Complex"]  # <complex.h>: `double complex z`
        if v in self.typedefs or v in KNOWN_TYPES:
            return "IDENT" if prev_is_type else "TYPE_NAME"
        if nxt == "?" or (nxt is not None and base[idx + 1][1] in QUALIFIERS and nxt != "?"):
            # two names in a row: the first is a type (`real x`, `idx_t const n`)
            return "IDENT" if prev_is_type else "TYPE_NAME"
        star = T["*"]
        if nxt == star:
            j = idx + 1
            while j < len(base) and (base[j][0] == star or (base[j][1] in QUALIFIERS and base[j][0] != "?")):
                j += 1
            if j < len(base):
                after = base[j][0]
                if after == self.RPAR and prev == self.LPAR:
                    return "TYPE_NAME"  # `(real *)`: a cast
                starts = (None, self.SEMI, self.LBRACE, self.RBRACE, "PRAGMA")
                stmt_start = prev in starts or (
                    prev == self.LPAR and idx >= 2 and base[idx - 2][0] == self.FOR) or (
                    prev != "?" and base[idx - 1][1] in QUALIFIERS | STORAGE)
                if (stmt_start and after == "?" and j + 1 < len(base)
                        and base[j + 1][0] in (self.EQUAL, self.SEMI, self.COMMA, self.LSQB)):
                    return "TYPE_NAME"  # `real *p = ...;`
        if nxt == self.RPAR and prev == self.LPAR and idx + 2 < len(base) and idx >= 2:
            before = base[idx - 2][0]
            after = base[idx + 2][0]
            cast_ok = before in (self.EQUAL, self.COMMA, self.LPAR, T["return"], T["+"], T["-"],
                                 star, T["/"], self.QMARK, self.COLON, T["<"], T[">"])
            if cast_ok and after in ("?", "INT_LIT", "FLOAT_LIT", "CHAR_LIT", self.LPAR):
                return "TYPE_NAME"  # `(real) x`
        return "IDENT"


    # ================================================================ file level
    def parse_unit(self, snippet: bool) -> tuple[list[ir.Function], list[ir.Decl]]:
        """Functions and global declarations of the file (or the snippet's function)."""
        toks = self.pre.tokens
        self.typedefs.update(self.typedef_types)  # those the C++ rewrite made
        self._collect_typedefs(toks)
        self._collect_aliases(toks)
        items = self._scan(toks, report=not snippet)
        has_function = any(kind == "func" for kind, *_ in items)
        if snippet and not has_function:
            return [self._snippet_function(toks)], []
        if snippet:
            self._scan(toks, report=True)  # re-run for its brace diagnostics only
        functions: list[ir.Function] = []
        globals_: list[ir.Decl] = []
        large = len(toks) > LARGE_FILE_TOKENS
        budget = GRAMMAR_TOKEN_BUDGET
        skipped: list[ir.Function] = []
        for kind, a, b, c in items:
            if kind == "func":
                size = c - b + 1
                try:
                    f = self._function(toks, a, b, c, large, over_budget=size > budget)
                except Exception as exc:  # a bug must cost one function, not the file
                    span = self.smap.span(toks[a].start, toks[c].end)
                    self.diags.append(d.FunctionSkipped(
                        span, name=name_before_paren(toks[a:b]),
                        where=ir.Span.point(span.line, span.column),
                        reason=f"internal error ({type(exc).__name__}: {exc}); please report it"))
                    continue
                if f is not None:
                    functions.append(f)
                    if size > budget:
                        skipped.append(f)
                        budget = -1  # the bodies after this one are not read either
                    else:
                        budget -= size
            else:
                enumerators = enum_constants(toks[a:b], self.enumerators)
                if enumerators:
                    globals_.extend(self._enumerator_decls(enumerators))
                    continue
                try:
                    g = self._global(toks, a, b)
                except Exception:  # globals are optional: an unreadable one is skipped
                    g = None
                if g is not None:
                    globals_.append(g)
        if skipped:
            first = skipped[0]
            self.diags.append(d.FileTooLarge(
                first.span, where=ir.Span.point(first.span.line, first.span.column),
                count=len(skipped), limit=GRAMMAR_TOKEN_BUDGET))
        return functions, globals_


    def _enumerator_decls(self, enumerators: list[tuple[Tok, int]]) -> list[ir.Decl]:
        """`const int NAME = value;` for each enumerator, placed at its name."""
        out: list[ir.Decl] = []
        for name, value in enumerators:
            self.enumerators[name.value] = value
            s, e = name.start, name.end
            synthetic = [Tok("id", "const", s, e), Tok("id", "int", s, e), Tok("id", name.value, s, e),
                         Tok("punct", "=", s, e), Tok("num", str(value), s, e), Tok("punct", ";", s, e)]
            if value < 0:
                synthetic[4:4] = [Tok("punct", "-", s, e)]
                synthetic[5] = Tok("num", str(-value), s, e)
            try:
                node = self._parse(self.to_lark(synthetic), "decl_start")
            except ParseFailure:
                continue
            if isinstance(node, ir.Decl):
                out.append(node)
        return out

    def _global(self, toks: list[Tok], a: int, b: int) -> ir.Decl | None:
        first = toks[a]
        if b - a > MAX_GLOBAL_TOKENS or first.kind != "id" or first.value == "typedef":
            return None
        if first.value not in SPEC_WORDS and first.value not in self.typedefs \
                and first.value not in KNOWN_TYPES and first.value not in ("struct", "union", "enum"):
            # `real x;` with an unknown type is still read; anything else is not a declaration
            if not (b - a > 2 and toks[a + 1].kind == "id"):
                return None
        lt = self.to_lark(toks[a:b])
        try:
            node = self._parse(lt, "decl_start")
        except ParseFailure:
            return None  # prototypes, struct definitions, ...: not needed, skipped silently
        return node if isinstance(node, ir.Decl) else None

    # ================================================================ functions
    def _function(self, toks: list[Tok], h: int, o: int, c: int, large: bool,
                  over_budget: bool = False) -> ir.Function | None:
        header = toks[h:o]
        fspan = self.smap.span(toks[h].start, toks[c].end)
        try:
            name, ret, params = self._header(header)
        except ParseFailure as exc:
            w = ir.Span.point(fspan.line, fspan.column)
            self.diags.append(d.FunctionSkipped(fspan, name="?", where=w, reason=exc.reason))
            return None
        body_toks = toks[o:c + 1]
        bspan = self.smap.span(toks[o].start, toks[c].end)
        if over_budget or (large and not any(t.kind == "id" and t.value == "for" for t in body_toks)):
            # a big file: a body without loops holds nothing tripcount reports
            return ir.Function(fspan, name, ret, params, ir.Block(bspan, ()))
        try:
            body = self.parse_body(self.to_lark(body_toks))
        except (RecursionError, ParseFailure) as exc:
            reason = "it nests too deeply" if isinstance(exc, RecursionError) else exc.reason
            w = ir.Span.point(fspan.line, fspan.column)
            self.diags.append(d.FunctionSkipped(fspan, name=name, where=w, reason=reason))
            return None
        return ir.Function(fspan, name, ret, params, body)

    def _header(self, toks: list[Tok]) -> tuple[str, str, tuple[ir.Param, ...]]:
        toks = strip_attributes(toks)
        # the parameter list is the first parenthesis at depth 0 after a name
        k = next((i for i, t in enumerate(toks) if t.value == "(" and i > 0
                  and toks[i - 1].kind == "id"), None)
        if k is None:
            raise ParseFailure("cannot find the function name")
        end = skip_parens(toks, k)
        name = toks[k - 1].value
        ret_words: list[str] = []
        stars = 0
        for t in toks[:k - 1]:
            v = KEYWORD_ALIASES.get(t.value, t.value)
            if v == "*":
                stars += 1
            elif t.kind == "id" and v not in STORAGE and not (stars and v in QUALIFIERS):
                ret_words.append(v)
        ret = " ".join(ret_words) or "int"
        if stars:
            ret += " " + "*" * stars
        params: list[ir.Param] = []
        parts = split_commas(toks[k + 1:end - 1])
        if len(parts) == 1 and [t.value for t in parts[0]] == ["void"]:
            parts = []
        for part in parts:
            if not part or part[0].value == "...":
                continue
            params.append(self._param(part))
        return name, ret, tuple(params)

    def _param(self, toks: list[Tok]) -> ir.Param:
        span = self.smap.span(toks[0].start, toks[-1].end)
        vals = [KEYWORD_ALIASES.get(t.value, t.value) for t in toks]
        # the name: inside `( * name )` if present, else the last name before the first '['
        name_idx = None
        for i in range(len(toks) - 2):
            if vals[i] == "(" and vals[i + 1] == "*":
                j = i + 1
                while j < len(toks) and (vals[j] == "*" or vals[j] in QUALIFIERS):
                    j += 1
                if j < len(toks) and toks[j].kind == "id":
                    name_idx = j
                break
        if name_idx is None:
            stop = vals.index("[") if "[" in vals else len(toks)
            ids = [i for i in range(stop) if toks[i].kind == "id" and vals[i] not in SPEC_WORDS]
            if ids:
                last = ids[-1]
                type_words_before = [i for i in range(last) if toks[i].kind == "id"
                                     and vals[i] not in QUALIFIERS and vals[i] not in STORAGE]
                if type_words_before or vals[last] not in KNOWN_TYPES | self.typedefs:
                    name_idx = last
        name = toks[name_idx].value if name_idx is not None else ""
        # the base type: the words before the first '*', '(' or '[' (later
        # qualifiers belong to the pointer, as in `int *const *rows`)
        stop_at = name_idx if name_idx is not None else len(toks)
        for i in range(stop_at):
            if vals[i] in ("*", "(", "["):
                stop_at = i
                break
        type_words = [vals[i] for i in range(stop_at)
                      if toks[i].kind == "id" and vals[i] not in ("restrict", "register")]
        depth = 0
        pointer = 0
        dims: list[ir.Expr | None] = []
        i = 0
        while i < len(toks):
            v = vals[i]
            if v == "[":
                end = skip_brackets(toks, i)
                inner = [t for t in toks[i + 1:end - 1]
                         if KEYWORD_ALIASES.get(t.value, t.value) not in QUALIFIERS | {"static"}]
                if not inner or (len(inner) == 1 and inner[0].value == "*"):
                    dims.append(None)
                else:
                    e = self.parse_expr(inner)
                    if e is None:
                        s = self.smap.span(inner[0].start, inner[-1].end)
                        e = ir.Opaque(s, self.smap.slice(s))
                    dims.append(e)
                i = end
                continue
            if v == "(":
                depth += 1
                if name_idx is not None and i > name_idx:
                    break  # a function pointer's own parameter list
            elif v == ")":
                depth -= 1
            elif v == "*":
                pointer += 1
            i += 1
        written = " ".join(type_words)
        resolved, more = resolve_typedef(written, self.typedef_types)
        return ir.Param(span, name, written, pointer + more, tuple(dims),
                        resolved if resolved != written else "")

    def _snippet_function(self, toks: list[Tok]) -> ir.Function:
        lt = self.to_lark(toks)
        if not lt:
            span = ir.Span(1, 1, 1, 1)
            return ir.Function(span, "<snippet>", "void", (), ir.Block(span, ()))
        first, last = lt[0], lt[-1]
        span = cover(first, last)
        whole = False
        if first.type == self.LBRACE and last.type == self.RBRACE:
            m = match_brackets(lt, self._openers(), self._closers())
            whole = m[0] == len(lt) - 1
        if not whole:
            lb = Token(self.LBRACE, "{", first.start_pos, first.line, first.column, first.line,
                       first.column, first.start_pos)
            rb = Token(self.RBRACE, "}", last.end_pos, last.end_line, last.end_column,
                       last.end_line, last.end_column, last.end_pos)
            lt = [lb, *lt, rb]
        try:
            body = self.parse_body(lt)
        except RecursionError:
            self.diags.append(d.NestingTooDeep(span, where=ir.Span.point(span.line, span.column),
                                               limit=MAX_RECOVERY_DEPTH))
            body = ir.Block(span, ())
        body = replace(body, span=span)
        return ir.Function(span, "<snippet>", "void", (), body)
