# JSON reporter: the stable machine-readable report (schema_version 1).
#
# Later analyses only ever add fields; nothing here is renamed or removed
# within schema_version 1. The schema lives in tripcount/report/schema.json.

from __future__ import annotations

import json
from typing import Any

from tripcount import __version__
from tripcount.analysis.results import (
    Count,
    FileResult,
    LoopResult,
    NestResult,
    Report,
    StatementResult,
)
from tripcount.engine.readable import plain_forms
from tripcount.ir import OmpClauses, Span, c_text
from tripcount.report.base import Reporter
from tripcount.report.ranking import DEFAULT_TOP, entries_of_json, ranking_json

SCHEMA_VERSION = 1


def span_json(span: Span) -> dict[str, int]:
    """Source range fields."""
    return {"line": span.line, "column": span.column, "end_line": span.end_line, "end_column": span.end_column}


def count_json(c: Count | None) -> dict[str, Any] | None:
    """A count object, or None."""
    return None if c is None else c.to_json()


def extras_json(extras: dict[str, Any]) -> dict[str, Any]:
    """JSON of the analyses' extra results."""
    out: dict[str, Any] = {}
    for key, value in extras.items():
        out[key] = value.to_json() if hasattr(value, "to_json") else value
    return out


def omp_json(omp: OmpClauses | None) -> dict[str, Any] | None:
    """The pragma part of a loop's `parallel` object."""
    if omp is None:
        return None

    return {
        "directive": omp.directive,
        "schedule": omp.schedule,
        "chunk": c_text(omp.chunk) if omp.chunk is not None else None,
        "collapse": omp.collapse,
        "num_threads": c_text(omp.num_threads) if omp.num_threads is not None else None,
    }


def loop_json(lr: LoopResult) -> dict[str, Any]:
    """One loop."""
    loop = lr.loop
    out: dict[str, Any] = {"index": loop.index, "var": loop.var, "depth": loop.depth, "parent": loop.parent}
    out.update(span_json(loop.span))
    out["step"] = loop.step
    extras = extras_json(lr.extras)
    parallel = omp_json(loop.omp)
    if "parallel" in extras:
        parallel = {**(parallel or {}), **extras.pop("parallel")}
    out["parallel"] = parallel
    out["trips"] = count_json(lr.trips)
    out["trips_per_entry"] = count_json(lr.per_entry)
    out.update(extras)
    return out


def statement_json(sr: StatementResult) -> dict[str, Any]:
    """One statement."""
    s = sr.stmt
    out: dict[str, Any] = {"id": s.id}
    out.update(span_json(s.span))
    out["text"] = s.text
    out["loops"] = list(s.loops)
    out["count"] = count_json(sr.count)
    out.update(extras_json(sr.extras))
    return out


def nest_json(nr: NestResult, readable: bool = True) -> dict[str, Any]:
    """One nest; readable=False prints formulas without the search for their most
    readable form (engine.readable.plain_forms), for the gate."""
    if not readable:
        with plain_forms():
            return nest_json(nr)
    n = nr.nest
    out: dict[str, Any] = {"function": n.function}
    out.update(span_json(n.span))
    out["parameters"] = list(n.params)
    out["symbolic"] = dict(n.symbolic)
    out["loops"] = [loop_json(lr) for lr in nr.loops]
    out["statements"] = [statement_json(sr) for sr in nr.statements]
    out.update(extras_json(nr.extras))
    return out


def file_json(fr: FileResult) -> dict[str, Any]:
    """One file with its nests and all its diagnostics."""
    return {
        "path": fr.path,
        "nests": [nest_json(n) for n in fr.nests],
        "diagnostics": [d.to_dict() for d in fr.all_diagnostics()],
    }


def report_json(report: Report) -> dict[str, Any]:
    """The whole report as plain JSON data."""
    return {
        "schema_version": SCHEMA_VERSION,
        "tool": {"name": "tripcount", "version": __version__},
        "at": dict(report.at),
        "settings": dict(report.settings),
        "files": [file_json(f) for f in report.files],
    }


class JsonReporter(Reporter):
    """Writes the report as one JSON document."""

    def write(self, report: Report | dict[str, Any]) -> None:
        """Render `report` (a Report, or its JSON form as the result cache assembles it) as indented JSON."""
        doc = report if isinstance(report, dict) else report_json(report)
        doc["summary"] = ranking_json(entries_of_json(doc["files"]), int(self.options.get("top", DEFAULT_TOP)))
        json.dump(doc, self.stream, indent=2)
        self.stream.write("\n")
