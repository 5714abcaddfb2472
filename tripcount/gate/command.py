# `tripcount check`: the pre-commit gate.
#
# For every given C file: analyze it (through the result cache), hold each
# nest against the budgets of the nearest `[tool.tripcount]` (degree of the
# work, innermost working set, thread imbalance; per-path overrides), and,
# with a baseline revision, against its counterpart in the baseline version
# of the same file (read with `git show REV:path` and analyzed in memory),
# flagging a higher degree, a leading term grown beyond `max_leading_growth`
# or an innermost working set that moved out to a larger cache level.
#
# Findings are TC6xx diagnostics in compiler style; an inline comment on the
# loop line suppresses them:  `// tripcount: allow degree, working-set`.
# Exit status: 0 all within budget, 1 findings, 2 usage or tool errors.
#
# The gate must stay light: on a warm cache nothing in tripcount/gate may
# import islpy, sympy or the engine.

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from typing import Any, TextIO

from tripcount.analysis.summary import NestSummary
from tripcount.config import CommandLine, build_options, load_config
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.gate import BaselineUnavailable
from tripcount.gate.baseline import (
    BaselineError,
    Git,
    baseline_nests,
    baseline_rev,
    match_nests,
    staged_sources,
)
from tripcount.gate.budgets import budgets_from, cache_levels, effective_table
from tripcount.gate.findings import findings_for
from tripcount.gate.readings import summaries_of
from tripcount.ir import Span
from tripcount.sources import collect_paths, refusal

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2


@dataclass
class FileCheck:
    """Everything found for one file."""

    path: str
    result: dict[str, Any]
    findings: list[Diagnostic]
    tool_errors: list[dict[str, Any]]
    at: dict[str, int] = field(default_factory=dict)


def check_file(path: str, given: CommandLine, git: Git, use_cache: bool, baseline: str | None = None,
               staged: bool = False) -> FileCheck:
    """Analyze one file, hold it against its budgets and its baseline (`baseline`: --baseline;
    `staged`: the file was found staged in git, so HEAD is the default baseline)."""
    from tripcount.cached import analyze_file_cached, read_source

    config = load_config(path)
    table = effective_table(config, path)
    budgets = budgets_from(table, config.path)
    options = build_options(table, given, detail="gate", base=os.path.dirname(config.path) if config.path else None)
    text, bad = read_source(path)
    result = analyze_file_cached(path, text, options, use_cache=use_cache)
    if bad is not None:
        result["diagnostics"].insert(0, bad)
    levels = cache_levels(options)
    nests = summaries_of(result)
    findings: list[Diagnostic] = []
    pairs: list[tuple[NestSummary, NestSummary]] = []
    rev, origin = baseline_rev(baseline, budgets, staged)
    if rev is not None:
        old_nests, problem = baseline_nests(path, rev, origin, git, options, use_cache)
        if problem:
            findings.append(BaselineUnavailable(Span(1, 1, 1, 1), reason=problem))
        pairs = [(old_nests[i], nests[j]) for i, j in match_nests(old_nests, nests)]
    findings += findings_for(nests, text, budgets, options, levels, pairs, rev or "")
    for d in findings:
        d.path = path
    tool_errors = [d for d in result.get("diagnostics", []) if str(d.get("code", "")).startswith("TC9")]
    return FileCheck(path, result, findings, tool_errors, dict(options.at))


@dataclass(frozen=True)
class CheckRequest:
    """What `tripcount check` was asked to do (built by the command line)."""

    paths: tuple[str, ...] = ()  # files or directories; none: the sources staged in git
    given: CommandLine = CommandLine()  # the options given on the command line
    baseline: str | None = None  # --baseline REV
    format: str = "text"
    output: str | None = None  # -o FILE
    use_cache: bool = True  # not --no-cache


def run_check(request: CheckRequest, stdout: TextIO, stderr: TextIO) -> int:
    """`tripcount check [FILES...]`; returns the exit status."""
    use_cache = request.use_cache
    given = request.given
    git = Git()
    paths = list(request.paths)
    staged = not paths
    if staged:
        paths = staged_sources(git)
        if not paths:
            stderr.write("tripcount check: nothing to check (give C files, or stage some in git)\n")
            return EXIT_OK if git.toplevel(os.getcwd()) is not None else EXIT_USAGE
    missing = [p for p in paths if not os.path.exists(p)]
    if missing:
        stderr.write(f"tripcount: error: no such file or directory: {missing[0]}\n")
        return EXIT_USAGE
    files = collect_paths(paths)
    refused = refusal(request.output, paths)
    if refused:
        stderr.write(f"tripcount: error: {refused}\n")
        return EXIT_USAGE
    from tripcount.report.progress import Progress

    checks: list[FileCheck] = []
    status = EXIT_OK
    progress = Progress(stderr, len(files), "tripcount check")
    for k, path in enumerate(files):
        progress.step(k, path)
        try:
            checks.append(check_file(path, given, git, use_cache, request.baseline, staged))
        except OSError as exc:
            progress.clear()
            stderr.write(f"tripcount: error: cannot read {path}: {exc.strerror or exc}\n")
            status = EXIT_USAGE
        except BaselineError as exc:
            progress.clear()
            stderr.write(f"tripcount: error: {exc}\n")
            return EXIT_USAGE
    progress.clear()
    n_find = sum(1 for c in checks for d in c.findings if d.severity == "error")
    if n_find and status == EXIT_OK:
        status = EXIT_FINDINGS
    if any(c.tool_errors for c in checks):
        status = EXIT_USAGE
    out = stdout
    if request.output:
        out = open(request.output, "w", encoding="utf-8")
    try:
        write_results(checks, request.format, out)
    finally:
        if out is not stdout:
            out.close()
    n_nests = sum(len(c.result.get("nests", [])) for c in checks)
    if n_find:
        stderr.write(f"tripcount check: {n_find} finding(s) in {len(checks)} file(s), {n_nests} nest(s); "
                     "see `tripcount: allow` comments to accept one on purpose\n")
    elif status == EXIT_OK:
        stderr.write(f"tripcount check: {len(checks)} file(s), {n_nests} nest(s) within budget\n")
    return status


def shown_diagnostics(c: FileCheck) -> list[dict[str, Any]]:
    """What the gate reports for a file: its findings and the analysis errors that limit them."""
    out = [d.to_dict() for d in c.findings]
    out += [d for d in c.result.get("diagnostics", []) if d.get("severity") == "error"]
    return sorted(out, key=lambda d: (d["line"], d["column"], d["code"]))


def write_results(checks: list[FileCheck], fmt: str, out: TextIO) -> None:
    """Render the findings: compiler-style lines, the JSON report, or SARIF."""
    if fmt == "text":
        for c in checks:
            for d in shown_diagnostics(c):
                out.write(f"{c.path}:{d['line']}:{d['column']}: {d['severity']}: {d['message']} [{d['code']}]\n")
        return
    report = check_report(checks)
    if fmt == "json":
        json.dump(report, out, indent=2)
        out.write("\n")
        return
    from tripcount.report.sarif import SarifReporter

    SarifReporter(out).write({**report, "files": [
        {"path": c.path, "nests": [], "diagnostics": shown_diagnostics(c)} for c in checks]})


def check_report(checks: list[FileCheck]) -> dict[str, Any]:
    """The JSON report of a check run: the analysis of each file with the findings added."""
    from tripcount import __version__

    files = []
    at: dict[str, int] = {}
    for c in checks:
        diags = list(c.result.get("diagnostics", [])) + [d.to_dict() for d in c.findings]
        files.append({**{k: v for k, v in c.result.items() if k != "summaries"}, "path": c.path,
                      "diagnostics": sorted(diags, key=lambda d: (d["line"], d["column"], d["code"]))})
        at.update(c.at)
    return {"schema_version": 1, "tool": {"name": "tripcount", "version": __version__},
            "at": at, "settings": {}, "files": files}
