# The README documents what users rely on: its diagnostics table is exactly
# the catalogue, and the two set-up commands are the ones CI runs.

from __future__ import annotations

import os
import re

from conftest import ROOT

from tripcount.diagnostics import RETIRED, catalogue

ROW = re.compile(r"^\| `(TC\d{3})` \| (\w+) \| ([\w-]+) \| (.*) \|$", re.M)
RETIRED_ROW = re.compile(r"^\| (TC\d{3}) \| (?:`(TC\d{3})`|\(none\)) \|$", re.M)


def readme() -> str:
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as f:
        return f.read()


def test_diagnostics_table_is_the_catalogue():
    rows = [m.groups() for m in ROW.finditer(readme())]
    want = [(c.code, c.severity, c.title, c.description()) for c in catalogue()]
    assert rows == want, "regenerate the README's diagnostics table from tripcount.diagnostics.catalogue()"


def test_retired_codes_are_documented_with_their_replacement():
    rows = {m.group(1): m.group(2) for m in RETIRED_ROW.finditer(readme())}
    assert rows == RETIRED
    codes = {c.code for c in catalogue()}
    assert not set(RETIRED) & codes  # a retired code is never given again
    assert all(new is None or new in codes for new in RETIRED.values())


def test_table_check_can_fail():
    assert ROW.search("| `TC101` | warning | x | y |") and not ROW.search("| TC101 | warning | x | y |")


def test_setup_commands_match_ci():
    text = readme()
    assert "pip install '.[test]' && python -m pytest" in text
    with open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8") as f:
        ci = f.read()
    assert "pip install --quiet '.[test]'" in ci and "python -m pytest" in ci
