# Diagnostics: the catalogue of everything tripcount reports about its input.
#
# One small class per kind of finding, with a stable code of our own, a
# severity, a short title, a message template and a description (the class
# docstring); stages create them with structured arguments, reporters render
# them late (text form `path:line:col: severity: message [code]`).
#
# One module per code range (stable; never reuse a retired code):
#   source    TC1xx  reading the source (preprocessor, grammar, bytes, build flags)
#   model     TC2xx  loop nests the model cannot represent exactly (refusals, notes)
#   engine    TC3xx  counting engine (limits, verification, time budgets)
#   memory    TC4xx  working set, cache fit, footprint
#   balance   TC5xx  parallel work balance
#   gate      TC6xx  budgets and baseline regressions (`tripcount check`)
#   internal  TC9xx  internal errors, unreadable files
#
# The family modules are plain Python (no engine), imported here by name so
# that the catalogue is complete for anyone who imports this package.

from __future__ import annotations

from typing import Any

from tripcount.diagnostics import balance, engine, gate, internal, memory, model, source
from tripcount.diagnostics.base import (
    REGISTRY,
    SEVERITIES,
    Diagnostic,
    LoopRef,
    Phrase,
    arg_from_json,
    arg_json,
    sort_key,
)
from tripcount.ir import Span

FAMILIES = (source, model, engine, memory, balance, gate, internal)

# Codes no longer given, and the code that replaced each (None: not replaced).
RETIRED: dict[str, str | None] = {
    "TC199": "TC903",  # a failure of the front end is an internal error
}


def catalogue() -> list[type[Diagnostic]]:
    """Every diagnostic class, ordered by code."""
    return [REGISTRY[c] for c in sorted(REGISTRY)]


def by_code(code: str) -> type[Diagnostic] | None:
    """The class of `code` (a retired code gives its replacement), or None."""
    if code in RETIRED:
        code = RETIRED[code] or ""
    return REGISTRY.get(code)


def from_dict(d: dict[str, Any]) -> Diagnostic | None:
    """The diagnostic a JSON form (Diagnostic.to_dict) stands for, or None for an unknown code."""
    cls = by_code(str(d.get("code", "")))
    if cls is None:
        return None
    line, column = d.get("line", 1), d.get("column", 1)
    span = Span(line, column, d.get("end_line", line), d.get("end_column", column))
    args = d.get("args")
    return cls(span, **{str(k): arg_from_json(v) for k, v in (args if isinstance(args, dict) else {}).items()})


def rerendered(d: dict[str, Any]) -> dict[str, Any]:
    """A JSON diagnostic with its message rendered again from its arguments (after
    its positions were moved); one of an unknown or retired code is returned unchanged."""
    diag = from_dict(d)
    return d if diag is None or diag.code != d.get("code") else {**d, "message": diag.message}


__all__ = [
    "FAMILIES", "REGISTRY", "RETIRED", "SEVERITIES", "Diagnostic", "LoopRef", "Phrase", "arg_from_json", "arg_json",
    "by_code", "catalogue", "from_dict", "rerendered", "sort_key",
]
