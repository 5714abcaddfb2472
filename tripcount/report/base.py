# Reporter interface: every output format implements `write(report)` and
# writes only to the stream it was given.

from __future__ import annotations

from typing import Any, TextIO

from tripcount.analysis.results import Report


class Reporter:
    """Base class of the reporters."""

    def __init__(self, stream: TextIO, **options: Any) -> None:
        self.stream = stream
        self.options = options

    def write(self, report: Report) -> None:
        """Render `report` to the stream."""
        raise NotImplementedError
