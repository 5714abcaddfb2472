# Stage 1 of the pipeline: the preprocessor.
#
# Turns source text into a list of tokens with positions in the user's
# original file: line continuations are spliced, comments dropped, directives
# obeyed (#define/#undef, #if-family, #include), macros expanded, and
# `#pragma omp ...` lines kept as single pragma tokens for the parser. Tokens
# produced by a macro expansion carry the offsets of the macro invocation, so
# every later stage points at what the user wrote. Nothing here raises on bad
# input; problems become diagnostics and the text is read on.
#
# Headers: `#include "x.h"` is read from the including file's directory or an
# -I directory, `#include <x.h>` only from an -I directory (system headers are
# never read: the standard types and math functions are known from a table).
# A header contributes its macros, types and declarations; its tokens carry
# the offsets of the #include directive, and the bodies of functions it
# defines are dropped (their loop nests are reported when the header itself
# is analyzed, once, in its own coordinates). Problems inside a header become
# one TC120 warning at the directive naming the header's own line:column.
#
# The lexer is in lexer.py, #include in includes.py, #if expressions in ppexpr.py.

from __future__ import annotations

import os
from dataclasses import dataclass, field

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics import source as d
from tripcount.frontend.includes import IncludeReader, Includes, IncludeState
from tripcount.frontend.lexer import SourceMap, Tok, char_value, int_value, tokenize
from tripcount.frontend.ppexpr import CondEvalError, CondEvaluator

# Macros every C compiler predefines that change which branch of common
# #if tests is taken. _OPENMP is defined because tripcount reads OpenMP
# pragmas: code guarded by `#ifdef _OPENMP` is the code that runs in parallel.
PREDEFINED = {
    "__STDC__": "1",
    "__STDC_VERSION__": "201112L",
    "__STDC_HOSTED__": "1",
    "_OPENMP": "201511",
}

# Expansion budgets, in tokens produced (every expansion step counts, the
# rescans and the argument pre-expansions too): per use of a macro in the text,
# and for all expansions of the file together (a multiple of the input size
# plus a floor); and how deep macro arguments may nest. A use past its budget
# is read as written (TC118); past the file's, nothing more is expanded (TC108).
MAX_USE_TOKENS = 20_000
EXPANSION_FACTOR = 20
EXPANSION_FLOOR = 100_000
MAX_ARG_DEPTH = 64


class _Overrun(Exception):
    """An expansion step went past a budget (`file`: the file's, else the use's)."""

    def __init__(self, file: bool) -> None:
        super().__init__("file" if file else "use")
        self.file = file


@dataclass
class MacroDef:
    """A macro as the expander uses it."""

    name: str
    params: tuple[str, ...] | None
    body: list[Tok]
    variadic: bool = False
    index: dict[str, int] = field(default_factory=dict)


@dataclass
class Preprocessed:
    """The preprocessor's result: tokens, the macros defined, and its diagnostics."""

    tokens: list[Tok]
    macros: list[ir.Macro]
    diagnostics: list[Diagnostic]
    source: SourceMap
    defined: dict[str, MacroDef]


_PLACEMARKER = Tok("other", "", 0, 0)
_PASTE = Tok("other", "##", 0, 0)


def _spelling(toks: list[Tok]) -> str:
    """Tokens as text, with a space where the source had whitespace between them."""
    parts: list[str] = []
    for i, t in enumerate(toks):
        if i and t.space:
            parts.append(" ")
        parts.append(t.value)
    return "".join(parts)


class Preprocessor(IncludeReader):
    """Runs directives and macro expansion over one file's tokens."""

    def __init__(self, text: str, path: str | None = None, includes: Includes | None = None,
                 _shared: IncludeState | None = None, _depth: int = 0) -> None:
        self.smap = SourceMap(text)
        self.path = path
        self.shared = _shared or IncludeState(includes or Includes())
        self.depth = _depth
        self.diags: list[Diagnostic] = []
        self.macros: dict[str, MacroDef] = {}
        self.recorded: list[ir.Macro] = []
        self.budget = 0
        self.exhausted = False
        self.use_left: int | None = None  # tokens the current macro use may still produce
        self.recursion_noted: set[str] = set()
        if _shared is not None:
            return  # a header: the including file's macro table is installed by _include
        for name, value in PREDEFINED.items():
            self.macros[name] = MacroDef(name, None, tokenize(value))
        inc = self.shared.includes
        for name, value in inc.defines:
            self._command_line_define(name, value)
        for name in inc.undefines:
            self.macros.pop(name, None)

    def _command_line_define(self, name: str, value: str) -> None:
        """-D NAME=VALUE, like `#define NAME VALUE` at the top of the file."""
        toks = tokenize(f"{name} {value}")
        if toks and toks[0].kind == "id" and len(toks) > 1 and toks[1].value == "(" \
                and toks[1].start == toks[0].end:
            toks[1].space = False
        before = len(self.recorded)
        self._define(Tok("punct", "#", 0, 0, True), toks)
        del self.recorded[before:]  # not a macro of the file

    # ------------------------------------------------------------------ helpers
    def _span(self, t: Tok) -> ir.Span:
        return self.smap.span(t.start, t.end)

    def _where(self, t: Tok) -> ir.Span:
        line, col = self.smap.position(t.start)
        return ir.Span.point(line, col)

    # ------------------------------------------------------------------ driver
    def run(self) -> Preprocessed:
        """Preprocess the whole text."""
        toks = tokenize(self.smap.text, self.diags, self.smap)
        self.budget = EXPANSION_FLOOR + EXPANSION_FACTOR * len(toks)
        out: list[Tok] = []
        pending: list[Tok] = []
        # conditional stack entries: [parent_active, this_branch_taken, some_branch_taken, tok]
        conds: list[list] = []
        active = True
        n = len(toks)
        i = 0
        while i < n:
            t = toks[i]
            if not (t.bol and t.value == "#" and t.kind == "punct"):
                if active:
                    pending.append(t)
                i += 1
                continue
            j = i + 1
            while j < n and not toks[j].bol:
                j += 1
            line = toks[i + 1:j]
            i = j
            name = line[0].value if line and line[0].kind == "id" else ""
            if name in ("if", "ifdef", "ifndef"):
                if active:
                    taken = self._condition(name, t, line[1:])
                else:
                    taken = False
                conds.append([active, taken, taken, t, name])
                active = active and taken
                continue
            if name in ("elif", "else", "endif"):
                if not conds:
                    self.diags.append(d.StrayDirective(self._span(t), directive=name,
                                                       where=self._where(t)))
                    continue
                top = conds[-1]
                if name == "endif":
                    conds.pop()
                    active = top[0]
                    continue
                if top[2]:
                    top[1] = False
                elif name == "else":
                    top[1] = top[2] = True
                else:
                    taken = self._condition("elif", t, line[1:]) if top[0] else False
                    top[1] = top[2] = taken
                active = top[0] and top[1]
                continue
            if not active:
                continue
            if name in ("define", "undef"):
                # a definition changes what later text means: expand what came before
                self._flush(pending, out)
                if name == "define":
                    self._define(t, line[1:])
                else:
                    self._undef(t, line[1:])
            elif name == "pragma":
                if len(line) > 1 and line[1].value == "once" and self.path is not None:
                    self.shared.once.add(os.path.realpath(self.path))
                if len(line) > 1 and line[1].value == "omp":
                    self._flush(pending, out)
                    p = Tok("pragma", _spelling(line[2:]), t.start, line[-1].end, True)
                    p.extra = self._expand(line[2:])
                    out.append(p)
            elif name == "include":
                self._flush(pending, out)
                self._include(t, line[1:], out)
            elif name in ("error", "warning"):
                self.diags.append(d.ErrorDirective(self._span(t), directive=name,
                                                   where=self._where(t),
                                                   text=_spelling(line[1:])))
            # line, ident and unknown directives are ignored on purpose
        self._flush(pending, out)
        for top in conds:
            tok = top[3]
            self.diags.append(d.UnterminatedConditional(self._span(tok), directive=top[4],
                                                        where=self._where(tok)))
        return Preprocessed(out, self.recorded, self.diags, self.smap, self.macros)

    def _flush(self, pending: list[Tok], out: list[Tok]) -> None:
        if pending:
            out.extend(self._expand(pending))
            pending.clear()

    # ------------------------------------------------------------------ #define
    def _define(self, hash_tok: Tok, toks: list[Tok]) -> None:
        if not toks or toks[0].kind != "id":
            self.diags.append(d.BadDirective(self._span(hash_tok), directive="define",
                                             where=self._where(hash_tok),
                                             reason="a macro name is expected"))
            return
        name_tok = toks[0]
        params: tuple[str, ...] | None = None
        variadic = False
        body_start = 1
        if len(toks) > 1 and toks[1].value == "(" and not toks[1].space:
            names: list[str] = []
            k = 2
            ok = False
            expect_name = True
            while k < len(toks):
                v = toks[k]
                if v.value == ")":
                    ok = True
                    k += 1
                    break
                if v.value == "," and not expect_name:
                    expect_name = True
                elif v.value == "..." and expect_name:
                    names.append("__VA_ARGS__")
                    variadic = True
                    expect_name = False
                elif v.kind == "id" and expect_name:
                    names.append(v.value)
                    expect_name = False
                elif v.value == "..." and names:
                    variadic = True  # GNU named variadic `args...`
                else:
                    break
                k += 1
            if not ok:
                self.diags.append(d.BadDirective(self._span(hash_tok), directive="define",
                                                 where=self._where(hash_tok),
                                                 reason=f"the parameter list of '{name_tok.value}' is malformed"))
                return
            params = tuple(names)
            body_start = k
        body = toks[body_start:]
        if body:
            body[0] = body[0].copy_at(body[0].start, body[0].end, None)
            body[0].space = False
        m = MacroDef(name_tok.value, params, body, variadic)
        if params is not None:
            m.index = {p: idx for idx, p in enumerate(params)}
        self.macros[m.name] = m
        end = toks[-1].end
        self.recorded.append(ir.Macro(self.smap.span(hash_tok.start, end), m.name, params,
                                      _spelling(body)))

    def _undef(self, hash_tok: Tok, toks: list[Tok]) -> None:
        if not toks or toks[0].kind != "id":
            self.diags.append(d.BadDirective(self._span(hash_tok), directive="undef",
                                             where=self._where(hash_tok),
                                             reason="a macro name is expected"))
            return
        self.macros.pop(toks[0].value, None)

    # ------------------------------------------------------------------ #if
    def _condition(self, name: str, hash_tok: Tok, toks: list[Tok]) -> bool:
        if name in ("ifdef", "ifndef"):
            if not toks or toks[0].kind != "id":
                self.diags.append(d.BadDirective(self._span(hash_tok), directive=name,
                                                 where=self._where(hash_tok),
                                                 reason="a macro name is expected"))
                return True
            known = toks[0].value in self.macros
            return known if name == "ifdef" else not known
        try:
            return self._evaluate(toks) != 0
        except (CondEvalError, RecursionError, ZeroDivisionError) as exc:
            reason = str(exc) or "the expression is not a plain integer expression"
            if isinstance(exc, ZeroDivisionError):
                reason = "division by zero"
            elif isinstance(exc, RecursionError):
                reason = "nested too deeply"
            self.diags.append(d.ConditionNotEvaluated(self._span(hash_tok), directive=name,
                                                      where=self._where(hash_tok), reason=reason))
            return True

    def _evaluate(self, toks: list[Tok]) -> int:
        # `defined X` is decided before expansion, as C requires
        pre: list[Tok] = []
        k = 0
        while k < len(toks):
            t = toks[k]
            if t.kind == "id" and t.value == "defined":
                if k + 1 < len(toks) and toks[k + 1].kind == "id":
                    name, k = toks[k + 1].value, k + 2
                elif (k + 3 < len(toks) and toks[k + 1].value == "(" and toks[k + 2].kind == "id"
                      and toks[k + 3].value == ")"):
                    name, k = toks[k + 2].value, k + 4
                else:
                    raise CondEvalError("malformed 'defined'")
                pre.append(Tok("num", "1" if name in self.macros else "0", t.start, t.end))
                continue
            pre.append(t)
            k += 1
        before = len(self.diags)
        expanded = self._expand(pre)
        if any(isinstance(x, (d.MacroUseTooLarge, d.ExpansionLimit)) for x in self.diags[before:]):
            raise CondEvalError("a macro in it expands past the budget")  # its name would read as 0
        values: list[int | str] = []
        for idx, t in enumerate(expanded):
            if t.kind == "num":
                v = int_value(t.value)
                if v is None:
                    raise CondEvalError(f"'{t.value}' is not an integer")
                values.append(v)
            elif t.kind == "chr":
                v = char_value(t.value)
                if v is None:
                    raise CondEvalError(f"cannot read {t.value}")
                values.append(v)
            elif t.kind == "id":
                if idx + 1 < len(expanded) and expanded[idx + 1].value == "(":
                    raise CondEvalError(f"'{t.value}(...)' is not known")
                values.append(1 if t.value == "true" else 0)  # C: other names are 0
            elif t.kind == "punct":
                values.append(t.value)
            else:
                raise CondEvalError(f"unexpected '{t.value}'")
        if not values:
            raise CondEvalError("the condition is empty")
        ev = CondEvaluator(values)
        result = ev.ternary()
        if ev.pos != len(values):
            raise CondEvalError(f"unexpected '{values[ev.pos]}'")
        return result

    # ------------------------------------------------------------------ expansion
    def _expand(self, toks: list[Tok], depth: int = 0) -> list[Tok]:
        """Expand macros in `toks` (C's rescanning rules, with hide sets).

        At depth 0 (text, not a macro argument) each macro use is expanded
        under its own budget: when it or the file's budget runs out, what the
        use produced is dropped and its source tokens are kept as written.
        """
        macros = self.macros
        if not macros or self.exhausted:
            return list(toks)
        out: list[Tok] = []
        stack = toks[::-1]
        pop = stack.pop
        n = len(toks)
        top = depth == 0
        # the use being expanded (depth 0): its first token, where its output starts in `out`,
        # its first source token, and the stack height below which the stack is untouched source
        use_tok: Tok | None = None
        use_out = use_src = use_base = 0
        while stack:
            if use_tok is not None and len(stack) <= use_base:
                use_tok = None  # everything the use produced has been read
                self.use_left = None
            t = pop()
            if t.kind != "id":
                out.append(t)
                continue
            m = macros.get(t.value)
            if m is None:
                out.append(t)
                continue
            if t.hide is not None and t.value in t.hide:
                self._note_recursion(t)
                out.append(t)
                continue
            if m.params is not None and (not stack or stack[-1].value != "("):
                out.append(t)  # a function-like macro name without arguments is a plain name
                continue
            starts = top and use_tok is None
            if starts:
                use_tok, use_out, use_src = t, len(out), n - 1 - len(stack)
                self.use_left = MAX_USE_TOKENS
            hide = (t.hide or frozenset()) | {m.name}
            try:
                if m.params is None:
                    body = self._substitute(m, [], t.start, t.end, hide, depth)
                else:
                    args, close = self._collect_args(stack, m, t)
                    if args is None:
                        if starts:
                            use_tok = None
                            self.use_left = None
                        out.append(t)
                        continue
                    body = self._substitute(m, args, t.start, close.end, hide, depth)
                if body:
                    body[0].space = t.space
                self._charge(len(body))
            except _Overrun as over:
                if not top:
                    raise
                assert use_tok is not None
                use_base = min(use_base, len(stack)) if not starts else len(stack)
                del out[use_out:]
                del stack[use_base:]
                out.extend(toks[use_src:n - use_base])  # the use as written
                if over.file:
                    self.exhausted = True
                    self.diags.append(d.ExpansionLimit(self._span(use_tok), where=self._where(use_tok),
                                                       reason="the file's expansion budget is spent"))
                    out.extend(reversed(stack))
                    return out
                self.diags.append(d.MacroUseTooLarge(self._span(use_tok), name=use_tok.value,
                                                   where=self._where(use_tok), limit=MAX_USE_TOKENS))
                use_tok = None
                self.use_left = None
                continue
            if starts:
                use_base = len(stack)
            elif use_tok is not None:
                use_base = min(use_base, len(stack))  # a rescan may take source tokens as arguments
            stack.extend(reversed(body))
        if top:
            self.use_left = None
        return out

    def _charge(self, produced: int) -> None:
        """Count `produced` tokens against the file's budget and the current use's."""
        self.budget -= produced
        if self.budget < 0:
            raise _Overrun(file=True)
        if self.use_left is not None:
            self.use_left -= produced
            if self.use_left < 0:
                raise _Overrun(file=False)

    def _note_recursion(self, t: Tok) -> None:
        if t.value not in self.recursion_noted:
            self.recursion_noted.add(t.value)
            self.diags.append(d.MacroRecursion(self._span(t), name=t.value, where=self._where(t)))

    def _collect_args(self, stack: list[Tok], m: MacroDef,
                      name_tok: Tok) -> tuple[list[list[Tok]] | None, Tok]:
        # the stack holds the remaining tokens reversed: walk from its end
        k = len(stack) - 1  # the '('
        level = 0
        args: list[list[Tok]] = [[]]
        close = None
        nparams = len(m.params or ())
        while k >= 0:
            t = stack[k]
            v = t.value
            if t.kind == "punct":
                if v == "(":
                    level += 1
                    if level == 1:
                        k -= 1
                        continue
                elif v == ")":
                    level -= 1
                    if level == 0:
                        close = t
                        break
                elif v == "," and level == 1 and not (m.variadic and len(args) >= nparams):
                    args.append([])
                    k -= 1
                    continue
            args[-1].append(t)
            k -= 1
        if close is None:
            self.diags.append(d.BadMacroCall(self._span(name_tok), name=m.name,
                                             where=self._where(name_tok),
                                             reason="the argument list is not closed"))
            return None, name_tok
        if nparams == 0 and args == [[]]:
            args = []
        if len(args) != nparams and not (m.variadic and len(args) == nparams - 1):
            self.diags.append(d.BadMacroCall(self._span(name_tok), name=m.name,
                                             where=self._where(name_tok),
                                             reason=f"it takes {nparams} argument(s), {len(args)} given"))
            return None, name_tok
        while len(args) < nparams:
            args.append([])
        del stack[k:]
        return args, close

    def _substitute(self, m: MacroDef, args: list[list[Tok]], start: int, end: int,
                    hide: frozenset[str], depth: int) -> list[Tok]:
        body = m.body
        index = m.index
        expanded: dict[int, list[Tok]] = {}
        items: list[Tok] = []
        n = len(body)
        k = 0
        while k < n:
            b = body[k]
            if b.kind == "punct" and b.value == "#" and k + 1 < n and body[k + 1].value in index:
                arg = args[index[body[k + 1].value]]
                text = _spelling(arg).replace("\\", "\\\\").replace('"', '\\"')
                s = Tok("str", '"' + text + '"', start, end)
                s.space = b.space
                items.append(s)
                k += 2
                continue
            if b.kind == "punct" and b.value == "##":
                items.append(_PASTE)
                k += 1
                continue
            if b.kind == "id" and b.value in index:
                idx = index[b.value]
                pasted = (k > 0 and body[k - 1].value == "##") or (k + 1 < n and body[k + 1].value == "##")
                if pasted:
                    seq = args[idx]
                else:
                    if idx not in expanded:
                        if depth >= MAX_ARG_DEPTH:
                            if not self.exhausted:
                                self.diags.append(d.ExpansionLimit(
                                    self.smap.span(start, end), where=ir.Span.point(*self.smap.position(start)),
                                    reason="macro arguments nest too deeply"))
                            self.exhausted = True
                            expanded[idx] = list(args[idx])
                        else:
                            expanded[idx] = self._expand(args[idx], depth + 1)
                    seq = expanded[idx]
                if not seq:
                    if pasted:
                        items.append(_PLACEMARKER)
                    k += 1
                    continue
                first = True
                for a in seq:
                    c = a.copy_at(start, end, hide | (a.hide or frozenset()))
                    if first:
                        c.space = b.space
                        first = False
                    items.append(c)
                k += 1
                continue
            items.append(b.copy_at(start, end, hide))
            k += 1
        if _PASTE not in items and _PLACEMARKER not in items:
            return items
        res: list[Tok] = []
        paste = False
        for it in items:
            if it is _PASTE:
                paste = True
                continue
            if paste and res:
                paste = False
                left = res[-1]
                if it is _PLACEMARKER:
                    continue
                if left is _PLACEMARKER:
                    res[-1] = it
                    continue
                joined = tokenize(left.value + it.value)
                if len(joined) == 1:
                    j = joined[0].copy_at(start, end, hide)
                    j.space = left.space
                    res[-1] = j
                else:
                    res.append(it)
                continue
            paste = False
            res.append(it)
        return [t for t in res if t is not _PLACEMARKER]


def preprocess(text: str, path: str | None = None, includes: Includes | None = None) -> Preprocessed:
    """Preprocess C source text: tokens in original-file coordinates, macros, diagnostics.

    `path` locates quoted #include files (None: the working directory);
    `includes` gives -I, -D and -U.
    """
    return Preprocessor(text, path, includes).run()
