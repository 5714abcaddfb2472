# SARIF 2.1.0 reporter, for CI code scanning.
#
# One run, one rule per diagnostic class (our TC codes, from the diagnostics
# catalogue: title as short description, the class's docstring as full
# description), one result per diagnostic with a physical location and the
# message's structured arguments as a property bag: the file
# relative to the working directory (base id SRCROOT) and the region in our
# own coordinates, which match SARIF's: 1-based lines and columns, exclusive
# end column, columns counted in Unicode code points (said in `columnKind`).
#
# Works from the JSON report form (a Report is converted first), so that
# `tripcount check` can emit SARIF from cached results without the engine.

from __future__ import annotations

import json
import os
from typing import Any
from urllib.parse import quote

from tripcount import __version__
from tripcount.diagnostics import Diagnostic, catalogue
from tripcount.report.base import Reporter

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
LEVELS = {"error": "error", "warning": "warning", "note": "note"}


def rule_json(cls: type[Diagnostic]) -> dict[str, Any]:
    """The SARIF reportingDescriptor of one diagnostic class."""
    return {
        "id": cls.code,
        "name": cls.title,
        "shortDescription": {"text": cls.title},
        "fullDescription": {"text": cls.description()},
        "defaultConfiguration": {"level": LEVELS.get(cls.severity, "warning")},
        "properties": {"severity": cls.severity},
    }


def artifact_location(path: str, root: str) -> dict[str, Any]:
    """artifactLocation: a URI relative to `root` when the file lies under it."""
    if path.startswith("<") and path.endswith(">"):  # <stdin>, <code>: no file
        return {"uri": quote(path.strip("<>"))}
    full = os.path.abspath(path)
    rel = os.path.relpath(full, root) if os.path.splitdrive(full)[0] == os.path.splitdrive(root)[0] else full
    if rel.startswith(os.pardir) or os.path.isabs(rel):
        return {"uri": "file://" + quote(full.replace(os.sep, "/"))}
    return {"uri": quote(rel.replace(os.sep, "/")), "uriBaseId": "SRCROOT"}


def region_json(d: dict[str, Any]) -> dict[str, int]:
    """SARIF region from our span fields (same conventions, so copied)."""
    line, col = int(d.get("line", 1)), int(d.get("column", 1))
    end_line, end_col = int(d.get("end_line", line)), int(d.get("end_column", col))
    if (end_line, end_col) < (line, col):  # a malformed span: keep a valid zero-width region
        end_line, end_col = line, col
    return {"startLine": line, "startColumn": col, "endLine": end_line, "endColumn": end_col}


def sarif_from_json(report: dict[str, Any], root: str | None = None) -> dict[str, Any]:
    """The SARIF log for a JSON report (jsonout.report_json form)."""
    root = os.path.abspath(root or os.getcwd())
    registry = {cls.code: cls for cls in catalogue()}
    codes = set(registry)
    for f in report.get("files", []):
        codes.update(d["code"] for d in f.get("diagnostics", []))
    order = sorted(codes)
    index = {code: k for k, code in enumerate(order)}
    rules = []
    for code in order:
        cls = registry.get(code)
        if cls is not None:
            rules.append(rule_json(cls))
        else:  # a code seen in the data without a class (e.g. from a newer cache entry)
            rules.append({"id": code, "shortDescription": {"text": code}})
    results = []
    for f in report.get("files", []):
        loc = artifact_location(f.get("path", "<input>"), root)
        for d in f.get("diagnostics", []):
            results.append({
                "ruleId": d["code"],
                "ruleIndex": index[d["code"]],
                "level": LEVELS.get(d.get("severity", "warning"), "warning"),
                "message": {"text": d.get("message", "")},
                "locations": [{"physicalLocation": {"artifactLocation": dict(loc), "region": region_json(d)}}],
                **({"properties": {"args": d["args"]}} if d.get("args") else {}),
            })
    root_uri = "file://" + quote(root.replace(os.sep, "/").rstrip("/") + "/")
    return {
        "$schema": SARIF_SCHEMA,
        "version": SARIF_VERSION,
        "runs": [{
            "tool": {"driver": {"name": "tripcount", "version": __version__,
                                "semanticVersion": __version__, "rules": rules}},
            "originalUriBaseIds": {"SRCROOT": {"uri": root_uri}},
            "columnKind": "unicodeCodePoints",
            "invocations": [{"executionSuccessful": True}],
            "results": results,
        }],
    }


class SarifReporter(Reporter):
    """Writes a SARIF 2.1.0 log (accepts a Report or its JSON form)."""

    def write(self, report: Any) -> None:
        """Render `report` (Report or report dict) as SARIF JSON."""
        if not isinstance(report, dict):
            from tripcount.report.jsonout import report_json

            report = report_json(report)
        json.dump(sarif_from_json(report, self.options.get("root")), self.stream, indent=2)  # type: ignore[arg-type]
        self.stream.write("\n")
