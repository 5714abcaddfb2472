"""Reporters: render a Report to a stream (text, JSON, SARIF)."""

from __future__ import annotations

from typing import TextIO

from tripcount.report.base import Reporter


def get_reporter(fmt: str, stream: TextIO, **options: object) -> Reporter:
    """The reporter for a --format name ('text', 'json', 'sarif')."""
    if fmt == "json":
        from tripcount.report.jsonout import JsonReporter

        return JsonReporter(stream, **options)
    if fmt == "sarif":
        from tripcount.report.sarif import SarifReporter

        return SarifReporter(stream, **options)
    from tripcount.report.text import TextReporter

    return TextReporter(stream, **options)


FORMATS = ("text", "json", "sarif")
