# Machine description: the peak flop rate and the bandwidths that the
# roofline estimate divides by.
#
# Read from `[tool.tripcount.machine]` in pyproject.toml or from a TOML file
# given with --machine (its top-level keys, a [machine] table, or a
# [tool.tripcount.machine] table), validated here so that a bad value is a
# clear error naming the file, the key and what was expected (the CLI exits
# with status 2). The legacy top-level `peak_gflops` and `bandwidth_gbs` of
# [tool.tripcount] fill the peak and the memory bandwidth when the table
# leaves them out. Pure data: no analysis is imported here.

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

LEVEL = re.compile(r"[Ll][1-9]")
KEYS = ("name", "source", "peak_gflops", "peak_gflops_per_core", "cores", "memory_gbs", "cache_gbs")


class MachineError(ValueError):
    """A machine description that cannot be used (file, key, what was expected)."""


@dataclass(frozen=True)
class Machine:
    """Peak flop rate per core and cores, memory bandwidth (whole machine) and
    the bandwidth of each cache level (per core), in GFLOP/s and GB/s (10^9 bytes/s)."""

    peak_gflops_per_core: float
    cores: int
    memory_gbs: float
    cache_gbs: tuple[tuple[str, float], ...] = ()  # ("L1", 200.0), ... smallest level first
    name: str = ""
    source: str = ""  # where it came from: a file, pyproject.toml, "measured on this host ..."
    notes: tuple[str, ...] = field(default=())

    @property
    def peak_gflops(self) -> float:
        """The peak of all the cores."""
        return self.peak_gflops_per_core * self.cores

    def bandwidth(self, level: str) -> float | None:
        """GB/s of a cache level ("L2") or of "memory"; None when not described."""
        if level.lower() in ("memory", "mem", "dram"):
            return self.memory_gbs
        return dict(self.cache_gbs).get(level.upper())

    def to_json(self) -> dict[str, Any]:
        """The description as the report states it."""
        return {"name": self.name or None, "source": self.source or None,
                "peak_gflops_per_core": self.peak_gflops_per_core, "cores": self.cores,
                "peak_gflops": self.peak_gflops, "memory_gbs": self.memory_gbs,
                "cache_gbs": dict(self.cache_gbs)}

    def describe(self) -> str:
        """One line: peak, cores, bandwidths."""
        caches = ", ".join(f"{k} {v:g} GB/s" for k, v in self.cache_gbs)
        return (f"{self.name + ': ' if self.name else ''}peak {self.peak_gflops_per_core:g} GFLOP/s per core x "
                f"{self.cores} core(s), memory {self.memory_gbs:g} GB/s" + (f", {caches}" if caches else ""))


def _number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _fail(where: str, key: str, want: str, got: Any) -> MachineError:
    text = repr(got)
    text = text if len(text) <= 60 else text[:57] + "..."
    return MachineError(f"{where}: {key} must be {want}, got {text}")


def machine_from_table(table: Mapping[str, Any], where: str, legacy: Mapping[str, Any] | None = None) -> Machine:
    """A Machine from a description table; `where` names the file and table in errors.

    `legacy`: the [tool.tripcount] table, whose `peak_gflops` and `bandwidth_gbs`
    stand in for a missing total peak and memory bandwidth. Raises MachineError.
    """
    if not isinstance(table, Mapping):
        raise MachineError(f"{where}: the machine description must be a table")
    unknown = sorted(set(table) - set(KEYS))
    if unknown:
        raise MachineError(f"{where}: unknown key '{unknown[0]}' (known: {', '.join(KEYS)})")
    legacy = legacy or {}
    for key in ("peak_gflops", "peak_gflops_per_core", "memory_gbs"):
        if key in table and not (_number(table[key]) and 0 < table[key] <= 1e9):
            raise _fail(where, key, "a number > 0 (at most 1e9)", table[key])
    cores = table.get("cores", 1)
    if not (isinstance(cores, int) and not isinstance(cores, bool) and 1 <= cores <= 1 << 16):
        raise _fail(where, "cores", "an integer from 1 to 65536", cores)
    for key in ("name", "source"):
        if key in table and not isinstance(table[key], str):
            raise _fail(where, key, "a text", table[key])
    caches = table.get("cache_gbs", {})
    if not (isinstance(caches, Mapping) and all(isinstance(k, str) and LEVEL.fullmatch(k) and _number(v) and v > 0
                                                for k, v in caches.items())):
        raise _fail(where, "cache_gbs", 'a table of cache levels L1..L9 to numbers > 0 ({ L1 = 200.0, L2 = 90.0 })',
                    caches)
    if "peak_gflops_per_core" in table:
        per_core = float(table["peak_gflops_per_core"])
        if "peak_gflops" in table and not math.isclose(per_core * cores, float(table["peak_gflops"]), rel_tol=1e-6):
            raise MachineError(f"{where}: peak_gflops ({table['peak_gflops']}) is not peak_gflops_per_core x cores "
                               f"({per_core:g} x {cores}); give one of them")
    elif "peak_gflops" in table or legacy.get("peak_gflops"):
        per_core = float(table.get("peak_gflops", legacy.get("peak_gflops"))) / cores
    else:
        raise MachineError(f"{where}: peak_gflops (all cores) or peak_gflops_per_core is required")
    memory = table.get("memory_gbs", legacy.get("bandwidth_gbs"))
    if memory is None:
        raise MachineError(f"{where}: memory_gbs (the main-memory bandwidth in GB/s) is required")
    levels = tuple(sorted(((k.upper(), float(v)) for k, v in caches.items()), key=lambda kv: int(kv[0][1:])))
    return Machine(per_core, cores, float(memory), levels, str(table.get("name", "")), str(table.get("source", "")))


def load_machine(path: str) -> Machine:
    """The machine description of a TOML file (--machine FILE.toml). Raises MachineError."""
    try:
        with open(path, "rb") as f:
            data = tomllib.load(f)
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise MachineError(f"{path}: cannot read the machine description: {exc}") from exc
    table: Any = data
    where = path
    tool = data.get("tool")
    if isinstance(tool, dict) and isinstance(tool.get("tripcount"), dict) and "machine" in tool["tripcount"]:
        table, where = tool["tripcount"]["machine"], f"{path}: [tool.tripcount.machine]"
    elif "machine" in data:
        table, where = data["machine"], f"{path}: [machine]"
    machine = machine_from_table(table, where)
    return machine if machine.source else Machine(**{**machine.__dict__, "source": path})


def machine_of_config(table: Mapping[str, Any], path: str | None) -> Machine | None:
    """The machine of a [tool.tripcount] table: its `machine` table, else the
    legacy `peak_gflops` with `bandwidth_gbs`; None when neither is there."""
    where = f"{path or 'pyproject.toml'}: [tool.tripcount.machine]"
    if "machine" in table:
        m = machine_from_table(table["machine"], where, legacy=table)
        return m if m.source else Machine(**{**m.__dict__, "source": path or "pyproject.toml"})
    if table.get("peak_gflops") and table.get("bandwidth_gbs"):
        return Machine(float(table["peak_gflops"]), 1, float(table["bandwidth_gbs"]),
                       source=f"{path or 'pyproject.toml'}: peak_gflops and bandwidth_gbs")
    return None
