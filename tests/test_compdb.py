# The compilation database (the open compile_commands.json format written by
# CMake, Meson and Bear): flags taken per file, never executed.

from __future__ import annotations

import json
import os

import pytest

from tripcount.compdb import CompileDbError, find, flags_from_arguments, load, parse_define


def test_flags_of_a_command_line():
    inc, cxx = flags_from_arguments(
        ["/usr/bin/gcc", "-O2", "-Iinclude", "-I", "../common", "-iquote", "q", "-DNX=1024",
         "-D", "DATA_TYPE=double", "-DDEBUG", "-UDEBUG", "-std=c11", "-c", "k.c"], "/proj/build")
    assert inc.dirs == ("/proj/build/include", "/proj/common", "/proj/build/q")
    assert inc.defines == (("NX", "1024"), ("DATA_TYPE", "double"), ("DEBUG", "1"))
    assert inc.undefines == ("DEBUG",)
    assert not cxx
    assert flags_from_arguments(["g++", "-c", "k.cc"], "/")[1]
    assert flags_from_arguments(["cc", "-x", "c++", "k.h"], "/")[1]
    assert flags_from_arguments(["cc", "-std=gnu++17", "k.c"], "/")[1]


def test_define_text():
    assert parse_define("N=4") == ("N", "4")
    assert parse_define("F(x)=((x)+1)") == ("F(x)", "((x)+1)")
    assert parse_define("FLAG") == ("FLAG", "1")
    assert parse_define("EMPTY=") == ("EMPTY", "")


def test_load_command_and_arguments_forms(tmp_path):
    db = tmp_path / "build" / "compile_commands.json"
    db.parent.mkdir()
    db.write_text(json.dumps([
        {"directory": str(tmp_path / "build"), "file": "../src/tide.c",
         "command": "cc -I../include -DSTEPS=48 -c ../src/tide.c -o tide.o"},
        {"directory": str(tmp_path), "file": "src/wave.cpp", "arguments": ["c++", "-DW=2", "-c", "src/wave.cpp"]},
    ]))
    a, b = load(str(db))
    assert a.path == str(tmp_path / "src" / "tide.c") and not a.cxx
    assert a.includes.dirs == (str(tmp_path / "include"),) and a.includes.defines == (("STEPS", "48"),)
    assert b.path == str(tmp_path / "src" / "wave.cpp") and b.cxx
    # found for a source: beside it or in build/ of a parent, up to the project root
    (tmp_path / "src").mkdir()
    assert find(str(tmp_path / "src" / "tide.c")) == str(db)
    assert find(str(tmp_path)) == str(db)
    (tmp_path / "src" / "pyproject.toml").write_text("")
    assert find(str(tmp_path / "src" / "wave.cpp")) is None


@pytest.mark.parametrize("content", [
    "not json", "{}", "[1]", '[{"file": 3}]', '[{"file": "a.c"}]', '[{"file": "a.c", "command": "cc \\"unclosed"}]',
    "[" * 100_000,
])
def test_malformed_database_is_an_error_with_the_path(tmp_path, content):
    db = tmp_path / "compile_commands.json"
    db.write_text(content)
    with pytest.raises(CompileDbError) as err:
        load(str(db))
    assert str(db) in str(err.value)


def test_database_that_is_not_a_regular_file(tmp_path):
    db = tmp_path / "compile_commands.json"
    os.mkfifo(db)
    with pytest.raises(CompileDbError, match="regular file"):
        load(str(db))


# -- through the command line ------------------------------------------------------

PROJECT = os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "corpus", "project")
RELAX = os.path.normpath(os.path.join(PROJECT, "src", "tide_relax.c"))


def _nests(out: str) -> list[dict]:
    return json.loads(out)["files"][0]["nests"]


def test_corpus_project_reads_its_header_and_build_flags(run_cli, private_cache):
    # compile_commands.json beside the sources gives -Iinclude -DNZ=16 -DHALO=2
    status, out, err = run_cli("analyze", RELAX, "--format", "json", "--at", "T=3")
    assert status == 0, err
    relax, energy = _nests(out)
    assert relax["parameters"] == [] and energy["parameters"] == ["T"]
    # 16 layers x (512 - 4) x (384 - 4) interior points
    assert relax["statements"][0]["count"]["value"] == 16 * 508 * 380
    assert energy["statements"][1]["count"]["value"] == 3 * 512 * 384


def test_corpus_project_counts_match_gcc(run_cli, private_cache):
    # reference: gcc compiles the file with the database's flags and runs it, counting
    import oracle

    if not oracle.gcc_available():
        pytest.skip("gcc not available")
    status, out, _ = run_cli("analyze", RELAX, "--format", "json", "--at", "T=2")
    assert status == 0
    text = open(RELAX, encoding="utf-8").read()
    flags = ["-I", os.path.join(PROJECT, "include"), "-DNZ=16", "-DHALO=2"]
    energy = _nests(out)[1]
    spans = [(s["line"], s["column"], s["end_line"], s["end_column"]) for s in energy["statements"]]
    got = oracle.count_statements(text, "row_energy", spans,
                                  [("T", "int", False), ("h", "double", True), ("e", "double", True)],
                                  [{"T": 2}], path=RELAX, flags=flags)
    assert got[0] == [s["count"]["value"] for s in energy["statements"]]


def test_command_line_flags_and_cache_staleness(tmp_path, run_cli, private_cache):
    inc = tmp_path / "inc"
    inc.mkdir()
    header = inc / "sizes.h"
    header.write_text("#define ROWS 10\n")
    src = tmp_path / "k.c"
    src.write_text('#include "sizes.h"\nvoid f(double *a) { for (int i = 0; i < ROWS + EXTRA; i++) a[i] = 0; }\n')
    args = ("analyze", str(src), "-I", str(inc), "-D", "EXTRA=5", "--format", "json")
    status, out, err = run_cli(*args)
    assert status == 0, err
    assert _nests(out)[0]["statements"][0]["count"]["value"] == 15
    header.write_text("#define ROWS 20\n")  # the cached result must go stale
    status, out, _ = run_cli(*args)
    assert _nests(out)[0]["statements"][0]["count"]["value"] == 25
    status, out, _ = run_cli(*args, "-U", "EXTRA")
    assert _nests(out)[0]["parameters"] == ["EXTRA"]


def test_configuration_include_and_define_are_relative_to_it(tmp_path, run_cli, private_cache):
    (tmp_path / "hdr").mkdir()
    (tmp_path / "hdr" / "n.h").write_text("#define N 7\n")
    (tmp_path / "pyproject.toml").write_text('[tool.tripcount]\ninclude = ["hdr"]\ndefine = { M = 3 }\n')
    src = tmp_path / "k.c"
    src.write_text('#include "n.h"\nvoid f(double *a) { for (int i = 0; i < N * M; i++) a[i] = 0; }\n')
    status, out, err = run_cli("analyze", str(src), "--format", "json")
    assert status == 0, err
    assert _nests(out)[0]["statements"][0]["count"]["value"] == 21


def test_unreadable_database(tmp_path, run_cli, private_cache):
    (tmp_path / "pyproject.toml").write_text("")
    (tmp_path / "compile_commands.json").write_text("[{]")
    src = tmp_path / "k.c"
    src.write_text("void f(int n, double *a) { for (int i = 0; i < n; i++) a[i] = 0; }\n")
    status, out, _ = run_cli("analyze", str(src))
    assert status == 0 and "[TC191]" in out and "not JSON" in out
    status, _, err = run_cli("analyze", str(tmp_path), "--compile-commands", str(tmp_path / "compile_commands.json"))
    assert status == 2 and "not JSON" in err


def test_explicit_database_selects_the_compiled_sources(tmp_path, run_cli, private_cache):
    for name in ("a.c", "b.c"):
        (tmp_path / name).write_text("void f(int n, double *x) { for (int i = 0; i < n; i++) x[i] = 0; }\n")
    db = tmp_path / "cc.json"
    db.write_text(json.dumps([{"directory": ".", "file": "a.c", "command": "cc -c a.c"}]))
    status, out, _ = run_cli("analyze", str(tmp_path), "--compile-commands", str(db), "--format", "json")
    assert status == 0
    assert [os.path.basename(f["path"]) for f in json.loads(out)["files"]] == ["a.c"]


def test_database_language_reads_a_c_named_file_as_cxx(tmp_path, run_cli, private_cache):
    src = tmp_path / "k.c"
    src.write_text("namespace velin {\nvoid f(int n, double *a) {\n"
                   "  for (int i = 0; i < std::min(n, 64); i++) a[i] = 0;\n}\n}\n")
    (tmp_path / "compile_commands.json").write_text(json.dumps(
        [{"directory": ".", "file": "k.c", "arguments": ["g++", "-x", "c++", "-c", "k.c"]}]))
    (tmp_path / "pyproject.toml").write_text("")
    status, out, err = run_cli("analyze", str(src), "--format", "json", "--at", "n=100")
    assert status == 0, err
    (nest,) = _nests(out)
    assert nest["statements"][0]["count"]["value"] == 64
