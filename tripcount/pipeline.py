# The pipeline driver: source text -> IR -> model -> analyses -> results.
#
# Runs the stages in order for each file and each nest. A failure inside one
# nest's analysis is caught and reported as an internal-error diagnostic at the
# nest's location; the other nests and files are still analyzed.

from __future__ import annotations

import os
import traceback
from collections.abc import Callable, Iterable

from tripcount.analysis import counts
from tripcount.analysis.results import FileResult, NestResult
from tripcount.diagnostics import InternalError, InvalidEncoding, UnreadableFile
from tripcount.frontend import parse_text
from tripcount.ir import Span
from tripcount.model import Nest, build_nests
from tripcount.options import Options

SOURCE_SUFFIXES = (".c", ".h")

Analysis = Callable[[NestResult, Options], None]


def analyses() -> list[tuple[str, Analysis]]:
    """The analyses run on every nest, in order (counts first: others read them)."""
    out: list[tuple[str, Analysis]] = [("counts", counts.analyze)]
    try:
        from tripcount.analysis import footprint

        out.append(("footprint", footprint.analyze))
    except ImportError:
        pass
    try:
        from tripcount.analysis import balance

        out.append(("balance", balance.analyze))
    except ImportError:
        pass
    return out


def collect_paths(paths: Iterable[str]) -> list[str]:
    """Expand directories into the C sources under them (sorted); keep files as given."""
    out: list[str] = []
    for p in paths:
        if os.path.isdir(p):
            found = []
            for root, dirs, files in os.walk(p):
                dirs[:] = sorted(d for d in dirs if not d.startswith("."))
                for f in files:
                    if f.endswith(SOURCE_SUFFIXES):
                        found.append(os.path.join(root, f))
            out.extend(sorted(found))
        else:
            out.append(p)
    return out


def analyze_nest(nest: Nest, options: Options) -> NestResult:
    """Run every analysis on one nest; an exception becomes an internal-error diagnostic."""
    result = NestResult(nest=nest, loops=[], statements=[], diagnostics=list(nest.diagnostics))
    for name, run in analyses():
        try:
            run(result, options)
        except Exception as exc:  # one nest must not take the report down
            where = traceback.extract_tb(exc.__traceback__)[-1]
            result.diagnostics.append(
                InternalError(nest.span, what=f"{name}: {type(exc).__name__}: {exc} at "
                              f"{os.path.basename(where.filename)}:{where.lineno}"))
            if name == "counts":
                break
    return result


def analyze_text(text: str, path: str, options: Options, snippet: bool = False) -> FileResult:
    """Analyze C source text; `path` is used in diagnostics and the report."""
    unit, diags = parse_text(text, path=path, snippet=snippet)
    result = FileResult(path=path, diagnostics=list(diags), source=text if snippet else None)
    nests, model_diags = build_nests(unit, assume=options.assume, path=path)
    result.diagnostics.extend(model_diags)
    for nest in nests:
        if nest.context is not None and not nest.context.get_space().is_params():
            nest.context = nest.context.params()
        result.nests.append(analyze_nest(nest, options))
    for d in result.all_diagnostics():
        d.path = path
    return result


def decode_source(data: bytes) -> tuple[str, InvalidEncoding | None]:
    """Decode C source bytes as UTF-8; invalid bytes are replaced and reported once."""
    try:
        return data.decode("utf-8"), None
    except UnicodeDecodeError as exc:
        before = data[: exc.start].decode("utf-8", errors="replace")
        line = before.count("\n") + 1
        column = len(before) - (before.rfind("\n") + 1) + 1
        diag = InvalidEncoding(Span.point(line, column), byte=f"0x{data[exc.start]:02x}")
        return data.decode("utf-8", errors="replace"), diag


def analyze_file(path: str, options: Options) -> FileResult:
    """Analyze one file; an unreadable file gives a file-level diagnostic."""
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError as exc:
        r = FileResult(path=path)
        r.diagnostics.append(UnreadableFile(None, path=path, reason=exc.strerror or str(exc)))
        return r
    text, bad = decode_source(data)
    result = analyze_text(text, path, options)
    if bad is not None:
        result.diagnostics.insert(0, bad.with_path(path))
    return result
