# The result cache's store: analysis results on disk, so that unchanged nests
# cost nothing in the pre-commit hook and the editor.
#
# Entries are JSON objects of four kinds (see cachekeys.py for their keys and
# cached.py for how the driver reads and writes them):
#   * "file": the exact file text -> the whole file JSON (no parsing at all
#     when nothing changed);
#   * "nest": one nest -> its JSON (jsonout.nest_json form), its typed
#     summary (analysis.summary.NestSummary.to_json: what the gate and the
#     language server read) and its diagnostics;
#   * "fn" / "out": diagnostics of the model that lie inside a function but
#     outside its nests, or outside all functions;
#   * "text": a file's path and exact text -> its part of the text report
#     (report.text.RenderedFile), for `analyze` in the terminal.
# Every key includes the code fingerprint of this installation (version plus
# the sizes and times of its source files) and Options.cache_key().
#
# Layout: <dir>/v1/<kind>/<key[:2]>/<key>.json, written through a temporary
# file and os.replace, so concurrent processes (pre-commit runs hooks in
# parallel) never see half an entry. A corrupt entry is a miss (cacheentry.py
# checks the shape of every entry). The cache directory is
# $TRIPCOUNT_CACHE_DIR, else $XDG_CACHE_HOME/tripcount, else
# ~/.cache/tripcount: never inside the user's source tree.

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import shutil
import tempfile
from typing import Any, TextIO

from tripcount import __version__
from tripcount.cacheentry import valid_entry
from tripcount.paths import cache_dir

LAYOUT = "v1"
KINDS = ("file", "nest", "fn", "out", "text")
ENV_MAX = "TRIPCOUNT_CACHE_MAX_MB"  # size cap; the least recently used entries go first
DEFAULT_MAX_MB = 512
TOUCH_AFTER_S = 24 * 3600  # a hit refreshes an entry's time at most daily (one utime, not one per read)


# --------------------------------------------------------------------------
# Where the cache lives


_FINGERPRINT: str | None = None
# Modules that cannot change an analysis result for given Options (they only
# read results or build the Options), left out so that editing them keeps the cache.
_NOT_IN_FINGERPRINT = {"lsp.py", "cli.py", "__main__.py", os.path.join("report", "sarif.py"),
                       os.path.join("report", "schema.py"), os.path.join("report", "schema.json")}


def code_fingerprint() -> str:
    """Version plus a hash of this installation's source files (size and mtime).

    A development checkout keeps the version number while its code changes;
    results of older code must not be served, so the files themselves count.
    """
    global _FINGERPRINT
    if _FINGERPRINT is not None:
        return _FINGERPRINT
    import tripcount

    roots = list(tripcount.__path__)
    try:
        import importlib.util

        spec = importlib.util.find_spec("tripcount.grammar")
        if spec is not None and spec.submodule_search_locations:
            roots.extend(spec.submodule_search_locations)
    except (ImportError, ValueError):
        pass
    checkout_grammar = os.path.join(os.path.dirname(roots[0]), "grammar")  # a source checkout keeps it beside
    if os.path.isfile(os.path.join(checkout_grammar, "loops.lark")):
        roots.append(checkout_grammar)
    h = hashlib.sha256(__version__.encode())
    for root in sorted(set(roots)):
        for dirpath, dirs, files in os.walk(root):
            dirs[:] = sorted(d for d in dirs if d != "__pycache__")
            for name in sorted(files):
                if name.endswith((".py", ".lark", ".json")):
                    rel = os.path.relpath(os.path.join(dirpath, name), root)
                    if rel in _NOT_IN_FINGERPRINT or rel.startswith("gate" + os.sep):
                        continue
                    try:
                        st = os.stat(os.path.join(dirpath, name))
                    except OSError:
                        continue
                    h.update(f"{rel}:{st.st_size}:{st.st_mtime_ns};".encode())
    _FINGERPRINT = f"{__version__}-{h.hexdigest()[:16]}"
    return _FINGERPRINT


# --------------------------------------------------------------------------
# The store


class Store:
    """Entries on disk; every failure to read or write is a miss, never an error."""

    def __init__(self, root: str | None = None, enabled: bool = True) -> None:
        self.root = os.path.join(root or cache_dir(), LAYOUT)
        self.enabled = enabled
        self.hits = 0
        self.misses = 0
        self.writes = 0

    def _path(self, kind: str, key: str) -> str:
        return os.path.join(self.root, kind, key[:2], key + ".json")

    def get(self, kind: str, key: str) -> dict[str, Any] | None:
        """The entry, or None when absent or unreadable."""
        if not self.enabled:
            return None
        try:
            with open(self._path(kind, key), encoding="utf-8") as f:
                data = json.load(f)
        except (OSError, ValueError, RecursionError):  # RecursionError: hostile nesting depth
            self.misses += 1
            return None
        if not isinstance(data, dict) or data.get("key") != key or not valid_entry(kind, data):
            self.misses += 1
            return None
        self.hits += 1
        self._touch(self._path(kind, key))
        return data

    @staticmethod
    def _touch(path: str) -> None:
        try:
            if os.stat(path).st_mtime < _now() - TOUCH_AFTER_S:
                os.utime(path)
        except OSError:
            pass

    def prune(self, max_bytes: int | None = None) -> int:
        """Remove the least recently used entries while the cache exceeds its cap; returns how many.

        Entries of older versions of the tool are never hit again and so age
        out first. The cap is $TRIPCOUNT_CACHE_MAX_MB (default 512 MiB).
        """
        if max_bytes is None:
            try:
                max_bytes = int(float(os.environ.get(ENV_MAX, DEFAULT_MAX_MB)) * 1024 * 1024)
            except ValueError:
                max_bytes = DEFAULT_MAX_MB * 1024 * 1024
        entries = []
        total = 0
        for dirpath, _dirs, files in os.walk(self.root):
            for name in files:
                if not name.endswith(".json"):
                    continue
                p = os.path.join(dirpath, name)
                try:
                    st = os.stat(p)
                except OSError:
                    continue
                if name.startswith(".tmp-") and st.st_mtime > _now() - 3600:
                    continue  # another process is writing it
                entries.append((st.st_mtime, st.st_size, p))
                total += st.st_size
        removed = 0
        if total <= max_bytes:
            return 0
        for _mtime, size, p in sorted(entries):
            if total <= max_bytes * 0.8:  # some headroom, so that pruning is rare
                break
            try:
                os.unlink(p)
                total -= size
                removed += 1
            except OSError:
                pass
        return removed

    def put(self, kind: str, key: str, data: dict[str, Any]) -> None:
        """Write an entry atomically (temporary file in the same directory, then os.replace)."""
        if not self.enabled:
            return
        path = self._path(kind, key)
        try:
            os.makedirs(os.path.dirname(path), exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".json", dir=os.path.dirname(path))
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as f:
                    json.dump({**data, "key": key}, f, separators=(",", ":"))
                os.replace(tmp, path)
                self.writes += 1
            except BaseException:
                try:
                    os.unlink(tmp)
                except OSError:
                    pass
                raise
        except OSError:  # read-only home, full disk: run uncached
            pass

    def stats(self) -> dict[str, tuple[int, int]]:
        """Entries and bytes per kind."""
        out: dict[str, tuple[int, int]] = {}
        for kind in KINDS:
            n = size = 0
            for dirpath, _dirs, files in os.walk(os.path.join(self.root, kind)):
                for name in files:
                    if name.endswith(".json") and not name.startswith(".tmp-"):
                        n += 1
                        try:
                            size += os.path.getsize(os.path.join(dirpath, name))
                        except OSError:
                            pass
            out[kind] = (n, size)
        return out

    def clear(self) -> int:
        """Remove every entry (only our layout directory) and the compiled grammar
        beside it; returns the number of entries removed."""
        n = sum(c for c, _ in self.stats().values())
        shutil.rmtree(self.root, ignore_errors=True)
        parent = os.path.dirname(self.root)
        try:
            names = os.listdir(parent)
        except OSError:
            names = []
        for name in names:
            if name.startswith("grammar-") and name.endswith((".json", ".lark", ".tmp")):
                with contextlib.suppress(OSError):
                    os.remove(os.path.join(parent, name))
        return n


def _now() -> float:
    import time

    return time.time()


def run_cache_command(action: str, stdout: TextIO) -> int:
    """`tripcount cache clear|info`."""
    store = Store()
    if action == "clear":
        n = store.clear()
        stdout.write(f"removed {n} cache entr{'y' if n == 1 else 'ies'} from {store.root}\n")
        return 0
    stats = store.stats()
    total_n = sum(n for n, _ in stats.values())
    total_b = sum(b for _, b in stats.values())
    stdout.write(f"cache directory: {store.root}\n")
    stdout.write(f"code fingerprint: {code_fingerprint()}\n")
    for kind in KINDS:
        n, b = stats[kind]
        stdout.write(f"  {kind:5s} {n:6d} entries {b / 1024:10.1f} KiB\n")
    stdout.write(f"  total {total_n:6d} entries {total_b / 1024:10.1f} KiB\n")
    return 0

