# Reading sources, shared by the pipeline and the paths that must stay light
# (the cached check, the language server): which files are C sources, and
# decoding their bytes. Imports nothing beyond the diagnostics.

from __future__ import annotations

import os
from collections.abc import Iterable

from tripcount.diagnostics import InvalidEncoding
from tripcount.ir import Span

SOURCE_SUFFIXES = (".c", ".h")


def collect_paths(paths: Iterable[str]) -> list[str]:
    """Expand directories into the C sources under them (sorted); keep files as given."""
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
