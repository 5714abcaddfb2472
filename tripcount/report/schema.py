# The JSON Schema (draft 2020-12) of the JSON report, schema_version 1.
#
# The schema itself is package data (schema.json beside this module) so that
# editors and CI can fetch it with `tripcount schema`. `validate_report` is
# the one place tests check reports against it; jsonschema is imported only
# there because it is a test dependency, not a runtime one.

from __future__ import annotations

import json
from functools import lru_cache
from importlib import resources
from typing import Any

SCHEMA_FILE = "schema.json"


def schema_text() -> str:
    """The schema as JSON text (what `tripcount schema` prints)."""
    text = resources.files("tripcount.report").joinpath(SCHEMA_FILE).read_text(encoding="utf-8")
    return text if text.endswith("\n") else text + "\n"


@lru_cache(maxsize=1)
def schema() -> dict[str, Any]:
    """The schema as a dict (parsed once)."""
    return json.loads(schema_text())


@lru_cache(maxsize=8)
def _validator(part: str | None) -> Any:
    import jsonschema

    full = schema()
    if part is None:
        target: dict[str, Any] = full
    else:
        if part not in full["$defs"]:
            raise KeyError(f"no definition '{part}' in the report schema")
        # A sub-schema that keeps the $defs so that its $refs resolve.
        target = {"$schema": full["$schema"], "$defs": full["$defs"], "$ref": f"#/$defs/{part}"}
    cls = jsonschema.validators.validator_for(full)
    cls.check_schema(target)
    return cls(target, format_checker=cls.FORMAT_CHECKER)


def validate_report(data: Any) -> None:
    """Raise jsonschema.ValidationError unless `data` is a valid schema_version 1 report."""
    _validator(None).validate(data)


def validate_part(data: Any, part: str) -> None:
    """Validate one part of a report against a definition: 'file', 'nest', 'loop', 'count', ..."""
    _validator(part).validate(data)


def report_errors(data: Any) -> list[str]:
    """All validation errors of a report as 'path: message' lines (empty when valid)."""
    out = []
    for err in sorted(_validator(None).iter_errors(data), key=lambda e: list(e.absolute_path)):
        where = "/".join(str(p) for p in err.absolute_path) or "(root)"
        out.append(f"{where}: {err.message}")
    return out
