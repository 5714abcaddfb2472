# Configuration: `[tool.tripcount]` in pyproject.toml, found by walking up
# from the analyzed file (or the working directory), merged under the
# command-line options (the command line wins).

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field
from typing import Any


class ConfigError(ValueError):
    """A configuration file that cannot be used (the CLI exits with status 2)."""


@dataclass
class Config:
    """The `[tool.tripcount]` table and where it came from."""

    path: str | None = None
    table: dict[str, Any] = field(default_factory=dict)

    def get(self, key: str, default: Any = None) -> Any:
        """A top-level setting."""
        return self.table.get(key, default)


def find_pyproject(start: str) -> str | None:
    """The nearest pyproject.toml at or above `start` (a file or directory)."""
    here = os.path.abspath(start)
    if not os.path.isdir(here):
        here = os.path.dirname(here)
    while True:
        cand = os.path.join(here, "pyproject.toml")
        if os.path.isfile(cand):
            return cand
        parent = os.path.dirname(here)
        if parent == here:
            return None
        here = parent


def load_config(start: str) -> Config:
    """Load `[tool.tripcount]` from the nearest pyproject.toml (empty when none)."""
    path = find_pyproject(start)
    if path is None:
        return Config()
    try:
        with open(path, "rb") as f:
            data = tomllib.load(f)
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read configuration: {exc}") from exc
    table = data.get("tool", {}).get("tripcount", {})
    if not isinstance(table, dict):
        raise ConfigError(f"{path}: [tool.tripcount] must be a table")
    return Config(path=path, table=table)


def parse_sizes(text: str) -> dict[str, int]:
    """Parse `N=64,M=32` (also spaces or ';' as separators)."""
    out: dict[str, int] = {}
    for part in text.replace(";", ",").replace(" ", ",").split(","):
        part = part.strip()
        if not part:
            continue
        if "=" not in part:
            raise ValueError(f"expected NAME=VALUE, got '{part}'")
        name, value = (x.strip() for x in part.split("=", 1))
        if not (name.isidentifier() or name == "*"):
            raise ValueError(f"'{name}' is not a parameter name")
        try:
            out[name] = int(value, 0)
        except ValueError:
            raise ValueError(f"value of {name} must be an integer, got '{value}'") from None
    return out


UNITS = {"": 1, "b": 1, "k": 1024, "kb": 1024, "kib": 1024, "m": 1024**2, "mb": 1024**2,
         "mib": 1024**2, "g": 1024**3, "gb": 1024**3, "gib": 1024**3}


def parse_bytes(text: str | int) -> int:
    """Parse a size such as 48KiB, 2 MiB, 32768."""
    if isinstance(text, int):
        return text
    s = str(text).strip().lower().replace(" ", "")
    num = s.rstrip("abcdefghijklmnopqrstuvwxyz")
    unit = s[len(num):]
    if unit not in UNITS or not num:
        raise ValueError(f"cannot read size '{text}' (use e.g. 48KiB, 2MiB, 32768)")
    return int(float(num) * UNITS[unit])
