# Configuration: `[tool.tripcount]` in pyproject.toml, found by walking up
# from the analyzed file (or the working directory), merged under the
# command-line options (the command line wins) into Options by the one
# function `build_options`, which every entry point (analyze, check, serve)
# calls; the command line reaches it as a plain CommandLine, never as the
# argument parser's namespace.

from __future__ import annotations

import math
import os
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import Any

from tripcount.machine import MachineError, load_machine, machine_of_config
from tripcount.names import mangle
from tripcount.options import Options


class ConfigError(ValueError):
    """A configuration file that cannot be used (the CLI exits with status 2)."""


class UsageError(ValueError):
    """Bad command-line input (exit status 2)."""


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
    tool = data.get("tool", {})
    table = tool.get("tripcount", {}) if isinstance(tool, dict) else {}
    if not isinstance(table, dict):
        raise ConfigError(f"{path}: [tool.tripcount] must be a table")
    check_table(table, path)
    return Config(path=path, table=table)


# --------------------------------------------------------------------------
# The schema of [tool.tripcount]: every known key with its type and range,
# checked when the file is loaded, so that a bad value is a clear error (file,
# key, what was expected; exit status 2) and never an internal error later.
# Keys not listed here are left alone (they may belong to a newer version).


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_number(v: Any) -> bool:
    return (_is_int(v) or isinstance(v, float)) and math.isfinite(v)


def _int_in(lo: int, hi: int) -> tuple[Any, str]:
    return (lambda v: _is_int(v) and lo <= v <= hi), f"an integer from {lo} to {hi}"


def _size_ok(v: Any) -> bool:
    try:
        return parse_bytes(v) > 0
    except (ValueError, TypeError):
        return False


def _sizes_ok(v: Any) -> bool:
    if isinstance(v, str):
        try:
            parse_sizes(v)
        except ValueError:
            return False
        return True
    return isinstance(v, dict) and all(isinstance(k, str) and (k.isidentifier() or k == "*") and _is_int(x)
                                       for k, x in v.items())


def _strings_ok(v: Any) -> bool:
    return isinstance(v, str) or (isinstance(v, list) and all(isinstance(x, str) for x in v))


_AT_LEAST_ONE = (lambda v: _is_number(v) and v >= 1, "a number >= 1")
_POSITIVE = (lambda v: _is_number(v) and v > 0, "a number > 0")
SCHEMA: dict[str, tuple[Any, str]] = {
    "at": (_sizes_ok, 'a table of sizes ({ N = 1024 }) or a text ("N=1024, M=768")'),
    "assume": (_strings_ok, "a text or a list of texts ('N >= 16, M >= N')"),
    "caches": (lambda v: isinstance(v, dict) and all(isinstance(k, str) and re.fullmatch(r"[Ll][1-9]", k)
                                                      and _size_ok(x) for k, x in v.items()),
               'a table of cache levels L1..L9 to positive sizes ({ L1 = "48KiB", L2 = 2097152 })'),
    "line_size": _int_in(1, 1 << 20),
    "threads": _int_in(1, 1 << 16),
    "imbalance_threshold": _AT_LEAST_ONE,
    "time_limit": (lambda v: _is_number(v) and 0 < v <= 86400, "a number of seconds > 0 (at most 86400)"),
    "max_pieces": _int_in(1, 1 << 20),
    "elem_size": _int_in(1, 1 << 16),
    "solve_for": (lambda v: isinstance(v, str) and v.isidentifier(), "a parameter name"),
    "work": (lambda v: v in ("statements", "flops"), '"statements" or "flops"'),
    "parallel": (lambda v: isinstance(v, list) and all(_is_int(x) and x >= 1 for x in v), "a list of line numbers"),
    "peak_gflops": _POSITIVE,
    "bandwidth_gbs": _POSITIVE,
    "max_degree": _int_in(0, 1 << 10),
    "max_working_set": (lambda v: (isinstance(v, str) and (re.fullmatch(r"\s*[Ll][1-9]\s*", v) is not None
                                                           or _size_ok(v))) or (_is_int(v) and v > 0),
                        'a cache level name ("L2") or a size ("256KiB")'),
    "max_imbalance": _AT_LEAST_ONE,
    "max_leading_growth": _AT_LEAST_ONE,
    "baseline": (lambda v: isinstance(v, str), "a git revision"),
}


def check_table(table: Mapping[str, Any], path: str | None) -> None:
    """Raise ConfigError for the first known key of `table` (and of its
    [[tool.tripcount.override]] tables) whose value has the wrong type or range."""
    def one(t: Mapping[str, Any], where: str) -> None:
        for key, (ok, want) in SCHEMA.items():
            if key in t and not ok(t[key]):
                raise ConfigError(f"{path}: {where}{key} must be {want}, got {_shown(t[key])}")

    one(table, "[tool.tripcount] ")
    if "machine" in table:  # checked when read, as the other keys (tripcount/machine.py)
        try:
            machine_of_config(table, path)
        except MachineError as exc:
            raise ConfigError(str(exc)) from None
    overrides = table.get("override", [])
    for k, ov in enumerate(overrides if isinstance(overrides, list) else [overrides]):
        if isinstance(ov, dict):
            one(ov, f"[[tool.tripcount.override]] #{k + 1}: ")


def _shown(v: Any) -> str:
    text = repr(v)
    return text if len(text) <= 60 else text[:57] + "..."


def parse_sizes(text: str) -> dict[str, int]:
    """Parse `N=64,M=32` (also spaces or ';' as separators); names as the model
    knows them (names.mangle: `ñ` is the parameter the model made of ñ)."""
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
            out[name if name == "*" else mangle(name)] = int(value, 0)
        except ValueError:
            raise ValueError(f"value of {name} must be an integer, got '{value}'") from None
    return out


UNITS = {"": 1, "b": 1, "k": 1024, "kb": 1024, "kib": 1024, "m": 1024**2, "mb": 1024**2,
         "mib": 1024**2, "g": 1024**3, "gb": 1024**3, "gib": 1024**3}


def parse_bytes(text: str | int) -> int:
    """Parse a size such as 48KiB, 2 MiB, 32768."""
    if _is_int(text):
        if text <= 0:  # type: ignore[operator]
            raise ValueError(f"a size must be positive, got {text}")
        return text  # type: ignore[return-value]
    if not isinstance(text, str):
        raise ValueError(f"cannot read size {text!r} (use e.g. 48KiB, 2MiB, 32768)")
    s = text.strip().lower().replace(" ", "")
    num = s.rstrip("abcdefghijklmnopqrstuvwxyz")
    unit = s[len(num):]
    try:
        value = float(num) * UNITS[unit] if num else math.nan
    except (KeyError, ValueError):
        value = math.nan
    if not (math.isfinite(value) and 1 <= value <= 1 << 60):
        raise ValueError(f"cannot read size '{text}' (use e.g. 48KiB, 2MiB, 32768)")
    return int(value)


@dataclass(frozen=True)
class CommandLine:
    """The command-line options that feed Options; None or empty means "not given"."""

    at: tuple[str, ...] = ()  # --at texts, in order
    assume: tuple[str, ...] = ()
    verify: bool = False
    time_limit: float | None = None
    max_pieces: int | None = None
    line_size: int | None = None
    cache: tuple[str, ...] = ()  # --cache L1=48KiB texts
    elem_size: int | None = None
    solve_for: str | None = None
    threads: int | None = None
    work: str | None = None
    parallel: tuple[int, ...] = ()
    include: tuple[str, ...] = ()  # -I DIR
    define: tuple[str, ...] = ()  # -D NAME[=VALUE]
    undefine: tuple[str, ...] = ()  # -U NAME
    compile_commands: str | None = None
    machine: str | None = None  # --machine FILE.toml

    @staticmethod
    def of(values: Mapping[str, Any]) -> CommandLine:
        """The fields of CommandLine found in `values` (e.g. vars() of parsed arguments)."""
        out: dict[str, Any] = {}
        for f in fields(CommandLine):
            v = values.get(f.name)
            if v is None:
                continue
            out[f.name] = tuple(v) if isinstance(v, list) else v
        return CommandLine(**out)


def parse_define(text: str) -> tuple[str, str]:
    """-D text to (NAME, VALUE): `N=1024` -> ('N', '1024'), `DEBUG` -> ('DEBUG', '1')."""
    name, eq, value = text.partition("=")
    return name.strip(), (value if eq else "1")


def _strings(table: Mapping[str, Any], key: str) -> list[str]:
    v = table.get(key, [])
    if isinstance(v, str):
        v = [v]
    if isinstance(v, dict) and key == "define":
        v = [f"{k}={x}" for k, x in v.items()]
    if not isinstance(v, list) or not all(isinstance(x, (str, int)) for x in v):
        raise ConfigError(f"[tool.tripcount] {key}: expected a string or a list of strings")
    return [str(x) for x in v]


def _source_flags(table: Mapping[str, Any], given: CommandLine, base: str | None) -> dict[str, Any]:
    """-I/-D/-U and the compilation database: the configuration's first (its
    relative paths from its own directory), then the command line's."""
    root = base or os.getcwd()
    dirs = [os.path.normpath(os.path.join(root, d)) for d in _strings(table, "include")]
    dirs += [os.path.abspath(d) for d in given.include]
    defines = [parse_define(x) for x in _strings(table, "define") + list(given.define)]
    if any(not n for n, _ in defines):
        raise UsageError("-D: a macro name is expected (-D NAME or -D NAME=VALUE)")
    db = given.compile_commands and os.path.abspath(given.compile_commands)
    if not db and table.get("compile_commands"):
        db = os.path.normpath(os.path.join(root, str(table["compile_commands"])))
    if db and not os.path.isfile(db):
        raise UsageError(f"--compile-commands: no such file: {db}")
    return {"include_dirs": tuple(dirs), "defines": tuple(defines),
            "undefines": tuple(_strings(table, "undefine") + list(given.undefine)),
            "compile_commands": db or None}


def build_options(table: Mapping[str, Any], given: CommandLine = CommandLine(), detail: str = "full",
                  base: str | None = None) -> Options:
    """Options from a (merged) `[tool.tripcount]` table and the command line, which wins.

    `base`: the directory of the configuration file, for its relative paths.
    """
    try:
        at: dict[str, int] = {}
        cfg_at = table.get("at", {})
        if isinstance(cfg_at, str):
            at.update(parse_sizes(cfg_at))
        elif isinstance(cfg_at, dict):
            at.update({str(k) if k == "*" else mangle(str(k)): int(v) for k, v in cfg_at.items()})
        for text in given.at:
            at.update(parse_sizes(text))
    except (ValueError, TypeError) as exc:
        raise UsageError(f"--at: {exc}") from None
    assumptions = []
    if table.get("assume"):
        a = table["assume"]
        assumptions.extend(a if isinstance(a, list) else [a])
    assumptions.extend(given.assume)
    caches = {str(k).upper(): parse_bytes(v) for k, v in table.get("caches", {}).items()}
    try:
        for text in given.cache:
            name, _, size = text.partition("=")
            caches[name.strip().upper()] = parse_bytes(size)
    except ValueError as exc:
        raise UsageError(f"--cache: {exc}") from None
    try:
        machine = load_machine(given.machine) if given.machine else machine_of_config(
            table, os.path.join(base, "pyproject.toml") if base else None)
    except MachineError as exc:
        raise ConfigError(str(exc)) from None
    d = Options()
    o = Options(
        at=at,
        assume=", ".join(str(x) for x in assumptions) or None,
        verify=given.verify,
        time_limit=given.time_limit or float(table.get("time_limit", d.time_limit)),
        max_pieces=given.max_pieces or int(table.get("max_pieces", d.max_pieces)),
        line_size=given.line_size or int(table.get("line_size", 0)) or 0,
        caches=caches,
        elem_size=given.elem_size or table.get("elem_size"),
        solve_for=given.solve_for or table.get("solve_for"),
        threads=given.threads or table.get("threads"),
        work=given.work or table.get("work", d.work),
        parallel_lines=tuple(given.parallel) + tuple(table.get("parallel", [])),
        imbalance_threshold=float(table.get("imbalance_threshold", d.imbalance_threshold)),
        peak_gflops=table.get("peak_gflops") or (machine.peak_gflops_per_core if machine else None),
        bandwidth_gbs=table.get("bandwidth_gbs") or (machine.memory_gbs if machine else None),
        machine=machine,
        detail=detail,
        **_source_flags(table, given, base),
    )
    if not (0 < o.time_limit < float("inf")) or o.max_pieces <= 0:
        raise UsageError("--time-limit and --max-pieces must be positive")
    for flag, value in (("--threads", given.threads), ("--line-size", given.line_size),
                        ("--elem-size", given.elem_size)):
        if value is not None and value <= 0:
            raise UsageError(f"{flag} must be positive, got {value}")
    return o
