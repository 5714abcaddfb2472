# Budgets of the gate: read from `[tool.tripcount]` (with per-path
# overrides), and the cache levels a working set budget is measured in.

from __future__ import annotations

import fnmatch
import os
import re
from dataclasses import dataclass
from typing import Any

from tripcount.config import Config, ConfigError, parse_bytes

BUDGET_KEYS = ("max_degree", "max_working_set", "max_imbalance", "max_leading_growth")
DEFAULT_LEADING_GROWTH = 1.5
# Typical cache sizes of current x86-64 server cores, used only when neither the
# configuration nor the host says anything (common practice, not a measurement).
DEFAULT_LEVELS = {"L1": 32 * 1024, "L2": 1024 * 1024, "L3": 8 * 1024 * 1024}


# --------------------------------------------------------------------------
# Budgets


@dataclass
class Budgets:
    """The budgets in force for one file (after per-path overrides)."""

    max_degree: int | None = None
    max_working_set: str | int | None = None  # a cache level name ("L2") or bytes
    max_imbalance: float | None = None
    max_leading_growth: float = DEFAULT_LEADING_GROWTH
    source: str = ""  # ' in path/pyproject.toml' for messages
    baseline: str | None = None  # `baseline = "origin/main"` in the configuration

    def any(self) -> bool:
        """True when at least one budget is set."""
        return any(x is not None for x in (self.max_degree, self.max_working_set, self.max_imbalance))


def effective_table(config: Config, path: str) -> dict[str, Any]:
    """`[tool.tripcount]` with the overrides whose `paths` match `path` merged in (later wins)."""
    table = {k: v for k, v in config.table.items() if k != "override"}
    overrides = config.table.get("override", [])
    if isinstance(overrides, dict):
        overrides = [overrides]
    if not isinstance(overrides, list):
        raise ConfigError(f"{config.path}: [[tool.tripcount.override]] must be an array of tables")
    base = os.path.dirname(os.path.abspath(config.path)) if config.path else os.getcwd()
    rel = os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/")
    for k, ov in enumerate(overrides):
        if not isinstance(ov, dict):
            raise ConfigError(f"{config.path}: override #{k + 1} must be a table")
        pats = ov.get("paths", [])
        if isinstance(pats, str):
            pats = [pats]
        if not isinstance(pats, list) or not all(isinstance(p, str) for p in pats):
            raise ConfigError(f"{config.path}: override #{k + 1}: 'paths' must be a list of glob patterns")
        if any(fnmatch.fnmatchcase(rel, p.lstrip("./") if p.startswith("./") else p) for p in pats):
            table.update({key: v for key, v in ov.items() if key != "paths"})
    return table


def budgets_from(table: dict[str, Any], config_path: str | None) -> Budgets:
    """Read and check the budget keys of a (merged) table."""
    where = f" in {os.path.relpath(config_path)}" if config_path else ""
    b = Budgets(source=where)

    def bad(key: str, want: str) -> ConfigError:
        return ConfigError(f"{config_path}: [tool.tripcount] {key} must be {want}, got {table[key]!r}")

    if "max_degree" in table:
        v = table["max_degree"]
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            raise bad("max_degree", "a non-negative integer")
        b.max_degree = v
    if "max_working_set" in table:
        v = table["max_working_set"]
        if isinstance(v, bool) or not isinstance(v, (str, int)):
            raise bad("max_working_set", 'a cache level name ("L2") or a size ("256KiB")')
        if isinstance(v, str) and not is_level(v):
            try:
                parse_bytes(v)
            except ValueError:
                raise bad("max_working_set", 'a cache level name ("L2") or a size ("256KiB")') from None
        b.max_working_set = v.strip().upper() if isinstance(v, str) and is_level(v) else v
    for key in ("max_imbalance", "max_leading_growth"):
        if key in table:
            v = table[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v < 1:
                raise bad(key, "a number >= 1")
            setattr(b, key, float(v))
    if "baseline" in table:
        v = table["baseline"]
        if not isinstance(v, str):
            raise bad("baseline", "a git revision")
        b.baseline = v
    return b


def is_level(text: str) -> bool:
    """True for a cache level name such as 'L2'."""
    return re.fullmatch(r"[Ll][1-9]", text.strip()) is not None


def cache_levels(options: Any) -> dict[str, int]:
    """Cache level capacities: configuration, else host, else labelled defaults.

    The same precedence as the footprint analysis (tripcount.analysis.caches),
    so the gate and the report agree. Configure `caches` in [tool.tripcount]
    for a gate that answers the same on every machine.
    """
    try:
        from tripcount.analysis.caches import hierarchy

        levels = {lv.name: lv.size for lv in hierarchy(options).levels}
        if levels:
            return levels
    except Exception:  # no hierarchy: fall back to the labelled defaults
        pass
    if getattr(options, "caches", None):
        return dict(options.caches)
    return dict(DEFAULT_LEVELS)


def level_of(size: float, levels: dict[str, int]) -> str:
    """The innermost cache level that holds `size` bytes ('memory' when none does)."""
    for name, cap in sorted(levels.items(), key=lambda kv: (kv[1], kv[0])):
        if size <= cap:
            return name
    return "memory"


def level_rank(name: str, levels: dict[str, int]) -> int:
    """Position of a level from the innermost outwards ('memory' past all)."""
    order = [n for n, _ in sorted(levels.items(), key=lambda kv: (kv[1], kv[0]))]
    return order.index(name) if name in order else len(order)

