# Tests of tripcount/frontend/lalr.py: the parse loop that ships (the fast
# loop over the grammar's LALR table) is the one in use with the lark versions
# pyproject.toml allows, and it reads every file exactly as lark's public
# `Lark.parse` does (the fallback when lark's table layout differs).

from __future__ import annotations

import glob
import os
import re

import pytest
from conftest import ROOT

from tripcount.frontend import lalr, parse_text

INPUTS = sorted(glob.glob(os.path.join(ROOT, "corpus", "*.c"))
                + glob.glob(os.path.join(ROOT, "tests", "inputs", "**", "*.c"), recursive=True))


def _pinned_range() -> str:
    with open(os.path.join(ROOT, "pyproject.toml"), encoding="utf-8") as f:
        m = re.search(r'"lark([^"]*)"', f.read())
    assert m, "lark is a dependency"
    return m.group(1)


def test_the_fast_loop_is_in_use():
    # if lark's internals change, the engine silently falls back to Lark.parse
    # (about a third slower to read a file); this makes the change visible
    assert lalr.engine().driver is not None


def test_lark_version_is_pinned():
    rng = _pinned_range()
    assert ">=" in rng and "<" in rng.replace("<=", ""), f"pin an upper bound for lark: {rng}"


def _read(path: str):
    with open(path, encoding="utf-8", errors="replace") as f:
        text = f.read()
    unit, diags = parse_text(text, path)
    return unit, [dg.render() for dg in diags]


def test_inputs_are_found():
    assert len(INPUTS) > 20


@pytest.mark.parametrize("path", INPUTS, ids=lambda p: os.path.relpath(p, ROOT))
def test_same_ir_as_the_public_parser(path, monkeypatch):
    fast = _read(path)
    monkeypatch.setattr(lalr.engine(), "driver", None)
    public = _read(path)
    assert fast == public


@pytest.mark.parametrize("text", [
    "void f(int n) { for (int i = 0; i < n; i++) { x = @; } }",
    "void f(int n) { for (int i = 0; i < n i++) a[i] = 0; }",
    "void f(int n) { if (n) { ",
])
def test_same_recovery_as_the_public_parser(text, monkeypatch):
    fast = parse_text(text, "bad.c")
    monkeypatch.setattr(lalr.engine(), "driver", None)
    public = parse_text(text, "bad.c")
    assert fast[0] == public[0]
    assert [dg.render() for dg in fast[1]] == [dg.render() for dg in public[1]]
    assert fast[1], "the broken input is reported"
