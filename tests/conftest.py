# Shared test helpers: run the pipeline on C text and turn the results into
# plain dicts/lists so that assertions stay short.

from __future__ import annotations

import os
import sys

import pytest

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
INPUTS = os.path.join(HERE, "inputs")
CORPUS = os.path.join(ROOT, "corpus")

if HERE not in sys.path:  # lets test modules import tests/oracle.py as `oracle`
    sys.path.insert(0, HERE)


def corpus_files() -> list[str]:
    """Every C file of the bundled corpus."""
    return sorted(os.path.join(CORPUS, f) for f in os.listdir(CORPUS) if f.endswith((".c", ".h")))


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
