# The pipeline driver: source text -> IR -> model -> analyses -> results.
#
# Runs the stages in order for each file and each nest. A failure inside one
# nest's analysis is caught and reported as an internal-error diagnostic at the
# nest's location; the other nests and files are still analyzed. A failure of
# the front end or the model on a whole file is a file-level internal error
# (TC902); the other files are still analyzed.
#
# Every nest runs under tripcount.guard.nest_budget: a per-nest time limit and
# isl operation budget (Options.time_limit), so that one hard nest cannot stop
# the others; a nest that hits them keeps its completed counts and gets a
# limit diagnostic (TC310). A file's nests share FILE_TIME_FACTOR x time_limit;
# nests past it are listed as not analyzed (TC311). The nests of a file run
# on a pool of forked workers when that pays (run_nests), else serially; the
# result cache (cache.py) asks run_nests for the nests it lacks, so every
# entry point gets its results from this one driver.

from __future__ import annotations

import dataclasses
import os
import sys
import time
import traceback
from collections.abc import Callable, Iterable
from typing import Any

from tripcount import guard
from tripcount.analysis import counts
from tripcount.analysis.results import Count, FileResult, LoopResult, NestResult, StatementResult
from tripcount.compdb import source_flags
from tripcount.diagnostics.engine import AnalysisLimit, FileBudgetSpent
from tripcount.diagnostics.internal import InternalError, ReadFailure, UnreadableFile
from tripcount.diagnostics.source import BuildFlagsUnreadable
from tripcount.frontend import parse_text
from tripcount.ir import Span
from tripcount.model import Nest, build_nests
from tripcount.options import Options
from tripcount.sources import collect_paths, decode_source, read_bytes  # noqa: F401 - re-exported: the CLI and tests read files through the pipeline

Analysis = Callable[[NestResult, Options], None]


def analyses() -> list[tuple[str, Analysis]]:
    """The analyses run on every nest, in order (counts first: others read them)."""
    from tripcount.analysis import balance, footprint, verify

    return [("counts", counts.analyze), ("footprint", footprint.analyze), ("balance", balance.analyze),
            ("verify", verify.analyze)]


def _where(exc: BaseException) -> str:
    """`file:line` of the innermost frame of an exception."""
    frames = traceback.extract_tb(exc.__traceback__)
    if not frames:
        return "?"
    return f"{os.path.basename(frames[-1].filename)}:{frames[-1].lineno}"


def _snapshot(result: NestResult) -> tuple[int, int, int, dict, list[dict], list[dict]]:
    """What an analysis may add to a result, to take it back when the analysis is cut short."""
    return (len(result.diagnostics), len(result.loops), len(result.statements), dict(result.extras),
            [dict(lr.extras) for lr in result.loops], [dict(sr.extras) for sr in result.statements])


def _restore(result: NestResult, snap: tuple[int, int, int, dict, list[dict], list[dict]]) -> None:
    n_diag, n_loops, n_stmts, extras, loop_extras, stmt_extras = snap
    del result.diagnostics[n_diag:]
    del result.loops[n_loops:]
    del result.statements[n_stmts:]
    result.extras.clear()
    result.extras.update(extras)
    for lr, ex in zip(result.loops, loop_extras, strict=False):
        lr.extras.clear()
        lr.extras.update(ex)
    for sr, ex in zip(result.statements, stmt_extras, strict=False):
        sr.extras.clear()
        sr.extras.update(ex)


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


def analyze_nest(nest: Nest, options: Options) -> NestResult:
    """Run every analysis on one nest; an exception becomes an internal-error diagnostic.

    The analyses share the nest's budget (guard.nest_budget): each one gets the
    time left as its `time_limit`. When the budget is spent, the analysis
    running is cut: completed counts are kept, anything else it produced is
    dropped, the later analyses are skipped, and a TC310 diagnostic says so.
    """
    result = NestResult(nest=nest, loops=[], statements=[], diagnostics=list(nest.diagnostics))
    stopped: list[str] = []  # analyses cut short or skipped at the limit
    reason = ""
    last: tuple[str, Any] | None = None  # the analysis that ran last, with its snapshot
    try:
        with guard.nest_budget(options) as budget:
            for name, run in analyses():
                if stopped:
                    stopped.append(name)
                    continue
                if last is not None and budget.ops_spent():
                    # the previous analysis swallowed a spent-budget isl error: take it back
                    _cut(result, *last)
                    stopped.extend([last[0], name])
                    reason = budget.reason()
                    continue
                left = budget.remaining()
                if left <= 0:
                    budget.tripped = budget.tripped or "time"
                    reason = budget.reason()
                    stopped.append(name)
                    continue
                snap = _snapshot(result)
                last = (name, snap)
                # later analyses get the time left, so the engine's own checks stop in time
                local = options
                if left < 0.95 * budget.time_limit:
                    local = dataclasses.replace(options, time_limit=max(0.01, round(left, 2)))
                try:
                    run(result, local)
                except (guard.NestLimit, guard.EnumerationLimit) as exc:
                    budget.stop_alarm()
                    budget.tripped = budget.tripped or "time"
                    reason = str(exc) or budget.reason()
                    _cut(result, name, snap)
                    stopped.append(name)
                except Exception as exc:  # one nest must not take the report down
                    if guard.is_quota_error(exc) or budget.ops_spent():
                        budget.tripped = "operations"
                        reason = budget.reason()
                        _cut(result, name, snap)
                        stopped.append(name)
                        continue
                    result.diagnostics.append(
                        InternalError(nest.span, what=f"{name}: {type(exc).__name__}: {guard._short(exc)} at "
                                      f"{_where(exc)}"))
                    if name == "counts":
                        _complete_counts(result, "count unknown (internal error)")
                        break
    except guard.NestLimit as exc:  # found spent on leaving the budget, or a stop while handling one
        reason = reason or str(exc)
        if last is not None and last[0] not in stopped:
            _cut(result, *last)
            stopped.append(last[0])
        elif last is None:
            stopped.append("counts")
            _complete_counts(result, "count unknown (nest limit reached)")
    if stopped:
        result.diagnostics.append(AnalysisLimit(nest.span, reason=reason or "limit reached",
                                                      kept=_kept_text(result, stopped)))
    return result


def _cut(result: NestResult, name: str, snap: Any) -> None:
    """Take back what a cut analysis produced (counts keep their completed, exact entries)."""
    if name == "counts":
        _complete_counts(result, "count unknown (nest limit reached)")
        return
    _restore(result, snap)


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


def analyze_file(path: str, options: Options) -> FileResult:
    """Analyze one file; an unreadable file gives a file-level diagnostic."""
    try:
        data = read_bytes(path)
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
