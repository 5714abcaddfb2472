# Command line: subcommands, exit statuses, formats, snippets.

from __future__ import annotations

import json
import os
import subprocess
import sys

from conftest import INPUTS, ROOT

FLUSH = os.path.join(INPUTS, "cli", "harbour_flush.c")


def test_analyze_text_values(run_cli):
    status, out, err = run_cli("analyze", FLUSH, "--at", "n=10")
    assert status == 0, err
    # triangle: 10*11/2 = 55 (OEIS A000217); every other index below 10: 5
    assert "= 55" in out
    assert "= 5" in out


def test_analyze_json_shape(run_cli):
    status, out, _ = run_cli("analyze", FLUSH, "--at", "n=10,m=10", "--format", "json")
    assert status == 0
    data = json.loads(out)
    assert data["schema_version"] == 1
    (f,) = data["files"]
    assert f["path"] == FLUSH
    nests = f["nests"]
    assert [n["function"] for n in nests] == ["flush_basin", "basin_mean"]
    tri = nests[0]
    assert [lp["var"] for lp in tri["loops"]] == ["i", "j"]
    assert tri["statements"][0]["count"]["value"] == 55
    assert tri["loops"][0]["trips"]["value"] == 10
    for d in f["diagnostics"]:
        assert {"line", "column", "severity", "code", "message"} <= set(d)


def test_formula_pieces_parse_with_sympy(run_cli):
    import sympy

    status, out, _ = run_cli("analyze", FLUSH, "--format", "json")
    assert status == 0
    data = json.loads(out)
    stmt = data["files"][0]["nests"][0]["statements"][0]
    assert stmt["count"]["value"] is None  # no --at
    n = sympy.Symbol("n")
    expr = sympy.sympify(stmt["count"]["pieces"][0]["expr"].replace("^", "**"), locals={"n": n})
    # triangular numbers, OEIS A000217
    assert sympy.expand(expr - n * (n + 1) / 2) == 0
    assert stmt["count"]["degree"] == 2


def test_formula_pieces_read_back_with_the_formula_reader(run_cli):
    from tripcount.formula import parse

    status, out, _ = run_cli("analyze", FLUSH, "--format", "json")
    assert status == 0
    stmt = json.loads(out)["files"][0]["nests"][0]["statements"][0]
    (piece,) = [p for p in stmt["count"]["pieces"] if p["when"] in ("true", "n >= 1")]
    # triangular numbers, OEIS A000217
    assert parse(piece["expr"]).evaluate({"n": 10}) == 55
    assert parse(piece["when"]).evaluate({"n": 10}) is True


def test_verify_reads_back_the_printed_formulas(run_cli):
    # the nest whose S2 condition was once printed '7*(2*N + 1) % 5 >= M + 24':
    # --verify re-reads every printed piece (C semantics) against isl enumeration
    path = os.path.join(INPUTS, "formula", "mod_guard_stride.c")
    status, out, err = run_cli("analyze", path, "--verify", "--at", "N=9,M=0", "--format", "json")
    assert status == 0, err
    diags = json.loads(out)["files"][0]["diagnostics"]
    assert [d["code"] for d in diags if d["code"] == "TC302"] == []
    assert any(d["code"] == "TC303" for d in diags)


def test_usage_errors_exit_2(run_cli):
    assert run_cli()[0] == 2
    assert run_cli("analyze")[0] == 2
    assert run_cli("analyze", "/no/such/file.c")[0] == 2
    status, _, err = run_cli("analyze", FLUSH, "--at", "n=ten")
    assert status == 2 and "integer" in err
    assert run_cli("frobnicate")[0] == 2


def test_snippet_code_and_stdin(run_cli):
    code = "for (i = 0; i < n; i++) for (j = 0; j <= i; j++) s += a[i][j];"
    status, out, _ = run_cli("analyze", "--code", code, "--at", "n=4", "--format", "json")
    assert status == 0
    f = json.loads(out)["files"][0]
    assert f["path"] == "<code>"
    assert f["nests"][0]["parameters"] == ["n"]
    assert f["nests"][0]["statements"][0]["count"]["value"] == 10
    status, out, _ = run_cli("analyze", "-", "--at", "n=4", "--format", "json",
                             stdin="for (int i = 0;\n     i < n; i++)\n  x[i] = 0;\n")
    assert status == 0
    f = json.loads(out)["files"][0]
    assert f["path"] == "<stdin>"
    assert f["nests"][0]["statements"][0]["count"]["value"] == 4


def test_snippet_not_c_exits_2(run_cli):
    status, out, err = run_cli("analyze", "--code", "this is not C at all, is it?")
    assert status == 2
    assert "<code>:1:" in out + err


def test_refusal_is_not_failure(run_cli):
    status, out, _ = run_cli("analyze", FLUSH, "--format", "json")
    assert status == 0
    codes = [d["code"] for d in json.loads(out)["files"][0]["diagnostics"]]
    assert codes == [] or all(c.startswith("TC") for c in codes)


def test_python_dash_m_and_version():
    r = subprocess.run([sys.executable, "-m", "tripcount", "--version"], capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 0 and "tripcount" in r.stdout


def test_snippet_with_refusal_points_into_the_snippet(run_cli):
    code = "for (i = 1; i < n; i *= 2)\n  x[i] = 0;\nfor (j = 0; j < n; j++) y[j] = 1;"
    status, out, _ = run_cli("analyze", "--code", code, "--at", "n=8", "--format", "json")
    assert status == 0  # a refusal is a diagnostic, not a failure
    f = json.loads(out)["files"][0]
    (d,) = [d for d in f["diagnostics"] if d["code"] == "TC201"]
    assert (d["line"], d["column"]) == (1, 20)  # the step `i *= 2`
    assert f["nests"][1]["statements"][0]["count"]["value"] == 8


def test_snippet_with_declarations_gives_bytes(run_cli):
    code = "double a[64][64]; for (int i = 0; i < 64; i++) for (int j = 0; j < 64; j++) a[i][j] = 0.0;"
    status, out, _ = run_cli("analyze", "--code", code, "--format", "json")
    assert status == 0
    nest = json.loads(out)["files"][0]["nests"][0]
    assert nest["statements"][0]["count"]["value"] == 4096
    assert nest["footprint"]["bytes"]["value"] == 64 * 64 * 8


def test_entry_points_do_not_import_each_other():
    # cli dispatches to the commands; the gate and the language server share
    # library modules (config, gate.findings) and never import cli or each other's command
    import ast
    import pathlib

    pkg = pathlib.Path(__file__).resolve().parent.parent / "tripcount"

    def imports(path):
        out = set()
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and node.module:
                out.add(node.module)
                out.update(f"{node.module}.{a.name}" for a in node.names)
            elif isinstance(node, ast.Import):
                out.update(a.name for a in node.names)
        return out

    for path in [pkg / "lsp.py", *sorted((pkg / "gate").glob("*.py"))]:
        found = imports(path)
        assert "tripcount.cli" not in found, path
        if path.name != "command.py":
            assert "tripcount.gate.command" not in found, path
        assert "tripcount.lsp" not in found, path


def test_analyze_json_and_sarif_come_from_the_cache_and_no_cache_bypasses_it(run_cli, private_cache, monkeypatch):
    # cold (computed, stored), warm (every nest from the cache: the analyses
    # must not run) and --no-cache (computed, nothing read) give the same
    # report as the driver's own JSON rendering of its results
    from tripcount import pipeline
    from tripcount.analysis.results import Report
    from tripcount.options import Options
    from tripcount.report.jsonout import report_json

    args = ("analyze", FLUSH, "--at", "n=10,m=10", "--format", "json")
    cold = run_cli(*args)
    assert cold[0] == 0 and os.path.isdir(private_cache)
    direct = report_json(Report([pipeline.analyze_file(FLUSH, Options(at={"n": 10, "m": 10}))], {"n": 10, "m": 10}))
    assert json.loads(cold[1])["files"] == direct["files"]

    def no_analysis(*a, **k):
        raise AssertionError("a warm run analyzed a nest")

    monkeypatch.setattr(pipeline, "analyze_nest", no_analysis)
    assert run_cli(*args) == cold
    assert run_cli(*args, "--format", "sarif")[0] == 0
    monkeypatch.undo()
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(private_cache))
    import shutil

    shutil.rmtree(private_cache)
    assert run_cli(*args, "--no-cache") == cold
    assert not os.path.exists(private_cache)


def test_last_resort_turns_any_exception_into_status_2(monkeypatch):
    # the one last-resort handler is cli.main's
    import io

    from tripcount import cli

    def crash(*a):
        raise KeyError("x")

    monkeypatch.setattr(cli, "_main", crash)
    err = io.StringIO()
    assert cli.main([], stderr=err) == 2
    lines = err.getvalue().splitlines()
    assert len(lines) == 1 and lines[0].startswith("tripcount: error: internal error (KeyError")

    def interrupted(*a):
        raise KeyboardInterrupt

    monkeypatch.setattr(cli, "_main", interrupted)
    assert cli.main([], stderr=io.StringIO()) == 130
    monkeypatch.setattr(cli, "_main", lambda *a: 1)
    assert cli.main([], stderr=io.StringIO()) == 1


def test_unreadable_assumption_is_a_usage_error(run_cli):
    code = "for (i = 0; i < n; i++) s += a[i];"
    status, _, err = run_cli("analyze", "--code", code, "--assume", "n*n > 4", "--at", "n=10")
    assert status == 2 and "--assume" in err and "not affine" in err
    status, _, err = run_cli("analyze", "--code", code, "--assume", "n >= 10, n < 5")
    assert status == 2 and "holds for no values" in err


def test_at_names_that_no_nest_has(run_cli):
    code = "for (i = 0; i < n; i++) s += a[i];"
    status, out, err = run_cli("analyze", "--code", code, "--at", "N=1000")
    assert status == 2 and "N (did you mean n?)" in err and out == ""
    status, out, err = run_cli("analyze", "--code", code, "--at", "N=1000,n=5")
    assert status == 0 and "warning" in err and "= 5" in out
    status, _, err = run_cli("analyze", "--code", code, "--at", "*=7")
    assert status == 0 and err == ""


def test_many_files_stream_with_a_status_line_on_a_terminal_only(tmp_path):
    # a run over many files writes each file's report as it is analysed (its results
    # are then dropped); the status line goes to a terminal's stderr, never to a pipe
    import io

    from tripcount.cli import main
    from tripcount.report.progress import MIN_FILES

    text = open(FLUSH, encoding="utf-8").read()
    for k in range(MIN_FILES + 1):
        (tmp_path / f"basin{k:02d}.c").write_text(text)

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True

    import itertools

    import tripcount.pipeline as pipeline

    out = io.StringIO()
    seen: list[int] = []  # how much had been written when each file was read
    real = pipeline.analyze_file

    def spy(path, options, data=None):
        seen.append(len(out.getvalue()))
        return real(path, options, data)

    pipeline.analyze_file = spy
    try:
        err = Terminal()
        status = main(["analyze", "--no-cache", str(tmp_path)], stdin=io.StringIO(), stdout=out, stderr=err)
    finally:
        pipeline.analyze_file = real
    assert status == 0
    assert seen[0] == 0 and all(b > a for a, b in itertools.pairwise(seen))  # streamed
    assert f"/{MIN_FILES + 1} " in err.getvalue() and err.getvalue().endswith("\r\x1b[K")
    assert "\x1b" not in out.getvalue()
    assert out.getvalue().endswith(f"{MIN_FILES + 1} file(s), {2 * (MIN_FILES + 1)} nest(s), "
                                   f"{3 * (MIN_FILES + 1)} diagnostic(s); give --at n=... (or --at '*=1000') for "
                                   "values\n")  # per file: one refusal and two parallel-candidate notes
    # not a terminal: no status line; an --at naming no parameter still gives no report
    err = io.StringIO()
    out2 = io.StringIO()
    assert main(["analyze", "--no-cache", "--at", "zz=3", str(tmp_path)], stdin=io.StringIO(),
                stdout=out2, stderr=err) == 2
    assert out2.getvalue() == "" and err.getvalue() == "tripcount: error: --at names no parameter of any nest: zz\n"
