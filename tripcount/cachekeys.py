# Keys of the result cache and positions in its entries.
#
# A nest's key is a whitespace- and comment-insensitive hash of the tokens of
# the nest, of the enclosing function's text before it (parameters,
# declarations, pragmas) and of the file's text outside all functions
# (macros, globals, typedefs), with the code fingerprint, the options and the
# build inputs (flags and header bytes). Positions stored in an entry are
# remapped on the way out through the token order, since the same tokens may
# now sit on other lines or columns. `layout` computes the keys of a text from
# the front end's parse tree (the driver parses; nothing here does), and
# `assemble` builds a file's results from entries alone.

from __future__ import annotations

import bisect
import hashlib
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from typing import Any

from tripcount.cache import Store, code_fingerprint
from tripcount.cacheentry import SLICE
from tripcount.diagnostics import rerendered
from tripcount.options import Options

POSITION_KEYS = (("line", "column"), ("end_line", "end_column"))

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


def layout_of(text: str, unit: Any, diags: list[Any], options: Options, inputs_key: str) -> Layout:
    """The nests and functions of `text` (parsed by the front end into `unit`, with its
    diagnostics `diags`) and the cache keys of their entries.

    `inputs_key` stands for the build flags and the bytes of every header the
    file may read (compdb.source_inputs), so a changed header is a miss.
    """
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


def anchor_positions(toks: Tokens, anchors: list[int]) -> list[int]:
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


def remap_json(data: Any, remap: _Remap) -> Any:
    """A copy of `data` with every position (fields and mentions in text) passed through `remap`."""
    if remap.identity:
        return data
    if isinstance(data, str):
        return _remap_text(data, remap)
    if isinstance(data, list):
        return [remap_json(x, remap) for x in data]
    if not isinstance(data, dict):
        return data
    out = {k: remap_json(v, remap) for k, v in data.items()}
    for lk, ck in POSITION_KEYS:
        if _is_int(out.get(lk)) and _is_int(out.get(ck)):
            out[lk], out[ck] = remap(out[lk], out[ck])
        elif _is_int(out.get(lk)) and ck not in out:
            out[lk] = remap.line(out[lk])
    return out


def slices_out(nest: dict[str, Any], toks: Tokens) -> dict[str, Any]:
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


def slices_in(nest: dict[str, Any], toks: Tokens) -> dict[str, Any]:
    """Inverse of slices_out on the current text."""
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


def entry_anchors(toks: Tokens, region: list[int], outside: list[int], lo: int, hi: int,
                   payload: Any) -> dict[str, Any]:
    """Anchor fields of an entry: the region's tokens, plus the outside text's when needed.

    Most entries only point inside their own region; storing the outside
    tokens for every nest of a file with large global tables would bloat them.
    """
    wide = any(not (lo <= toks.offset(line, col) <= hi) for line, col in _positions(payload))
    anchors = region + outside if wide else region
    return {"anchors": anchor_positions(toks, anchors), "wide": wide}


def entry_remap(entry: dict[str, Any], toks: Tokens, region: list[int], outside: list[int]) -> _Remap | None:
    """The position map of an entry, or None when its anchors do not fit the
    tokens it is keyed by (a damaged entry: a miss)."""
    anchors = region + outside if entry.get("wide") else region
    old = entry.get("anchors", [])
    if old and len(old) != 2 * len(anchors):
        return None
    return _Remap(old, toks, anchors)


def span_of(d: dict[str, Any], toks: Tokens) -> tuple[int, int]:
    return toks.offset(int(d.get("line", 1)), int(d.get("column", 1))), toks.offset(
        int(d.get("end_line", d.get("line", 1))), int(d.get("end_column", d.get("column", 1))))



# --------------------------------------------------------------------------
# Files from entries


def sort_diags(diags: list[dict[str, Any]]) -> list[dict[str, Any]]:
    return sorted(diags, key=lambda d: (d.get("line", 0), d.get("column", 0), d.get("code", "")))


def file_key(text: str, options: Options, inputs_key: str) -> str:
    """The key of a whole file's JSON: its exact text, build inputs and options."""
    return _digest(["file", code_fingerprint(), options.cache_key(), inputs_key, text])


def text_key(path: str, text: str, options: Options, inputs_key: str) -> str:
    """The key of a file's text report: as file_key, plus the path (every line of the report names it)."""
    return _digest(["text", code_fingerprint(), options.cache_key(), inputs_key, path, text])



def usable_nest_entry(e: dict[str, Any] | None) -> bool:
    """An entry with a nest has both its renderings (report JSON and typed summary); else it is a miss."""
    if e is None:
        return False
    if e.get("nest") is None:
        return True  # a loop the model made no nest of
    return isinstance(e.get("nest"), dict) and isinstance(e.get("summary"), dict)


def assemble(layout: Layout, store: Store) -> tuple[list, list, list, bool] | None:
    """The file's nests and diagnostics from cache entries alone, or None on any miss."""
    toks = layout.tokens
    entries = []
    for s in layout.sites:
        e = store.get("nest", s.key)
        if not usable_nest_entry(e):
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
    remaps = [entry_remap(e, toks, s.anchors, layout.outside) for s, e in entries]
    fn_remaps = [entry_remap(e, toks, list(range(*toks.range(a, b))), layout.outside) for a, b, e in fn_entries]
    out_remap = entry_remap(out_entry, toks, layout.outside, [])
    if out_remap is None or None in remaps or None in fn_remaps:
        return None
    nests: list[dict[str, Any]] = []
    summaries: list[dict[str, Any]] = []
    diags: list[dict[str, Any]] = list(layout.parse_diagnostics)
    for (_s, e), remap in zip(entries, remaps, strict=True):
        if e.get("nest") is not None:
            nests.append(slices_in(remap_json(e["nest"], remap), toks))
            summaries.append(slices_in(remap_json(e["summary"], remap), toks))
        diags.extend(remap_diags(e.get("diagnostics", []), remap))
    for (_a, _b, e), remap in zip(fn_entries, fn_remaps, strict=True):
        diags.extend(remap_diags(e.get("diagnostics", []), remap))
    diags.extend(remap_diags(out_entry.get("diagnostics", []), out_remap))
    return nests, summaries, diags, True


_Payload = tuple[dict[str, Any], dict[str, Any], list[dict[str, Any]]]  # nest JSON, summary JSON, diagnostics



def depends_on_time(diag: dict[str, Any]) -> bool:
    """A result not worth keeping: an internal error, or one cut short by a time
    limit or budget (a less busy machine, or the next run, may do better)."""
    code = diag.get("code", "")
    if code.startswith("TC9") or code in ("TC310", "TC311"):
        return True
    args = diag.get("args")
    return isinstance(args, dict) and args.get("time_bound") is True


def remap_diags(diags: list[dict[str, Any]], remap: _Remap) -> list[dict[str, Any]]:
    """Stored diagnostics with their positions (also those among their arguments)
    moved, and their messages rendered again from the moved arguments."""
    if remap.identity:
        return diags
    return [rerendered(d) for d in remap_json(diags, remap)]

