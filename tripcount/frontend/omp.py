# Front end: the clauses of OpenMP loop directives that the balance analysis reads.

from __future__ import annotations

from typing import Protocol

from tripcount import ir
from tripcount.diagnostics import Diagnostic
from tripcount.diagnostics import source as d
from tripcount.frontend.lexer import SourceMap, Tok
from tripcount.frontend.scanner import skip_parens, split_commas
from tripcount.frontend.vocab import OMP_DIRECTIVES, SCHEDULE_KINDS


class UnitParser(Protocol):
    """What clause reading needs of the unit parser (parser.UnitParser), declared here so it is not imported back."""

    smap: SourceMap
    diags: list[Diagnostic]

    def parse_expr(self, toks: list[Tok]) -> ir.Expr | None: ...


def omp_clauses(up: UnitParser, p: Tok) -> ir.OmpClauses | None:
    """The clauses of an OpenMP directive that bear on loops (None for other directives); problems are diagnostics."""
    toks = p.extra or []
    words: list[str] = []
    k = 0
    while k < len(toks) and toks[k].kind == "id" and toks[k].value in ("parallel", "for", "simd"):
        if k + 1 < len(toks) and toks[k + 1].value == "(":
            break
        words.append(toks[k].value)
        k += 1
    if tuple(words) not in OMP_DIRECTIVES:
        return None
    span = up.smap.span(p.start, p.end)
    text = up.smap.text[p.start:p.end].rstrip()
    schedule = None
    chunk = None
    collapse = 1
    num_threads = None
    while k < len(toks):
        t = toks[k]
        if t.value == ",":
            k += 1
            continue
        name = t.value
        args: list[Tok] = []
        k += 1
        if k < len(toks) and toks[k].value == "(":
            end = skip_parens(toks, k)
            args = toks[k + 1:end - 1]
            k = end
        w = ir.Span.point(*up.smap.position(t.start))
        if name == "schedule":
            parts = split_commas(args)
            kind_toks = parts[0] if parts else []
            kinds = [x.value for x in kind_toks if x.kind == "id"]
            if not kinds or kinds[-1] not in SCHEDULE_KINDS:
                up.diags.append(d.OmpClauseProblem(span, clause="schedule", where=w,
                                                     reason="unknown schedule kind"))
                continue
            schedule = kinds[-1]
            if len(parts) > 1:
                chunk = up.parse_expr(parts[1])
                if chunk is None:
                    up.diags.append(d.OmpClauseProblem(span, clause="schedule", where=w,
                                                         reason="the chunk size is not an expression"))
        elif name == "collapse":
            e = up.parse_expr(args)
            if isinstance(e, ir.IntLit) and e.value >= 1:
                collapse = e.value
            else:
                up.diags.append(d.OmpClauseProblem(span, clause="collapse", where=w,
                                                     reason="expected a positive integer constant"))
        elif name == "num_threads":
            num_threads = up.parse_expr(args)
            if num_threads is None:
                up.diags.append(d.OmpClauseProblem(span, clause="num_threads", where=w,
                                                     reason="not an expression"))
    return ir.OmpClauses(span, " ".join(words), schedule, chunk, collapse, num_threads, text)
