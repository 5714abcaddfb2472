# The README documents what users rely on: every diagnostic code is listed,
# and the two set-up commands are the ones CI runs.

from __future__ import annotations

import os

from conftest import ROOT

import tripcount.pipeline  # noqa: F401  (registers the diagnostics of every stage)
from tripcount.diagnostics import REGISTRY


def readme() -> str:
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as f:
        return f.read()


def test_every_diagnostic_code_is_documented():
    for mod in ("tripcount.gate.diagnostics", "tripcount.cli", "tripcount.analysis.footprint", "tripcount.analysis.balance"):
        __import__(mod)
    text = readme()
    missing = [code for code in REGISTRY if f"`{code}`" not in text]
    assert not missing, f"add these codes to the README's diagnostics table: {missing}"


def test_setup_commands_match_ci():
    text = readme()
    assert "pip install '.[test]' && python -m pytest" in text
    with open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8") as f:
        ci = f.read()
    assert "pip install --quiet '.[test]'" in ci and "python -m pytest" in ci
