# Entry point: `main(argv) -> int` is the single entry of the command line,
# the console script, `python -m tripcount` and the pre-commit hook.
#
# Exit status: 0 analyzed (refusals are diagnostics, not failures),
# 1 findings (`check` budgets, `--verify` mismatches), 2 usage errors,
# unreadable input or tool errors.

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from typing import TextIO

from tripcount import __version__
from tripcount.config import (
    CommandLine,
    Config,
    ConfigError,
    UsageError,
    build_options,
    load_config,
    parse_sizes,
)
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics.balance import UnmatchedParallel
from tripcount.ir import Span
from tripcount.options import Options
from tripcount.sources import MAX_SOURCE_BYTES, collect_paths, refusal

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # argparse would exit; we return a status instead
        raise UsageError(message)


def add_common(p: argparse.ArgumentParser) -> None:
    """Options shared by `analyze` and `check`."""
    p.add_argument("--at", metavar="N=64,M=32", action="append", default=[],
                   help="sizes at which to give exact values (repeatable)")
    p.add_argument("--assume", metavar="'N >= 16, M >= N'", action="append", default=[],
                   help="assumptions on the parameters (affine comparisons, comma separated)")
    p.add_argument("--format", choices=("text", "json", "sarif"), default="text", help="output format")
    p.add_argument("-o", "--output", metavar="FILE", help="write the report to FILE instead of stdout")
    p.add_argument("--time-limit", type=float, metavar="SECONDS", help="time limit per nest, all its analyses (default 20)")
    p.add_argument("--max-pieces", type=int, metavar="K", help="cap on pieces of one formula (default 256)")
    p.add_argument("--line-size", type=int, metavar="BYTES", help="cache line size (default: host, else 64)")
    p.add_argument("--cache", action="append", default=[], metavar="L1=48KiB",
                   help="cache level size overriding the host's (repeatable)")
    p.add_argument("--elem-size", type=int, metavar="BYTES", help="element size of undeclared arrays")
    p.add_argument("--solve-for", metavar="PARAM", help="parameter whose cache-fit threshold to solve for")
    p.add_argument("--threads", type=int, metavar="P", help="threads for the balance model (default: host cores)")
    p.add_argument("--work", choices=("statements", "flops"), help="work measure of the balance model")
    p.add_argument("--parallel", action="append", type=int, default=[], metavar="LINE",
                   help="treat the loop on LINE as '#pragma omp parallel for' (repeatable)")
    p.add_argument("--machine", metavar="FILE.toml", help="machine description (peak, bandwidths) for the roofline time estimate")
    p.add_argument("--no-cache", action="store_true", help="do not read or write the result cache")
    p.add_argument("-I", dest="include", action="append", default=[], metavar="DIR",
                   help="look for quoted and angle #include files in DIR too (repeatable)")
    p.add_argument("-D", dest="define", action="append", default=[], metavar="NAME[=VALUE]",
                   help="define a macro, as the compiler's -D (repeatable)")
    p.add_argument("-U", dest="undefine", action="append", default=[], metavar="NAME",
                   help="undefine a macro, as the compiler's -U (repeatable)")
    p.add_argument("--compile-commands", metavar="PATH",
                   help="compile_commands.json giving each file its -I/-D/-U (default: the one "
                        "found beside the sources or in build/, up to the project root)")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with its subcommands."""
    p = _Parser(prog="tripcount", description="Exact trip counts, flops, working sets and thread balance "
                "of affine C loop nests, as formulas in the size parameters.")
    p.add_argument("--version", action="version", version=f"tripcount {__version__}")
    sub = p.add_subparsers(dest="command", parser_class=_Parser)
    a = sub.add_parser("analyze", help="report counts of every loop nest in C files or directories")
    a.add_argument("paths", nargs="*", metavar="PATH", help="C files or directories ('-' reads stdin)")
    a.add_argument("--code", metavar="C", help="analyze this C text (a file, a function body or bare loops)")
    a.add_argument("--verify", action="store_true", help="re-check every formula by exact enumeration")
    a.add_argument("--plot", metavar="FILE.png", help="plot the working set of each loop level against one size (needs matplotlib)")
    a.add_argument("--top", type=int, default=10, metavar="K",
                   help="nests shown in the ranking by estimated time at the end of a multi-nest report (default 10)")
    a.add_argument("--plot-param", metavar="PARAM", help="the size parameter on the plot's x axis")
    add_common(a)
    c = sub.add_parser("check", help="pre-commit gate: budgets and baseline regressions")
    c.add_argument("paths", nargs="*", metavar="FILE")
    c.add_argument("--baseline", metavar="REV", help="git revision to compare with (default: HEAD under pre-commit and for `check` without files; else none)")
    add_common(c)
    sub.add_parser("schema", help="print the JSON Schema of the JSON report")
    s = sub.add_parser("serve", help="run the language server on stdio")
    s.add_argument("--stdio", action="store_true", help="accepted for editor compatibility (stdio is the default)")
    m = sub.add_parser("machine", help="show the machine description of the roofline estimate, or measure one")
    m.add_argument("--measure", action="store_true",
                   help="measure this host: a dense multiply (flops) and a STREAM-like kernel per cache level "
                        "and memory (needs numpy: pip install 'tripcount[measure]')")
    m.add_argument("-o", "--output", metavar="FILE.toml", help="write the measured description to FILE.toml")
    m.add_argument("--budget", type=float, default=3.0, metavar="SECONDS", help="time for the measurement (default 3)")
    m.add_argument("--machine", metavar="FILE.toml", help="the description to show (default: pyproject.toml's)")
    m.add_argument("--cache", action="append", default=[], metavar="L1=48KiB",
                   help="cache level size overriding the host's (sizes the measured arrays; repeatable)")
    k = sub.add_parser("cache", help="manage the result cache")
    k.add_argument("action", choices=("clear", "info"))
    return p


def options_from(args: argparse.Namespace, config: Config) -> Options:
    """Options of a command: its configuration under its command line (config.build_options)."""
    base = os.path.dirname(config.path) if config.path else None
    return build_options(config.table, CommandLine.of(vars(args)), base=base)


def check_assumptions(options: Options) -> None:
    """--assume (and the configuration's `assume`) must be readable: raises UsageError."""
    if not options.assume:
        return
    from tripcount.model import parse_assumptions

    try:
        allowed = parse_assumptions(options.assume)
    except ValueError as exc:
        raise UsageError(f"--assume: cannot read '{options.assume}': {exc}") from None
    if allowed.is_empty():
        raise UsageError(f"--assume: '{options.assume}' holds for no values of the parameters")


def source_paths(files: list[str], options: Options) -> list[str]:
    """The files to analyze: files as given; for a directory, its sources, or
    with --compile-commands (or the configuration's), exactly the sources the
    database compiles under it. Raises UsageError for an unreadable database."""
    from tripcount.compdb import CompileDbError, compiled_sources, database

    if not options.compile_commands:
        return collect_paths(files)
    try:
        database(options.compile_commands)
    except CompileDbError as exc:
        raise UsageError(f"--compile-commands: {exc}") from None
    out: list[str] = []
    for p in files:
        out.extend(compiled_sources(options.compile_commands, [p]) if os.path.isdir(p) else [p])
    return out


def open_output(path: str | None) -> TextIO:
    """The output stream (stdout unless -o)."""
    if path is None:
        return sys.stdout
    return open(path, "w", encoding="utf-8")


def run_analyze(args: argparse.Namespace, stdin: TextIO, stdout: TextIO, stderr: TextIO) -> int:
    """`tripcount analyze`."""
    from tripcount.analysis.results import Report
    from tripcount.report import get_reporter

    sources: list[tuple[str, str | None]] = []  # (path, text for snippets)
    if args.code is not None:
        sources.append(("<code>", args.code))
    for p in args.paths:
        if p == "-":
            text = stdin.read(MAX_SOURCE_BYTES + 1)  # bounded: stdin may be /dev/zero
            if len(text) > MAX_SOURCE_BYTES:
                raise UsageError(f"standard input is larger than {MAX_SOURCE_BYTES >> 20} MiB; not read")
            sources.append(("<stdin>", text))
    files = [p for p in args.paths if p != "-"]
    if not sources and not files:
        raise UsageError("nothing to analyze: give C files or directories, '-' for stdin, or --code 'C text'")
    missing = [p for p in files if not os.path.exists(p)]
    if missing:
        stderr.write(f"tripcount: error: no such file or directory: {missing[0]}\n")
        return EXIT_USAGE
    if args.top < 1:
        raise UsageError(f"--top must be at least 1, got {args.top}")
    refused = refusal(args.output, files)
    if refused:
        stderr.write(f"tripcount: error: {refused}\n")
        return EXIT_USAGE
    config = load_config(files[0] if files else os.getcwd())
    options = options_from(args, config)
    check_assumptions(options)
    results = []
    if sources:
        from tripcount.pipeline import analyze_text

        results = [analyze_text(text or "", path, options, snippet=True) for path, text in sources]
    paths = source_paths(files, options)
    if files and not paths:
        stderr.write("tripcount: error: no .c or .h files under the given directories\n")
        return EXIT_USAGE
    # Every report comes from the result cache where it can: JSON and SARIF are
    # renderings of the file JSON, which the cache keeps per nest; the text report
    # is kept per file (its rendering for these options, cached.text_of_path).
    # The plot and --parallel LINE read live results of all files together, and
    # --verify is a fresh check by definition.
    if args.format == "text" and not args.plot and not options.parallel_lines:
        return stream_text(results, len(sources), paths, options, args, stdout, stderr)
    from tripcount.report.progress import Progress

    cached = args.format in ("json", "sarif") and not args.plot and not options.verify
    file_json: list[dict] = []
    progress = Progress(stderr, len(paths))
    for k, path in enumerate(paths):
        progress.step(k, path)
        if cached:
            from tripcount.cached import analyze_path_cached

            file_json.append(analyze_path_cached(path, options, use_cache=not args.no_cache))
        else:
            from tripcount.pipeline import analyze_file

            results.append(analyze_file(path, options))
    progress.clear()
    loop_lines = {lr.loop.span.line for fr in results for nr in fr.nests for lr in nr.loops}
    loop_lines |= {lp["line"] for f in file_json for n in f["nests"] for lp in n["loops"]}
    unmatched = unmatched_parallel(loop_lines, options, (results[0].path if results else file_json[0]["path"])
                                   if results or file_json else "")
    if unmatched and results:
        results[0].diagnostics.extend(unmatched)
    elif unmatched:
        file_json[0]["diagnostics"] = sorted(file_json[0]["diagnostics"] + [d.to_dict() for d in unmatched],
                                             key=lambda d: (d["line"], d["column"], d["code"]))
    known = {p for fr in results for nr in fr.nests for p in (*nr.nest.params, *nr.nest.names)}
    known |= {p for f in file_json for n in f["nests"] for p in (*n.get("parameters", []), *n.get("symbolic", {}))}
    if at_unused(given_sizes(args), known, stderr):
        return EXIT_USAGE
    report = Report(files=results, at=options.at, settings=settings_of(options))
    out = open_output(args.output) if args.output else stdout
    try:
        reporter = get_reporter(args.format, out, top=args.top)
        if cached:
            from tripcount.report.jsonout import report_json

            whole = report_json(report)
            whole["files"] += file_json
            reporter.write(whole)
        else:
            reporter.write(report)
    finally:
        if args.output:
            out.close()
    status = EXIT_OK
    if args.plot:
        from tripcount.report.plot import write_plot

        why = write_plot(report, args.plot, args.plot_param, options.machine)
        if why:
            stderr.write(f"tripcount: error: no plot: {why}\n")
            status = EXIT_USAGE
    codes = [d.code for fr in results for d in fr.all_diagnostics()]
    codes += [d["code"] for f in file_json for d in f["diagnostics"]]
    for code in codes:
        if code == "TC901":
            status = EXIT_USAGE
        elif code in ("TC302", "TC305") and status == EXIT_OK:
            status = EXIT_FINDINGS
    if sources and all(not fr.nests for fr in results[: len(sources)]) and _not_c(results[: len(sources)]):
        stderr.write("tripcount: error: the snippet could not be read as C (see the diagnostics above)\n")
        status = EXIT_USAGE
    return status


def given_sizes(args: argparse.Namespace) -> dict[str, int]:
    """The --at sizes of the command line only: a project's configuration may well
    list sizes of kernels that this run does not read."""
    given: dict[str, int] = {}
    for text in args.at:
        given.update(parse_sizes(text))
    return given


def at_unused(given: dict[str, int], known: set[str], stderr: TextIO) -> bool:
    """Warn about --at names of no nest; True (a usage error) when none is used."""
    unknown, none_used = unknown_sizes(given, known)
    if unknown:
        kind = "error" if none_used else "warning"
        stderr.write(f"tripcount: {kind}: --at names no parameter of any nest: {unknown}\n")
    return bool(unknown) and none_used


def stream_text(snippets: list, n_sources: int, paths: list[str], options: Options, args: argparse.Namespace,
                stdout: TextIO, stderr: TextIO) -> int:
    """The text report of several files, written file by file as each is analysed
    (its results dropped once written, so memory does not grow with the number
    of files), with a status line on a terminal. Until an --at name is known to
    be used, the rendered text is held back: --at naming no parameter of any
    nest is still a usage error with no report."""
    import io

    from tripcount.cached import text_of_path
    from tripcount.report.progress import Progress
    from tripcount.report.text import RenderedFile, TextReporter, render_file

    given_at = given_sizes(args)
    held: io.StringIO | None = io.StringIO() if given_at else None
    out: TextIO | None = None if held is not None else (open_output(args.output) if args.output else stdout)
    reporter = TextReporter(held if held is not None else out, top=args.top)
    ranking: list = []
    known: set[str] = set()
    params: set[str] = set()
    codes: set[str] = set()
    n_nests = n_diag = 0
    progress = Progress(stderr, len(paths))

    def write(rf: RenderedFile) -> None:
        nonlocal n_nests, n_diag, held, out
        n_nests += rf.nests
        n_diag += len(rf.codes)
        codes.update(rf.codes)
        params.update(rf.params)
        known.update(rf.names)
        reporter.stream.write(rf.text)
        ranking.extend(rf.entries)
        if held is not None and not unknown_sizes(given_at, known)[1]:
            out = open_output(args.output) if args.output else stdout
            out.write(held.getvalue())
            reporter.stream = out
            held = None

    try:
        for fr in snippets:
            write(render_file(fr))
        not_c = bool(snippets) and all(not fr.nests for fr in snippets[:n_sources]) and _not_c(snippets[:n_sources])
        del snippets[:]
        for k, path in enumerate(paths):
            progress.step(k, path)
            rf = text_of_path(path, options, use_cache=not args.no_cache)
            progress.clear()
            write(rf)
            del rf
        if at_unused(given_at, known, stderr):
            return EXIT_USAGE
        reporter.write_ranking(ranking)
        reporter.write_totals(n_sources + len(paths), n_nests, n_diag, params, options.at)
    finally:
        progress.clear()
        if args.output and out is not None:
            out.close()
    status = EXIT_USAGE if "TC901" in codes else EXIT_FINDINGS if "TC302" in codes else EXIT_OK
    if not_c:
        stderr.write("tripcount: error: the snippet could not be read as C (see the diagnostics above)\n")
        status = EXIT_USAGE
    return status


def _not_c(results: list) -> bool:
    """True when a snippet produced only syntax errors and nothing to analyze."""
    for fr in results:
        diags = fr.all_diagnostics()
        if not any(d.code.startswith("TC1") for d in diags):
            return False
    return True


def unknown_sizes(at: dict[str, int], known: set[str]) -> tuple[str, bool]:
    """Names given sizes that no nest has as a parameter ('N (did you mean n?)'),
    and whether none of the given names is used at all (only when some nest
    has parameters: a file without any says nothing about a typo)."""
    import difflib

    given = [n for n in at if n != "*"]
    missing = [n for n in given if n not in known]
    if not missing or not known:
        return "", False
    parts = []
    for n in missing:
        near = difflib.get_close_matches(n, sorted(known), n=1, cutoff=0.5) or \
            [k for k in sorted(known) if k.lower() == n.lower()]
        parts.append(f"{n} (did you mean {near[0]}?)" if near else n)
    return ", ".join(parts), len(missing) == len(given)


def unmatched_parallel(loop_lines: set[int], options: Options, path: str) -> list[Diagnostic]:
    """--parallel lines on which no analysed loop starts (the balance analysis sees one nest at a time)."""
    if not path:
        return []
    return [UnmatchedParallel(Span.point(1, 1), path=path, line=line)
            for line in options.parallel_lines if line not in loop_lines]


def settings_of(options: Options) -> dict:
    """The model assumptions that the report states (assumptions, caches, threads)."""
    out: dict = {"assume": options.assume}
    try:
        from tripcount.analysis.caches import hierarchy

        out["caches"] = hierarchy(options).to_json()
    except Exception:  # the report still states what it was given
        if options.caches:
            out["caches"] = dict(options.caches)
    if options.threads:
        out["threads"] = {"value": options.threads, "from": "--threads or config"}
    else:
        out["threads"] = {"value": os.cpu_count() or 1, "from": "host cores (num_threads clauses take precedence)"}
    return out


def run_machine(args: argparse.Namespace, stdout: TextIO, stderr: TextIO) -> int:
    """`tripcount machine`: measure this host (--measure), or show the description in use."""
    options = options_from(args, load_config(os.getcwd()))
    if args.measure:
        if not 0 < args.budget <= 600:
            raise UsageError(f"--budget must be from 0 to 600 seconds, got {args.budget}")
        refused = refusal(args.output, [])
        if refused:
            stderr.write(f"tripcount: error: {refused}\n")
            return EXIT_USAGE
        from tripcount.measure import run_measure

        try:
            run_measure(options, args.output, args.budget, stdout)
        except ImportError:
            raise UsageError("--measure needs numpy (pip install 'tripcount[measure]')") from None
        return EXIT_OK
    if options.machine is None:
        from tripcount.analysis.roofline import HINT

        stdout.write(HINT + "\n")
        return EXIT_OK
    stdout.write(f"{options.machine.describe()}\n  from {options.machine.source}\n")
    return EXIT_OK


def main(argv: Sequence[str] | None = None, stdin: TextIO | None = None,
         stdout: TextIO | None = None, stderr: TextIO | None = None) -> int:
    """Run tripcount with `argv` (without the program name); returns the exit status.

    Never raises: an unexpected failure becomes a one-line tool error, status 2.
    """
    err = stderr or sys.stderr
    try:
        return _main(argv, stdin, stdout, stderr)
    except KeyboardInterrupt:
        err.write("tripcount: interrupted\n")
        return 130
    except SystemExit as exc:  # argparse's --help/--version
        return exc.code if isinstance(exc.code, int) else EXIT_OK
    except BaseException as exc:  # noqa: BLE001 - the last resort: never a traceback
        # (kept free of islpy imports: the cached `check` path must stay light)
        tb = exc.__traceback__
        while tb is not None and tb.tb_next is not None:
            tb = tb.tb_next
        where = f" at {os.path.basename(tb.tb_frame.f_code.co_filename)}:{tb.tb_lineno}" if tb else ""
        err.write(f"tripcount: error: internal error ({type(exc).__name__}: {str(exc)[:200]}{where}); "
                  "please report it\n")
        return EXIT_USAGE


def _main(argv: Sequence[str] | None, stdin: TextIO | None,
          stdout: TextIO | None, stderr: TextIO | None) -> int:
    stdin = stdin or sys.stdin
    stdout = stdout or sys.stdout
    stderr = stderr or sys.stderr
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if args.command is None:
            parser.print_help(stdout)
            return EXIT_USAGE
        if args.command == "analyze":
            return run_analyze(args, stdin, stdout, stderr)
        if args.command == "check":
            from tripcount.gate.command import CheckRequest, run_check

            return run_check(CheckRequest(paths=tuple(args.paths), given=CommandLine.of(vars(args)),
                                          baseline=args.baseline, format=args.format, output=args.output,
                                          use_cache=not args.no_cache), stdout, stderr)
        if args.command == "schema":
            from tripcount.report.schema import schema_text

            stdout.write(schema_text())
            return EXIT_OK
        if args.command == "serve":
            from tripcount.lsp import serve

            return serve()
        if args.command == "machine":
            return run_machine(args, stdout, stderr)
        if args.command == "cache":
            from tripcount.cache import run_cache_command

            return run_cache_command(args.action, stdout)
    except UsageError as exc:
        stderr.write(f"tripcount: error: {exc}\n")
        return EXIT_USAGE
    except ConfigError as exc:
        stderr.write(f"tripcount: error: {exc}\n")
        return EXIT_USAGE
    except ValueError as exc:  # bad --assume and similar input
        stderr.write(f"tripcount: error: {exc}\n")
        return EXIT_USAGE
    except BrokenPipeError:  # the reader (e.g. `| head`) went away: not an error
        return EXIT_OK
    except OSError as exc:  # e.g. -o into a directory that does not exist
        stderr.write(f"tripcount: error: {exc.strerror or exc}: {exc.filename or ''}\n")
        return EXIT_USAGE
    return EXIT_USAGE


def console_main() -> None:
    """Console-script entry."""
    sys.exit(main())
