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
    # found from a source directory: beside it or in build/ of a parent
    assert find([str(tmp_path / "src")]) is None or find([str(tmp_path)]) == str(db)
    assert find([str(tmp_path)]) == str(db)


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
