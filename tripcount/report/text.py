# Text reporter: a readable per-nest report for a terminal.
#
# For every nest: the loop tree with each loop's trip count, each statement
# with its execution count as a formula (generic case first, with its validity
# condition in C syntax, the other pieces as edge cases) and its value at the
# --at sizes; the sections of further analyses; then the diagnostics in
# compiler style `path:line:col: severity: message`.

from __future__ import annotations

import io
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

from tripcount import ir
from tripcount.analysis.results import Count, FileResult, NestResult, Report, StatementResult
from tripcount.report.base import Reporter
from tripcount.report.ranking import DEFAULT_TOP, Entry, entries_of, ranking_text


def fmt_value(v: Any) -> str:
    """An exact value with thousands separators."""
    if v is None:
        return "-"
    if isinstance(v, int):
        return f"{v:,}"
    return str(v)


def formula_lines(c: Count) -> tuple[str, list[str]]:
    """Main formula text (with its condition) and the edge-case lines of a count.

    The main piece is the generic one, unless --at sizes fall into another
    piece: then that piece leads, so the formula shown is the one the value
    on the same line comes from.
    """
    if c.formula is None:
        return (c.note or "unknown"), []
    pieces = list(c.formula.pieces)
    if not pieces:
        return "0", []
    lead = c.at_piece if c.at_piece is not None else 0
    order = [lead] + [k for k in range(len(pieces)) if k != lead]
    def text(k: int) -> str:
        p = pieces[k]
        return p.poly.to_expr() + (f"   when {p.when}" if p.when and p.when != "true" else "")
    head = text(lead)
    rest = [text(k) for k in order[1:]]
    if any(p.when and p.when != "true" for p in pieces):
        rest.append("0 otherwise")
    return head, rest


def short_formula(c: Count) -> str:
    """One-line formula for a loop row: the leading piece, marked when piecewise."""
    head, rest = formula_lines(c)
    expr = head.partition("   when ")[0]
    nonzero = [r for r in rest if r != "0 otherwise"]
    if nonzero:
        return f"{expr} [+{len(nonzero)} case{'s' if len(nonzero) > 1 else ''}]"
    return expr


# The roofline fields the ranking reads (report/ranking.py): all a stored rendering keeps.
RANKING_FIELDS = {"seconds": (int, float), "flops": (int, float), "memory_bytes": (int, float),
                  "intensity": (int, float), "degree": (int,), "memory_from": (str,), "binding": (str,)}


@dataclass(frozen=True)
class RenderedFile:
    """One file's part of the text report, with what the closing lines and the exit status need.

    What the result cache keeps for the text report (the report of one file
    is a rendering of its results for given options; the ranking and the
    totals come after all files).
    """

    path: str
    text: str
    nests: int
    codes: tuple[str, ...]  # the diagnostics' codes, one per diagnostic
    params: tuple[str, ...]  # size parameters of the nests
    names: tuple[str, ...]  # every name an --at size may give (parameters and the C names behind them)
    entries: tuple[Entry, ...]  # the ranking's rows

    def to_json(self) -> dict[str, Any]:
        """A plain JSON object; from_json reads it back for the path it was stored under."""
        return {"text": self.text, "nests": self.nests, "codes": list(self.codes),
                "params": list(self.params), "names": list(self.names),
                "entries": [{"line": e.line, "function": e.function,
                             "roofline": {k: e.roofline.get(k) for k in RANKING_FIELDS}} for e in self.entries]}

    @classmethod
    def from_json(cls, d: dict[str, Any], path: str) -> RenderedFile:
        """The rendering of `to_json`, for the file at `path` (the key includes the path)."""
        return cls(path, d["text"], d["nests"], tuple(d["codes"]), tuple(d["params"]), tuple(d["names"]),
                   tuple(Entry(path, e["line"], e["function"], dict(e["roofline"])) for e in d["entries"]))


def render_file(fr: FileResult) -> RenderedFile:
    """The text report of one file's live results, with its totals' inputs."""
    out = io.StringIO()
    TextReporter(out).write_file(fr)
    return RenderedFile(
        fr.path, out.getvalue(), len(fr.nests), tuple(d.code for d in fr.all_diagnostics()),
        tuple(sorted({p for nr in fr.nests for p in nr.nest.params})),
        tuple(sorted({p for nr in fr.nests for p in (*nr.nest.params, *nr.nest.names)})), tuple(entries_of(fr)))


class TextReporter(Reporter):
    """Human-readable report."""

    width = 100

    def write(self, report: Report) -> None:
        """Render all files, then the ranking and a one-line summary."""
        files = [render_file(fr) for fr in report.files]
        for rf in files:
            self.stream.write(rf.text)
        self.write_ranking([e for rf in files for e in rf.entries])
        self.write_totals(len(files), sum(rf.nests for rf in files), sum(len(rf.codes) for rf in files),
                          {p for rf in files for p in rf.params}, report.at)

    def write_ranking(self, entries: list[Entry]) -> None:
        """Where the time goes: the nests ranked by estimated time (report.ranking), before the totals."""
        lines = ranking_text(entries, int(self.options.get("top", DEFAULT_TOP)))
        for line in lines:
            self.stream.write(line + "\n")
        if lines:
            self.stream.write("\n")

    def write_totals(self, n_files: int, n_nests: int, n_diag: int, params: set[str], at_values: dict) -> None:
        """The closing line: files, nests, diagnostics, and where the values are taken."""
        at = ", ".join(f"{k}={v}" for k, v in at_values.items())
        at = at.replace("*=", "every other size=") if "*=" in at and at.count("=") > 1 else at.replace("*=", "every size=")
        names = sorted(params)
        example = ",".join(f"{p}=..." for p in names[:3]) + (",..." if len(names) > 3 else "")
        hint = f"; values at {at}" if at else (
            f"; give --at {example} (or --at '*=1000') for values" if names else "")
        self.stream.write(f"{n_files} file(s), {n_nests} nest(s), {n_diag} diagnostic(s){hint}\n")

    def write_file(self, fr: FileResult) -> None:
        """One file: its nests and diagnostics."""
        w = self.stream.write
        for nr in fr.nests:
            self.write_nest(fr, nr)
        for d in fr.all_diagnostics():
            w(d.render() + "\n")
        if fr.nests or fr.all_diagnostics():
            w("\n")

    def write_nest(self, fr: FileResult, nr: NestResult) -> None:
        """One nest: header, loop tree with statements, extra sections."""
        w = self.stream.write
        n = nr.nest
        modelled = any(lr.trips.formula is not None or lr.trips.value is not None for lr in nr.loops)
        params = ", ".join(n.params) if n.params else ("none" if modelled else "unknown (the nest is not modelled)")
        w(f"{fr.path}:{n.span.line}:{n.span.column}: nest in {n.function}()   parameters: {params}\n")
        for name, text in n.symbolic.items():
            w(f"    {name} stands for {text}\n")
        by_parent: dict[int | None, list[int]] = {}
        for lr in nr.loops:
            by_parent.setdefault(lr.loop.parent, []).append(lr.loop.index)
        stmts_in: dict[int | None, list[int]] = {}
        for k, sr in enumerate(nr.statements):
            owner = sr.stmt.loops[-1] if sr.stmt.loops else None
            stmts_in.setdefault(owner, []).append(k)
        loops = {lr.loop.index: lr for lr in nr.loops}

        def row(left: str, value: str) -> None:
            if not value:
                w(left + "\n")
                return
            pad = max(1, self.width - len(left) - len(value))
            w(left + " " * pad + value + "\n")

        def walk(index: int, indent: int) -> None:
            lr = loops[index]
            loop = lr.loop
            pre = "  " * indent
            omp = ""
            if loop.omp is not None:
                omp = f"  [omp {loop.omp.directive}" + (f" schedule({loop.omp.schedule}" + (
                    f", {ir.c_text(loop.omp.chunk)}" if loop.omp.chunk is not None else "") + ")"
                    if loop.omp.schedule else "") + "]"
            name = "(;;)" if loop.display == "?" else loop.var  # a loop without a variable
            if lr.trips.formula is None and lr.trips.value is None:
                row(f"{pre}for {name}  (line {loop.span.line}){omp}   not counted (see the diagnostics)", "")
            else:
                head = short_formula(lr.trips)
                per = ""
                if loop.depth > 0 and lr.per_entry is not None and lr.per_entry.formula is not None:
                    per = f" ({short_formula(lr.per_entry)} per entry)"
                row(f"{pre}for {loop.var}  (line {loop.span.line}){omp}   trips {head}{per}",
                    f"= {fmt_value(lr.trips.value)}" if lr.trips.value is not None else "")
            for _key, extra in lr.extras.items():
                if hasattr(extra, "text_lines"):
                    for line in extra.text_lines():
                        w(f"{pre}    {line}\n")
            # statements and inner loops in source order
            items = [((nr.statements[k].stmt.span.line, nr.statements[k].stmt.span.column), 0, k)
                     for k in stmts_in.get(index, [])]
            items += [((loops[c].loop.span.line, loops[c].loop.span.column), 1, c)
                      for c in by_parent.get(index, [])]
            for _, kind, k in sorted(items):
                if kind == 0:
                    stmt_rows(k, indent + 1)
                else:
                    walk(k, indent + 1)

        def stmt_rows(k: int, indent: int) -> None:
            sr = nr.statements[k]
            pre = "  " * indent
            text = " ".join(sr.stmt.text.split())
            if len(text) > 48:
                text = text[:45] + "..."
            if sr.stmt.domain is None:
                row(f"{pre}{sr.stmt.id} (line {sr.stmt.span.line}) {text}   not counted", "")
                return
            head, rest = formula_lines(sr.count)
            row(f"{pre}{sr.stmt.id} (line {sr.stmt.span.line}) {text}", "")
            row(f"{pre}    runs {head}", f"= {fmt_value(sr.count.value)}" if sr.count.value is not None else "")
            for line in rest:
                w(f"{pre}      edge case: {line}\n")
            for _key, extra in sr.extras.items():
                if hasattr(extra, "text_lines"):
                    for line in extra.text_lines():
                        w(f"{pre}    {line}\n")

        for k in stmts_in.get(None, []):
            stmt_rows(k, 1)
        for root in by_parent.get(None, []):
            walk(root, 1)
        self.write_summary(nr)
        for _key, extra in nr.extras.items():
            if hasattr(extra, "text_lines"):
                for line in extra.text_lines():
                    w(f"  {line}\n")
        w("\n")

    def write_summary(self, nr: NestResult) -> None:
        """Degree of the dominant statement count and what doubling the sizes does.

        The dominant statement is the one with the largest count at the --at
        sizes when every count has a value there, else the one with the
        largest count when all sizes are equal and large (its generic piece
        at 10^6): the first of the highest degree can be a lesser one
        (n against 100*n, m*n*p/32 against m*n*p).
        """
        counted = [sr for sr in nr.statements if sr.count.formula is not None and sr.count.formula.pieces]
        if not counted or not nr.nest.params:
            return
        degree = max(sr.count.formula.degree() for sr in counted)
        if all(sr.count.value is not None for sr in counted):
            sr = max(counted, key=lambda x: x.count.value)
            rule = "the largest count at the --at sizes"
        else:
            big = {p: 10**6 for p in nr.nest.params}

            def size(x: StatementResult) -> Fraction:
                try:
                    return x.count.formula.pieces[0].poly.evaluate(big)
                except (KeyError, ZeroDivisionError):
                    return Fraction(-1)
            sr = max(counted, key=size)
            rule = "the largest count for large equal sizes"
        f = sr.count.formula
        leading = f.leading()
        tail = ""
        if rule.endswith("--at sizes"):
            # the piece that holds at the --at sizes can differ from the generic one (a count capped at
            # 4096 is linear below the cap): describe the work where the user asked, and say both
            local = [x.count.formula.pieces[x.count.at_piece].poly for x in counted if x.count.at_piece is not None]
            if len(local) == len(counted):
                here = max(p.growth_degree() for p in local)
                leading = sr.count.formula.pieces[sr.count.at_piece].poly.leading()
                if here != degree:
                    tail = f" (degree {degree} for large sizes)"
                degree = here
        self.stream.write(f"  work: degree {degree} in the sizes{' at the --at sizes' if tail else ''} "
                          f"(dominant {sr.stmt.id} ~ {leading}, {rule}); doubling all sizes multiplies it by about "
                          f"{2 ** degree}{tail}\n")
