# The language server (`tripcount serve`, LSP over stdio, pygls + lsprotocol).
#
# Diagnostics on open, on change (debounced) and on save: the analysis'
# own diagnostics plus the budget findings of `tripcount check` (no baseline
# in the editor); hover on a loop header or a statement shows its count
# formula, its value at the configured sizes, the working set and the
# thread balance; an inlay hint after each loop header gives its trip count.
#
# Analyses go through the result cache and run in one child process
# (lspworker: stopped when a newer version supersedes it, at exit, and by the
# per-nest hard stop, which works there), so the event loop keeps answering
# (hover reads the last finished analysis). Positions: ours are 1-based with
# an exclusive end, in code points; LSP's are 0-based, in the code units of
# the negotiated position encoding (UTF-16 unless the client offers more).
#
# Everything but `make_server`/`serve` is plain Python on JSON data, so that
# it can be tested without a client; the server is tested with pytest-lsp.

from __future__ import annotations

import asyncio
import logging
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any

from tripcount import __version__
from tripcount.analysis.summary import (
    EXACT,
    UPPER,
    LoopSummary,
    NestSummary,
    Quantity,
    StatementSummary,
    WorkingSetSummary,
)
from tripcount.diagnostics.gate import BudgetsUnusable
from tripcount.diagnostics.internal import DocumentFailed
from tripcount.diagnostics.source import LiveAnalysisSkipped
from tripcount.lspworker import Worker

log = logging.getLogger("tripcount.lsp")

DEBOUNCE_S = 0.3
MAX_LIVE_CHARS = 2 * 1024 * 1024  # larger documents are not analyzed while typing
MAX_DOCUMENTS = 256  # analyses kept for hover; past it the least recently analysed are dropped
SEVERITY = {"error": 1, "warning": 2, "note": 3}  # lsprotocol DiagnosticSeverity values


# --------------------------------------------------------------------------
# Positions


def units(text: str, encoding: str) -> int:
    """Length of `text` in the code units of a position encoding ('utf-8', 'utf-16', 'utf-32')."""
    if encoding == "utf-32":
        return len(text)
    if encoding == "utf-8":
        return len(text.encode("utf-8", "surrogatepass"))
    return len(text) + sum(1 for ch in text if ord(ch) > 0xFFFF)


def to_lsp(line: int, column: int, lines: list[str], encoding: str = "utf-16") -> tuple[int, int]:
    """Our 1-based (line, column in code points) -> LSP 0-based (line, character in code units)."""
    ln = max(line - 1, 0)
    if ln >= len(lines):
        return (len(lines), 0) if lines else (0, 0)
    text = lines[ln]
    return ln, units(text[: max(column - 1, 0)], encoding)


def from_lsp(line: int, character: int, lines: list[str], encoding: str = "utf-16") -> tuple[int, int]:
    """LSP 0-based (line, character) -> our 1-based (line, column)."""
    if line < 0:
        return 1, 1
    if line >= len(lines):
        return line + 1, 1
    text = lines[line]
    if encoding == "utf-32":
        return line + 1, min(character, len(text)) + 1
    n = 0
    for k, ch in enumerate(text):
        if n >= character:
            return line + 1, k + 1
        n += units(ch, encoding)
    return line + 1, len(text) + 1


# --------------------------------------------------------------------------
# Analysis of one document (no pygls)


@dataclass
class Analysis:
    """The result of analyzing one version of a document."""

    text: str
    result: dict[str, Any]  # file JSON (its diagnostics are published)
    nests: list[NestSummary] = field(default_factory=list)  # what hover and inlay hints read
    findings: list[dict[str, Any]] = field(default_factory=list)  # TC6xx budget findings
    at: dict[str, int] = field(default_factory=dict)
    levels: dict[str, int] = field(default_factory=dict)
    lines: list[str] = field(default_factory=list)
    headers: dict[tuple[int, int], tuple[int, int, int, int]] = field(default_factory=dict)

    def header(self, loop: LoopSummary) -> tuple[int, int, int, int]:
        """(line, column, end_line, end_column) of a loop's `for (...)`."""
        key = (loop.span.line, loop.span.column)
        if key not in self.headers:
            from tripcount.gate.suppress import header_span

            s = header_span(self.lines, *key)
            self.headers[key] = (s.line, s.column, s.end_line, s.end_column)
        return self.headers[key]


def analyze_document(path: str | None, text: str, use_cache: bool = True) -> Analysis:
    """Analyze a document's text with the configuration found from its path.

    Its findings are those `tripcount check` gives the file without a
    baseline (the same gate.findings_for, budgets and suppression comments).
    """
    from tripcount.cached import analyze_file_cached
    from tripcount.config import build_options, load_config
    from tripcount.gate.budgets import budgets_from, cache_levels, effective_table
    from tripcount.gate.findings import findings_for
    from tripcount.gate.readings import summaries_of

    where = path or os.getcwd()
    config = load_config(where)
    table = effective_table(config, where) if path else dict(config.table)
    budgets = budgets_from(table, config.path)
    options = build_options(table, base=os.path.dirname(config.path) if config.path else None)
    result = analyze_file_cached(path or "<untitled>", text, options, use_cache=use_cache)
    levels = cache_levels(options)
    a = Analysis(text=text, result=result, nests=summaries_of(result), at=dict(options.at), levels=levels,
                 lines=text.split("\n"))
    try:
        a.findings = [d.to_dict() for d in findings_for(a.nests, text, budgets, options, levels)]
    except ValueError as exc:  # e.g. a budget naming a cache level the machine lacks
        a.findings = [BudgetsUnusable(None, reason=str(exc)).to_dict()]
    return a


def lsp_diagnostics(a: Analysis, encoding: str = "utf-16") -> list[dict[str, Any]]:
    """LSP Diagnostic objects (as dicts) for an analysis."""
    out = []
    for d in list(a.result.get("diagnostics", [])) + a.findings:
        sl, sc = to_lsp(d.get("line", 1), d.get("column", 1), a.lines, encoding)
        el, ec = to_lsp(d.get("end_line", d.get("line", 1)), d.get("end_column", d.get("column", 1)),
                        a.lines, encoding)
        if (el, ec) < (sl, sc):
            el, ec = sl, sc
        out.append({"range": {"start": {"line": sl, "character": sc}, "end": {"line": el, "character": ec}},
                    "severity": SEVERITY.get(d.get("severity", "warning"), 2), "code": d.get("code"),
                    "source": "tripcount", "message": d.get("message", "")})
    return out


# --------------------------------------------------------------------------
# Hover


def _fmt_value(v: Any) -> str:
    if isinstance(v, int) and not isinstance(v, bool):
        return f"{v:,}"
    return str(v)


def _count_md(c: Quantity | None, unit: str = "") -> list[str]:
    """Markdown lines of a count: the formula (generic case first) and its value."""
    if c is None:
        return ["unknown"]
    out = []
    if c.pieces is None:
        out.append(c.note or "no formula")
    elif not c.pieces:
        out.append("`0`")
    else:
        first = c.pieces[0]
        when = f" when `{first.when}`" if first.when not in ("", "true") else ""
        out.append(f"`{first.expr}`{unit}{when}")
        for p in c.pieces[1:4]:
            out.append(f"- `{p.expr}` when `{p.when}`")
        if len(c.pieces) > 4:
            out.append(f"- ... {len(c.pieces) - 4} more case(s)")
    if c.value is not None:
        out[0] += f" = **{_fmt_value(c.value)}**{unit}"
    return out


def _ws_md(ws: WorkingSetSummary, levels: dict[str, int]) -> list[str]:
    from tripcount.analysis.caches import fmt_bytes
    from tripcount.gate.budgets import level_of

    scope = ws.scope or "this loop"
    out = [f"**working set** ({scope}): " + _count_md(ws.bytes, " bytes")[0]]
    size = ws.occupancy
    if size is None:
        return out
    if ws.estimate == EXACT:
        out.append(f"occupies {fmt_bytes(size)} in whole cache lines: fits {level_of(size, levels)} "
                   "(model estimate)")
    elif ws.estimate == UPPER:
        out.append(f"occupies at most {fmt_bytes(size)} in whole cache lines (an upper bound: {ws.reason}): "
                   f"fits {level_of(size, levels)} at least (model estimate)")
    else:
        out.append(f"occupies at least {fmt_bytes(size)} in whole cache lines (a lower bound: {ws.reason}); "
                   "may not fit " + level_of(size, levels) + " (model estimate)")
    return out


def _parallel_md(lp: LoopSummary) -> list[str]:
    bal = lp.balance
    assert bal is not None
    bits = []
    if bal.directive:
        bits.append(f"`omp {bal.directive}`")
    if bal.schedule:
        bits.append(f"schedule({bal.schedule + (f', {bal.chunk}' if bal.chunk not in (None, '') else '')})")
    if bal.threads:
        bits.append(f"{bal.threads} threads")
    line = "**balance**: " + ", ".join(bits) if bits else "**balance**"
    if bal.imbalance is not None:
        line += f"; imbalance {float(bal.imbalance):.3g} (busiest thread / mean)"
        if bal.efficiency is not None:
            line += f", efficiency {float(bal.efficiency):.0%}"
    out = [line]
    if bal.recommendation:
        out.append(bal.recommendation)
    return out


def _at_md(at: dict[str, int]) -> str:
    return ("values at " + ", ".join(f"{k}={v}" for k, v in at.items())) if at else \
        "give sizes (`at` in [tool.tripcount]) for values"


def hover_at(a: Analysis, line: int, column: int) -> str | None:
    """Markdown hover for our 1-based position, or None when nothing is there."""
    best_stmt: tuple[tuple[int, int], NestSummary, StatementSummary] | None = None
    for n in a.nests:
        for s in n.statements:
            if s.span.contains(line, column):
                size = (s.span.end_line - s.span.line, s.span.end_column - s.span.column)
                if best_stmt is None or size < best_stmt[0]:
                    best_stmt = (size, n, s)
    if best_stmt is not None:
        _, n, s = best_stmt
        text = " ".join(s.text.split())
        if len(text) > 80:
            text = text[:77] + "..."
        md = [f"**{s.id}** `{text}` in `{n.function or '?'}()`", "",
              "**runs** " + "\n".join(_count_md(s.count))]
        fl = s.flops
        if fl is not None and fl.per_execution:
            md += ["", f"**flops** {fl.per_execution} per run; " + _count_md(fl.total)[0] + " in all"]
        md += ["", f"_{_at_md(a.at)}_"]
        return "\n".join(md)
    best_loop: tuple[tuple[int, int], NestSummary, LoopSummary] | None = None
    for n in a.nests:
        for lp in n.loops:
            hl, hc, hel, hec = a.header(lp)
            on_header = (hl, hc) <= (line, column) < (hel, hec)
            on_first_line = line == lp.span.line and column >= lp.span.column
            if on_header or on_first_line:
                rank = (0 if on_header else 1, -lp.depth)
                if best_loop is None or rank < best_loop[0]:
                    best_loop = (rank, n, lp)
    if best_loop is None:
        return None
    _, n, lp = best_loop
    md = [f"**loop `{lp.var}`** (line {lp.span.line}, depth {lp.depth}) in `{n.function or '?'}()`", ""]
    md.append("**trips** " + "\n".join(_count_md(lp.trips)))
    if lp.depth > 0 and lp.per_entry is not None:
        md += ["", "**per entry** " + "\n".join(_count_md(lp.per_entry))]
    if lp.working_set is not None:
        md += [""] + _ws_md(lp.working_set, a.levels)
    if lp.balance is not None:
        md += [""] + _parallel_md(lp)
    if lp.parent is None:
        work = n.work()
        if work.degree is not None:
            md += ["", f"**work** of the nest: degree {work.degree} ({work.who} ~ `{' + '.join(work.leading)}`)"]
        if n.flops is not None:
            md += ["**flops** " + _count_md(n.flops.total)[0]]
    md += ["", f"_{_at_md(a.at)}_"]
    return "\n".join(md)


# --------------------------------------------------------------------------
# Inlay hints


def _short(c: Quantity | None) -> str | None:
    if c is None or not c.pieces:
        return None
    expr = c.pieces[0].expr
    return expr if len(expr) <= 40 else (c.leading and f"~{c.leading}") or expr[:37] + "..."


def inlay_hints(a: Analysis, first_line: int = 1, last_line: int | None = None) -> list[dict[str, Any]]:
    """(line, column, label) hints after each loop header in [first_line, last_line] (1-based)."""
    out = []
    for n in a.nests:
        for lp in n.loops:
            if lp.span.line < first_line or (last_line is not None and lp.span.line > last_line):
                continue
            label = _short(lp.per_entry if lp.depth > 0 else lp.trips)
            if label is None:
                continue
            text = f"{label} trips"
            total = lp.trips.value if lp.trips is not None else None
            if lp.depth > 0:
                text += " per entry"
                if total is not None:
                    text += f" ({_fmt_value(total)} in all)"
            elif total is not None:
                text += f" = {_fmt_value(total)}"
            _l, _c, el, ec = a.header(lp)
            out.append({"line": el, "column": ec, "label": text})
    return out


# --------------------------------------------------------------------------
# The server


def _path_of(uri: str) -> str | None:
    from pygls.uris import to_fs_path

    if not uri.startswith("file:"):
        return None
    try:
        return to_fs_path(uri)
    except Exception:  # a malformed URI: analyze without a path
        return None


def make_server() -> Any:
    """The pygls LanguageServer with tripcount's features registered."""
    from types import SimpleNamespace

    from lsprotocol import types
    from pygls.exceptions import JsonRpcException
    from pygls.lsp.server import LanguageServer
    from pygls.protocol import LanguageServerProtocol

    class Protocol(LanguageServerProtocol):
        """Answers requests whose parameters cannot be read, and ignores non-messages.

        pygls drops a request it cannot deserialize without answering, which
        leaves the client waiting; JSON-RPC wants an error response.
        """

        def structure_message(self, data: Any) -> Any:
            try:
                return super().structure_message(data)
            except JsonRpcException as exc:
                if isinstance(data, dict) and "id" in data and "method" in data:
                    self._send_response(data["id"], error=types.ResponseError(code=exc.code, message=exc.message))
                    return SimpleNamespace(jsonrpc="answered")  # handle_message skips it
                raise

        def handle_message(self, message: Any) -> Any:
            if not hasattr(message, "jsonrpc"):  # JSON that is no JSON-RPC message (a list, a number)
                log.warning("ignored a message that is not JSON-RPC")
                return None
            return super().handle_message(message)

    class Server(LanguageServer):
        def __init__(self) -> None:
            super().__init__("tripcount", __version__, text_document_sync_kind=types.TextDocumentSyncKind.Incremental,
                             protocol_cls=Protocol)
            self.analyses: dict[str, Analysis] = {}
            self.timers: dict[str, asyncio.Task[Any]] = {}
            self.active: dict[str, asyncio.Task[Any]] = {}  # the latest scheduled analysis of each document
            # one thread waits on the analysis child (lspworker) while the loop keeps answering
            self.pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="tripcount-analysis")
            self.worker = Worker(_safe_analyze)
            self.running: str | None = None  # the document being analysed

        def encoding(self) -> str:
            try:
                enc = self.workspace.position_encoding
            except Exception:  # before initialize
                return "utf-16"
            return str(getattr(enc, "value", enc) or "utf-16")

        def text_of(self, uri: str) -> tuple[str, int | None] | None:
            try:
                doc = self.workspace.text_documents.get(uri)
            except Exception:  # before initialize
                return None
            if doc is None:
                return None
            return doc.source, doc.version

        def publish(self, uri: str, diags: list[dict[str, Any]], version: int | None) -> None:
            items = [types.Diagnostic(
                range=types.Range(start=types.Position(**d["range"]["start"]), end=types.Position(**d["range"]["end"])),
                message=d["message"], severity=types.DiagnosticSeverity(d["severity"]), code=d["code"],
                source=d["source"]) for d in diags]
            self.text_document_publish_diagnostics(
                types.PublishDiagnosticsParams(uri=uri, diagnostics=items, version=version))

        def schedule(self, uri: str, delay: float, force: bool = False) -> None:
            """Analyze `uri` after `delay` seconds unless another change comes first (the debounce)."""
            old = self.timers.pop(uri, None)
            if old is not None:
                old.cancel()  # only waiting timers are in `timers`
            if self.running == uri:
                self.worker.cancel()  # the running analysis of an older version is superseded
            task = asyncio.ensure_future(self._later(uri, delay, force))
            self.timers[uri] = self.active[uri] = task

        async def _later(self, uri: str, delay: float, force: bool) -> None:
            if delay > 0:
                await asyncio.sleep(delay)
            if self.timers.get(uri) is asyncio.current_task():
                del self.timers[uri]
            await self.run_analysis(uri, force)

        async def run_analysis(self, uri: str, force: bool = False) -> None:
            snap = self.text_of(uri)
            if snap is None:
                return
            text, version = snap
            if len(text) > MAX_LIVE_CHARS:
                skipped = LiveAnalysisSkipped(None, kib=len(text) // 1024)
                self.publish(uri, [{"range": {"start": {"line": 0, "character": 0}, "end": {"line": 0, "character": 0}},
                                    "severity": SEVERITY[skipped.severity], "code": skipped.code,
                                    "source": "tripcount", "message": skipped.message}], version)
                return
            prev = self.analyses.get(uri)
            if prev is not None and prev.text == text and not force:
                self.publish(uri, lsp_diagnostics(prev, self.encoding()), version)
                return
            loop = asyncio.get_running_loop()
            a = await loop.run_in_executor(self.pool, self._analyze, uri, text)
            now = self.text_of(uri)
            if a is None or now is None:  # superseded, stopped, or closed meanwhile
                return
            self.analyses.pop(uri, None)
            self.analyses[uri] = a  # kept for hover even when the text moved on
            while len(self.analyses) > MAX_DOCUMENTS:  # the least recently analysed go first
                self.analyses.pop(next(iter(self.analyses)))
            if now[0] == text:  # still the current text: its diagnostics hold
                self.publish(uri, lsp_diagnostics(a, self.encoding()), version)
                try:
                    caps = self.client_capabilities.workspace
                    if caps and caps.inlay_hint and caps.inlay_hint.refresh_support:
                        self.workspace_inlay_hint_refresh(None)
                except Exception:  # refresh is a courtesy
                    pass

        def _analyze(self, uri: str, text: str) -> Analysis | None:
            self.running = uri
            try:
                return self.worker.run(_path_of(uri), text)
            finally:
                self.running = None

        def shutdown(self) -> None:
            """Stop the analysis child at once (exit must not wait for an analysis), then pygls'."""
            self.worker.cancel()
            self.pool.shutdown(wait=False, cancel_futures=True)
            super().shutdown()
            self.worker.stop()

        def start_io(self, stdin: Any = None, stdout: Any = None) -> None:
            """Serve LSP frames from `stdin` (lspframes: malformed frames are skipped
            with a warning on stderr, never a crash or a silent stall) until `exit`
            or end of input."""
            import sys
            import threading

            from pygls.io_ import StdoutWriter

            self._stop_event = threading.Event()
            self.protocol.set_writer(StdoutWriter(stdout or sys.stdout.buffer))
            try:
                asyncio.run(self._serve_frames(stdin or sys.stdin.buffer))
            except BrokenPipeError:
                log.error("the client closed the connection")
            except (KeyboardInterrupt, SystemExit):
                pass
            finally:
                self.shutdown()

        async def _serve_frames(self, stdin: Any) -> None:
            import json
            import threading

            from tripcount.lspframes import frames

            loop = asyncio.get_running_loop()
            inbox: asyncio.Queue[bytes | None] = asyncio.Queue()

            try:  # a private reader: interpreter shutdown must not wait on the lock of sys.stdin
                stream = open(os.dup(stdin.fileno()), "rb")  # noqa: SIM115 - lives as long as the process
            except (AttributeError, OSError, ValueError):
                stream = stdin

            def pump() -> None:  # a blocking reader on its own thread; the loop stays free
                try:
                    for body in frames(stream, log.warning):
                        loop.call_soon_threadsafe(inbox.put_nowait, body)
                except Exception:  # noqa: BLE001 - a read error ends the input, never the process silently
                    log.exception("reading the client's messages failed")
                finally:
                    loop.call_soon_threadsafe(inbox.put_nowait, None)

            threading.Thread(target=pump, name="tripcount-lsp-input", daemon=True).start()
            while not self._stop_event.is_set():
                body = await inbox.get()
                if body is None:
                    log.warning("end of input: the server stops")
                    break
                try:
                    self.protocol.handle_message(json.loads(body, object_hook=self.protocol.structure_message))
                except (ValueError, RecursionError) as exc:
                    log.warning("message skipped: %s", exc)
                    self.report_server_error(exc, JsonRpcException)
                except Exception as exc:  # noqa: BLE001 - one bad message must not stop the server
                    log.exception("unable to handle a message")
                    self.report_server_error(exc, JsonRpcException)

        async def current(self, uri: str) -> Analysis | None:
            """The latest analysis; before the first one, waits (boundedly) for it."""
            if uri not in self.analyses:
                pending = self.active.get(uri)
                if pending is not None and not pending.done():
                    try:
                        await asyncio.wait_for(asyncio.shield(pending), timeout=30)
                    except Exception:  # still running or failed: answer with what there is
                        pass
            return self.analyses.get(uri)

    server = Server()

    @server.feature(types.TEXT_DOCUMENT_DID_OPEN)
    def did_open(ls: Server, params: types.DidOpenTextDocumentParams) -> None:
        ls.schedule(params.text_document.uri, 0)

    @server.feature(types.TEXT_DOCUMENT_DID_CHANGE)
    def did_change(ls: Server, params: types.DidChangeTextDocumentParams) -> None:
        ls.schedule(params.text_document.uri, DEBOUNCE_S)

    @server.feature(types.TEXT_DOCUMENT_DID_SAVE)
    def did_save(ls: Server, params: types.DidSaveTextDocumentParams) -> None:
        ls.schedule(params.text_document.uri, 0, force=True)  # the configuration may have changed too

    @server.feature(types.TEXT_DOCUMENT_DID_CLOSE)
    def did_close(ls: Server, params: types.DidCloseTextDocumentParams) -> None:
        uri = params.text_document.uri
        t = ls.timers.pop(uri, None)
        if t is not None:
            t.cancel()
        ls.active.pop(uri, None)
        ls.analyses.pop(uri, None)
        ls.publish(uri, [], None)

    @server.feature(types.TEXT_DOCUMENT_HOVER)
    async def hover(ls: Server, params: types.HoverParams) -> types.Hover | None:
        uri = params.text_document.uri
        a = await ls.current(uri)
        if a is None:
            return None
        line, col = from_lsp(params.position.line, params.position.character, a.lines, ls.encoding())
        md = hover_at(a, line, col)
        if md is None:
            return None
        return types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown, value=md))

    @server.feature(types.TEXT_DOCUMENT_INLAY_HINT, types.InlayHintOptions(resolve_provider=False))
    async def inlay_hint(ls: Server, params: types.InlayHintParams) -> list[types.InlayHint]:
        a = await ls.current(params.text_document.uri)
        if a is None:
            return []
        enc = ls.encoding()
        out = []
        for h in inlay_hints(a, params.range.start.line + 1, params.range.end.line + 1):
            ln, ch = to_lsp(h["line"], h["column"], a.lines, enc)
            out.append(types.InlayHint(position=types.Position(line=ln, character=ch), label=h["label"],
                                       padding_left=True))
        return out

    return server


def _safe_analyze(path: str | None, text: str) -> Analysis:
    """analyze_document that never raises: a failure becomes one diagnostic."""
    try:
        return analyze_document(path, text)
    except Exception as exc:  # configuration errors, internal errors: keep serving
        log.exception("analysis failed")
        lines = text.split("\n")
        diag = DocumentFailed(None, what=f"{type(exc).__name__}: {exc}").to_dict()
        return Analysis(text=text, result={"path": path or "<untitled>", "nests": [], "diagnostics": [diag]},
                        lines=lines)


def serve() -> int:
    """Run the language server on stdin/stdout until the client exits."""
    logging.basicConfig(level=os.environ.get("TRIPCOUNT_LSP_LOG", "WARNING").upper(),
                        format="tripcount-lsp %(levelname)s %(message)s")
    try:
        server = make_server()
    except ImportError as exc:  # pygls/lsprotocol are the optional `lsp` extra
        import sys

        sys.stderr.write(f"tripcount: error: the language server needs pygls and lsprotocol ({exc}); "
                         "install them with: pip install 'tripcount[lsp]'\n")
        return 2
    server.start_io()
    return 0
