# The front end: C source text -> ir.TranslationUnit.
#
# preprocess.py (comments, continuations, directives, macros; positions kept
# in the original file; lexer.py makes the tokens, includes.py reads headers,
# ppexpr.py evaluates #if) ->
# parser.py (one file: scanner.py cuts it into functions and declarations,
# lalr.py runs the grammar of grammar/loops.lark, recovery.py rebuilds what
# does not parse, omp.py reads OpenMP clauses, vocab.py holds the words) ->
# build.py (callbacks that build the IR); cxx.py first rewrites the tokens of
# a C++ file into the C that the rest reads. Nothing here raises on bad input:
# what cannot be read becomes a diagnostic (codes TC100..TC189, see
# tripcount/diagnostics/source.py) and the rest of the file is read on.

from __future__ import annotations

import gc

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.internal import FrontEndError
from tripcount.diagnostics.source import InvalidEncoding
from tripcount.frontend.build import Context
from tripcount.frontend.cxx import is_cxx_path, looks_cxx
from tripcount.frontend.cxx import rewrite as rewrite_cxx
from tripcount.frontend.includes import Includes
from tripcount.frontend.lexer import SourceMap
from tripcount.frontend.parser import UnitParser, engine
from tripcount.frontend.preprocess import preprocess as _preprocess
from tripcount.sources import read_bytes

__all__ = [
    "Includes", "decode", "parse_file", "parse_text",
]


def parse_text(text: str, path: str = "<input>", snippet: bool = False,
               includes: Includes | None = None,
               lang: str | None = None) -> tuple[ir.TranslationUnit, list[Diagnostic]]:
    """Read C (or C++) source text into IR.

    With `snippet=True` the text may also be a function body or bare
    statements; those become the body of a function named "<snippet>".
    `includes` gives -I directories and -D/-U macros (quoted headers are
    also looked for beside `path`). `lang` is "c" or "c++"; by default the
    suffix of `path` decides (see sources.CXX_SUFFIXES), and a `.h` file
    with C++-only constructs is C++. Diagnostics carry `path` and positions
    in `text`.
    """
    cxx = lang == "c++" or (lang is None and is_cxx_path(path))
    if text.startswith("\ufeff"):
        text = text[1:]  # a byte-order mark is not a column anyone sees
    eng = engine()
    # Reading makes millions of small acyclic objects; the cycle collector
    # would rescan them again and again (run time grows faster than the file),
    # so it pauses while a file is read.
    gc_was_enabled = gc.isenabled()
    gc.disable()
    macros: tuple[ir.Macro, ...] = ()
    whole: ir.Span | None = None
    try:
        pre = _preprocess(text, path, includes)
        macros = tuple(pre.macros)
        whole = pre.source.end_span()
        diags: list[Diagnostic] = list(pre.diagnostics)
        with eng.lock:
            # the callbacks are shared by every parse; they read this file's context
            ctx = Context(pre.source, diags)
            eng.builder.ctx = ctx
            if cxx or (lang is None and path.endswith(".h") and looks_cxx(pre.tokens)):
                pre.tokens = rewrite_cxx(pre.tokens, ctx.typedefs)
            try:
                unit = UnitParser(pre, diags)
                unit.typedef_types = ctx.typedefs  # the scanner fills what the builder reads
                functions, globals_ = unit.parse_unit(snippet)
            finally:
                eng.builder.ctx = None
    except Exception as exc:  # the tool never crashes on a file: report and read nothing
        diags = [FrontEndError(ir.Span(1, 1, 1, 1), what=f"{type(exc).__name__}: {exc}")]
        functions, globals_ = [], []
    finally:
        if gc_was_enabled:
            gc.enable()
    for dg in diags:
        dg.with_path(path)
    problems = tuple(ir.ParseProblem(dg.span, dg.message) for dg in diags
                     if dg.severity in ("error", "warning"))
    if whole is None:
        whole = SourceMap(text).end_span()
    tu = ir.TranslationUnit(whole, path, tuple(functions), tuple(globals_),
                            macros, problems)
    return tu, diags


def decode(data: bytes) -> tuple[str, Diagnostic | None]:
    """UTF-8 text of source bytes; invalid bytes become U+FFFD and one diagnostic."""
    try:
        return data.decode("utf-8"), None
    except UnicodeDecodeError as exc:
        before = data[:exc.start].decode("utf-8", errors="replace")
        if before.startswith("\ufeff"):
            before = before[1:]
        line = before.count("\n") + 1
        column = len(before) - (before.rfind("\n") + 1) + 1
        diag = InvalidEncoding(ir.Span(line, column, line, column + 1),
                               byte=f"0x{data[exc.start]:02x}")
        return data.decode("utf-8", errors="replace"), diag


def parse_file(path: str, lang: str | None = None) -> tuple[ir.TranslationUnit, list[Diagnostic]]:
    """Read a C or C++ file into IR (OSError propagates; bad bytes are a diagnostic)."""
    data = read_bytes(path)  # regular files under the size cap only: a FIFO or /dev/zero is an OSError
    text, bad = decode(data)
    tu, diags = parse_text(text, path=path, lang=lang)
    if bad is not None:
        diags.insert(0, bad.with_path(path))
    return tu, diags
