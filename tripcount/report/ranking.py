# Reporter part: "where the time goes" -- the nests of a run ranked by their
# roofline time estimate, or by flops (then memory bytes) when no machine
# description is given.
#
# It reads each nest's `roofline` object in its JSON form, so the same
# ranking comes from live results (text report) and from the result cache's
# file JSON (JSON report); the text report keeps only these small entries
# while it streams files.

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from tripcount.analysis.results import FileResult
from tripcount.analysis.roofline import HINT, fmt_seconds

DEFAULT_TOP = 10
NOTE = ("model estimate: roofline lower bound per nest (Williams, Waterman & Patterson, CACM 2009); "
        "see each nest's roofline assumptions")


@dataclass(frozen=True)
class Entry:
    """One nest of the ranking: where it is and its `roofline` JSON object."""

    path: str
    line: int
    function: str
    roofline: dict[str, Any]

    @property
    def seconds(self) -> float | None:
        """The estimated time (None without a machine description)."""
        return self.roofline.get("seconds")

    @property
    def flops(self) -> float:
        """Flops at the --at sizes (0 when unknown)."""
        return float(self.roofline.get("flops") or 0)

    @property
    def memory_bytes(self) -> float:
        """Bytes from memory at the --at sizes (0 when unknown)."""
        return float(self.roofline.get("memory_bytes") or 0)


def entries_of(fr: FileResult) -> list[Entry]:
    """The ranking entries of one file's live results."""
    out = []
    for nr in fr.nests:
        rf = nr.extras.get("roofline")
        if rf is not None:
            out.append(Entry(fr.path, nr.nest.span.line, nr.nest.function, rf.to_json()))
    return out


def entries_of_json(files: list[dict[str, Any]]) -> list[Entry]:
    """The ranking entries of the report's file JSON."""
    return [Entry(f["path"], n["line"], n["function"], n["roofline"])
            for f in files for n in f["nests"] if isinstance(n.get("roofline"), dict)]


def by_time(entries: list[Entry]) -> bool:
    """Rank by time: every entry with a value has a time (a machine description was given)."""
    return any(e.seconds is not None for e in entries)


def ranked(entries: list[Entry]) -> list[Entry]:
    """Largest first: by time, else by flops then memory bytes; ties in source order."""
    if by_time(entries):
        return sorted(entries, key=lambda e: -(e.seconds or 0.0))
    return sorted(entries, key=lambda e: (-e.flops, -e.memory_bytes))


def _shares(entries: list[Entry]) -> list[float | None]:
    timed = by_time(entries)
    total = sum((e.seconds or 0.0) if timed else e.flops for e in entries)
    return [(((e.seconds or 0.0) if timed else e.flops) / total) if total else None for e in entries]


def ranking_json(entries: list[Entry], top: int = DEFAULT_TOP) -> dict[str, Any]:
    """The top-level `summary` object: every nest ranked (`top` is what the text report shows)."""
    order = ranked(entries)
    rows = []
    for k, (e, share) in enumerate(zip(order, _shares(order), strict=True)):
        r = e.roofline
        rows.append({"rank": k + 1, "path": e.path, "line": e.line, "function": e.function,
                     "seconds": e.seconds, "share": None if share is None else round(share, 6),
                     "flops": r.get("flops"), "memory_bytes": r.get("memory_bytes"),
                     "memory_from": r.get("memory_from"), "degree": r.get("degree"),
                     "intensity": r.get("intensity"), "binding": r.get("binding")})
    timed = by_time(entries)
    return {"ranked_by": "time" if timed else "flops",
            "total_seconds": sum(e.seconds or 0.0 for e in entries) if timed else None,
            "top": top, "nests": rows, "estimate": True,
            "note": NOTE if timed else "no machine description: ranked by flops, then bytes from memory"}


def _num(v: float | None) -> str:
    if v is None:
        return "-"
    for unit, scale in (("E", 1e18), ("P", 1e15), ("T", 1e12), ("G", 1e9), ("M", 1e6), ("k", 1e3)):
        if abs(v) >= scale:
            return f"{v / scale:.3g}{unit}"
    return f"{v:.3g}"


def ranking_text(entries: list[Entry], top: int = DEFAULT_TOP) -> list[str]:
    """The table 'where the time goes' (for fewer than two nests, at most the hint)."""
    if len(entries) < 2:
        return [HINT] if entries and not by_time(entries) else []
    order = ranked(entries)
    shares = _shares(order)
    timed = by_time(order)
    shown = order[:max(0, top)]
    head = (f"where the time goes: {len(order)} nests ranked by estimated time (roofline lower bound, model "
            f"estimate), total {fmt_seconds(sum(e.seconds or 0.0 for e in order))}" if timed else
            f"where the work goes: {len(order)} nests ranked by flops, then bytes from memory (no machine "
            "description: no time)")
    lines = [head + (f"; top {len(shown)}" if len(shown) < len(order) else "")]
    cols = ["#", "time", "share", "flops", "mem bytes", "deg", "flop/B", "bound by"] if timed else \
        ["#", "share", "flops", "mem bytes", "deg", "flop/B"]
    rows = []
    for k, (e, share) in enumerate(zip(shown, shares, strict=False)):
        r = e.roofline
        cells = {"#": str(k + 1), "time": fmt_seconds(e.seconds), "share": "-" if share is None else f"{share:.1%}",
                 "flops": _num(r.get("flops")),
                 "mem bytes": _num(r.get("memory_bytes")) + ("*" if r.get("memory_from") != "traffic" else ""),
                 "deg": "-" if r.get("degree") is None else str(r["degree"]), "flop/B": _num(r.get("intensity")),
                 "bound by": r.get("binding") or "-"}
        rows.append([cells[c] for c in cols] + [f"{e.path}:{e.line} {e.function}()"])
    widths = [max(len(c), *(len(row[i]) for row in rows)) for i, c in enumerate(cols)]
    lines.append("  ".join(c.rjust(w) for c, w in zip(cols, widths, strict=True)) + "  nest")
    for row in rows:
        lines.append("  ".join(x.rjust(w) for x, w in zip(row, widths, strict=False)) + "  " + row[-1])
    if any(e.roofline.get("memory_from") != "traffic" for e in shown):
        lines.append("  * compulsory bytes only (no traffic model): a lower bound on the bytes moved"
                     + (", so the time is a lower bound too" if timed else ""))
    lines.append("  " + (NOTE if timed else HINT))
    return lines
