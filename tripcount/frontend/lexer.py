# Front end: the lexer under the preprocessor -- offsets to line and column
# (SourceMap), tokens, the splicing of line continuations, and the values of
# integer and character literals.

from __future__ import annotations

import bisect
import re

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics import source as d


class SourceMap:
    """The original text and its line starts: converts offsets to 1-based line/column."""

    def __init__(self, text: str) -> None:
        self.text = text
        starts = [0]
        find = text.find
        i = find("\n")
        while i >= 0:
            starts.append(i + 1)
            i = find("\n", i + 1)
        self.line_starts = starts

    def position(self, offset: int) -> tuple[int, int]:
        """(line, column) of an offset; tabs count as one column."""
        line = bisect.bisect_right(self.line_starts, offset)
        return line, offset - self.line_starts[line - 1] + 1

    def offset(self, line: int, column: int) -> int:
        """The offset of a (line, column) position, clamped to the text."""
        if line < 1:
            return 0
        if line > len(self.line_starts):
            return len(self.text)
        return max(0, min(self.line_starts[line - 1] + column - 1, len(self.text)))

    def span(self, start: int, end: int) -> ir.Span:
        """The span of the offsets [start, end)."""
        a, b = self.position(start)
        c, e = self.position(max(start, end))
        return ir.Span(a, b, c, e)

    def slice(self, span: ir.Span) -> str:
        """The original text of a span."""
        return self.text[self.offset(span.line, span.column):self.offset(span.end_line, span.end_column)]

    def end_span(self) -> ir.Span:
        """The span of the whole text."""
        return self.span(0, len(self.text))


class Tok:
    """One preprocessing token.

    kind: 'id', 'num', 'str', 'chr', 'punct', 'other' or 'pragma'. `start` and
    `end` are offsets into the original text (for macro output: the
    invocation). `hide` is the set of macro names not to expand again (C's
    rule against recursive expansion). `bol` marks the first token of a line.
    For a pragma token, `extra` holds its macro-expanded tokens after `omp`.
    """

    __slots__ = ("kind", "value", "start", "end", "hide", "bol", "space", "extra")

    def __init__(self, kind: str, value: str, start: int, end: int, bol: bool = False,
                 space: bool = False) -> None:
        self.kind = kind
        self.value = value
        self.start = start
        self.end = end
        self.hide: frozenset[str] | None = None
        self.bol = bol
        self.space = space  # whitespace (or a comment) before this token
        self.extra: list[Tok] | None = None

    def copy_at(self, start: int, end: int, hide: frozenset[str] | None) -> Tok:
        """This token's kind and spelling at another position."""
        t = Tok(self.kind, self.value, start, end, False, self.space)
        t.hide = hide
        return t

    def __repr__(self) -> str:
        return f"Tok({self.kind}, {self.value!r}, {self.start}:{self.end})"


_TOKEN_RE = re.compile(
    r"""
     (?P<nl>\n)
    |(?P<ws>[ \t\r\f\v]+)
    |(?P<lc>//[^\n]*)
    |(?P<bc>/\*.*?\*/)
    |(?P<ubc>/\*)
    |(?P<num>\.?[0-9](?:[eEpP][+-]|[0-9A-Za-z_.])*)
    |(?P<str>(?:u8|[uUL])?"(?:\\.|[^"\\\n])*")
    |(?P<chr>(?:u8|[uUL])?'(?:\\.|[^'\\\n])*')
    |(?P<id>[^\W\d][\w$]*|\$[\w$]*)
    |(?P<punct>\.\.\.|<<=|>>=|->|\+\+|--|<<|>>|<=|>=|==|!=|&&|\|\||[-+*/%&|^]=|\#\#|[][(){};,:?~!=<>+\-*/%&|^.\#])
    |(?P<other>.)
    """,
    re.X | re.S,
)

_SPLICE_RE = re.compile(r"\\[ \t]*\r?\n")


class _Splices:
    """Maps offsets in the spliced text (continuations removed) back to the original."""

    def __init__(self, text: str) -> None:
        self.cuts: list[int] = []  # spliced offsets where text was removed
        self.removed: list[int] = []  # total removed up to and including that cut
        parts: list[str] = []
        last = 0
        total = 0
        for m in _SPLICE_RE.finditer(text):
            parts.append(text[last:m.start()])
            self.cuts.append(m.start() - total)
            total += m.end() - m.start()
            self.removed.append(total)
            last = m.end()
        parts.append(text[last:])
        self.text = "".join(parts) if self.cuts else text

    def start(self, s: int) -> int:
        """Original offset of a token start at spliced offset `s`."""
        k = bisect.bisect_right(self.cuts, s)
        return s + (self.removed[k - 1] if k else 0)

    def end(self, s: int) -> int:
        """Original offset of an exclusive token end at spliced offset `s`."""
        k = bisect.bisect_left(self.cuts, s)
        return s + (self.removed[k - 1] if k else 0)


# Trigraphs (C99 5.2.1.1) are not replaced, as in C23 and gcc's default mode; the
# first one outside comments and literals is named, since the code around it then
# reads differently from what a strict C99 compiler sees.
_TRIGRAPHS = {"=": "#", "(": "[", "/": "\\", ")": "]", "'": "^", "<": "{", "!": "|", ">": "}", "-": "~"}
_TRIGRAPH_ENDS = frozenset(_TRIGRAPHS)


def tokenize(text: str, diags: list[Diagnostic] | None = None,
             smap: SourceMap | None = None) -> list[Tok]:
    """Split source text into preprocessing tokens (comments and whitespace dropped)."""
    sp = _Splices(text)
    spliced = sp.text
    mapped = bool(sp.cuts)
    out: list[Tok] = []
    append = out.append
    bol = True
    space = False
    warned_trigraph = False
    for m in _TOKEN_RE.finditer(spliced):
        kind = m.lastgroup
        if kind == "nl":
            bol = True
            space = True
            continue
        if kind == "ws" or kind == "lc" or kind == "bc":
            space = True
            continue
        s, e = m.span()
        if kind == "ubc":
            if diags is not None and smap is not None:
                line, col = smap.position(sp.start(s) if mapped else s)
                diags.append(d.UnterminatedComment(ir.Span(line, col, line, col + 2),
                                                   where=ir.Span.point(line, col)))
            break
        if (kind == "punct" and m.group() == "?" and not warned_trigraph and diags is not None
                and smap is not None and spliced[e:e + 1] == "?" and spliced[e + 1:e + 2] in _TRIGRAPH_ENDS):
            warned_trigraph = True
            line, col = smap.position(sp.start(s) if mapped else s)
            diags.append(d.TrigraphIgnored(ir.Span(line, col, line, col + 3), where=ir.Span.point(line, col),
                                           spelling=spliced[s:e + 2], meaning=_TRIGRAPHS[spliced[e + 1]]))
        if mapped:
            s, e = sp.start(s), sp.end(e)
        append(Tok(kind, m.group(), s, e, bol, space))
        bol = False
        space = False
    return out


def int_value(text: str) -> int | None:
    """The value of a C integer literal (suffixes U/L/LL stripped), or None."""
    s = text.rstrip("uUlLzZ")
    s = s.replace("'", "")
    try:
        if s[:2] in ("0x", "0X"):
            return int(s[2:], 16)
        if s[:2] in ("0b", "0B"):
            return int(s[2:], 2)
        if len(s) > 1 and s[0] == "0":
            return int(s[1:], 8)
        return int(s, 10)
    except ValueError:
        return None


_ESCAPES = {"n": 10, "t": 9, "r": 13, "0": 0, "\\": 92, "'": 39, '"': 34, "a": 7, "b": 8,
            "f": 12, "v": 11, "?": 63}


def char_value(text: str) -> int | None:
    """The value of a simple character constant such as 'a' or '\\n', or None."""
    q = text.find("'")
    body = text[q + 1:-1]
    if len(body) == 1:
        return ord(body)
    if len(body) >= 2 and body[0] == "\\":
        rest = body[1:]
        if rest in _ESCAPES:
            return _ESCAPES[rest]
        try:
            if rest[0] in "xX":
                return int(rest[1:], 16)
            return int(rest, 8)
        except ValueError:
            return None
    return None
