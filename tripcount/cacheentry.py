# The schema of result cache entries, checked before an entry is used.
#
# Whoever can write the cache directory (a CI cache restored from another job,
# a shared directory, a damaged disk) decides what is in an entry; an entry
# that parses as JSON is still only data of unknown shape. Every entry is
# checked here against the shape the cache writes (tripcount/cache.py), and
# anything else is a miss: never an internal error, never a nest that
# silently vanishes. Typed summaries must survive NestSummary's from_json /
# to_json round trip unchanged, so only what the cache itself could have
# written gets through.

from __future__ import annotations

import re
from typing import Any

from tripcount.analysis.summary import NestSummary
from tripcount.diagnostics import from_dict
from tripcount.report.text import RANKING_FIELDS

MAX_DEPTH = 48  # the deepest entry the cache writes is about 12 levels
MAX_NODES = 2_000_000
SEVERITIES = ("error", "warning", "note")
_CODE = re.compile(r"TC\d{3}\Z")
SLICE = "__source_slice__"
_SPAN_KEYS = ("line", "column", "end_line", "end_column")


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _pos(v: Any) -> bool:
    return _is_int(v) and v >= 1


def bounded(data: Any) -> bool:
    """True when `data` nests at most MAX_DEPTH deep and has at most MAX_NODES
    values (walked without recursion, so a hostile depth cannot overflow)."""
    stack = [(data, 0)]
    nodes = 0
    while stack:
        x, depth = stack.pop()
        nodes += 1
        if depth > MAX_DEPTH or nodes > MAX_NODES:
            return False
        if isinstance(x, dict):
            stack.extend((v, depth + 1) for v in x.values())
        elif isinstance(x, list):
            stack.extend((v, depth + 1) for v in x)
    return True


def valid_diagnostic(d: Any) -> bool:
    """A diagnostic exactly as Diagnostic.to_dict writes it: a code of the
    catalogue, and a message that its structured arguments render again."""
    if not (isinstance(d, dict) and _pos(d.get("line")) and _pos(d.get("column"))
            and all(k not in d or _pos(d[k]) for k in ("end_line", "end_column"))
            and d.get("severity") in SEVERITIES and isinstance(d.get("code"), str)
            and _CODE.match(d["code"]) is not None and isinstance(d.get("message"), str)
            and isinstance(d.get("args"), dict)):
        return False
    if not _valid_args(d["args"]):
        return False
    try:
        diag = from_dict(d)
        return diag is not None and diag.to_dict() == d
    except (TypeError, ValueError, AttributeError, KeyError):
        return False


def _valid_arg(v: Any) -> bool:
    # a plain value, a span (with `loop` when it names a loop), or a phrase of those
    if v is None or isinstance(v, (str, int, float, bool)):
        return True
    if isinstance(v, list):
        return all(_valid_arg(x) for x in v)
    return (isinstance(v, dict) and all(_pos(v.get(k)) for k in _SPAN_KEYS)
            and set(v) <= {*_SPAN_KEYS, "loop"} and isinstance(v.get("loop", ""), str))


def _valid_args(args: dict[str, Any]) -> bool:
    return all(isinstance(k, str) and _valid_arg(v) for k, v in args.items())


def valid_diagnostics(ds: Any) -> bool:
    """A list of diagnostics."""
    return isinstance(ds, list) and all(valid_diagnostic(d) for d in ds)


def _valid_text(t: Any) -> bool:
    # a statement text as written, or the source range it is cut from again
    if isinstance(t, str):
        return True
    return isinstance(t, dict) and t.get(SLICE) == 1 and all(_pos(t.get(k)) for k in _SPAN_KEYS)


def _unsliced(d: dict[str, Any]) -> dict[str, Any]:
    # the statements with a placeholder for a slice, as the round trip sees them
    stmts = d.get("statements")
    if not isinstance(stmts, list):
        return d
    return {**d, "statements": [{**s, "text": ""} if isinstance(s, dict) and isinstance(s.get("text"), dict)
                                else s for s in stmts]}


def valid_summary(d: Any) -> bool:
    """A typed nest summary exactly as NestSummary.to_json writes it."""
    if not isinstance(d, dict) or not isinstance(d.get("statements"), list):
        return False
    if not all(isinstance(s, dict) and _valid_text(s.get("text")) for s in d["statements"]):
        return False
    plain = _unsliced(d)
    try:
        return NestSummary.from_json(plain).to_json() == plain
    except (TypeError, ValueError, AttributeError, KeyError, ArithmeticError):
        return False


def valid_nest(d: Any) -> bool:
    """A nest of the JSON report (jsonout.nest_json): the fields the cache and the
    reporters read, with their types."""
    if not (isinstance(d, dict) and isinstance(d.get("function"), str) and all(_pos(d.get(k)) for k in _SPAN_KEYS)):
        return False
    params, loops, stmts = d.get("parameters"), d.get("loops"), d.get("statements")
    if not (isinstance(params, list) and all(isinstance(p, str) for p in params)):
        return False
    if not (isinstance(loops, list) and isinstance(stmts, list)):
        return False
    for item in loops + stmts:
        if not (isinstance(item, dict) and all(_pos(item.get(k)) for k in _SPAN_KEYS)):
            return False
    return all(_valid_text(s.get("text")) for s in stmts)


def valid_anchors(a: Any) -> bool:
    """Token positions of an entry: a flat list of line, column pairs."""
    return isinstance(a, list) and len(a) % 2 == 0 and all(_pos(v) for v in a)


_CONTROL = re.compile(r"[\x00-\x09\x0b-\x1f\x7f]")  # a stored report is printed to a terminal: no escapes


def _strs(v: Any) -> bool:
    return isinstance(v, list) and all(isinstance(x, str) for x in v)


def _ranking_entry(e: Any) -> bool:
    if not (isinstance(e, dict) and _pos(e.get("line")) and isinstance(e.get("function"), str)
            and isinstance(e.get("roofline"), dict) and set(e["roofline"]) == set(RANKING_FIELDS)):
        return False
    return all(v is None or (isinstance(v, RANKING_FIELDS[k]) and not isinstance(v, bool))
               for k, v in e["roofline"].items())


def valid_rendering(d: Any) -> bool:
    """A file's text report as RenderedFile.to_json writes it (and no terminal control characters)."""
    return (isinstance(d, dict) and isinstance(d.get("text"), str)
            and _CONTROL.search(d["text"]) is None and _is_int(d.get("nests")) and d["nests"] >= 0
            and all(_strs(d.get(k)) for k in ("codes", "params", "names"))
            and all(_CODE.match(c) for c in d["codes"])
            and isinstance(d.get("entries"), list) and all(_ranking_entry(e) for e in d["entries"]))


def valid_entry(kind: str, data: Any) -> bool:
    """True when `data` has the shape the cache writes for entries of `kind`."""
    if not isinstance(data, dict) or not bounded(data):
        return False
    if kind == "text":
        return valid_rendering(data.get("report"))
    if kind == "file":
        f = data.get("file")
        return (isinstance(f, dict) and isinstance(f.get("nests"), list) and isinstance(f.get("summaries"), list)
                and len(f["nests"]) == len(f["summaries"]) and all(valid_nest(n) for n in f["nests"])
                and all(valid_summary(s) for s in f["summaries"]) and valid_diagnostics(f.get("diagnostics")))
    if not (valid_diagnostics(data.get("diagnostics")) and valid_anchors(data.get("anchors"))):
        return False
    if kind == "out":
        return True
    if not isinstance(data.get("wide"), bool):
        return False
    if kind == "fn":
        return True
    if kind == "nest":
        if "nest" not in data:
            return False  # `{"key": K}` alone is not "a loop the model made no nest of"
        if data["nest"] is None:
            return "summary" not in data or data["summary"] is None
        return valid_nest(data["nest"]) and valid_summary(data.get("summary"))
    return False
