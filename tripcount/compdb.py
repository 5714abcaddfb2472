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

import hashlib
import json
import os
import re
import shlex
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import lru_cache

from tripcount.config import parse_define
from tripcount.options import Includes, Options
from tripcount.sources import CXX_SUFFIXES, read_bytes

DB_NAME = "compile_commands.json"
MAX_DB_BYTES = 64 << 20  # CMake databases of large projects run to tens of MiB


class CompileDbError(ValueError):
    """A compilation database that cannot be read (message gives path and reason)."""


@dataclass(frozen=True)
class FileFlags:
    """What tripcount takes from one compile command."""

    path: str  # absolute, normalised
    includes: Includes = field(default_factory=Includes)
    cxx: bool = False


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


def find(start: str) -> str | None:
    """The compilation database that applies to a file or directory: in its
    directory or a parent, beside the sources or in `build/`; the walk stops
    at the project root (a directory with pyproject.toml or .git), so a
    database elsewhere on the machine is never picked up."""
    d = os.path.abspath(start if os.path.isdir(start) else os.path.dirname(start) or ".")
    return _find_from(d)


def _find_from(d: str) -> str | None:
    while True:
        for cand in (os.path.join(d, DB_NAME), os.path.join(d, "build", DB_NAME)):
            if os.path.isfile(cand):
                return cand
        if any(os.path.exists(os.path.join(d, m)) for m in ("pyproject.toml", ".git")):
            return None
        parent = os.path.dirname(d)
        if parent == d:
            return None
        d = parent


def compiled_sources(db_path: str, roots: Iterable[str]) -> list[str]:
    """The sources a database compiles that lie under one of `roots` (sorted)."""
    real = [os.path.realpath(r) for r in roots]
    out = []
    for p in database(db_path):
        rp = os.path.realpath(p)
        if os.path.isfile(p) and any(rp == r or rp.startswith(r.rstrip(os.sep) + os.sep) for r in real):
            out.append(p)
    return sorted(out)


def merge(base: Includes, extra: Includes) -> Includes:
    """Flags of a file's compile command, then the command line's own (which win)."""
    return Includes(base.dirs + extra.dirs, base.defines + extra.defines, base.undefines + extra.undefines)


@lru_cache(maxsize=8)
def _load_cached(path: str, stamp: tuple[int, int]) -> dict[str, FileFlags]:
    return {f.path: f for f in load(path)}


def database(path: str) -> dict[str, FileFlags]:
    """The entries of a compilation database by absolute source path (read once
    per process while the file is unchanged). Raises CompileDbError."""
    try:
        st = os.stat(path)
    except OSError as exc:
        raise CompileDbError(f"{path}: cannot read: {exc.strerror or exc}") from exc
    return _load_cached(os.path.abspath(path), (st.st_mtime_ns, st.st_size))


def _entry(path: str | None, options: Options) -> FileFlags | None:
    """The compile command of `path`: from --compile-commands, else from the
    database found for it (None when there is none or it does not list the
    file). Raises CompileDbError."""
    if not path or path.startswith("<"):
        return None
    db = options.compile_commands or find(path)
    if db is None:
        return None
    return database(db).get(os.path.normpath(os.path.abspath(path)))


_INCLUDE_RE = re.compile(rb'^[ \t]*#[ \t]*include[ \t]*([<"])([^">\n]+)[">]', re.M)
MAX_FINGERPRINT_HEADERS = 256


def inputs_fingerprint(text: str, path: str | None, includes: Includes) -> str:
    """A digest of everything besides `text` that the front end may read for it:
    the flags, and the bytes of every header it could include (found the way
    the preprocessor finds them, every #include followed whatever the #if
    around it), so a cached result goes stale when a header changes."""
    h = hashlib.sha256(repr((includes.dirs, includes.defines, includes.undefines)).encode())
    here = os.path.dirname(os.path.abspath(path)) if path and not path.startswith("<") else os.getcwd()
    todo = [(here, text.encode("utf-8", "surrogatepass"))]
    seen: set[str] = set()
    while todo and len(seen) < MAX_FINGERPRINT_HEADERS:
        base, data = todo.pop()
        for m in _INCLUDE_RE.finditer(data):
            name = m.group(2).decode("utf-8", "replace")
            dirs = ([base] if m.group(1) == b'"' else []) + list(includes.dirs)
            for d in dirs:
                cand = os.path.realpath(os.path.join(d, name))
                if cand in seen or not os.path.isfile(cand):
                    continue
                seen.add(cand)
                try:
                    body = read_bytes(cand)
                except OSError:
                    break
                h.update(cand.encode("utf-8", "surrogatepass") + b"\0" + hashlib.sha256(body).digest())
                todo.append((os.path.dirname(cand), body))
                break
    return h.hexdigest()[:32]


def source_flags(path: str | None, options: Options) -> tuple[Includes, str | None, str | None]:
    """(the file's -I/-D/-U, a reason when its compilation database is
    unreadable, and the language its compile command gives: "c++", or None to
    go by the suffix). Never raises: a bad database means the command line's
    flags only."""
    given = Includes(tuple(options.include_dirs), tuple(options.defines), tuple(options.undefines))
    try:
        entry = _entry(path, options)
    except CompileDbError as exc:
        return given, str(exc), None
    if entry is None:
        return given, None, None
    return merge(entry.includes, given), None, "c++" if entry.cxx else None


def source_inputs(path: str | None, text: str, options: Options
                  ) -> tuple[Includes, str, str | None, str | None]:
    """source_flags plus, second, the fingerprint of what the front end may
    read besides `text` (the result cache's key part)."""
    inc, problem, lang = source_flags(path, options)
    return inc, inputs_fingerprint(text, path, inc) + (lang or ""), problem, lang
