# Diagnostics: one small class per kind of finding, each with a stable code of
# our own, a severity, a message template and a location. Analyses create
# them; reporters render them (text form `path:line:col: severity: message`).
#
# Code ranges (stable; never reuse a retired code):
#   TC1xx  reading the source (preprocessor, grammar)
#   TC2xx  loop nests the model cannot represent exactly (refusals, notes)
#   TC3xx  counting engine (limits, verification)
#   TC4xx  working set, cache fit, flops
#   TC5xx  parallel work balance
#   TC6xx  budgets and baseline regressions (`tripcount check`)
#   TC9xx  internal errors

from __future__ import annotations

from typing import Any, ClassVar

from tripcount.ir import NO_SPAN, Span

SEVERITIES = ("error", "warning", "note")

REGISTRY: dict[str, type[Diagnostic]] = {}


class Diagnostic:
    """Base class. Subclasses set `code`, `severity`, `template` and `title`.

    `template` is formatted with the keyword arguments given at construction,
    e.g. `NonConstantStep(span, var="i")`. `title` is a short rule name
    (used for SARIF rules and the documentation table).
    """

    code: ClassVar[str] = "TC000"
    severity: ClassVar[str] = "error"
    title: ClassVar[str] = "diagnostic"
    template: ClassVar[str] = "{message}"

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if cls.code in REGISTRY and REGISTRY[cls.code] is not cls:
            raise ValueError(f"diagnostic code {cls.code} used twice")
        REGISTRY[cls.code] = cls

    def __init__(self, span: Span | None = None, path: str | None = None, **args: Any) -> None:
        self.span = span or NO_SPAN
        self.path = path
        self.args = args

    @property
    def message(self) -> str:
        """The rendered message."""
        try:
            return self.template.format(**self.args)
        except (KeyError, IndexError, ValueError):
            return self.template + " " + repr(self.args)

    def with_path(self, path: str) -> Diagnostic:
        """This diagnostic with its file path set (returns self for chaining)."""
        self.path = path
        return self

    def to_dict(self) -> dict[str, Any]:
        """The JSON form used by the reporters."""
        return {
            "line": self.span.line,
            "column": self.span.column,
            "end_line": self.span.end_line,
            "end_column": self.span.end_column,
            "severity": self.severity,
            "code": self.code,
            "message": self.message,
        }

    def render(self) -> str:
        """Compiler-style one-line form `path:line:col: severity: message [code]`."""
        path = self.path or "<input>"
        return f"{path}:{self.span.line}:{self.span.column}: {self.severity}: {self.message} [{self.code}]"

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.code} {self.span.line}:{self.span.column} {self.message!r}>"


class InternalError(Diagnostic):
    """An unexpected failure inside one nest's analysis; the rest of the report goes on."""

    code = "TC900"
    severity = "error"
    title = "internal-error"
    template = "internal error while analyzing this nest ({what}); please report it. The other nests are unaffected"


class UnreadableFile(Diagnostic):
    """A file that cannot be read at all."""

    code = "TC901"
    severity = "error"
    title = "unreadable-file"
    template = "cannot read file: {reason}"


class InvalidEncoding(Diagnostic):
    """Bytes that are not UTF-8; they are replaced and the file is read anyway."""

    code = "TC190"
    severity = "warning"
    title = "invalid-encoding"
    template = "byte {byte} is not valid UTF-8; read as U+FFFD"


class BuildFlagsUnreadable(Diagnostic):
    """A compilation database that applies to the file cannot be read; the file is read without it."""

    code = "TC191"
    severity = "warning"
    title = "compile-commands-unreadable"
    template = "cannot use {reason}; this file is read without its build flags"


def sort_key(d: Diagnostic) -> tuple[str, int, int, str]:
    """Order diagnostics by file, position and code."""
    return (d.path or "", d.span.line, d.span.column, d.code)
