# Tests of tripcount/frontend/lalr.py: the parse loop that ships (the fast
# loop over the grammar's LALR table) is the one in use with the lark versions
# pyproject.toml allows, and it reads every file exactly as lark's public
# `Lark.parse` does (the fallback when lark's table layout differs).

from __future__ import annotations

import glob
import json
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


class _Payload:
    # unpickling this object creates the file named in it: the marker of code run
    def __init__(self, marker: str) -> None:
        self.marker = marker

    def __reduce__(self):
        return (open, (self.marker, "w"))


def test_the_grammar_cache_never_runs_code(tmp_path, monkeypatch):
    # whoever can write the cache directory must not run code in later
    # commands: a pickle under the name of the compiled grammar (the old lark
    # format, or the JSON name) is ignored or a miss, never unpickled
    import hashlib
    import pickle
    import sys

    from lark import __version__ as lark_version

    from tripcount.frontend.build import IRBuilder

    cache = tmp_path / "c"
    cache.mkdir()
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(cache))
    marker = tmp_path / "ran"
    key = hashlib.sha256(f"{lalr._grammar_text()}\0{lark_version}\0{sys.version_info[:2]}".encode()).hexdigest()[:20]
    # lark's own cache format: a header line lark checks, then pickles; the
    # header is that of a genuine file, so only the pickle is hostile
    from lark import Lark

    genuine = tmp_path / "genuine.lark"
    Lark(lalr._grammar_text(), transformer=IRBuilder(), cache=str(genuine), **lalr._LARK_OPTIONS)
    header = genuine.read_bytes().split(b"\n", 1)[0] + b"\n"
    payload = header + pickle.dumps(_Payload(str(marker)))
    for name in (f"grammar-{key}.lark", f"grammar-{key}.json"):
        (cache / name).write_bytes(payload)
    lark = lalr._compile(IRBuilder())
    assert lark.terminals and not marker.exists()
    # the miss rewrote the JSON file: data, and it loads
    assert json.loads((cache / f"grammar-{key}.json").read_text("utf-8"))["key"] == key
    assert lalr._load_tables(str(cache / f"grammar-{key}.json"), key, IRBuilder()) is not None
    assert not marker.exists()


@pytest.mark.parametrize("text", ['{"key": "K"}', '{"key": "K", "data": {"m": [[[1], 2]]}, "memo": {}}',
                                  "[" * 100000, '{"key": "K", "data": {"t": 5}, "memo": {"m": [[1]]}}'])
def test_damaged_grammar_tables_are_a_miss(tmp_path, text):
    from tripcount.frontend.build import IRBuilder

    path = tmp_path / "g.json"
    path.write_text(text)
    assert lalr._load_tables(str(path), "K", IRBuilder()) is None
