# Build flags of real projects: the compilation database (compile_commands.json,
# as written by CMake, Meson and Bear) and -I/-D/-U given on the command line.
#
# Each entry names a source file, the directory the compiler ran in, and its
# command line (`arguments` as a list, or `command` as one shell string). Only
# what changes how tripcount reads the file is taken: -I (and -iquote) include
# directories made absolute against the entry's directory, -D and -U in
# command-line order, and the language (-x c++, a C++ -std=, a C++ compiler
# name or suffix). Nothing in the database is ever executed. Reading is
# bounded (size cap, JSON depth from the standard parser) and a malformed
# database is an error with the reason, never a crash.

from __future__ import annotations

import json
import os
import shlex
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from tripcount.frontend.includes import Includes
from tripcount.sources import read_bytes

DB_NAME = "compile_commands.json"
MAX_DB_BYTES = 64 << 20  # CMake databases of large projects run to tens of MiB
CXX_SUFFIXES = (".cpp", ".cc", ".cxx", ".c++", ".C", ".hpp", ".hh", ".hxx")


class CompileDbError(ValueError):
    """A compilation database that cannot be read (message gives path and reason)."""


@dataclass(frozen=True)
class FileFlags:
    """What tripcount takes from one compile command."""

    path: str  # absolute, normalised
    includes: Includes = field(default_factory=Includes)
    cxx: bool = False


def parse_define(text: str) -> tuple[str, str]:
    """-D text to (NAME, VALUE): `N=1024` -> ('N', '1024'), `DEBUG` -> ('DEBUG', '1')."""
    name, eq, value = text.partition("=")
    return name.strip(), (value if eq else "1")


def flags_from_arguments(args: Sequence[str], directory: str) -> tuple[Includes, bool]:
    """The include directories, macros and language of one compiler command line."""
    dirs: list[str] = []
    defines: list[tuple[str, str]] = []
    undefines: list[str] = []
    cxx = False
    if args:
        cc = os.path.basename(args[0])
        cxx = any(k in cc for k in ("++", "clang++", "cxx")) or cc in ("CC", "c++")
    i = 1
    while i < len(args):
        a = args[i]
        flag = next((f for f in ("-iquote", "-I", "-D", "-U", "-x") if a.startswith(f)), None)
        if flag is None:
            if a.startswith("-std="):
                cxx = "++" in a
            i += 1
            continue
        v, i = _operand(args, i, flag)
        if not v:
            continue
        if flag in ("-I", "-iquote"):
            dirs.append(os.path.normpath(os.path.join(directory, v)))
        elif flag == "-D":
            defines.append(parse_define(v))
        elif flag == "-U":
            undefines.append(v)
        else:
            cxx = v.startswith("c++")
    return Includes(tuple(dirs), tuple(defines), tuple(undefines)), cxx


def _operand(args: Sequence[str], i: int, flag: str) -> tuple[str | None, int]:
    """The operand of `flag` at args[i] (joined `-DX` or separate `-D X`) and the next index."""
    a = args[i]
    if a == flag:
        return (args[i + 1] if i + 1 < len(args) else None), i + 2
    return a[len(flag):], i + 1


def load(path: str) -> list[FileFlags]:
    """The entries of a compilation database. Raises CompileDbError."""
    try:
        data = json.loads(read_bytes(path, MAX_DB_BYTES).decode("utf-8", errors="replace"))
    except OSError as exc:
        raise CompileDbError(f"{path}: cannot read: {exc.strerror or exc}") from exc
    except (ValueError, RecursionError) as exc:
        raise CompileDbError(f"{path}: not JSON: {exc}") from exc
    if not isinstance(data, list):
        raise CompileDbError(f"{path}: expected a list of compile commands")
    base = os.path.dirname(os.path.abspath(path))
    out: list[FileFlags] = []
    for k, entry in enumerate(data):
        if not isinstance(entry, dict) or not isinstance(entry.get("file"), str):
            raise CompileDbError(f"{path}: entry {k} has no 'file'")
        directory = entry.get("directory", base)
        if not isinstance(directory, str):
            raise CompileDbError(f"{path}: entry {k}: 'directory' is not a string")
        directory = os.path.join(base, directory)
        if isinstance(entry.get("arguments"), list) and all(isinstance(a, str) for a in entry["arguments"]):
            args = entry["arguments"]
        elif isinstance(entry.get("command"), str):
            try:
                args = shlex.split(entry["command"])
            except ValueError as exc:
                raise CompileDbError(f"{path}: entry {k}: command: {exc}") from exc
        else:
            raise CompileDbError(f"{path}: entry {k} has neither 'arguments' nor 'command'")
        includes, cxx = flags_from_arguments(args, directory)
        src = os.path.normpath(os.path.join(directory, entry["file"]))
        out.append(FileFlags(src, includes, cxx or src.endswith(CXX_SUFFIXES)))
    return out


def find(start: Iterable[str]) -> str | None:
    """A compilation database for the given paths: in the first directory, or
    one of its parents up to the filesystem root, either beside the sources or
    in its `build/` subdirectory."""
    for p in start:
        d = os.path.abspath(p if os.path.isdir(p) else os.path.dirname(p) or ".")
        while True:
            for cand in (os.path.join(d, DB_NAME), os.path.join(d, "build", DB_NAME)):
                if os.path.isfile(cand):
                    return cand
            parent = os.path.dirname(d)
            if parent == d:
                break
            d = parent
        break
    return None


def merge(base: Includes, extra: Includes) -> Includes:
    """Flags of a file's compile command, then the command line's own (which win)."""
    return Includes(base.dirs + extra.dirs, base.defines + extra.defines, base.undefines + extra.undefines)
