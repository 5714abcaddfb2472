# Host data-cache hierarchy for the cache-fit model.
#
# The working-set analysis compares each loop level's working set with the
# capacity of the data caches. The sizes come, in order of precedence, from
# Options.caches (`--cache L1=48KiB`, `[tool.tripcount] caches = {...}`), from
# the operating system (Linux sysfs: /sys/devices/system/cpu/cpu0/cache/
# index*/{level,type,size,coherency_line_size}), or from fixed defaults that
# are labelled as such wherever they are used. Instruction caches are left
# out: only data and unified caches hold array elements.

from __future__ import annotations

import os
from dataclasses import dataclass, field

from tripcount.options import Options

SYSFS_CACHE_DIR = "/sys/devices/system/cpu/cpu0/cache"

# Used when the host says nothing; typical of current x86-64 server cores
# (common practice, not a measurement of any machine).
DEFAULT_LEVELS = {"L1": 32 * 1024, "L2": 1024 * 1024, "L3": 8 * 1024 * 1024}
DEFAULT_LINE = 64


@dataclass(frozen=True)
class CacheLevel:
    """One data (or unified) cache level."""

    name: str  # "L1", "L2", ...
    size: int  # bytes
    source: str  # "host", "configured" or "default"


@dataclass
class CacheHierarchy:
    """The cache levels the model compares working sets with, smallest first."""

    levels: list[CacheLevel] = field(default_factory=list)
    line_size: int = DEFAULT_LINE
    line_source: str = "default"

    def describe(self) -> str:
        """One-line description, e.g. 'L1 48 KiB, L2 1 MiB (host); 64 B lines (host)'."""
        parts = []
        for lv in self.levels:
            parts.append(f"{lv.name} {fmt_bytes(lv.size)} ({lv.source})")
        text = ", ".join(parts) if parts else "no cache levels"
        return f"{text}; {self.line_size} B lines ({self.line_source})"

    def to_json(self) -> dict:
        """JSON form: levels with sizes in bytes and where each came from."""
        return {
            "levels": [{"name": lv.name, "bytes": lv.size, "source": lv.source} for lv in self.levels],
            "line_size": self.line_size,
            "line_source": self.line_source,
        }


def parse_size(text: str) -> int | None:
    """Parse a sysfs size such as '48K', '1024K', '32M' or '65536' into bytes."""
    t = text.strip().upper()
    if not t:
        return None
    mult = 1
    for suffix, m in (("KIB", 1024), ("MIB", 1024**2), ("GIB", 1024**3), ("K", 1024), ("M", 1024**2),
                      ("G", 1024**3), ("B", 1)):
        if t.endswith(suffix):
            t = t[: -len(suffix)].strip()
            mult = m
            break
    try:
        return int(t) * mult
    except ValueError:
        return None


def _read(path: str) -> str | None:
    try:
        with open(path, encoding="ascii", errors="replace") as f:
            return f.read().strip()
    except OSError:
        return None


def read_sysfs(root: str = SYSFS_CACHE_DIR) -> tuple[dict[str, int], int | None]:
    """Data/unified cache sizes by level name and the line size, from Linux sysfs.

    Returns ({}, None) when the directory is missing or unreadable.
    """
    levels: dict[str, int] = {}
    line: int | None = None
    try:
        entries = sorted(e for e in os.listdir(root) if e.startswith("index"))
    except OSError:
        return {}, None
    for entry in entries:
        d = os.path.join(root, entry)
        kind = (_read(os.path.join(d, "type")) or "").lower()
        if kind not in ("data", "unified"):
            continue
        level = _read(os.path.join(d, "level"))
        size = parse_size(_read(os.path.join(d, "size")) or "")
        if not level or not level.isdigit() or not size:
            continue
        name = f"L{int(level)}"
        levels[name] = max(levels.get(name, 0), size)
        ls = _read(os.path.join(d, "coherency_line_size"))
        if ls and ls.isdigit() and int(ls) > 0 and (line is None or name == "L1"):
            line = int(ls)
    return levels, line


def _sysconf_levels() -> tuple[dict[str, int], int | None]:
    """glibc's sysconf cache values (a second source on Linux; often 0 in containers)."""
    names = {"L1": "SC_LEVEL1_DCACHE_SIZE", "L2": "SC_LEVEL2_CACHE_SIZE", "L3": "SC_LEVEL3_CACHE_SIZE"}
    out: dict[str, int] = {}
    for lv, key in names.items():
        try:
            v = os.sysconf(key)
        except (ValueError, OSError, AttributeError):
            continue
        if v and v > 0:
            out[lv] = int(v)
    line = None
    try:
        v = os.sysconf("SC_LEVEL1_DCACHE_LINESIZE")
        line = int(v) if v and v > 0 else None
    except (ValueError, OSError, AttributeError):
        pass
    return out, line


_HOST: tuple[dict[str, int], int | None] | None = None


def host_caches() -> tuple[dict[str, int], int | None]:
    """The host's data-cache sizes and line size (read once per process)."""
    global _HOST
    if _HOST is None:
        levels, line = read_sysfs()
        if not levels:
            levels, line2 = _sysconf_levels()
            line = line or line2
        _HOST = (levels, line)
    return _HOST


def hierarchy(options: Options, host: tuple[dict[str, int], int | None] | None = None) -> CacheHierarchy:
    """The cache hierarchy of the model: configured sizes over host sizes over defaults.

    A configured level replaces the host's level of the same name; the other
    host levels stay. When the host reports nothing, the defaults are used
    for the levels that are not configured (labelled "default").
    """
    levels, line = host if host is not None else host_caches()
    merged: dict[str, CacheLevel] = {}
    base, source = (levels, "host") if levels else (DEFAULT_LEVELS, "default")
    for name, size in base.items():
        merged[name] = CacheLevel(name, size, source)
    for name, size in (options.caches or {}).items():
        if size and size > 0:
            merged[name.upper()] = CacheLevel(name.upper(), int(size), "configured")
    ordered = sorted(merged.values(), key=lambda lv: (_level_number(lv.name), lv.size))
    if options.line_size and options.line_size > 0:
        # the Options default equals the usual host value: call it the host's when they agree
        ls, ls_source = options.line_size, "host" if options.line_size == line else "configured"
    elif line:
        ls, ls_source = line, "host"
    else:
        ls, ls_source = DEFAULT_LINE, "default"
    return CacheHierarchy(levels=ordered, line_size=ls, line_source=ls_source)


def _level_number(name: str) -> int:
    digits = "".join(ch for ch in name if ch.isdigit())
    return int(digits) if digits else 99


_UNITS = tuple((u, 1024 ** k) for k, u in reversed(list(enumerate(("KiB", "MiB", "GiB", "TiB", "PiB", "EiB"), 1))))


def fmt_bytes(n: int | float) -> str:
    """Bytes with binary units: '512 B', '48 KiB', '1.5 MiB', '2.25 GiB', '3.5 EiB'
    (at most 3 significant digits; beyond EiB the count grows)."""
    n = float(n)
    for unit, scale in _UNITS:
        if abs(n) >= scale:
            v = n / scale
            text = f"{v:.2f}" if abs(v) < 10 else (f"{v:.1f}" if abs(v) < 100 else f"{v:.0f}")
            if "." in text:
                text = text.rstrip("0").rstrip(".")
            return f"{text} {unit}"
    return f"{int(n)} B" if n == int(n) else f"{n:.1f} B"
