# Footprint: the per-level text table (working sets, cache fit) and the nest
# totals (footprint, flops, intensity) shown by the text report.

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Protocol

from tripcount.analysis.caches import CacheHierarchy, fmt_bytes
from tripcount.analysis.results import Count


class NestFootprint(Protocol):
    """The fields of a nest's footprint result (results.NestFootprint) that the table shows.

    Declared here so that the result, which renders itself through this
    module, is not imported back.
    """

    footprint: Any  # results.Footprint
    levels: list[Any]  # results.WorkingSet per loop level
    caches: CacheHierarchy
    at: dict[str, int]
    flops: Any  # flops.Flops or None
    intensity: Any  # results.Intensity or None
    sized: bool

def _fmt_at(at: Mapping[str, int]) -> str:
    return ", ".join(f"{k}={v}" for k, v in at.items()) or "any size"



def _piece_expr(c: Count, point: Mapping[str, int] | None = None) -> str | None:
    """Formula text of a count: the piece valid at `point` (the --at sizes), else the generic piece."""
    if c.formula is None:
        return None
    pieces = list(c.formula.pieces)
    if not pieces:
        return "0"
    if point:
        for p in pieces:
            try:
                if p.contains(point):
                    return p.poly.to_expr()
            except (KeyError, AttributeError):
                break
    return pieces[0].poly.to_expr()


def _short(expr: str, c: Count, limit: int = 44) -> str:
    """A long formula is shown by its leading term (the JSON report has it all)."""
    if len(expr) <= limit or c.formula is None:
        return expr
    return "~" + c.formula.leading()


def _value_text(c: Count | None, unit: str = "") -> str:
    if c is None or c.value is None:
        return "-"
    v = c.value
    if unit == "bytes":
        text = fmt_bytes(v)
    else:
        text = f"{int(v):,}" if isinstance(v, int) else str(v)
    if getattr(c, "bound", False) and getattr(c, "lower_bound", False):
        return "unknown"  # an upper bound of a footprint that misses references bounds nothing
    if getattr(c, "bound", False):
        text = "<= " + text
    elif getattr(c, "lower_bound", False):
        text = ">= " + text
    return text


def _sources(h: CacheHierarchy) -> str:
    names = {"host": "from this host", "default": "default (host not read)", "configured": "configured"}
    return ", ".join(sorted({names.get(lv.source, lv.source) for lv in h.levels}))


def _caches_text(h: CacheHierarchy) -> str:
    sources = {lv.source for lv in h.levels}
    levels = ", ".join(f"{lv.name} {fmt_bytes(lv.size)}" + ("" if len(sources) == 1 else f" ({lv.source})")
                       for lv in h.levels)
    where = {"host": " from this host", "default": " (defaults: host not read)", "configured": " (configured)"}
    return levels + (where.get(next(iter(sources)), "") if len(sources) == 1 else "") + f", {h.line_size} B lines"


def text_table(nf: NestFootprint) -> list[str]:
    """The per-level working-set table and the nest totals (footprint, flops, intensity)."""
    out: list[str] = []
    at = _fmt_at(nf.at)
    if not nf.levels and not nf.footprint.by_array:
        out.append("working sets: unknown (the nest could not be modelled)")
    else:
        out.append(f"working sets (model estimate: {_caches_text(nf.caches)}; fully associative, capacity only):")
        head = ("loop", "bytes touched by all its iterations, outer variables fixed",
                (f"at {at}" if nf.at else "value") if nf.sized else "", "in lines" if nf.sized else "", "fits" if nf.sized else "", "reused by")
        rows = [head]
        for ws in nf.levels:
            fp = ws.whole
            point = nf.at if nf.sized and not fp.fixed else None
            expr = _piece_expr(fp.bytes, point)
            if fp.typical_piece is not None and fp.bytes.formula is not None:
                expr = fp.bytes.formula.pieces[fp.typical_piece].poly.to_expr()
            if expr is not None:
                expr = _short(expr, fp.bytes)
                # one piece of several is shown: say so, as the loop rows do (the JSON has every piece)
                others = len(fp.bytes.formula.pieces) - 1 if fp.bytes.formula is not None else 0
                if others > 0:
                    expr += f" [+{others} case{'s' if others > 1 else ''}]"
            else:
                el = _piece_expr(fp.elements, point)
                expr = (_short(el, fp.elements) + " elements") if el is not None else (
                    "no formula" if fp.bytes.value is not None else (fp.bytes.note or "unknown"))
            if fp.fixed:
                expr += f"  (for each {', '.join(fp.fixed)})"
            fits = ""
            if ws.fits:
                fitting = [k for k, ok in ws.fits.items() if ok]
                if getattr(fp.lines, "bound", False):
                    # an upper bound proves the fit it shows; a smaller cache may hold the true set too
                    smaller = fitting and fitting[0] != nf.caches.levels[0].name
                    fits = (f"{fitting[0]} (smaller not checked: bound)" if smaller else fitting[0]) if fitting \
                        else "may not fit"
                else:
                    fits = fitting[0] if fitting else "none"
                thr = [(f"{k} while {t.text()}" if t.largest is not None and t.largest >= 1 else
                        f"{k}: {t.text()}") for k, t in ws.thresholds.items()
                       if not ws.fits.get(k, True) and not t.unbounded]
                if thr:
                    fits += f" ({thr[-1]})"
            reuse = "-" if ws.loop.parent is None else (
                f"loop {ws.outer_var}" if ws.reuse else ("nothing" if ws.reuse is False else "?"))
            value = _value_text(fp.bytes, "bytes") if nf.sized else ""
            if nf.sized and fp.bytes.value is None and fp.elements.value is not None:
                value = f"{_value_text(fp.elements)} elements"
            in_lines = fmt_bytes(ws.occupancy) if ws.occupancy is not None else ("-" if nf.sized else "")
            if ws.occupancy is not None and fp.lower_bound and not fp.lines.bound:
                in_lines = ">= " + in_lines
            elif ws.occupancy is not None and getattr(fp.lines, "bound", False) and not fp.lower_bound:
                in_lines = "<= " + in_lines
            rows.append((f"{ws.loop.var} (line {ws.loop.span.line})", expr, value, in_lines, fits, reuse))
        widths = [min(max(len(r[k]) for r in rows), 60) for k in range(6)]
        shown = [k for k in range(6) if head[k]]  # a column is kept or dropped whole, never cell by cell
        for r in rows:
            out.append("  " + "  ".join(r[k].ljust(widths[k]) for k in shown).rstrip())
        if nf.sized:
            out.append("  (values: the largest over the outer loop variables, exact at these sizes unless marked "
                       "'<=' or '>=', in the packed row-major layout, arrays starting on a line boundary; "
                       "'in lines': the whole cache lines they occupy; 'fits': the smallest cache holding them)")
            out.append("  (legend: '<=' an upper bound, '>=' a lower bound, '~' the leading term of a long formula; "
                       "'reused by': 'nothing' = the enclosing loop does not touch these lines again, "
                       "'-' = no enclosing loop)")
        partial = [ws for ws in nf.levels if ws.whole.lower_bound]
        if partial:
            out.append("  (>=: a lower bound, the loop's references that are not modelled are left out: "
                       + ", ".join(f"loop {ws.loop.var}" for ws in partial) + ")")
    fp = nf.footprint
    n_arr = len(fp.by_array)
    if n_arr:
        el = _piece_expr(fp.elements, nf.at if nf.sized else None) or "-"
        line = f"footprint of the nest: {n_arr} array{'s' if n_arr != 1 else ''}, {_short(el, fp.elements)} elements"
        by = _piece_expr(fp.bytes, nf.at if nf.sized else None)
        if by is not None:
            line += f", {_short(by, fp.bytes)} bytes"
        if nf.sized and fp.bytes.value is not None:
            line += f" {'>=' if fp.lower_bound else '='} {fmt_bytes(fp.bytes.value)} at {at}"
        elif fp.bytes.note and fp.bytes.value is None:
            line += f" ({fp.bytes.note})"
        out.append(line)
    for note in fp.notes:
        if not note.startswith("formula not available"):
            out.append(f"  note: {note}")
    if nf.flops is not None:
        out.extend(_flops_lines(nf, at))
    return out


def _flops_lines(nf: NestFootprint, at: str) -> list[str]:
    f = nf.flops
    if f is None:
        return []
    total = f.count
    if total.formula is not None and total.formula.is_zero() or total.value == 0 and total.formula is None:
        return ["flops: none (no floating-point arithmetic)"]
    expr = _piece_expr(total, nf.at if nf.sized else None)
    line = "flops " + (_short(expr, total) if expr is not None else "unknown")
    if nf.sized and total.value is not None:
        line += f" = {_value_text(total)}"
    kinds = []
    for k in ("add", "mul", "div"):
        c = f.kinds[k].count
        if c.value or (c.formula is not None and not c.formula.is_zero()):
            kinds.append(f"{k} {_value_text(c) if nf.sized and c.value is not None else _piece_expr(c)}")
    for name, wc in sorted(f.calls.items()):
        c = wc.count
        if c.value or (c.formula is not None and not c.formula.is_zero()):
            kinds.append(f"{name} {_value_text(c) if nf.sized and c.value is not None else _piece_expr(c)}")
    if kinds:
        line += f" ({', '.join(kinds)})"
    out = [line]
    it = nf.intensity
    if it is not None and (it.value is not None or it.asymptotic):
        parts = []
        if it.asymptotic:
            parts.append(f"{it.asymptotic} flop/byte for large sizes")
        if it.value is not None:
            parts.append(f"{float(it.value):.3g} at {at}")
        out.append("arithmetic intensity " + ("at most " if it.upper_bound else "") + "; ".join(parts)
                   + " (model estimate: flops / compulsory bytes, each moved once"
                   + ("; the footprint is a lower bound)" if it.upper_bound else ")"))
        # the time estimate is the roofline unit's own line (it reads the traffic per level); the
        # compulsory-bytes figure stays in the JSON (intensity.roofline) only
    return out


