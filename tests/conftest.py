# Shared test helpers: run the pipeline on C text and turn the results into
# plain dicts/lists so that assertions stay short.

from __future__ import annotations

import atexit
import os
import shutil
import sys
import tempfile

import pytest
from unhurried import GENEROUS_S, TIME_SHARES

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
INPUTS = os.path.join(HERE, "inputs")
CORPUS = os.path.join(ROOT, "corpus")

if HERE not in sys.path:  # lets test modules import tests/oracle.py as `oracle`
    sys.path.insert(0, HERE)

# The tool's own cache (results, compiled grammar) goes to a directory of this
# test session, inherited by the subprocesses tests start, never to the user's
# ~/.cache; tests that study the cache set their own.
_SESSION_CACHE = tempfile.mkdtemp(prefix="tripcount-test-cache-")
os.environ["TRIPCOUNT_CACHE_DIR"] = _SESSION_CACHE
atexit.register(shutil.rmtree, _SESSION_CACHE, True)


def corpus_files() -> list[str]:
    """Every C and C++ file of the bundled corpus."""
    return sorted(os.path.join(CORPUS, f) for f in os.listdir(CORPUS) if f.endswith((".c", ".h", ".cpp")))


@pytest.fixture
def run_cli(capsys):
    """Run `tripcount ARGS...` in-process; returns (status, stdout, stderr)."""
    import io

    from tripcount.cli import main

    def run(*args: str, stdin: str = "") -> tuple[int, str, str]:
        out, err = io.StringIO(), io.StringIO()
        status = main(list(args), stdin=io.StringIO(stdin), stdout=out, stderr=err)
        return status, out.getvalue(), err.getvalue()

    return run


@pytest.fixture
def private_cache(tmp_path_factory, monkeypatch):
    """A result cache of this test alone, outside any pre-commit run (and outside
    tmp_path, which tests analyse as a tree: a cache inside it is refused)."""
    path = tmp_path_factory.mktemp("private") / "cache"
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(path))
    monkeypatch.delenv("PRE_COMMIT", raising=False)
    monkeypatch.delenv("PRE_COMMIT_FROM_REF", raising=False)
    return path


@pytest.fixture
def compulsory_only(monkeypatch, request):
    """The pipeline without the traffic unit (memory bytes then come from the compulsory footprint), for
    tests whose hand figures are those of that path; a test marked `with_traffic` keeps the unit."""
    if request.node.get_closest_marker("with_traffic"):
        return
    from tripcount import pipeline
    from tripcount.analysis import protocol

    every = protocol.analyses
    monkeypatch.setattr(pipeline, "analyses", lambda: [a for a in every() if a.name != "traffic"])


@pytest.fixture
def unhurried(monkeypatch):
    """Every time share generous (and the tests' nest limit is 600 s): results compared for
    equality must not depend on how busy the machine is (a loaded CI runner ran out of a
    0.2 s share in one run and not in the other)."""
    import importlib

    for module, name in TIME_SHARES:
        monkeypatch.setattr(importlib.import_module(module), name, GENEROUS_S)
