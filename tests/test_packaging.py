# Packaging: pyproject.toml lists the packages explicitly (the grammar lives
# outside the package tree), so a package missing from the list would be
# missing from a normal install while an editable one still works.

from __future__ import annotations

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_package_is_listed_in_pyproject():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "tripcount").rglob("__init__.py")}
    assert found - listed == set(), "add these packages to [tool.setuptools] packages in pyproject.toml"
    assert "tripcount.grammar" in listed
