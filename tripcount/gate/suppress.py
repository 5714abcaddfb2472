# Suppression comments (`// tripcount: allow degree, working-set` on or
# above a loop header) and the spans of loop headers they apply to. One rule
# for `tripcount check` and the language server.

from __future__ import annotations

import re
from dataclasses import dataclass, field

from tripcount.analysis.summary import LoopSummary, NestSummary
from tripcount.ir import Span

# Which suppression kind silences which finding (the TC6xx codes of
# tripcount/diagnostics/gate.py), and every kind a comment may name.
SUPPRESSES = {
    "TC601": "degree", "TC610": "degree", "TC611": "growth",
    "TC602": "working-set", "TC612": "working-set", "TC603": "imbalance",
}
KINDS = ("degree", "growth", "working-set", "imbalance", "all")

# --------------------------------------------------------------------------
# Suppressions:  // tripcount: allow degree, working-set   (on the loop line)

SUPPRESS_RE = re.compile(r"(?://|/\*).*?\btripcount\s*:\s*allow\s+([A-Za-z][\w-]*(?:\s*,\s*[A-Za-z][\w-]*)*)")


@dataclass
class Suppressions:
    """Kinds allowed per line, read from comments in the file text."""

    by_line: dict[int, set[str]] = field(default_factory=dict)
    unknown: list[tuple[int, int, str]] = field(default_factory=list)  # (line, column, kind)
    lines: list[str] = field(default_factory=list)

    @staticmethod
    def scan(text: str) -> Suppressions:
        """Find every `tripcount: allow` comment."""
        s = Suppressions(lines=text.split("\n"))
        if "tripcount" not in text:
            return s
        for no, line in enumerate(s.lines, start=1):
            if "tripcount" not in line:
                continue
            m = SUPPRESS_RE.search(line)
            if not m:
                continue
            kinds = set()
            for part in re.finditer(r"[A-Za-z][\w-]*", m.group(1)):
                k = part.group().lower().replace("_", "-")
                if k in KINDS:
                    kinds.add(k)
                else:
                    s.unknown.append((no, part.start() + m.start(1) + 1, part.group()))
            s.by_line[no] = kinds
        return s

    def lines_for(self, line: int, end_line: int | None = None) -> list[int]:
        """The lines whose comments apply to a loop starting on `line`.

        The loop header's own lines, and the block of comment-only or
        preprocessor lines right above it (so that a comment may sit above
        a `#pragma omp` line or a long header).
        """
        out = list(range(line, (end_line or line) + 1))
        k = line - 1
        while k >= 1 and k <= len(self.lines):
            t = self.lines[k - 1].strip()
            if t.startswith(("//", "/*", "*", "#")) and t:
                out.append(k)
                k -= 1
                continue
            break
        return out

    def allows(self, code: str, lines: list[int]) -> bool:
        """True when a comment on one of `lines` allows findings of `code`."""
        kind = SUPPRESSES.get(code)
        for ln in lines:
            kinds = self.by_line.get(ln)
            if kinds and ("all" in kinds or kind in kinds):
                return True
        return False


# --------------------------------------------------------------------------
# Spans of loop headers (for tighter regions than whole nests)


def header_span(lines: list[str], line: int, column: int) -> Span:
    """The span of `for (...)` starting at (line, column), found by matching parentheses."""
    depth = 0
    seen = False
    ln, col = line, column
    while 1 <= ln <= len(lines):
        text = lines[ln - 1]
        i = col - 1
        while i < len(text):
            ch = text[i]
            if text.startswith("//", i):
                break
            if ch == "(":
                depth += 1
                seen = True
            elif ch == ")":
                depth -= 1
                if seen and depth == 0:
                    return Span(line, column, ln, i + 2)
            i += 1
        ln, col = ln + 1, 1
        if ln - line > 40:  # not a loop header we can read: a point will do
            break
    end = min(len(lines[line - 1]) + 1, column + 3) if 1 <= line <= len(lines) else column
    return Span(line, column, line, max(end, column))


def loop_span(lp: LoopSummary | NestSummary, lines: list[str]) -> Span:
    """The header span of a loop (or of a nest's first line)."""
    return header_span(lines, lp.span.line, lp.span.column)


