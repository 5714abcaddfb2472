# Reading sources, shared by the pipeline and the paths that must stay light
# (the cached check, the language server): which files are C and C++ sources, and
# decoding their bytes. Imports nothing beyond the diagnostics.

from __future__ import annotations

import os
import stat
from collections.abc import Iterable

from tripcount.diagnostics.source import InvalidEncoding
from tripcount.ir import Span
from tripcount.paths import cache_dir, is_inside

# C++ sources and headers (read with the C++ subset of frontend/cxx.py).
CXX_SUFFIXES = (".cpp", ".cc", ".cxx", ".c++", ".C", ".hpp", ".hh", ".hxx")
SOURCE_SUFFIXES = (".c", ".h", *CXX_SUFFIXES)

# Sources larger than this are not read: a generated or hostile file of tens of
# megabytes would cost gigabytes of parse tree (the largest corpus file is 4 KB;
# a large hand-written kernel file is well under 1 MiB).
MAX_SOURCE_BYTES = 4 << 20


def read_bytes(path: str, limit: int = MAX_SOURCE_BYTES) -> bytes:
    """The bytes of a regular file of at most `limit` bytes.

    Raises OSError (with a reason in `strerror`) for anything else: a FIFO,
    a device such as /dev/zero behind a symlink, a directory, a file too large.
    The file is opened without blocking and checked on the open descriptor, so
    a FIFO never hangs the reader and a file swapped after the check is not read.
    """
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    fd = os.open(path, flags)
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            kind = "a directory" if stat.S_ISDIR(st.st_mode) else "not a regular file"
            raise OSError(0, f"{kind} (only regular files are read)", path)
        if st.st_size > limit:
            raise OSError(0, f"larger than {limit >> 20} MiB ({st.st_size} bytes); not read", path)
        chunks = []
        total = 0
        while True:
            chunk = os.read(fd, 1 << 20)
            if not chunk:
                break
            total += len(chunk)
            if total > limit:  # grew while being read
                raise OSError(0, f"larger than {limit >> 20} MiB; not read", path)
            chunks.append(chunk)
        return b"".join(chunks)
    finally:
        os.close(fd)


def collect_paths(paths: Iterable[str]) -> list[str]:
    """Expand directories into the C and C++ sources under them (sorted); keep files as given."""
    out: list[str] = []
    for p in paths:
        if os.path.isdir(p):
            found = []
            for root, dirs, files in os.walk(p):
                dirs[:] = sorted(d for d in dirs if not d.startswith("."))
                found.extend(os.path.join(root, f) for f in files if f.endswith(SOURCE_SUFFIXES))
            out.extend(sorted(found))
        else:
            out.append(p)
    return out


def output_clash(output: str, inputs: Iterable[str]) -> str | None:
    """The input that `output` would overwrite (the same file, symlinks and
    hard links included), or None. Directories count by the files under them."""
    try:
        out = os.stat(output)
    except OSError:
        return None  # a new file overwrites nothing
    for p in collect_paths(inputs):
        try:
            st = os.stat(p)
        except OSError:
            continue
        if (st.st_dev, st.st_ino) == (out.st_dev, out.st_ino):
            return p
    return None


def project_root(path: str) -> str | None:
    """The nearest directory at or above `path` holding pyproject.toml or .git
    (found without running git), or None."""
    here = os.path.abspath(path)
    if not os.path.isdir(here):
        here = os.path.dirname(here)
    while True:
        if os.path.exists(os.path.join(here, "pyproject.toml")) or os.path.exists(os.path.join(here, ".git")):
            return here
        parent = os.path.dirname(here)
        if parent == here:
            return None
        here = parent


def cache_in_tree(inputs: Iterable[str]) -> str | None:
    """The analysed tree that holds the cache directory, or None.

    The analysed trees are the directories given and the projects (pyproject.toml
    or .git) of the files given; one that holds the home directory is not a
    source tree (the default cache lives under it)."""
    home = os.path.expanduser("~")
    roots = {p if os.path.isdir(p) else project_root(p) for p in inputs}
    for root in sorted(r for r in roots if r is not None):
        if not is_inside(home, [root]) and is_inside(cache_dir(), [root]):
            return root
    return None


def refusal(output: str | None, inputs: Iterable[str]) -> str | None:
    """Why a command must not run on `inputs` (writing `output`), or None: the
    output would replace an input, or the cache directory lies in the analysed tree."""
    inputs = [p for p in inputs if p != "-"]
    clash = output_clash(output, inputs) if output else None
    if clash is not None:
        return f"-o {output} is the input {clash}; the report would replace it"
    root = cache_in_tree(inputs)
    if root is not None:
        return (f"the cache directory {cache_dir()} is inside the analysed tree {root}; tripcount never "
                "writes into the source tree: set TRIPCOUNT_CACHE_DIR to a directory outside it")
    return None


def decode_source(data: bytes) -> tuple[str, InvalidEncoding | None]:
    """Decode C source bytes as UTF-8; invalid bytes are replaced and reported once."""
    try:
        return data.decode("utf-8"), None
    except UnicodeDecodeError as exc:
        before = data[: exc.start].decode("utf-8", errors="replace")
        line = before.count("\n") + 1
        column = len(before) - (before.rfind("\n") + 1) + 1
        diag = InvalidEncoding(Span.point(line, column), byte=f"0x{data[exc.start]:02x}")
        return data.decode("utf-8", errors="replace"), diag
