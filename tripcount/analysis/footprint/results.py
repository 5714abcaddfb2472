# Footprint results: the objects the footprint analysis attaches to a nest's
# result (working sets, worst cases, cache-fit thresholds, intensity), their
# JSON shapes and the stated model assumptions (the TC4xx diagnostics are in
# tripcount/diagnostics/memory.py).

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import islpy as isl

from tripcount.analysis import flops as flops_mod
from tripcount.analysis.caches import CacheHierarchy
from tripcount.analysis.footprint.table import text_table
from tripcount.analysis.results import Count
from tripcount.model import Loop

LAYOUT_NOTE = ("row-major C layout of the declared types, arrays do not overlap and each starts on a cache-line "
               "boundary; values at the --at sizes: the packed layout (line = floor((i0*E1*...*En + ... + i_last)"
               "*elem/line)) whenever the inner extents are known there, exact, the largest over the outer loop "
               "variables (a value that is only a bound says so and which side); formulas in the sizes: the same "
               "packed layout when all inner extents are constants, else every row assumed to start on a line "
               "boundary (line = (i0, ..., floor(i_last*elem/line))), marked `formula_assumes` where the value "
               "at the --at sizes does not share that assumption")
CACHE_ASSUMPTIONS = ("model estimate: fully associative caches, capacity only (no replacement policy, "
                     "no conflict misses), no other data or threads competing, row-major layout, "
                     "the working set counted in whole cache lines")
CACHE_MODEL_SHORT = ("model estimate: fully associative capacity-only caches, no other traffic, "
                     "row-major layout")
INTENSITY_ASSUMPTIONS = ("model estimate: flops divided by compulsory traffic -- every byte of the whole-nest "
                         "footprint moved from memory exactly once, nothing else")


# --------------------------------------------------------------------------
# Result objects


@dataclass
class FCount(Count):
    """A count object with what its value means (maximum over outer variables, bound)."""

    value_is: str | None = None
    bound: bool = False
    worst_at: dict[str, int] | None = None
    lower_bound: bool = False  # references are left out: the true count is at least this
    value_bound: str | None = None  # "upper"/"lower" when the value at the --at sizes is only a bound
    formula_assumes: str | None = None  # an assumption of the formula that the value need not share
    # a value at the extreme outer values, shown largest only at probe sizes: not yet the maximum at the
    # --at sizes (the exact maximum replaces it, or it is dropped)
    unchecked: bool = False

    def to_json(self) -> dict[str, Any]:
        """Count object plus `value_is`, `bound`, `lower_bound`, `worst_at`, `value_bound` and
        `formula_assumes` when set."""
        out = super().to_json()
        if self.value_bound:
            out["value_bound"] = self.value_bound
        if self.formula_assumes:
            out["formula_assumes"] = self.formula_assumes
        if self.value_is:
            out["value_is"] = self.value_is
        if self.bound:
            out["bound"] = True
        if self.lower_bound:
            out["lower_bound"] = True
        if self.worst_at:
            out["worst_at"] = dict(self.worst_at)
        return out


@dataclass
class ArrayFootprint:
    """One array's share of a footprint."""

    array: str
    elem_size: int | None
    layout: str  # "rows aligned" or "linear"
    elements: Count
    bytes: Count
    lines: Count

    def to_json(self) -> dict[str, Any]:
        """elements, bytes, lines (count objects), element size and layout model."""
        return {"elements": self.elements.to_json(), "bytes": self.bytes.to_json(),
                "lines": self.lines.to_json(), "elem_size": self.elem_size, "layout": self.layout}


@dataclass
class Worst:
    """Worst case of a per-level footprint over the fixed loop variables, as a function of the sizes.

    Either exact at the extreme values of the fixed variables (`where`: their
    values as expressions of the sizes; `exprs`: the footprint formulas there),
    as checked by evaluation, or a safe upper bound (`bound`: the footprint with
    the fixed variables free, `counts` its formulas).
    """

    fixed: tuple[str, ...]
    bound: bool
    method: str
    where: dict[str, str] | None = None
    exprs: dict[str, Any] = field(default_factory=dict)  # key -> QPoly at the extreme values (or None)
    values: dict[str, int | Fraction | None] = field(default_factory=dict)  # at the --at sizes
    counts: dict[str, Count] | None = None  # the bound's count objects
    evaluate: Callable[[str, Mapping[str, int]], int | Fraction | None] | None = field(default=None, repr=False)
    lower_bound: bool = False  # the footprint it bounds leaves references out

    def value(self, key: str, sizes: Mapping[str, int]) -> int | Fraction | None:
        """Exact worst-case (or bound) value of 'elements', 'bytes' or 'lines' at some sizes."""
        return self.evaluate(key, sizes) if self.evaluate is not None else None

    def to_json(self) -> dict[str, Any]:
        """bound, method, where, and elements/bytes/lines (value, expr, degree, leading)."""
        out: dict[str, Any] = {"bound": self.bound, "method": self.method, "where": self.where}
        if self.lower_bound:
            out["lower_bound"] = True
        for key in ("elements", "bytes", "lines"):
            if self.counts is not None:
                c = self.counts.get(key)
                out[key] = None if c is None else c.to_json()
                continue
            q = self.exprs.get(key)
            out[key] = {"value": _json_value(self.values.get(key)),
                        "expr": None if q is None else q.to_expr(),
                        "degree": None if q is None else q.degree(),
                        "leading": None if q is None else q.leading()}
        return out


def _json_value(v: int | Fraction | None) -> int | str | None:
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else str(v)
    return v


@dataclass
class Footprint:
    """Distinct elements, bytes and lines touched in one scope, in total and per array."""

    scope: str  # human label of what was counted
    fixed: tuple[str, ...]  # loop variables held fixed (they appear in the formulas)
    elements: Count
    bytes: Count
    lines: Count
    by_array: dict[str, ArrayFootprint] = field(default_factory=dict)
    worst: Worst | None = None  # worst case over the fixed variables
    notes: list[str] = field(default_factory=list)
    quantities: dict[str, Any] = field(default_factory=dict, repr=False)  # totals, for evaluation
    typical_piece: int | None = None  # piece holding for most outer values at the --at sizes (text)
    lower_bound: bool = False  # references of the scope are left out (the notes say which)
    time_limited: bool = False  # a formula is missing because a time limit stopped it (not cached)

    def to_json(self) -> dict[str, Any]:
        """The footprint shape of the JSON report."""
        out: dict[str, Any] = {"scope": self.scope, "fixed": list(self.fixed),
                               "elements": self.elements.to_json(), "bytes": self.bytes.to_json(),
                               "lines": self.lines.to_json(),
                               "by_array": {k: v.to_json() for k, v in self.by_array.items()}}
        if self.lower_bound:
            out["lower_bound"] = True
        if self.fixed:
            out["worst"] = None if self.worst is None else self.worst.to_json()
        if self.notes:
            out["notes"] = list(self.notes)
        return out


@dataclass
class Threshold:
    """Largest value of a size for which a working set still fits a cache level."""

    param: str
    largest: int | None  # None: does not fit even at the smallest size
    unbounded: bool = False  # fits at every size searched
    safe: bool = False  # computed from an upper bound: fits at least up to `largest`
    fixed: dict[str, int] = field(default_factory=dict)
    checked: bool = False  # the exact count (packed layout) fits at `largest` and not one past it
    assumes: str | None = None  # "rows aligned": from the formula's layout, not checked with the exact count

    def text(self) -> str:
        """'N <= 2047', 'any N', 'no N >= 1'."""
        if self.unbounded:
            return f"any {self.param}"
        if self.largest is None or self.largest < 1:  # fitting only an empty loop is no answer
            return f"no {self.param} >= 1"
        return f"{self.param} <= {self.largest}" + (f" ({self.assumes})" if self.assumes else "")

    def to_json(self) -> dict[str, Any]:
        """param, largest, unbounded, safe, the other sizes held fixed."""
        return {"param": self.param, "largest": self.largest, "unbounded": self.unbounded,
                "safe": self.safe, "others": dict(self.fixed), "checked": self.checked,
                **({"assumes": self.assumes} if self.assumes else {})}


@dataclass
class WorkingSet:
    """Loop extra `working_set`: the loop's working set, per-iteration footprint and cache fit."""

    loop: Loop
    whole: Footprint
    per_iteration: Footprint | None
    reuse: bool | None  # the enclosing loop touches this loop's lines again in a later iteration (None: no such loop)
    occupancy: int | None = None  # worst-case bytes in whole lines at the --at sizes
    fits: dict[str, bool] = field(default_factory=dict)
    thresholds: dict[str, Threshold] = field(default_factory=dict)
    assumptions: str = ""
    outer_var: str | None = None  # variable of the enclosing loop
    lines_at: Callable[[Mapping[str, int]], int | Fraction | None] | None = field(default=None, repr=False)
    # exact worst-case lines at other sizes (packed layout; None when not exact)
    exact_lines: Callable[[Mapping[str, int]], int | None] | None = field(default=None, repr=False)

    def occupancy_at(self, sizes: Mapping[str, int]) -> int | None:
        """Worst-case working set in bytes of whole lines at other sizes (for plots), None if unknown."""
        if self.lines_at is None:
            return None
        try:
            v = self.lines_at(sizes)
        except (isl.Error, KeyError, ValueError):
            return None
        return None if v is None else int(v) * self.line_size

    line_size: int = 64

    def to_json(self) -> dict[str, Any]:
        """Working set of the loop (all its iterations, outer variables fixed) and more."""
        out = self.whole.to_json()
        out["per_iteration"] = None if self.per_iteration is None else self.per_iteration.to_json()
        out["reused_by_enclosing_loop"] = self.reuse
        out["cache_fit"] = None if not self.fits and not self.thresholds else {
            "occupancy_bytes": self.occupancy,
            "fits": dict(self.fits),
            "thresholds": {k: v.to_json() for k, v in self.thresholds.items()},
        }
        out["assumptions"] = self.assumptions
        return out


@dataclass
class Intensity:
    """Nest extra `intensity`: flops per byte of compulsory traffic."""

    value: Fraction | None
    asymptotic: str | None
    roofline: dict[str, Any] | None
    note: str | None = None
    upper_bound: bool = False  # the footprint is a lower bound, so the ratio is at most this

    def to_json(self) -> dict[str, Any]:
        """value (float), exact (fraction text), asymptotic (text), roofline (or None)."""
        out: dict[str, Any] = {
            "value": None if self.value is None else round(float(self.value), 6),
            "exact": None if self.value is None else str(self.value),
            "asymptotic": self.asymptotic,
            "roofline": self.roofline,
            "assumptions": INTENSITY_ASSUMPTIONS,
        }
        if self.note:
            out["note"] = self.note
        if self.upper_bound:
            out["upper_bound"] = True
        return out


@dataclass
class NestFootprint:
    """Nest extra `footprint`: the whole nest's footprint, plus the per-level text table."""

    footprint: Footprint
    levels: list[WorkingSet]
    caches: CacheHierarchy
    at: dict[str, int]
    flops: flops_mod.Flops | None = None
    intensity: Intensity | None = None
    sized: bool = False  # values exist: --at sizes every parameter, or the nest has none

    def to_json(self) -> dict[str, Any]:
        """The whole-nest footprint (same shape as a loop's working set) and the cache model used."""
        out = self.footprint.to_json()
        out["caches"] = self.caches.to_json()
        out["layout"] = LAYOUT_NOTE
        return out

    def text_lines(self) -> list[str]:
        """A compact per-level table: loop, working set formula, value at the sizes, cache that holds it."""
        return text_table(self)
