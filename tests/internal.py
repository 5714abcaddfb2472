# Test helper: which diagnostics report a failure of tripcount itself (an
# exception that the pipeline or the front end contained and turned into a
# diagnostic) rather than a finding about the input. Robustness and "never
# raises" tests fail on any of them: a contained crash is still a crash, and
# checking only that no exception escapes could never fail.
#
# Internal errors are the TC9xx range except the unreadable-file refusal
# (a finding about the input: a FIFO, a device, a file past the size cap),
# the front end's own failure included (TC903).

from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Any

from tripcount.diagnostics.internal import UnreadableFile

NOT_INTERNAL = frozenset({UnreadableFile.code})
ALSO_INTERNAL: frozenset[str] = frozenset()  # the front end's failure is TC903, in the range
# a code as each output format writes it: `[TC900]` in text, `"code": "TC900"` in JSON,
# `"ruleId": "TC900"` in SARIF
_CODE = re.compile(r'\[(TC\d{3})\]|"(?:code|ruleId)":\s*"(TC\d{3})"')


def is_internal(code: str) -> bool:
    """Whether a diagnostic code reports an internal failure."""
    return code in ALSO_INTERNAL or (code.startswith("TC9") and code not in NOT_INTERNAL)


def internal_errors(diagnostics: Iterable[Any]) -> list[str]:
    """The internal-error diagnostics among `diagnostics`, rendered."""
    return [d.render() for d in diagnostics if is_internal(d.code)]


def assert_no_internal_errors(diagnostics: Iterable[Any], source: str = "") -> None:
    """Fail with the rendered internal errors (and the input, when given) if there are any."""
    found = internal_errors(diagnostics)
    assert not found, "internal error: " + "\n".join(found) + (f"\non this input:\n{source[:2000]}" if source else "")


def internal_codes_in(output: str) -> list[str]:
    """Internal-error codes mentioned in a report of any format (text, JSON, SARIF)."""
    return [c for pair in _CODE.findall(output) for c in pair if c and is_internal(c)]
