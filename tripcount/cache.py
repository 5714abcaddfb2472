# The result cache: analysis results on disk, so that unchanged nests cost
# nothing in the pre-commit hook and the editor.
#
# Two levels of entries, both keyed with the code fingerprint of this
# installation (version plus the sizes and times of its source files) and
# Options.cache_key():
#   * "file": the exact file text -> the whole file JSON (no parsing at all
#     when nothing changed);
#   * "nest": one nest -> its JSON (jsonout.nest_json form), its typed
#     summary (analysis.summary.NestSummary.to_json: what the gate and the
#     language server read) and its diagnostics.
#     The key is a whitespace- and comment-insensitive hash of the tokens of
#     the nest, of the enclosing function's text before it (parameters,
#     declarations, pragmas) and of the file's text outside all functions
#     (macros, globals, typedefs). Positions stored in an entry are remapped
#     on the way out through the token order, since the same tokens may now
#     sit on other lines or columns;
#   * "fn" / "out": diagnostics of the model that lie inside a function but
#     outside its nests, or outside all functions, keyed the same way.
# Locating the nests needs only the front end: islpy and the engine are
# imported only when some entry is missing.
#
# Layout: <dir>/v1/<kind>/<key[:2]>/<key>.json, written through a temporary
# file and os.replace, so concurrent processes (pre-commit runs hooks in
# parallel) never see half an entry. A corrupt entry is a miss. The cache
# directory is $TRIPCOUNT_CACHE_DIR, else $XDG_CACHE_HOME/tripcount, else
# ~/.cache/tripcount: never inside the user's source tree.

from __future__ import annotations

import bisect
import contextlib
import hashlib
import json
import os
import re
import shutil
import tempfile
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from typing import Any, TextIO

from tripcount import __version__
from tripcount.cacheentry import SLICE, valid_entry
from tripcount.compdb import source_inputs
from tripcount.diagnostics import rerendered
from tripcount.options import Options
from tripcount.paths import cache_dir
from tripcount.sources import decode_source, read_bytes

LAYOUT = "v1"
KINDS = ("file", "nest", "fn", "out")
ENV_MAX = "TRIPCOUNT_CACHE_MAX_MB"  # size cap; the least recently used entries go first
DEFAULT_MAX_MB = 512
TOUCH_AFTER_S = 24 * 3600  # a hit refreshes an entry's time at most daily (one utime, not one per read)
POSITION_KEYS = (("line", "column"), ("end_line", "end_column"))


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


# --------------------------------------------------------------------------
# Tokens: the normalized form of C text

_TOKEN_RE = re.compile(
    r"""
    (?P<ws>[ \t\f\v\r]+|\\\n)
  | (?P<nl>\n)
  | (?P<lc>//[^\n]*)
  | (?P<bc>/\*.*?(?:\*/|\Z))
  | (?P<str>"(?:\\.|[^"\\\n])*"?|'(?:\\.|[^'\\\n])*'?)
  | (?P<num>\.?[0-9](?:[eEpP][+-]|[0-9A-Za-z_.])*)
  | (?P<id>[A-Za-z_$][A-Za-z0-9_$]*)
  | (?P<op>\.\.\.|<<=|>>=|->|\+\+|--|<<|>>|<=|>=|==|!=|&&|\|\||[-+*/%&|^]=|\#\#|.)
    """,
    re.VERBOSE | re.DOTALL,
)
EOL = "\n"  # pseudo-token ending a preprocessor directive (the line end matters there)


@dataclass
class Tokens:
    """The tokens of a text: their spellings and start/end offsets (comments and spacing dropped)."""

    text: str
    spell: list[str] = field(default_factory=list)
    start: list[int] = field(default_factory=list)
    end: list[int] = field(default_factory=list)
    line_starts: list[int] = field(default_factory=list)

    def range(self, lo: int, hi: int) -> tuple[int, int]:
        """Indices [i, j) of the tokens lying in text offsets [lo, hi)."""
        i = bisect.bisect_left(self.start, lo)
        j = bisect.bisect_left(self.start, hi)
        return i, j

    def offset(self, line: int, column: int) -> int:
        """Text offset of a 1-based position (clamped to the text)."""
        if line < 1:
            return 0
        if line > len(self.line_starts):
            return len(self.text)
        return min(self.line_starts[line - 1] + max(column, 1) - 1, len(self.text))

    def position(self, offset: int) -> tuple[int, int]:
        """1-based (line, column) of a text offset."""
        k = bisect.bisect_right(self.line_starts, offset) - 1
        return k + 1, offset - self.line_starts[k] + 1


def tokenize(text: str) -> Tokens:
    """Split C text into tokens; directives end with an EOL pseudo-token."""
    toks = Tokens(text)
    starts = [0]
    for m in re.finditer("\n", text):
        starts.append(m.end())
    toks.line_starts = starts
    in_directive = False
    line_has_token = False
    spell, start, end = toks.spell, toks.start, toks.end
    for m in _TOKEN_RE.finditer(text):
        kind = m.lastgroup
        if kind == "ws" or kind == "lc":
            continue
        if kind == "bc":
            if "\n" in m.group() and in_directive:
                pass  # a comment spanning lines does not end the directive
            continue
        if kind == "nl":
            if in_directive:
                spell.append(EOL)
                start.append(m.start())
                end.append(m.start())
                in_directive = False
            line_has_token = False
            continue
        s = m.group()
        if s == "#" and not line_has_token:
            in_directive = True
        line_has_token = True
        spell.append(s)
        start.append(m.start())
        end.append(m.end())
    if in_directive:
        spell.append(EOL)
        start.append(len(text))
        end.append(len(text))
    return toks


def _digest(parts: Iterable[str]) -> str:
    h = hashlib.sha256()
    for p in parts:
        h.update(p.encode("utf-8", "surrogatepass"))
        h.update(b"\x1f")
    return h.hexdigest()[:40]


# --------------------------------------------------------------------------
# Locating nests with the front end only


@dataclass
class Site:
    """One outermost `for` of a file as the front end sees it, with its cache key."""

    function: str
    lo: int  # text offset of the region start (the function's start, or the loop's when outside one)
    start: int  # offset of the `for`
    stop: int  # offset one past the loop's end
    line: int
    column: int
    key: str = ""
    anchors: list[int] = field(default_factory=list)  # token indices of the region, then of the outside text


@dataclass
class Layout:
    """Where the nests and functions of one text are, and the keys of their entries."""

    tokens: Tokens
    sites: list[Site]
    functions: list[tuple[str, int, int, str]]  # (name, start offset, stop offset, key of its "fn" entry)
    outside: list[int]  # token indices outside all functions
    outside_key: str
    parse_diagnostics: list[dict[str, Any]]
    unit: Any = None  # the front end's TranslationUnit, reused when something must be computed


def _outermost_fors(node: Any) -> Iterator[Any]:
    """The `for` statements under `node` not nested in another `for`."""
    from tripcount import ir

    stack = [node]
    while stack:
        n = stack.pop()
        if isinstance(n, ir.For):
            yield n
            continue
        kids = ir.children(n) if isinstance(n, ir.Node) else []
        stack.extend(reversed(kids))


def locate(text: str, path: str, options: Options,
           inputs: tuple[Any, str, str | None, str | None] | None = None) -> Layout:
    """Parse `text` with the front end and compute the cache keys of its nests.

    The keys include the build flags and the bytes of every header the file
    may read (compdb.source_inputs, passed as `inputs` when already computed),
    so a changed header is a miss.
    """
    from tripcount.diagnostics.source import BuildFlagsUnreadable
    from tripcount.frontend import parse_text
    from tripcount.ir import Span

    includes, inputs_key, problem, lang = inputs or source_inputs(path, text, options)
    unit, diags = parse_text(text, path=path, snippet=False, includes=includes, lang=lang)
    if problem is not None:
        diags = [BuildFlagsUnreadable(Span.point(1, 1), reason=problem), *diags]
    toks = tokenize(text)
    opt_key = options.cache_key() + inputs_key
    fp = code_fingerprint()
    by_position = bool(options.parallel_lines)  # --parallel LINE ties results to absolute lines

    funcs = []
    for fn in unit.functions:
        a = toks.offset(fn.span.line, fn.span.column)
        b = toks.offset(fn.span.end_line, fn.span.end_column)
        funcs.append((fn, a, b))
    inside = [False] * len(toks.spell)
    for _fn, a, b in funcs:
        i, j = toks.range(a, b)
        for k in range(i, j):
            inside[k] = True
    outside = [k for k in range(len(toks.spell)) if not inside[k]]
    outside_spell = [toks.spell[k] for k in outside]
    outside_key = _digest(["out", fp, opt_key, *outside_spell])

    sites: list[Site] = []
    functions: list[tuple[str, int, int, str]] = []
    for fn, a, b in funcs:
        i, j = toks.range(a, b)
        functions.append((fn.name, a, b, _digest(["fn", fp, opt_key, outside_key, *toks.spell[i:j]])))
        for loop in _outermost_fors(fn.body):
            start = toks.offset(loop.span.line, loop.span.column)
            stop = toks.offset(loop.span.end_line, loop.span.end_column)
            sites.append(Site(fn.name, a, start, stop, loop.span.line, loop.span.column))
    for s in sites:
        i, j = toks.range(s.lo, s.stop)
        parts = ["nest", fp, opt_key, outside_key, s.function, *toks.spell[i:j]]
        if by_position:
            parts += ["@", str(s.line), *(str(toks.position(toks.start[k])[0]) for k in range(i, j))]
        s.key = _digest(parts)
        s.anchors = list(range(i, j))
    parse_diags = [d.to_dict() for d in diags]
    return Layout(toks, sites, functions, outside, outside_key, parse_diags, unit)


# --------------------------------------------------------------------------
# Positions in entries: stored as they were, remapped through token order


def _anchor_positions(toks: Tokens, anchors: list[int]) -> list[int]:
    """Flat [line, column, ...] of the given tokens' starts (what an entry stores)."""
    out: list[int] = []
    for k in anchors:
        line, col = toks.position(toks.start[k])
        out += [line, col]
    return out


class _Remap:
    """Maps positions of an old text to the new one, token by token.

    Both texts have the same token sequence over the regions of an entry
    (that is what equal keys mean). A position inside token k, at offset d
    into it, moves to token k of the new text at the same offset; a position
    between tokens snaps to the end of the token before it.
    """

    def __init__(self, old: list[int], toks: Tokens, anchors: list[int]) -> None:
        self.old = [(old[2 * i], old[2 * i + 1]) for i in range(len(old) // 2)]
        self.toks = toks
        self.anchors = anchors
        self.identity = self.old == [toks.position(toks.start[k]) for k in anchors]
        # lengths come from the new text; the spellings are identical
        self.lengths = [toks.end[k] - toks.start[k] for k in anchors]
        self.order = sorted(range(len(self.old)), key=lambda i: self.old[i])
        self.sorted_old = [self.old[i] for i in self.order]

    def __call__(self, line: int, column: int) -> tuple[int, int]:
        if self.identity or not self.old:
            return line, column
        p = bisect.bisect_right(self.sorted_old, (line, column)) - 1
        if p < 0:
            i, delta = self.order[0], 0
        else:
            i = self.order[p]
            ol, oc = self.sorted_old[p]
            delta = column - oc if line == ol else self.lengths[i]
            delta = min(max(delta, 0), self.lengths[i])
        nl, nc = self.toks.position(self.toks.start[self.anchors[i]])
        return nl, nc + delta

    def line(self, line: int) -> int:
        """Where old line `line` went: the line of the first token that started on it."""
        if self.identity or not self.old:
            return line
        p = bisect.bisect_left(self.sorted_old, (line, 0))
        if p < len(self.sorted_old) and self.sorted_old[p][0] == line:
            return self.toks.position(self.toks.start[self.anchors[self.order[p]]])[0]
        return self(line, 1)[0]


# Messages and notes mention positions as text ("at 63:13", "(line 59)").
_POS_TEXT = re.compile(r"(?<![\w.:])(\d+):(\d+)(?![\w.]|:\d)")
_LINE_TEXT = re.compile(r"\b(line )(\d+)\b")


def _remap_text(s: str, remap: _Remap) -> str:
    if not any(ch.isdigit() for ch in s):
        return s
    def pos(m: re.Match[str]) -> str:
        line, col = remap(int(m.group(1)), int(m.group(2)))
        return f"{line}:{col}"

    s = _POS_TEXT.sub(pos, s)
    return _LINE_TEXT.sub(lambda m: m.group(1) + str(remap.line(int(m.group(2)))), s)


def _remap_json(data: Any, remap: _Remap) -> Any:
    """A copy of `data` with every position (fields and mentions in text) passed through `remap`."""
    if remap.identity:
        return data
    if isinstance(data, str):
        return _remap_text(data, remap)
    if isinstance(data, list):
        return [_remap_json(x, remap) for x in data]
    if not isinstance(data, dict):
        return data
    out = {k: _remap_json(v, remap) for k, v in data.items()}
    for lk, ck in POSITION_KEYS:
        if _is_int(out.get(lk)) and _is_int(out.get(ck)):
            out[lk], out[ck] = remap(out[lk], out[ck])
        elif _is_int(out.get(lk)) and ck not in out:
            out[lk] = remap.line(out[lk])
    return out


def _remap_diags(diags: list[dict[str, Any]], remap: _Remap) -> list[dict[str, Any]]:
    """Stored diagnostics with their positions (also those among their arguments)
    moved, and their messages rendered again from the moved arguments."""
    if remap.identity:
        return diags
    return [rerendered(d) for d in _remap_json(diags, remap)]


def _slices_out(nest: dict[str, Any], toks: Tokens) -> dict[str, Any]:
    """The nest JSON with statement texts replaced by the source range they were cut from.

    A statement's text is the source as written, spacing included; the key
    ignores spacing, so the text is cut again from the current file on the
    way out of the cache (the range is remapped like any position).
    """
    stmts = []
    for st in nest.get("statements", []):
        t = st.get("text")
        if isinstance(t, str) and _is_int(st.get("line")) and _is_int(st.get("column")):
            a = toks.offset(st["line"], st["column"])
            if toks.text[a:a + len(t)] == t:
                el, ec = toks.position(a + len(t))
                st = {**st, "text": {SLICE: 1, "line": st["line"], "column": st["column"],
                                     "end_line": el, "end_column": ec}}
        stmts.append(st)
    return {**nest, "statements": stmts}


def _slices_in(nest: dict[str, Any], toks: Tokens) -> dict[str, Any]:
    """Inverse of _slices_out on the current text."""
    stmts = []
    for st in nest.get("statements", []):
        t = st.get("text")
        if isinstance(t, dict) and t.get(SLICE):
            a = toks.offset(t["line"], t["column"])
            b = toks.offset(t["end_line"], t["end_column"])
            st = {**st, "text": toks.text[a:b]}
        stmts.append(st)
    return {**nest, "statements": stmts}


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _positions(data: Any) -> Iterator[tuple[int, int]]:
    """Every position in JSON data: line/column fields and positions mentioned in text."""
    if isinstance(data, str):
        for m in _POS_TEXT.finditer(data):
            yield int(m.group(1)), int(m.group(2))
        for m in _LINE_TEXT.finditer(data):
            yield int(m.group(2)), 1
    elif isinstance(data, list):
        for x in data:
            yield from _positions(x)
    elif isinstance(data, dict):
        for lk, ck in POSITION_KEYS:
            if _is_int(data.get(lk)):
                yield data[lk], data.get(ck, 1) if _is_int(data.get(ck)) else 1
        for v in data.values():
            if isinstance(v, (list, dict, str)):
                yield from _positions(v)


def _entry_anchors(toks: Tokens, region: list[int], outside: list[int], lo: int, hi: int,
                   payload: Any) -> dict[str, Any]:
    """Anchor fields of an entry: the region's tokens, plus the outside text's when needed.

    Most entries only point inside their own region; storing the outside
    tokens for every nest of a file with large global tables would bloat them.
    """
    wide = any(not (lo <= toks.offset(line, col) <= hi) for line, col in _positions(payload))
    anchors = region + outside if wide else region
    return {"anchors": _anchor_positions(toks, anchors), "wide": wide}


def _entry_remap(entry: dict[str, Any], toks: Tokens, region: list[int], outside: list[int]) -> _Remap | None:
    """The position map of an entry, or None when its anchors do not fit the
    tokens it is keyed by (a damaged entry: a miss)."""
    anchors = region + outside if entry.get("wide") else region
    old = entry.get("anchors", [])
    if old and len(old) != 2 * len(anchors):
        return None
    return _Remap(old, toks, anchors)


def _span_of(d: dict[str, Any], toks: Tokens) -> tuple[int, int]:
    return toks.offset(int(d.get("line", 1)), int(d.get("column", 1))), toks.offset(
        int(d.get("end_line", d.get("line", 1))), int(d.get("end_column", d.get("column", 1))))


# --------------------------------------------------------------------------
# The cached analysis


def _sort_diags(diags: list[dict[str, Any]]) -> list[dict[str, Any]]:
    return sorted(diags, key=lambda d: (d.get("line", 0), d.get("column", 0), d.get("code", "")))


def _file_key(text: str, options: Options, inputs_key: str) -> str:
    return _digest(["file", code_fingerprint(), options.cache_key(), inputs_key, text])


def analyze_file_uncached(path: str, text: str, options: Options) -> dict[str, Any]:
    """The file JSON straight from the pipeline (no cache), with the nests' summaries."""
    from tripcount.pipeline import analyze_text

    fr = analyze_text(text, path, options)
    payloads = [nest_payload(nr, options) for nr in fr.nests]
    return {"path": fr.path, "nests": [p[0] for p in payloads], "summaries": [p[1] for p in payloads],
            "diagnostics": [d.to_dict() for d in fr.all_diagnostics()]}


def analyze_path_cached(path: str, options: Options, use_cache: bool = True) -> dict[str, Any]:
    """The file JSON (jsonout.file_json form) of the file at `path`, from the cache where possible.

    An unreadable file gives the pipeline's file-level diagnostic; invalid
    UTF-8 is reported first, as the pipeline does.
    """
    try:
        text, bad = read_source(path)
    except (OSError, ValueError):
        from tripcount.pipeline import analyze_file
        from tripcount.report.jsonout import file_json

        return file_json(analyze_file(path, options))
    out = analyze_file_cached(path, text, options, use_cache=use_cache)
    out = {k: v for k, v in out.items() if k != "summaries"}
    if bad is not None:
        out["diagnostics"] = _sort_diags([bad, *out["diagnostics"]])
    return out


def nest_payload(nr: Any, options: Options) -> tuple[dict[str, Any], dict[str, Any]]:
    """A nest result's report JSON and typed summary JSON (formulas printed alike in both)."""
    from tripcount.engine.readable import plain_forms
    from tripcount.report.jsonout import nest_json

    if options.gate:  # the gate prints formulas without the search for their most readable form
        with plain_forms():
            return nest_json(nr), nr.summary().to_json()
    return nest_json(nr), nr.summary().to_json()


def analyze_file_cached(path: str, text: str, options: Options, use_cache: bool = True,
                        store: Store | None = None) -> dict[str, Any]:
    """The file JSON (jsonout.file_json form) of `text`, from the cache where possible.

    Only nests whose entries are missing are analyzed (this imports islpy
    and the engine); the rest is assembled from the cache with positions
    moved to where the same tokens now are.
    """
    if text.startswith("\ufeff"):
        text = text[1:]  # the front end drops a byte-order mark too; columns must agree
    if not use_cache:
        return analyze_file_uncached(path, text, options)
    store = store or Store()
    if not store.enabled:
        return analyze_file_uncached(path, text, options)
    inputs = source_inputs(path, text, options)  # flags and header bytes: read once per file
    fkey = _file_key(text, options, inputs[1])
    hit = store.get("file", fkey)
    if hit is not None and isinstance(hit.get("file"), dict):
        return {"path": path, **{k: v for k, v in hit["file"].items() if k != "path"}}
    layout = locate(text, path, options, inputs)
    result = _assemble(layout, store)
    if result is None:
        result = _compute(layout, path, text, options, store)
        _prune_once(store)
    out = {"path": path, "nests": result[0], "summaries": result[1], "diagnostics": _sort_diags(result[2])}
    if result[3]:  # every part is cacheable
        store.put("file", fkey, {"file": {"nests": out["nests"], "summaries": out["summaries"],
                                          "diagnostics": out["diagnostics"]}})
    return out


_PRUNED = False


def _prune_once(store: Store) -> None:
    """Keep the cache under its cap; checked after computing (already slow), once per process."""
    global _PRUNED
    if not _PRUNED:
        _PRUNED = True
        store.prune()


def _usable_nest_entry(e: dict[str, Any] | None) -> bool:
    """An entry with a nest has both its renderings (report JSON and typed summary); else it is a miss."""
    if e is None:
        return False
    if e.get("nest") is None:
        return True  # a loop the model made no nest of
    return isinstance(e.get("nest"), dict) and isinstance(e.get("summary"), dict)


def _assemble(layout: Layout, store: Store) -> tuple[list, list, list, bool] | None:
    """The file's nests and diagnostics from cache entries alone, or None on any miss."""
    toks = layout.tokens
    entries = []
    for s in layout.sites:
        e = store.get("nest", s.key)
        if not _usable_nest_entry(e):
            return None
        entries.append((s, e))
    fn_entries = []
    for _name, a, b, key in layout.functions:
        e = store.get("fn", key)
        if e is None:
            return None
        fn_entries.append((a, b, e))
    out_entry = store.get("out", layout.outside_key)
    if out_entry is None:
        return None
    remaps = [_entry_remap(e, toks, s.anchors, layout.outside) for s, e in entries]
    fn_remaps = [_entry_remap(e, toks, list(range(*toks.range(a, b))), layout.outside) for a, b, e in fn_entries]
    out_remap = _entry_remap(out_entry, toks, layout.outside, [])
    if out_remap is None or None in remaps or None in fn_remaps:
        return None
    nests: list[dict[str, Any]] = []
    summaries: list[dict[str, Any]] = []
    diags: list[dict[str, Any]] = list(layout.parse_diagnostics)
    for (_s, e), remap in zip(entries, remaps, strict=True):
        if e.get("nest") is not None:
            nests.append(_slices_in(_remap_json(e["nest"], remap), toks))
            summaries.append(_slices_in(_remap_json(e["summary"], remap), toks))
        diags.extend(_remap_diags(e.get("diagnostics", []), remap))
    for (_a, _b, e), remap in zip(fn_entries, fn_remaps, strict=True):
        diags.extend(_remap_diags(e.get("diagnostics", []), remap))
    diags.extend(_remap_diags(out_entry.get("diagnostics", []), out_remap))
    return nests, summaries, diags, True


_Payload = tuple[dict[str, Any], dict[str, Any], list[dict[str, Any]]]  # nest JSON, summary JSON, diagnostics


class _Render:
    """What the driver's workers send back for one nest: its payload (picklable JSON, no isl objects)."""

    def __init__(self, options: Options) -> None:
        self.options = options

    def __call__(self, nr: Any) -> _Payload:
        return (*nest_payload(nr, self.options), [d.to_dict() for d in nr.diagnostics])


def _depends_on_time(diag: dict[str, Any]) -> bool:
    """A result not worth keeping: an internal error, or one cut short by a time
    limit or budget (a less busy machine, or the next run, may do better)."""
    code = diag.get("code", "")
    if code.startswith("TC9") or code in ("TC310", "TC311"):
        return True
    args = diag.get("args")
    return isinstance(args, dict) and args.get("time_bound") is True


def _compute(layout: Layout, path: str, text: str, options: Options,
             store: Store) -> tuple[list, list, list, bool]:
    """Analyze what the cache lacks; write the new entries."""
    from tripcount.model import build_nests

    toks = layout.tokens
    nests, model_diags = build_nests(layout.unit, assume=options.assume, path=path)
    by_pos = {(s.line, s.column): s for s in layout.sites}
    cacheable = True
    nest_out: list[dict[str, Any]] = []
    summary_out: list[dict[str, Any]] = []
    diags: list[dict[str, Any]] = list(layout.parse_diagnostics)
    per_site: set[str] = set()
    found: list[tuple[Site | None, dict[str, Any] | None, dict[str, Any] | None, list[dict[str, Any]]] | None] = []
    todo: list[int] = []
    for k, nest in enumerate(nests):
        site = by_pos.get((nest.span.line, nest.span.column))
        cached = store.get("nest", site.key) if site is not None else None
        remap = _entry_remap(cached, toks, site.anchors, layout.outside) if _usable_nest_entry(cached) else None
        if remap is None:
            found.append(None)
            todo.append(k)
            continue
        nj = sj = None
        if cached.get("nest") is not None:
            nj = _slices_in(_remap_json(cached["nest"], remap), toks)
            sj = _slices_in(_remap_json(cached["summary"], remap), toks)
        found.append((site, nj, sj, _remap_diags(cached.get("diagnostics", []), remap)))
    from tripcount.pipeline import run_nests

    for k, (nj, sj, nd) in run_nests(nests, todo, options, _Render(options)).items():
        site = by_pos.get((nests[k].span.line, nests[k].span.column))
        found[k] = (site, nj, sj, nd)
        if site is None:
            cacheable = False  # a nest the front end did not show us: no key to store it under
        elif not any(_depends_on_time(d) for d in nd):
            store.put("nest", site.key, {
                "nest": _slices_out(nj, toks), "summary": _slices_out(sj, toks), "diagnostics": nd,
                **_entry_anchors(toks, site.anchors, layout.outside, site.lo, site.stop, [nj, sj, nd])})
        else:
            cacheable = False
    for entry in found:
        assert entry is not None
        site, nj, sj, nd = entry
        if nj is not None and sj is not None:
            nest_out.append(nj)
            summary_out.append(sj)
        diags.extend(nd)
        if site is not None:
            per_site.add(site.key)
    # Loops the model made no nest of still get an entry, so that the warm path sees no miss.
    for s in layout.sites:
        if s.key not in per_site and store.get("nest", s.key) is None:
            store.put("nest", s.key, {"nest": None, "diagnostics": [], "anchors": [], "wide": False})
    # The model's own diagnostics: inside a nest, a function, or outside all functions.
    md = [d.to_dict() for d in model_diags]
    fn_diags: dict[int, list[dict[str, Any]]] = {k: [] for k in range(len(layout.functions))}
    out_diags: list[dict[str, Any]] = []
    for d in md:
        a, _b = _span_of(d, toks)
        owner = None
        for k, (_name, fa, fb, _key) in enumerate(layout.functions):
            if fa <= a < fb:
                owner = k
                break
        if owner is None:
            out_diags.append(d)
        else:
            fn_diags[owner].append(d)
    diags.extend(md)
    for k, (_name, fa, fb, key) in enumerate(layout.functions):
        i, j = toks.range(fa, fb)
        store.put("fn", key, {"diagnostics": fn_diags[k],
                              **_entry_anchors(toks, list(range(i, j)), layout.outside, fa, fb, fn_diags[k])})
    store.put("out", layout.outside_key, {"diagnostics": out_diags,
                                          "anchors": _anchor_positions(toks, layout.outside)})
    return nest_out, summary_out, diags, cacheable


# --------------------------------------------------------------------------
# Reading sources without the pipeline (which imports the engine)


def read_source(path: str) -> tuple[str, dict[str, Any] | None]:
    """Read a C file as UTF-8; invalid bytes are replaced and reported (diagnostic dict).

    Raises OSError when the file cannot be read.
    """
    data = read_bytes(path)
    text, diag = decode_source(data)
    return text, None if diag is None else diag.to_dict()
