# Front end: #include. Quoted headers are read from the including file's
# directory or an -I directory, angle headers only from an -I directory; a
# header contributes its macros, types and declarations (function bodies are
# dropped), its tokens carry the offsets of the directive, and its problems
# become one TC120 warning at the directive. Depth and count are bounded.

from __future__ import annotations

import os
from dataclasses import dataclass, field

from tripcount import ir
from tripcount.diagnostics import source as d
from tripcount.frontend.lexer import Tok
from tripcount.options import Includes  # noqa: F401 - where the front end's users find it
from tripcount.sources import read_bytes

# Headers: how deep #include may nest, and how many headers one file may read.
MAX_INCLUDE_DEPTH = 16
MAX_HEADERS = 256


@dataclass
class IncludeState:
    """State shared by a file and the headers it reads."""

    includes: Includes
    headers: int = 0
    once: set[str] = field(default_factory=set)  # headers with #pragma once already read


class IncludeReader:
    """#include for the preprocessor (a part of Preprocessor: reads self.path, self.shared, self.depth)."""

    def _header_name(self, toks: list[Tok]) -> tuple[str, bool] | None:
        """(name, quoted) of an #include operand, expanding macros once if needed."""
        for attempt in (toks, None):
            if attempt is None:
                attempt = self._expand(list(toks))
            if attempt and attempt[0].kind == "str" and attempt[0].value.startswith('"'):
                return attempt[0].value[1:-1], True
            if attempt and attempt[0].value == "<":
                parts = []
                for t in attempt[1:]:
                    if t.value == ">":
                        return "".join(parts), False
                    parts.append((" " if t.space and parts else "") + t.value)
        return None

    def _find_header(self, name: str, quoted: bool) -> tuple[str | None, list[str]]:
        """The header's path (None when not found) and the directories searched."""
        dirs: list[str] = []
        if quoted:
            here = self.path if self.path and not self.path.startswith("<") else None
            dirs.append(os.path.dirname(os.path.abspath(here)) if here else os.getcwd())
        dirs.extend(self.shared.includes.dirs)
        # anything that exists and is not a directory is "found": reading it
        # then refuses what is not a regular file (a FIFO, a device) with a reason
        if os.path.isabs(name):
            return (name if os.path.exists(name) and not os.path.isdir(name) else None), dirs
        for base in dirs:
            cand = os.path.join(base, name)
            if os.path.exists(cand) and not os.path.isdir(cand):
                return cand, dirs
        return None, dirs

    def _include(self, hash_tok: Tok, toks: list[Tok], out: list[Tok]) -> None:
        found = self._header_name(toks)
        if found is None:
            return  # `#include` with an operand we cannot name: ignored, as before
        name, quoted = found
        shown = f'"{name}"' if quoted else f"<{name}>"
        end = toks[-1].end if toks else hash_tok.end
        span = self.smap.span(hash_tok.start, end)
        path, dirs = self._find_header(name, quoted)
        if path is None:
            if quoted:
                searched = ", ".join(dirs) if dirs else "no directory"
                self.diags.append(d.HeaderNotFound(span, header=shown, where=self._where(hash_tok),
                                                   searched=searched))
            return
        real = os.path.realpath(path)
        if real in self.shared.once:
            return
        if self.depth + 1 > MAX_INCLUDE_DEPTH or self.shared.headers >= MAX_HEADERS:
            reason = (f"#include nests deeper than {MAX_INCLUDE_DEPTH}" if self.depth + 1 > MAX_INCLUDE_DEPTH
                      else f"more than {MAX_HEADERS} headers read for one file")
            self.diags.append(d.IncludeLimit(span, header=shown, where=self._where(hash_tok), reason=reason))
            return
        try:
            data = read_bytes(path)
        except OSError as exc:
            self.diags.append(d.IncludeLimit(span, header=shown, where=self._where(hash_tok),
                                             reason=exc.strerror or str(exc)))
            return
        self.shared.headers += 1
        sub = type(self)(data.decode("utf-8", errors="replace"), path, _shared=self.shared,
                           _depth=self.depth + 1)
        sub.macros = self.macros  # definitions flow both ways, as in one translation unit
        res = sub.run()
        for t in _declarations_only(res.tokens):
            c = t.copy_at(hash_tok.start, end, t.hide)
            c.bol, c.extra = t.bol, t.extra
            if c.extra is not None:
                c.extra = [x.copy_at(hash_tok.start, end, x.hide) for x in c.extra]
            out.append(c)
        self.recorded.extend(ir.Macro(span, m.name, m.params, m.body) for m in res.macros)
        problems = [g for g in res.diagnostics if g.severity in ("error", "warning")]
        if problems:
            first = problems[0]
            if isinstance(first, d.HeaderProblems):  # nested: name the innermost place
                where_first = first.args["first"]
            else:
                where_first = f"{name}:{first.span.line}:{first.span.column}: {first.message} [{first.code}]"
            self.diags.append(d.HeaderProblems(span, header=shown, where=self._where(hash_tok),
                                               count=len(problems), first=where_first))


def _declarations_only(toks: list[Tok]) -> list[Tok]:
    """A header's tokens with each function body `) { ... }` at file level made `);`."""
    out: list[Tok] = []
    depth = 0
    i, n = 0, len(toks)
    while i < n:
        t = toks[i]
        if t.value == "{" and t.kind == "punct":
            if depth == 0 and out and out[-1].value == ")":
                k, level = i, 0
                while k < n:
                    if toks[k].value == "{":
                        level += 1
                    elif toks[k].value == "}":
                        level -= 1
                        if level == 0:
                            break
                    k += 1
                semi = t.copy_at(t.start, t.end, None)
                semi.value = ";"
                out.append(semi)
                i = k + 1
                continue
            depth += 1
        elif t.value == "}" and t.kind == "punct":
            depth = max(0, depth - 1)
        out.append(t)
        i += 1
    return out
