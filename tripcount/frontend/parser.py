# Stage 2a of the pipeline: preprocessed tokens -> IR, with error recovery.
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

import hashlib
import os
import re
import sys
import threading
from bisect import bisect_right
from dataclasses import replace
from pathlib import Path

from lark import Lark, Token
from lark import __version__ as lark_version
from lark.exceptions import UnexpectedInput
from lark.lexer import Lexer

from tripcount import ir
from tripcount.ctable import IDENTIFIER_TYPES
from tripcount.diagnostics import Diagnostic
from tripcount.frontend import diagnostics as d
from tripcount.frontend.build import IRBuilder, PragmaToken, cover
from tripcount.frontend.preprocess import Preprocessed, SourceMap, Tok
from tripcount.paths import cache_dir

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

_FLOAT_RE = re.compile(
    r"(?:[0-9]+\.[0-9]*|\.[0-9]+|[0-9]+(?=[eE]))(?:[eE][+-]?[0-9]+)?[fFlL]?$"
    r"|0[xX](?:[0-9a-fA-F]+\.?[0-9a-fA-F]*|\.[0-9a-fA-F]+)[pP][+-]?[0-9]+[fFlL]?$")
_INT_RE = re.compile(r"(?:0[xX][0-9a-fA-F]+|0[bB][01]+|[0-9]+)(?:[uU](?:ll|LL|[lLzZ])?|(?:ll|LL|[lLzZ])[uU]?)?$")


class ParseFailure(Exception):
    """A token range the grammar could not read; `reason` says why."""

    def __init__(self, reason: str, token: Token | None = None) -> None:
        super().__init__(reason)
        self.reason = reason
        self.token = token


class _ListLexer(Lexer):
    """The parser's lexer: the tokens were made beforehand, so it hands them over."""

    def __init__(self, lexer_conf: object) -> None:
        pass

    def lex(self, data: list[Token]):  # type: ignore[override]
        return iter(data)


def _grammar_text() -> str:
    try:
        from importlib import resources

        return resources.files("tripcount.grammar").joinpath("loops.lark").read_text("utf-8")
    except (ImportError, FileNotFoundError, OSError, TypeError):
        # source checkout: the grammar lives in the repository's grammar/ directory
        return (Path(__file__).resolve().parents[2] / "grammar" / "loops.lark").read_text("utf-8")


class _Driver:
    """The LALR loop over lark's parse table and callbacks, written out.

    lark's own loop does the same work through a method call per token, and
    its table is keyed by grammar objects whose comparisons run Python code.
    A file is hundreds of thousands of tokens, so the table is copied once
    into plain dictionaries (string keys; reductions carry their size, goto
    symbol and callback) and the loop below runs over it. If lark's internals
    ever differ, the engine falls back to `Lark.parse`.
    """

    def __init__(self, lark: Lark) -> None:
        from lark.parse_tree_builder import ExpandSingleChild
        from lark.parsers.lalr_analysis import Shift

        inner = lark.parser.parser.parser  # ParsingFrontend -> LALR_Parser -> _Parser
        table = inner.parse_table
        callbacks = inner.callbacks
        reduce_info: dict[int, tuple] = {}
        self.states: dict = {}
        for state, row in table.states.items():
            new_row = {}
            for sym, (action, arg) in row.items():
                if action is Shift:
                    new_row[str(sym)] = (True, arg)
                    continue
                info = reduce_info.get(id(arg))
                if info is None:
                    cb = callbacks[arg]
                    size = len(arg.expansion)
                    if type(cb) is ExpandSingleChild and size == 1:
                        cb = None  # `?rule` with one child: the child itself
                    info = (size, str(arg.origin.name), cb)
                    reduce_info[id(arg)] = info
                new_row[str(sym)] = (False, info)
            self.states[state] = new_row
        self.start_states = {str(k): v for k, v in table.start_states.items()}
        self.end_states = {str(k): v for k, v in table.end_states.items()}

    def parse(self, tokens: list[Token], start: str):
        states = self.states
        state_stack = [self.start_states[start]]
        value_stack: list = []
        push_state = state_stack.append
        push_value = value_stack.append

        def reduce(size: int, origin: str, cb) -> None:
            if cb is None:
                state_stack.pop()
            else:
                if size:
                    children = value_stack[-size:]
                    del state_stack[-size:]
                    del value_stack[-size:]
                else:
                    children = []
                push_value(cb(children))
            push_state(states[state_stack[-1]][origin][1])

        for tok in tokens:
            ty = tok.type
            while True:
                try:
                    is_shift, arg = states[state_stack[-1]][ty]
                except KeyError:
                    raise ParseFailure(_describe(tok), tok) from None
                if is_shift:
                    push_state(arg)
                    push_value(tok)
                    break
                reduce(*arg)
        end_state = self.end_states[start]
        while True:
            try:
                is_shift, arg = states[state_stack[-1]]["$END"]
            except KeyError:
                raise ParseFailure(_describe(None)) from None
            if is_shift:
                raise ParseFailure(_describe(None))
            reduce(*arg)
            if state_stack[-1] == end_state:
                return value_stack[-1]


_LARK_OPTIONS = dict(parser="lalr", lexer=_ListLexer, keep_all_tokens=True, maybe_placeholders=True,
                     start=["body_start", "item_start", "expr_start", "decl_start"])


def _compile(builder: IRBuilder) -> Lark:
    """The LALR parser of the grammar; its tables are kept in the cache directory
    (about 0.2 s to compute, a few ms to load).

    lark's own cache is used with the final file name: lark keys the file by its
    options, the file name included, so a table written under a private name and
    renamed would never be loaded. lark checks the key and the file when it
    loads and recompiles (and rewrites) on any mismatch or damage, so a file
    half written by a concurrent process is only a miss; an unwritable
    directory means no grammar cache."""
    text = _grammar_text()
    key = hashlib.sha256(f"{text}\0{lark_version}\0{sys.version_info[:2]}".encode()).hexdigest()[:20]
    final = os.path.join(cache_dir(), f"grammar-{key}.lark")
    try:
        os.makedirs(os.path.dirname(final), exist_ok=True)
        return Lark(text, transformer=builder, cache=final, **_LARK_OPTIONS)
    except Exception:  # noqa: BLE001 - no usable cache: compile without one
        return Lark(text, transformer=builder, **_LARK_OPTIONS)


class _Engine:
    """The compiled grammar, its callbacks, and the terminal names of keywords/punctuators."""

    def __init__(self) -> None:
        self.builder = IRBuilder()
        self.lark = _compile(self.builder)
        self.terms: dict[str, str] = {}
        for t in self.lark.terminals:
            if t.pattern.type == "str":
                self.terms[str(t.pattern.value)] = str(t.name)
        self.lock = threading.RLock()
        try:
            self.driver: _Driver | None = _Driver(self.lark)
        except (AttributeError, ImportError, KeyError, TypeError):
            self.driver = None

    def parse(self, tokens: list[Token], start: str):
        """Parse parser tokens from the rule `start`; ParseFailure when they do not fit."""
        if self.driver is not None:
            return self.driver.parse(tokens, start)
        try:
            return self.lark.parse(tokens, start=start)
        except UnexpectedInput as exc:
            tok = getattr(exc, "token", None)
            if tok is not None and tok.type == "$END":
                tok = None
            raise ParseFailure(_describe(tok), tok) from None


_ENGINE: _Engine | None = None
_ENGINE_LOCK = threading.Lock()


def engine() -> _Engine:
    """The shared parser, compiled on first use."""
    global _ENGINE
    if _ENGINE is None:
        with _ENGINE_LOCK:
            if _ENGINE is None:
                _ENGINE = _Engine()
    return _ENGINE


def _describe(tok: Token | None) -> str:
    if tok is None or tok.type == "$END":
        return "it ends before the statement is complete"
    where = d.where(tok.line, tok.column)
    if tok.type == "BAD":
        return f"unexpected character '{tok}' at {where}"
    return f"unexpected '{tok}' at {where}"


class UnitParser:
    """Parses one preprocessed file (or snippet) into functions and globals."""

    def __init__(self, pre: Preprocessed, diags: list[Diagnostic]) -> None:
        self.pre = pre
        self.smap: SourceMap = pre.source
        self.diags = diags
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
                    i = _skip_parens(toks, i + 1)
                    continue
                ty = terms.get(v, "?")
            elif k == "num":
                if _INT_RE.match(v):
                    ty = "INT_LIT"
                elif _FLOAT_RE.match(v):
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
        new = _new_token
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
                p.omp = self._omp(t)
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

    # ================================================================ OpenMP
    def _omp(self, p: Tok) -> ir.OmpClauses | None:
        toks = p.extra or []
        words: list[str] = []
        k = 0
        while k < len(toks) and toks[k].kind == "id" and toks[k].value in ("parallel", "for", "simd"):
            if k + 1 < len(toks) and toks[k + 1].value == "(":
                break
            words.append(toks[k].value)
            k += 1
        if tuple(words) not in OMP_DIRECTIVES:
            return None
        span = self.smap.span(p.start, p.end)
        text = self.smap.text[p.start:p.end].rstrip()
        schedule = None
        chunk = None
        collapse = 1
        num_threads = None
        while k < len(toks):
            t = toks[k]
            if t.value == ",":
                k += 1
                continue
            name = t.value
            args: list[Tok] = []
            k += 1
            if k < len(toks) and toks[k].value == "(":
                end = _skip_parens(toks, k)
                args = toks[k + 1:end - 1]
                k = end
            w = d.where(*self.smap.position(t.start))
            if name == "schedule":
                parts = _split_commas(args)
                kind_toks = parts[0] if parts else []
                kinds = [x.value for x in kind_toks if x.kind == "id"]
                if not kinds or kinds[-1] not in SCHEDULE_KINDS:
                    self.diags.append(d.OmpClauseProblem(span, clause="schedule", where=w,
                                                         reason="unknown schedule kind"))
                    continue
                schedule = kinds[-1]
                if len(parts) > 1:
                    chunk = self.parse_expr(parts[1])
                    if chunk is None:
                        self.diags.append(d.OmpClauseProblem(span, clause="schedule", where=w,
                                                             reason="the chunk size is not an expression"))
            elif name == "collapse":
                e = self.parse_expr(args)
                if isinstance(e, ir.IntLit) and e.value >= 1:
                    collapse = e.value
                else:
                    self.diags.append(d.OmpClauseProblem(span, clause="collapse", where=w,
                                                         reason="expected a positive integer constant"))
            elif name == "num_threads":
                num_threads = self.parse_expr(args)
                if num_threads is None:
                    self.diags.append(d.OmpClauseProblem(span, clause="num_threads", where=w,
                                                         reason="not an expression"))
        return ir.OmpClauses(span, " ".join(words), schedule, chunk, collapse, num_threads, text)

    # ================================================================ file level
    def parse_unit(self, snippet: bool) -> tuple[list[ir.Function], list[ir.Decl]]:
        """Functions and global declarations of the file (or the snippet's function)."""
        toks = self.pre.tokens
        self._collect_typedefs(toks)
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
                        span, name=_name_before_paren(toks[a:b]),
                        where=d.where(span.line, span.column),
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
                try:
                    g = self._global(toks, a, b)
                except Exception:  # globals are optional: an unreadable one is skipped
                    g = None
                if g is not None:
                    globals_.append(g)
        if skipped:
            first = skipped[0]
            self.diags.append(d.FileTooLarge(
                first.span, where=d.where(first.span.line, first.span.column),
                count=len(skipped), limit=GRAMMAR_TOKEN_BUDGET))
        return functions, globals_

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
                            self.smap.span(t.start, t.end), where=d.where(line, col),
                            reason="this '{' is never closed; the rest of the file is skipped"))
                    break
                head = _function_head(toks, chunk, i)
                if head is not None:
                    # text before the head (an unexpanded macro call, say) is not part of it
                    items.append(("func", head, i, j))
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
                self.smap.span(t.start, t.end), where=d.where(line, col),
                reason=f"this '}}' has no matching '{{'{more}; ignored"))
        return items

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
            w = d.where(fspan.line, fspan.column)
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
            w = d.where(fspan.line, fspan.column)
            self.diags.append(d.FunctionSkipped(fspan, name=name, where=w, reason=reason))
            return None
        return ir.Function(fspan, name, ret, params, body)

    def _header(self, toks: list[Tok]) -> tuple[str, str, tuple[ir.Param, ...]]:
        toks = _strip_attributes(toks)
        # the parameter list is the first parenthesis at depth 0 after a name
        k = next((i for i, t in enumerate(toks) if t.value == "(" and i > 0
                  and toks[i - 1].kind == "id"), None)
        if k is None:
            raise ParseFailure("cannot find the function name")
        end = _skip_parens(toks, k)
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
        parts = _split_commas(toks[k + 1:end - 1])
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
                end = _skip_brackets(toks, i)
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
        return ir.Param(span, name, " ".join(type_words), pointer, tuple(dims))

    def _snippet_function(self, toks: list[Tok]) -> ir.Function:
        lt = self.to_lark(toks)
        if not lt:
            span = ir.Span(1, 1, 1, 1)
            return ir.Function(span, "<snippet>", "void", (), ir.Block(span, ()))
        first, last = lt[0], lt[-1]
        span = cover(first, last)
        whole = False
        if first.type == self.LBRACE and last.type == self.RBRACE:
            m = _match(lt, self._openers(), self._closers())
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
            self.diags.append(d.NestingTooDeep(span, where=d.where(span.line, span.column),
                                               limit=MAX_RECOVERY_DEPTH))
            body = ir.Block(span, ())
        body = replace(body, span=span)
        return ir.Function(span, "<snippet>", "void", (), body)

    # ================================================================ recovery
    def _openers(self) -> dict[str, str]:
        return {self.LPAR: self.RPAR, self.LSQB: self.RSQB, self.LBRACE: self.RBRACE}

    def _closers(self) -> set[str]:
        return {self.RPAR, self.RSQB, self.RBRACE}

    def parse_body(self, lt: list[Token]) -> ir.Block:
        """A `{ ... }` token list as a Block; unreadable statements become ir.Unparsed."""
        try:
            return self._parse(lt, "body_start")
        except ParseFailure as exc:
            failure = exc
        self._match = _match(lt, self._openers(), self._closers())
        self._index = {id(t): k for k, t in enumerate(lt)}
        at = self._index.get(id(failure.token)) if failure.token is not None else None
        known = (at, failure.reason) if at is not None else None
        return self._recover_block(lt, 0, len(lt) - 1, 0, known)

    def _recover_block(self, L: list[Token], lo: int, hi: int, depth: int,
                       known: tuple[int, str] | None = None) -> ir.Block:
        items: list[ir.Stmt] = []
        i = lo + 1
        while i < hi:
            e = self._stmt_end(L, i, hi)
            items.append(self._recover_stmt(L, i, e, depth, known))
            i = e
        return ir.Block(cover(L[lo], L[hi]), tuple(items))

    def _unparsed(self, L: list[Token], i: int, e: int, reason: str) -> ir.Unparsed:
        span = cover(L[i], L[e - 1])
        self.diags.append(d.SyntaxProblem(span, where=d.where(span.line, span.column),
                                          reason=reason))
        return ir.Unparsed(span, self.smap.slice(span), reason)

    def _semi_after(self, tok: Token) -> Token:
        return Token(self.SEMI, ";", tok.end_pos, tok.end_line, tok.end_column, tok.end_line,
                     tok.end_column, tok.end_pos)

    def _recover_stmt(self, L: list[Token], i: int, e: int, depth: int,
                      known: tuple[int, str] | None = None) -> ir.Stmt:
        # `known` is the failure of an enclosing statement: when it lies in
        # this range, parsing the range alone fails the same way, so the
        # attempt is skipped (keeps recovery linear in deeply nested code)
        if known is not None and i <= known[0] < e:
            reason = known[1]
        else:
            try:
                return self._parse(L[i:e], "item_start")
            except ParseFailure as exc:
                reason = exc.reason
                at = self._index.get(id(exc.token)) if exc.token is not None else None
                known = (at, reason) if at is not None else None
        if depth >= MAX_RECOVERY_DEPTH:
            span = cover(L[i], L[e - 1])
            self.diags.append(d.NestingTooDeep(span, where=d.where(span.line, span.column),
                                               limit=MAX_RECOVERY_DEPTH))
            return ir.Unparsed(span, self.smap.slice(span), "nested too deeply")
        m = self._match
        ty = L[i].type
        try:
            if ty == self.LBRACE and m[i] == e - 1:
                return self._recover_block(L, i, e - 1, depth + 1, known)
            if ty == "PRAGMA" and i + 1 < e:
                inner = self._recover_stmt(L, i + 1, e, depth + 1, known)
                return self.eng.builder.attach_pragma(L[i], inner)
            if ty in (self.FOR, self.WHILE, self.SWITCH) and i + 1 < e and L[i + 1].type == self.LPAR:
                k = m[i + 1]
                if i + 1 < k < e - 1:
                    node = self._parse(L[i:k + 1] + [self._semi_after(L[k])], "item_start")
                    body = self._recover_stmt(L, k + 1, e, depth + 1, known)
                    return replace(node, body=body, span=cover(node, body))
            if ty == self.IF and i + 1 < e and L[i + 1].type == self.LPAR:
                k = m[i + 1]
                if i + 1 < k < e - 1:
                    node = self._parse(L[i:k + 1] + [self._semi_after(L[k])], "item_start")
                    te = self._stmt_end(L, k + 1, e)  # stops before this if's own else
                    then = self._recover_stmt(L, k + 1, te, depth + 1, known)
                    other = None
                    if te + 1 < e and L[te].type == self.ELSE:
                        other = self._recover_stmt(L, te + 1, e, depth + 1, known)
                    last = other if other is not None else then
                    return replace(node, then=then, other=other, span=cover(node, last))
            if ty == self.DO and i + 1 < e:
                be = self._stmt_end(L, i + 1, e)
                if be < e and L[be].type == self.WHILE:
                    node = self._parse([L[i], self._semi_after(L[i])] + L[be:e], "item_start")
                    body = self._recover_stmt(L, i + 1, be, depth + 1, known)
                    return replace(node, body=body)
            if ty == "IDENT" and i + 2 < e and L[i + 1].type == self.COLON:
                inner = self._recover_stmt(L, i + 2, e, depth + 1, known)
                return ir.Labeled(cover(L[i], inner), str(L[i]), inner)
            if ty == self.DEFAULT and i + 2 < e and L[i + 1].type == self.COLON:
                inner = self._recover_stmt(L, i + 2, e, depth + 1, known)
                return ir.Labeled(cover(L[i], inner), "default", inner)
            if ty == self.CASE:
                c = self._case_colon(L, i, e)
                if c is not None and c + 1 < e:
                    inner = self._recover_stmt(L, c + 1, e, depth + 1, known)
                    return ir.Labeled(cover(L[i], inner), "case", inner)
        except ParseFailure as exc:
            reason = exc.reason
        return self._unparsed(L, i, e, reason)

    def _case_colon(self, L: list[Token], i: int, e: int) -> int | None:
        q = 0
        j = i + 1
        while j < e:
            ty = L[j].type
            if ty == self.QMARK:
                q += 1
            elif ty == self.COLON:
                if q == 0:
                    return j
                q -= 1
            elif ty in (self.LPAR, self.LSQB) and self._match[j] > j:
                j = self._match[j]
            j += 1
        return None

    def _stmt_end(self, L: list[Token], i: int, hi: int) -> int:
        """Index just past the statement starting at `i` (bounded by `hi`)."""
        m = self._match
        pending: list[str] = []
        while True:
            # prefixes: pragma, labels, loop/if/switch headers, `do`
            while True:
                if i >= hi:
                    return hi
                ty = L[i].type
                if ty == "PRAGMA":
                    i += 1
                elif ty in (self.FOR, self.WHILE, self.SWITCH, self.IF) and i + 1 < hi \
                        and L[i + 1].type == self.LPAR and i + 1 < m[i + 1] < hi:
                    if ty == self.IF:
                        pending.append("if")
                    i = m[i + 1] + 1
                elif ty in (self.FOR, self.WHILE, self.SWITCH, self.IF) and i + 1 < hi \
                        and L[i + 1].type == self.LPAR:
                    # the header's ')' is missing: the statement runs to its body's end
                    return self._broken_header_end(L, i, hi)
                elif ty == self.DO:
                    pending.append("do")
                    i += 1
                elif ty == "IDENT" and i + 1 < hi and L[i + 1].type == self.COLON:
                    i += 2
                elif ty == self.DEFAULT and i + 1 < hi and L[i + 1].type == self.COLON:
                    i += 2
                elif ty == self.CASE:
                    c = self._case_colon(L, i, hi)
                    if c is None:
                        break
                    i = c + 1
                else:
                    break
            # the statement itself
            if L[i].type == self.LBRACE and i < m[i] < hi:
                i = m[i] + 1
            else:
                i = self._simple_end(L, i, hi)
            # finish the constructs waiting for it
            reopened = False
            while pending:
                top = pending.pop()
                if top == "if":
                    if i < hi and L[i].type == self.ELSE:
                        i += 1
                        reopened = True
                        break
                else:
                    if i + 1 < hi and L[i].type == self.WHILE and L[i + 1].type == self.LPAR:
                        k = m[i + 1]
                        i = k + 1 if i + 1 < k < hi else hi
                        if i < hi and L[i].type == self.SEMI:
                            i += 1
            if not reopened:
                return i

    def _broken_header_end(self, L: list[Token], i: int, hi: int) -> int:
        m = self._match
        semis = 2 if L[i].type == self.FOR else 0
        j = i + 2
        while j < hi:
            ty = L[j].type
            if ty == self.SEMI:
                if semis == 0:
                    return j + 1
                semis -= 1
            elif ty == self.LBRACE and j < m[j] < hi:
                return m[j] + 1
            elif ty == self.RBRACE:
                return max(j, i + 1)
            elif ty in (self.LPAR, self.LSQB) and j < m[j] < hi:
                j = m[j]
            j += 1
        return hi

    def _simple_end(self, L: list[Token], i: int, hi: int) -> int:
        m = self._match
        j = i
        while j < hi:
            ty = L[j].type
            if ty == self.SEMI:
                return j + 1
            if ty == self.RBRACE:
                return j if j > i else j + 1  # a missing ';' before '}'
            if ty in (self.LPAR, self.LSQB, self.LBRACE) and j < m[j] < hi:
                j = m[j] + 1
                continue
            if ty == "PRAGMA" and j > i:
                return j
            j += 1
        return hi


# ==================================================================== helpers
def _name_before_paren(toks: list[Tok]) -> str:
    for k in range(1, len(toks)):
        if toks[k].value == "(" and toks[k - 1].kind == "id":
            return toks[k - 1].value
    return "?"


_str_new = str.__new__


def _new_token(cls: type, ty: str, value: str, start: int, line: int, column: int,
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


def _skip_parens(toks: list, k: int, limit: int | None = None) -> int:
    """Index past the parenthesised group opening at `k` (or `k` if it is not '(').

    The search stops at `limit` (default: the end), which it returns when the
    group is not closed before it.
    """
    end = len(toks) if limit is None else min(limit, len(toks))
    if k >= end or toks[k].value != "(":
        return k
    depth = 0
    for j in range(k, end):
        v = toks[j].value
        if v == "(":
            depth += 1
        elif v == ")":
            depth -= 1
            if depth == 0:
                return j + 1
    return end


def _close_paren(toks: list[Tok], k: int, limit: int) -> int | None:
    """Index of the ')' closing the '(' at `k`, searching below `limit`; None if unclosed."""
    depth = 0
    for j in range(k, min(limit, len(toks))):
        v = toks[j].value
        if v == "(":
            depth += 1
        elif v == ")":
            depth -= 1
            if depth == 0:
                return j
    return None


def _skip_brackets(toks: list[Tok], k: int) -> int:
    depth = 0
    for j in range(k, len(toks)):
        v = toks[j].value
        if v == "[":
            depth += 1
        elif v == "]":
            depth -= 1
            if depth == 0:
                return j + 1
    return len(toks)


def _split_commas(toks: list[Tok]) -> list[list[Tok]]:
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


def _strip_attributes(toks: list[Tok]) -> list[Tok]:
    out: list[Tok] = []
    i = 0
    while i < len(toks):
        v = toks[i].value
        if toks[i].kind == "id" and v in SKIP_WITH_PARENS:
            i = _skip_parens(toks, i + 1)
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


def _match(L: list[Token], openers: dict[str, str], closers: set[str]) -> list[int]:
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
