"""The time shares of a nest's analysis, and a way to make them generous in a fresh
interpreter without importing the modules that hold them (a test of the warm path checks
that islpy is never imported there)."""

from __future__ import annotations

import importlib.abc
import importlib.util
import sys
from typing import Any

# Every share of a nest's time that can run out without the nest's own limit doing so.
TIME_SHARES = [
    ("tripcount.analysis.footprint.fit", "THRESHOLD_TIME_S"),
    ("tripcount.analysis.footprint.exact", "EXACT_BUDGET_S"),
    ("tripcount.analysis.footprint.scopes", "CHECK_BUDGET_S"),
    ("tripcount.analysis.footprint.quantities", "BUDGET_S"),
    ("tripcount.analysis.footprint.scopes", "ELEMENTS_TIME_S"),
    ("tripcount.analysis.footprint.scopes", "LINES_TIME_S"),
    ("tripcount.analysis.traffic.model", "LINES_TIME_S"),
    ("tripcount.analysis.dependences", "TIME_S"),
    ("tripcount.analysis.tiling", "TIME_S"),
]


GENEROUS_S = 120.0


class _Generous(importlib.abc.MetaPathFinder):
    """Sets the shares of a module to GENEROUS_S right after the module is executed."""

    def find_spec(self, name: str, path: Any, target: Any = None) -> Any:
        names = [n for m, n in TIME_SHARES if m == name]
        if not names:
            return None
        sys.meta_path.remove(self)
        try:
            spec = importlib.util.find_spec(name)
        finally:
            sys.meta_path.insert(0, self)
        if spec is None or spec.loader is None:
            return spec
        run = spec.loader.exec_module

        def exec_module(module: Any) -> None:
            run(module)
            for n in names:
                setattr(module, n, GENEROUS_S)

        spec.loader.exec_module = exec_module  # type: ignore[method-assign]
        return spec


def install() -> None:
    """Make every share generous in this interpreter, as its modules are imported."""
    sys.meta_path.insert(0, _Generous())
