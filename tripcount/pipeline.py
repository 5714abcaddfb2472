# The pipeline driver: source text -> IR -> model -> analyses -> results.
#
# Runs the stages in order for each file and each nest. A failure inside one
# nest's analysis is caught and reported as an internal-error diagnostic at the
# nest's location; the other nests and files are still analyzed. A failure of
# the front end or the model on a whole file is a file-level internal error
# (TC902); the other files are still analyzed.
#
# Every nest runs under one tripcount.budget.Budget (Options.time_limit
# seconds, with its isl operation budget and hard stop in force), passed
# explicitly to each analysis (analysis/protocol.py), so that one hard nest
# cannot stop the others; a nest that hits it keeps its completed counts and
# gets a limit diagnostic (TC310). The analyses return their outputs; the
# NestResult is assembled from them here, so a cut analysis is simply left out. A file's nests share FILE_TIME_FACTOR x time_limit;
# nests past it are listed as not analyzed (TC311). The nests of a file run
# on a pool of forked workers when that pays (run_nests), else serially.
# With the result cache (cached.py finds the nests and their keys with the
# front end alone), compute_missing builds the model, takes every nest it can
# from the store, analyzes the others here and stores their results: every
# entry point (analyze, check, serve) gets its results from this one driver.

from __future__ import annotations

import os
import sys
import time
import traceback
from collections.abc import Callable, Iterable
from typing import Any

from tripcount import cachekeys as keys
from tripcount import guard
from tripcount.analysis.protocol import Analysis, Inputs, Output, analyses, assemble
from tripcount.analysis.results import Count, FileResult, LoopResult, NestResult, StatementResult
from tripcount.budget import Budget, LimitReached, NestLimit, is_quota_error
from tripcount.cache import Store
from tripcount.compdb import source_flags
from tripcount.diagnostics.engine import AnalysisLimit, FileBudgetSpent
from tripcount.diagnostics.internal import InternalError, ReadFailure, UnreadableFile
from tripcount.diagnostics.source import BuildFlagsUnreadable
from tripcount.frontend import parse_text
from tripcount.ir import Span
from tripcount.model import Nest, build_nests
from tripcount.options import Options
from tripcount.sources import collect_paths, decode_source, read_bytes  # noqa: F401 - re-exported: the CLI and tests read files through the pipeline


def _where(exc: BaseException) -> str:
    """`file:line` of the innermost frame of an exception."""
    frames = traceback.extract_tb(exc.__traceback__)
    if not frames:
        return "?"
    return f"{os.path.basename(frames[-1].filename)}:{frames[-1].lineno}"


def _complete_counts(result: NestResult, note: str) -> None:
    """Loops and statements the counts analysis did not reach get an explicit 'unknown'."""
    done_loops = {id(lr.loop) for lr in result.loops}
    done_stmts = {id(sr.stmt) for sr in result.statements}
    for loop in result.nest.loops:
        if id(loop) not in done_loops:
            result.loops.append(LoopResult(loop, Count(note=note)))
    for stmt in result.nest.statements:
        if id(stmt) not in done_stmts:
            result.statements.append(StatementResult(stmt, Count(note=note)))
    order_l = {id(lp): k for k, lp in enumerate(result.nest.loops)}
    order_s = {id(st): k for k, st in enumerate(result.nest.statements)}
    result.loops.sort(key=lambda lr: order_l.get(id(lr.loop), len(order_l)))
    result.statements.sort(key=lambda sr: order_s.get(id(sr.stmt), len(order_s)))


LIMIT_NOTE = "count unknown (nest limit reached)"


class _Run:
    """The outputs of one nest's analyses so far, and what was stopped."""

    def __init__(self, nest: Nest) -> None:
        self.nest = nest
        self.outputs: list[Output] = []
        self.last: Analysis | None = None  # the analysis whose output came last
        self.stopped: list[str] = []  # analyses cut short or skipped at the limit
        self.reason = ""
        self.counts_note: str | None = None  # loops and statements without counts get this note

    def take_back_last(self) -> None:
        """Drop the last analysis' output (it may have run on a spent budget); a partial
        analysis (the counts) keeps what it completed."""
        last = self.last
        if last is None:
            return
        if last.partial:
            self.counts_note = LIMIT_NOTE
        elif self.outputs and self.outputs[-1].name == last.name:
            self.outputs.pop()
        self.stopped.append(last.name)
        self.last = None

    def failed(self, name: str, exc: BaseException) -> None:
        """An internal error of one analysis, in the nest's diagnostics where it happened."""
        self.outputs.append(Output(name=f"{name} (failed)", diagnostics=(InternalError(
            self.nest.span, what=f"{name}: {type(exc).__name__}: {guard._short(exc)} at {_where(exc)}"),)))


def analyze_nest(nest: Nest, options: Options) -> NestResult:
    """Run every analysis on one nest under one budget; assemble the NestResult of their outputs.

    An exception becomes an internal-error diagnostic. When the budget is
    spent, the analysis running is cut: completed counts are kept, anything
    else it produced is left out, the later analyses are skipped, and a TC310
    diagnostic says so.
    """
    run = _Run(nest)
    budget = Budget.start(options.time_limit)
    try:
        with budget.enforce():
            _run_analyses(run, options, budget)
    except NestLimit as exc:  # found spent on leaving the budget, or a stop while handling one
        run.reason = run.reason or str(exc)
        if run.last is not None and run.last.name not in run.stopped:
            run.take_back_last()
        elif not run.outputs:
            run.stopped.append("counts")
            run.counts_note = LIMIT_NOTE
    result = assemble(nest, run.outputs)
    result.time_cut = budget.time_cut or budget.tripped == "time"
    if run.counts_note is not None:
        _complete_counts(result, run.counts_note)
    if run.stopped:
        result.diagnostics.append(AnalysisLimit(nest.span, reason=run.reason or "limit reached",
                                                      kept=_kept_text(result, run.stopped)))
    return result


def _run_analyses(run: _Run, options: Options, budget: Budget) -> None:
    for unit in analyses():
        if run.stopped:
            run.stopped.append(unit.name)
            continue
        if run.last is not None and budget.ops_spent():
            # the previous analysis swallowed a spent-budget isl error: take it back
            run.take_back_last()
            run.stopped.append(unit.name)
            run.reason = budget.reason()
            continue
        if budget.remaining() <= 0:
            budget.tripped = budget.tripped or "time"
            run.reason = budget.reason()
            run.stopped.append(unit.name)
            continue
        try:
            out = unit.run(run.nest, options, budget, Inputs(run.nest, tuple(run.outputs)))
        except (NestLimit, LimitReached) as exc:
            budget.stop_alarm()
            budget.tripped = budget.tripped or "time"
            run.reason = str(exc) or budget.reason()
            run.stopped.append(unit.name)
            continue
        except Exception as exc:  # one nest must not take the report down
            if is_quota_error(exc) or budget.ops_spent():
                budget.tripped = "operations"
                run.reason = budget.reason()
                run.stopped.append(unit.name)
                continue
            run.failed(unit.name, exc)
            continue
        run.outputs.append(out)
        run.last = unit
        if out.error is not None:  # a partial analysis (the counts) failed: the others need it
            run.failed(unit.name, out.error)
            run.counts_note = "count unknown (internal error)"
            return
        if out.stopped is not None:
            run.reason = out.stopped
            run.stopped.append(unit.name)
            run.counts_note = LIMIT_NOTE


def _kept_text(result: NestResult, stopped: list[str]) -> str:
    names = ", ".join(stopped)
    if "counts" in stopped:
        done = sum(1 for sr in result.statements if sr.count.formula is not None or sr.count.value is not None)
        return (f"{done} of {len(result.statements)} statement counts were completed and are exact; "
                f"not computed: {names}")
    complete = all(sr.count.formula is not None or sr.count.value is not None for sr in result.statements)
    what = "the counts are complete and exact" if complete else "the counts shown are exact"
    return f"{what}; not computed: {names}"


def _file_failure(path: str, text: str, stage: str, exc: BaseException, snippet: bool) -> FileResult:
    result = FileResult(path=path, source=text if snippet else None)
    result.diagnostics.append(ReadFailure(
        Span.point(1, 1), what=f"{stage}: {type(exc).__name__}: {guard._short(exc)} at {_where(exc)}"))
    return result


def _skipped(nest: Nest, options: Options) -> NestResult:
    """A nest left out because its file's time budget is spent (TC311)."""
    skipped = NestResult(nest=nest, loops=[], statements=[], diagnostics=list(nest.diagnostics))
    _complete_counts(skipped, "not analyzed (file budget spent)")
    skipped.diagnostics.append(FileBudgetSpent(
        nest.span, seconds=guard.FILE_TIME_FACTOR * guard.time_limit_of(options), factor=guard.FILE_TIME_FACTOR))
    return skipped


def analyze_in_file(nest: Nest, options: Options, deadline: float) -> NestResult:
    """One nest of a file whose budget ends at `deadline` (time.monotonic()); failures of the
    set-up are contained like those of the analyses."""
    if time.monotonic() > deadline:
        return _skipped(nest, options)
    try:
        if nest.context is not None and not nest.context.get_space().is_params():
            nest.context = nest.context.params()
        return analyze_nest(nest, options)
    except Exception as exc:  # analyze_nest contains its analyses; this guards the set-up
        failed = NestResult(nest=nest, loops=[], statements=[], diagnostics=list(nest.diagnostics))
        failed.diagnostics.append(InternalError(
            nest.span, what=f"set-up: {type(exc).__name__}: {guard._short(exc)} at {_where(exc)}"))
        return failed


def analyze_nests(nests: Iterable[Nest], options: Options) -> list[NestResult]:
    """Analyze the nests of one file under the file's budget (FILE_TIME_FACTOR x time_limit).

    Nests past the budget are returned not analyzed, with a TC311 diagnostic.
    """
    deadline = guard.file_deadline(options)
    return [analyze_in_file(nest, options, deadline) for nest in nests]


# --------------------------------------------------------------------------
# The worker pool: nests of one file on several processes, with a serial fallback

ENV_JOBS = "TRIPCOUNT_JOBS"
_FORKED: tuple[list[Nest], Options, Callable[[NestResult], Any], float] | None = None  # inherited, not pickled


def jobs() -> int:
    """Worker processes for analyzing nests: $TRIPCOUNT_JOBS, else the cores (at most 4)."""
    try:
        return max(1, int(os.environ.get(ENV_JOBS, "")))
    except ValueError:
        return max(1, min(os.cpu_count() or 1, 4))


def _forked_worker(group: list[int]) -> list[tuple[int, Any]]:
    assert _FORKED is not None
    nests, options, render, deadline = _FORKED
    out: list[tuple[int, Any]] = []
    for k in group:
        try:
            out.append((k, render(analyze_in_file(nests[k], options, deadline))))
        except Exception:  # the parent analyzes it again and reports what happens there
            out.append((k, None))
    return out


def work_groups(nests: list[Any], todo: list[int]) -> list[list[int]]:
    """The nests at `todo` in groups for the workers, the likely slowest first.

    Nests with the same iteration domains (the same loops, over the same or
    other arrays, in any function) go to one worker: the engine's memo answers
    the later ones' counts there, where two workers would each compute them. The order is
    a guess from the shape (non-unit steps give periodic formulas, the slowest
    part of a report; then depth and size), so that no long group starts last.
    """
    groups: dict[tuple[str, ...], list[int]] = {}
    for k in todo:
        groups.setdefault(tuple(str(lp.domain) for lp in nests[k].loops), []).append(k)

    def guess(ks: list[int]) -> tuple[int, int, int]:
        n = nests[ks[0]]
        strided = sum(1 for lp in n.loops if lp.step not in (1, -1))
        return (strided, len(ks) * (1 + len(n.loops)), len(n.statements))

    return sorted(groups.values(), key=guess, reverse=True)


def run_nests(nests: list[Nest], todo: list[int], options: Options,
              render: Callable[[NestResult], Any]) -> dict[int, Any]:
    """`render(result)` of the nests at indices `todo` of one file, under the file's budget.

    Several processes when it pays: workers are forked after the model is
    built, so they inherit the nests (isl objects do not pickle) and every
    import; only what `render` makes (JSON) comes back. Forking is used only
    from a single-threaded process (the command line), never from the
    language server, and never off Linux-like systems; otherwise, or when no
    process can be had, the nests are analyzed here, one after the other.
    """
    global _FORKED
    deadline = guard.file_deadline(options)
    out: dict[int, Any] = {}
    n_jobs = min(jobs(), len(todo))
    import threading

    can_fork = (n_jobs > 1 and hasattr(os, "fork") and threading.active_count() == 1
                and sys.platform.startswith("linux"))
    groups = work_groups(nests, todo) if can_fork else []
    if len(groups) > 1:
        n_jobs = min(n_jobs, len(groups))
        import multiprocessing

        _FORKED = (nests, options, render, deadline)
        try:
            with multiprocessing.get_context("fork").Pool(n_jobs) as pool:
                for done in pool.imap_unordered(_forked_worker, groups):
                    for k, res in done:
                        if res is not None:
                            out[k] = res
        except Exception:  # no processes to be had: do it here
            out.clear()
        finally:
            _FORKED = None
    for k in todo:
        if k not in out:
            out[k] = render(analyze_in_file(nests[k], options, deadline))
    return out


def analyze_text(text: str, path: str, options: Options, snippet: bool = False) -> FileResult:
    """Analyze C source text; `path` is used in diagnostics and the report."""
    includes, problem, lang = source_flags(None if snippet else path, options)
    try:
        unit, diags = parse_text(text, path=path, snippet=snippet, includes=includes, lang=lang)
    except Exception as exc:  # the front end promises not to raise; if it does, this file only
        return _finish(_file_failure(path, text, "front end", exc, snippet), path)
    result = FileResult(path=path, diagnostics=list(diags), source=text if snippet else None)
    if problem is not None:
        result.diagnostics.insert(0, BuildFlagsUnreadable(Span.point(1, 1), reason=problem))
    try:
        nests, model_diags = build_nests(unit, assume=options.assume, path=path)
    except Exception as exc:  # build_nests contains failures per nest; this is the last net
        result.diagnostics.append(ReadFailure(
            Span.point(1, 1), what=f"model: {type(exc).__name__}: {guard._short(exc)} at {_where(exc)}"))
        return _finish(result, path)
    result.diagnostics.extend(model_diags)
    result.nests.extend(analyze_nests(nests, options))
    return _finish(result, path)


def _finish(result: FileResult, path: str) -> FileResult:
    for d in result.all_diagnostics():
        d.path = path
    return result


def analyze_file(path: str, options: Options, data: bytes | None = None) -> FileResult:
    """Analyze one file (its bytes `data` when the caller has read them already);
    an unreadable file gives a file-level diagnostic."""
    try:
        data = read_bytes(path) if data is None else data
    except (OSError, ValueError) as exc:
        r = FileResult(path=path)
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        r.diagnostics.append(UnreadableFile(None, path=path, reason=reason))
        return r
    text, bad = decode_source(data)
    result = analyze_text(text, path, options)
    if bad is not None:
        result.diagnostics.insert(0, bad.with_path(path))
    return result


# --------------------------------------------------------------------------
# Results as JSON payloads, and the nests the result cache lacks

_Payload = tuple[dict[str, Any], dict[str, Any], list[dict[str, Any]]]  # nest JSON, summary JSON, diagnostics


def nest_payload(nr: NestResult, options: Options) -> tuple[dict[str, Any], dict[str, Any]]:
    """A nest result's report JSON and typed summary JSON (formulas printed alike in both)."""
    from tripcount.engine.readable import plain_forms
    from tripcount.report.jsonout import nest_json

    if options.gate:  # the gate prints formulas without the search for their most readable form
        with plain_forms():
            return nest_json(nr), nr.summary().to_json()
    return nest_json(nr), nr.summary().to_json()


def file_payload(path: str, text: str, options: Options) -> dict[str, Any]:
    """The file JSON (jsonout.file_json form) with the nests' summaries, computed without the cache."""
    fr = analyze_text(text, path, options)
    payloads = [nest_payload(nr, options) for nr in fr.nests]
    return {"path": fr.path, "nests": [p[0] for p in payloads], "summaries": [p[1] for p in payloads],
            "diagnostics": [d.to_dict() for d in fr.all_diagnostics()]}


class _Render:
    """What the driver's workers send back for one nest: its payload (picklable JSON, no isl objects)."""

    def __init__(self, options: Options) -> None:
        self.options = options

    def __call__(self, nr: Any) -> tuple[_Payload, bool]:
        """The payload, and whether the result was cut by time (not to be stored)."""
        return (*nest_payload(nr, self.options), [d.to_dict() for d in nr.diagnostics]), nr.time_cut


def compute_missing(layout: keys.Layout, path: str, options: Options,
                    store: Store) -> tuple[list, list, list, bool]:
    """The file's nest JSON, summaries and diagnostics, with the nests whose entries are
    missing analyzed here (run_nests) and their new entries written.

    The last element says whether every part of the file could be stored
    (results cut by a time limit are not).
    """
    toks = layout.tokens
    try:
        nests, model_diags = build_nests(layout.unit, assume=options.assume, path=path)
    except Exception as exc:  # build_nests contains failures per nest; this is the last net, as in analyze_text
        failure = ReadFailure(Span.point(1, 1), path=path, what=f"model: {type(exc).__name__}: "
                                    f"{guard._short(exc)} at {_where(exc)}")
        return [], [], [*layout.parse_diagnostics, failure.to_dict()], False
    by_pos = {(s.line, s.column): s for s in layout.sites}
    cacheable = True
    nest_out: list[dict[str, Any]] = []
    summary_out: list[dict[str, Any]] = []
    diags: list[dict[str, Any]] = list(layout.parse_diagnostics)
    per_site: set[str] = set()
    found: list[tuple[keys.Site | None, dict[str, Any] | None, dict[str, Any] | None, list[dict[str, Any]]] | None] = []
    todo: list[int] = []
    for k, nest in enumerate(nests):
        site = by_pos.get((nest.span.line, nest.span.column))
        cached = store.get("nest", site.key) if site is not None else None
        remap = keys.entry_remap(cached, toks, site.anchors, layout.outside) if keys.usable_nest_entry(cached) else None
        if remap is None:
            found.append(None)
            todo.append(k)
            continue
        nj = sj = None
        if cached.get("nest") is not None:
            nj = keys.slices_in(keys.remap_json(cached["nest"], remap), toks)
            sj = keys.slices_in(keys.remap_json(cached["summary"], remap), toks)
        found.append((site, nj, sj, keys.remap_diags(cached.get("diagnostics", []), remap)))
    for k, ((nj, sj, nd), time_cut) in run_nests(nests, todo, options, _Render(options)).items():
        site = by_pos.get((nests[k].span.line, nests[k].span.column))
        found[k] = (site, nj, sj, nd)
        if site is None:
            cacheable = False  # a nest the front end did not show us: no key to store it under
        elif not time_cut and not any(keys.depends_on_time(d) for d in nd):
            store.put("nest", site.key, {
                "nest": keys.slices_out(nj, toks), "summary": keys.slices_out(sj, toks), "diagnostics": nd,
                **keys.entry_anchors(toks, site.anchors, layout.outside, site.lo, site.stop, [nj, sj, nd])})
        else:
            cacheable = False
    for entry in found:
        assert entry is not None
        site, nj, sj, nd = entry
        if nj is not None and sj is not None:
            nest_out.append(nj)
            summary_out.append(sj)
        diags.extend(nd)
        if site is not None:
            per_site.add(site.key)
    # Loops the model made no nest of still get an entry, so that the warm path sees no miss.
    for s in layout.sites:
        if s.key not in per_site and store.get("nest", s.key) is None:
            store.put("nest", s.key, {"nest": None, "diagnostics": [], "anchors": [], "wide": False})
    # The model's own diagnostics: inside a nest, a function, or outside all functions.
    md = [d.to_dict() for d in model_diags]
    fn_diags: dict[int, list[dict[str, Any]]] = {k: [] for k in range(len(layout.functions))}
    out_diags: list[dict[str, Any]] = []
    for d in md:
        a, _b = keys.span_of(d, toks)
        owner = None
        for k, (_name, fa, fb, _key) in enumerate(layout.functions):
            if fa <= a < fb:
                owner = k
                break
        if owner is None:
            out_diags.append(d)
        else:
            fn_diags[owner].append(d)
    diags.extend(md)
    for k, (_name, fa, fb, key) in enumerate(layout.functions):
        i, j = toks.range(fa, fb)
        store.put("fn", key, {"diagnostics": fn_diags[k],
                              **keys.entry_anchors(toks, list(range(i, j)), layout.outside, fa, fb, fn_diags[k])})
    store.put("out", layout.outside_key, {"diagnostics": out_diags,
                                          "anchors": keys.anchor_positions(toks, layout.outside)})
    return nest_out, summary_out, diags, cacheable

