# Diagnostics, the common part: the Diagnostic base class, the registry of
# classes by code, and the structured arguments of a message.
#
# A diagnostic keeps its arguments as values, not as text: a position named
# inside the message (the loop header, the `#if` it belongs to) is a Span or
# a LoopRef, rendered only when the message is shown. The JSON form carries
# the arguments beside the rendered message, so that a stored diagnostic can
# have its positions moved (the result cache, after an edit above the nest)
# and be rendered again, and so that consumers never parse message text.

from __future__ import annotations

import re
import string
from dataclasses import dataclass
from typing import Any, ClassVar

from tripcount.ir import NO_SPAN, Span

SEVERITIES = ("error", "warning", "note")

REGISTRY: dict[str, type[Diagnostic]] = {}

_SPAN_KEYS = ("line", "column", "end_line", "end_column")
_CODE = re.compile(r"TC\d{3}")


@dataclass(frozen=True)
class LoopRef:
    """A loop named in a message: its variable ("?" when unknown) and header."""

    var: str
    span: Span

    def __str__(self) -> str:
        inside = "..." if self.var == "?" else f"{self.var} ..."
        return f"loop 'for ({inside})' at {self.span.line}:{self.span.column}"


@dataclass(frozen=True)
class Phrase:
    """Text with positions in it (a reason such as "unexpected '}' at 5:3"):
    strings, Spans and LoopRefs, rendered one after the other."""

    parts: tuple[str | Span | LoopRef, ...]

    def __str__(self) -> str:
        return "".join(_FORMAT.format_field(p, "") for p in self.parts)


def arg_json(value: Any) -> Any:
    """The JSON form of one message argument: a span becomes its four position
    fields (plus `loop` for a LoopRef), a Phrase the list of its parts, a value
    of another type (a Fraction) its text."""
    if isinstance(value, LoopRef):
        return {"loop": value.var, **span_json(value.span)}
    if isinstance(value, Span):
        return span_json(value)
    if isinstance(value, Phrase):
        return [arg_json(v) for v in value.parts]
    if isinstance(value, dict):
        return {str(k): arg_json(v) for k, v in value.items()}
    if value is None or isinstance(value, (str, int, float, bool)):
        return value
    return str(value)  # e.g. a Fraction: its text is what the message shows


def arg_from_json(value: Any) -> Any:
    """The argument a JSON value stands for (inverse of arg_json)."""
    if isinstance(value, dict):
        if all(isinstance(value.get(k), int) for k in _SPAN_KEYS):
            span = Span(*(value[k] for k in _SPAN_KEYS))
            return LoopRef(str(value["loop"]), span) if "loop" in value else span
        return dict(value)
    if isinstance(value, list):
        return Phrase(tuple(arg_from_json(v) for v in value))
    return value


def span_json(span: Span) -> dict[str, int]:
    """The position fields of a span (1-based, exclusive end)."""
    return {"line": span.line, "column": span.column, "end_line": span.end_line, "end_column": span.end_column}


class _Formatter(string.Formatter):
    """str.format with positions: `{x}` of a Span reads `line:column`, `{x:line}` just the line."""

    def format_field(self, value: Any, format_spec: str) -> str:
        if isinstance(value, Span):
            return str(value.line) if format_spec == "line" else f"{value.line}:{value.column}"
        if isinstance(value, LoopRef):
            return str(value.span.line) if format_spec == "line" else str(value)
        if isinstance(value, Phrase):
            return str(value)
        return super().format_field(value, format_spec)


_FORMAT = _Formatter()


class Diagnostic:
    """Base class. Subclasses set `code`, `severity`, `title` and `template`;
    the class docstring is the rule's description (SARIF, README).

    `template` is formatted with the keyword arguments given at construction,
    e.g. `NonConstantStep(span, loop=LoopRef("i", header), step="i*=2", ...)`,
    when the message is shown.
    """

    code: ClassVar[str] = ""
    severity: ClassVar[str] = "error"
    title: ClassVar[str] = "diagnostic"
    template: ClassVar[str] = ""

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if not _CODE.fullmatch(cls.code):
            raise ValueError(f"{cls.__name__}: code {cls.code!r} is not of the form TCnnn")
        if cls.code in REGISTRY and REGISTRY[cls.code] is not cls:
            raise ValueError(f"diagnostic code {cls.code} used twice")
        if cls.severity not in SEVERITIES:
            raise ValueError(f"{cls.code}: unknown severity {cls.severity!r}")
        REGISTRY[cls.code] = cls

    def __init__(self, span: Span | None = None, path: str | None = None, **args: Any) -> None:
        self.span = span or NO_SPAN
        self.path = path
        self.args = args

    @classmethod
    def fields(cls) -> list[tuple[str, str]]:
        """(name, format spec) of every argument the template uses, in order."""
        return [(name, spec or "") for _, name, spec, _ in _FORMAT.parse(cls.template) if name]

    @classmethod
    def description(cls) -> str:
        """The rule's description: the class docstring as one paragraph."""
        return " ".join((cls.__doc__ or cls.title).split())

    @property
    def message(self) -> str:
        """The rendered message."""
        try:
            return _FORMAT.format(self.template, **self.args)
        except (KeyError, IndexError, ValueError, TypeError, AttributeError):
            return self.template + " " + repr(self.args)

    def with_path(self, path: str) -> Diagnostic:
        """This diagnostic with its file path set (returns self for chaining)."""
        self.path = path
        return self

    def to_dict(self) -> dict[str, Any]:
        """The JSON form used by the reporters and the cache."""
        return {
            **span_json(self.span),
            "severity": self.severity,
            "code": self.code,
            "message": self.message,
            "args": {k: arg_json(v) for k, v in self.args.items()},
        }

    def render(self) -> str:
        """Compiler-style one-line form `path:line:col: severity: message [code]`."""
        path = self.path or "<input>"
        return f"{path}:{self.span.line}:{self.span.column}: {self.severity}: {self.message} [{self.code}]"

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.code} {self.span.line}:{self.span.column} {self.message!r}>"


def sort_key(d: Diagnostic) -> tuple[str, int, int, str]:
    """Order diagnostics by file, position and code."""
    return (d.path or "", d.span.line, d.span.column, d.code)
