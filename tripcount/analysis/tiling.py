# Analysis: tiling advice for nests whose working sets exceed a cache level.
#
# Legality: a band of perfectly nested loops may be tiled rectangularly when
# it is fully permutable -- every dependence not already carried by a loop
# outside the band has a non-negative distance in every band dimension (in
# each loop's direction of execution). The distances' bounds come from the
# dependence analysis. Where no band of two loops or more is permutable, the
# blocking dependence is named, and skewing (the time-skewing / wavefront
# transformation) is said to help when the band's distances are constant.
#
# Tile sizes: the working set of one tile is counted exactly with isl -- the
# band loops' variables held to one box of T1 x ... x Tm iterations at an
# interior position (the box lies wholly inside the iteration domain, near
# its middle, its origin a multiple of the tile from the loop's lower bound,
# as a tiled loop `for (ii = lb; ii < ub; ii += T)` starts them), the loops
# inside the band running fully; distinct elements and cache lines of every
# array (packed row-major layout at the sizes, arrays line-aligned). The
# count is a function of the tile sizes evaluated exactly at each candidate;
# the largest sizes whose lines fit a cache level are kept: equal sizes (the
# innermost a multiple of the line length in elements), and, when one array
# holds most of the tile's lines, the aspect with the most iterations per
# line that still fits. Only the working set per tile is predicted: the
# traffic a tiling saves is not.

from __future__ import annotations

import math
import time
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import islpy as isl

from tripcount.analysis.caches import CacheLevel, fmt_bytes, hierarchy
from tripcount.analysis.dependences import Dependence, Dependences, direction
from tripcount.analysis.footprint.exact import aligned_line_map, inner_extents, packed_line_map
from tripcount.analysis.footprint.isets import fix_params
from tripcount.budget import count_points
from tripcount.diagnostics import Phrase
from tripcount.diagnostics.base import span_json
from tripcount.diagnostics.memory import TilingAdvice, TilingBlocked
from tripcount.ir import Span
from tripcount.model import Loop, Nest
from tripcount.options import Options

if TYPE_CHECKING:
    from tripcount.analysis.results import NestResult
    from tripcount.budget import Budget

_dt = isl.dim_type
MAX_TILE = 1024  # largest tile size searched per loop
TIME_S = 2.0
ASSUMPTIONS = ("model estimate: one tile at an interior position, its origin a multiple of the tile from the "
               "loop's lower bound; the loops inside the band run fully; fully associative capacity-only "
               "caches holding nothing else; packed row-major layout, arrays line-aligned; the working set "
               "per tile only, not the traffic a tiling saves")


@dataclass(frozen=True)
class TileFit:
    """Tile sizes (one per band loop, outermost first) whose tile working set fits one cache level."""

    level: str
    capacity: int  # bytes
    sizes: tuple[int, ...]
    elements: int
    lines: int
    line_size: int
    shape: str  # "equal" or "aspect"

    @property
    def bytes(self) -> int:
        """The tile's working set in bytes of whole lines."""
        return self.lines * self.line_size

    def to_json(self) -> dict[str, Any]:
        """level, capacity, tile sizes, the tile's distinct elements, lines and bytes, shape."""
        return {"level": self.level, "capacity_bytes": self.capacity, "sizes": list(self.sizes),
                "elements": self.elements, "lines": self.lines, "bytes": self.bytes, "shape": self.shape}


@dataclass(frozen=True)
class Tiling:
    """Nest extra `tiling`: the band that may be tiled, and tile sizes per cache level (or why not)."""

    band: tuple[str, ...]  # loop variables, outermost first
    loops: tuple[int, ...]  # their indices in the nest
    headers: tuple[Span, ...]  # their headers in the source
    legal: bool
    reason: str  # why the band is legal, or the dependence that prevents it
    skewing: str | None  # where not legal: whether skewing would help
    fits: tuple[TileFit, ...]
    at: dict[str, int]  # size parameters the tile was counted at
    position: dict[str, int]  # the tile's origin (the band's and outer loops' variables)
    assumptions: str = ASSUMPTIONS

    def to_json(self) -> dict[str, Any]:
        """band (variable, loop index and header of each loop), legal, reason, skewing, tile sizes per level,
        sizes, the counted tile's origin, assumptions."""
        band = [{"var": v, "loop": k, **span_json(h)} for v, k, h in zip(self.band, self.loops, self.headers,
                                                                          strict=True)]
        return {"band": band, "legal": self.legal, "reason": self.reason,
                "skewing": self.skewing, "tiles": [f.to_json() for f in self.fits], "at": dict(self.at),
                "origin": [{"var": k, "value": v} for k, v in self.position.items()], "assumptions": self.assumptions}

    def text_lines(self) -> list[str]:
        """The report's line: the band and its tile sizes per level, or what prevents tiling."""
        loops = ", ".join(self.band)
        if not self.legal:
            return [f"tiling: loops {loops} may not be tiled rectangularly: {self.reason}"
                    + (f"; {self.skewing}" if self.skewing else "")]
        if not self.fits:
            return [f"tiling: loops {loops} may be tiled ({self.reason}); no tile of these sizes fits a cache level"]
        parts = [f"{'x'.join(map(str, f.sizes))} ({fmt_bytes(f.bytes)}{', ' + f.shape if f.shape != 'equal' else ''})"
                 f" in {f.level}" for f in self.fits]
        at = ", ".join(f"{k}={v}" for k, v in self.at.items())
        return [f"tiling: loops {loops} may be tiled ({self.reason}); tiles " + ", ".join(parts)
                + (f" at {at}" if at else "") + f" ({self.assumptions})"]


# --------------------------------------------------------------------------
# The band and its legality


def perfect_chain(nest: Nest) -> list[Loop]:
    """The loops from the outermost down while each holds exactly one loop and no statement."""
    roots = [lp for lp in nest.loops if lp.parent is None]
    if len(roots) != 1:
        return []
    chain = [roots[0]]
    while True:
        cur = chain[-1]
        direct = [s for s in nest.statements if s.loops and s.loops[-1] == cur.index]
        if len(cur.children) != 1 or direct:
            return chain
        chain.append(nest.loops[cur.children[0]])


def _signed(d: Dependence, k: int, loop: Loop) -> tuple[int | None, int | None]:
    """Bounds of the dependence's distance at depth k in the loop's direction of execution."""
    lo, hi = d.bounds[k] if k < len(d.bounds) else (None, None)
    if loop.step > 0:
        return lo, hi
    return (None if hi is None else -hi), (None if lo is None else -lo)


def _inside(nest: Nest, deps: Dependences, depth: int) -> list[Dependence]:
    """The dependences not carried by a loop outside depth `depth` (loop-independent ones included)."""
    out = list(deps.independent)
    for v in deps.loops:
        if nest.loops[v.loop].depth >= depth:
            out.extend(v.carried)
    return out


def blocking(nest: Nest, deps: Dependences, band: Sequence[Loop]) -> Dependence | None:
    """The first dependence with a possibly negative distance in a band loop (None: fully permutable)."""
    for d in _inside(nest, deps, band[0].depth):
        if any(_backwards(d, lp) for lp in band):
            return d
    return None


def _backwards(d: Dependence, lp: Loop) -> bool:
    """Whether the dependence's distance in loop `lp` may be negative (in the loop's direction)."""
    lo, _ = _signed(d, lp.depth, lp)
    return lo is None or lo < 0


def choose_band(nest: Nest, deps: Dependences) -> tuple[list[Loop], Dependence | None]:
    """The outermost fully permutable band of two loops or more of the perfect chain; with none, the
    chain's first two loops and the dependence that prevents tiling them."""
    chain = perfect_chain(nest)
    for a in range(len(chain) - 1):
        b = a + 1
        if blocking(nest, deps, chain[a:b + 1]) is not None:
            continue
        while b + 1 < len(chain) and blocking(nest, deps, chain[a:b + 2]) is None:
            b += 1
        return chain[a:b + 1], None
    if len(chain) < 2:
        return [], None
    return chain[:2], blocking(nest, deps, chain[:2])


def skewing_text(nest: Nest, deps: Dependences, band: Sequence[Loop]) -> str:
    """Whether skewing would make the band permutable: yes when every distance in it is constant."""
    def constant(d: Dependence, lp: Loop) -> bool:
        lo, hi = _signed(d, lp.depth, lp)
        return lo is not None and lo == hi

    if all(constant(d, lp) for d in _inside(nest, deps, band[0].depth) for lp in band):
        return ("every distance in the band is constant, so skewing the inner loops by the outer ones "
                "(time skewing / wavefront) makes them non-negative and the skewed band tileable")
    return "some distances in the band vary, so skewing is not shown to help"


# --------------------------------------------------------------------------
# The working set of one tile


def _box(dom: isl.Set, band: Sequence[Loop], sizes: Sequence[int], origin: Mapping[str, int],
         outer: Sequence[Loop]) -> isl.Set:
    """`dom` with the outer loops' variables fixed and each band variable in its tile's window."""
    names = [dom.get_dim_name(_dt.set, k) for k in range(dom.dim(_dt.set))]
    for lp in outer:
        k = names.index(lp.var)
        dom = dom.fix_val(_dt.set, k, isl.Val(origin[lp.var]))
    ls = isl.LocalSpace.from_space(dom.get_space())
    for lp, t in zip(band, sizes, strict=True):
        k = names.index(lp.var)
        lo = origin[lp.var] if lp.step > 0 else origin[lp.var] - (t - 1) * abs(lp.step)
        width = t * abs(lp.step)
        dom = dom.add_constraint(isl.Constraint.alloc_inequality(ls).set_coefficient_val(_dt.set, k, 1)
                                 .set_constant_val(isl.Val(-lo)))
        dom = dom.add_constraint(isl.Constraint.alloc_inequality(ls).set_coefficient_val(_dt.set, k, -1)
                                 .set_constant_val(isl.Val(lo + width - 1)))
    return dom


def origin(nest: Nest, band: Sequence[Loop], sizes: Sequence[int], at: Mapping[str, int]) -> dict[str, int] | None:
    """An interior tile origin: every corner of the box in the band's domain, near the middle, aligned."""
    inner = band[-1]
    if inner.domain is None:
        return None
    dom = fix_params(inner.domain, at)
    if dom is None:
        return None
    names = [dom.get_dim_name(_dt.set, k) for k in range(dom.dim(_dt.set))]
    ok = dom
    # the origins whose whole box lies in the domain: the domain shifted back by each corner
    for corner in range(1 << len(band)):
        shift = [0] * len(names)
        for b, (lp, t) in enumerate(zip(band, sizes, strict=True)):
            if corner >> b & 1:
                shift[names.index(lp.var)] = (t - 1) * lp.step
        if not any(shift):
            continue
        ok = ok.intersect(_shifted(dom, shift))
    if ok.is_empty():
        return None
    out: dict[str, int] = {}
    by_var = {lp.var: lp for lp in nest.loops}
    for k, nm in enumerate(names):
        lo, hi = ok.dim_min_val(k), ok.dim_max_val(k)
        if not (lo.is_int() and hi.is_int()):
            return None
        lo_i, hi_i = int(lo.to_python()), int(hi.to_python())
        lb_v = dom.dim_min_val(k) if by_var[nm].step > 0 else dom.dim_max_val(k)
        lb = int(lb_v.to_python()) if lb_v.is_int() else lo_i
        t = sizes[band.index(by_var[nm])] if by_var[nm] in band else 1
        period = t * by_var[nm].step
        mid = (lo_i + hi_i) // 2
        v = lb + period * round((mid - lb) / period) if period else mid
        picks = [v, v - period, v + period] if period else [v]
        for v in picks + [mid, lo_i]:
            trial = ok.fix_val(_dt.set, k, isl.Val(v))
            if not trial.is_empty():
                ok, out[nm] = trial, v
                break
        else:
            return None
        dom = dom.fix_val(_dt.set, k, isl.Val(out[nm]))
    return out


def _shifted(dom: isl.Set, shift: Sequence[int]) -> isl.Set:
    """{ x : x + shift in dom }."""
    ls = isl.LocalSpace.from_space(dom.get_space())
    n = dom.dim(_dt.set)
    sp = isl.Space.map_from_set(dom.get_space())
    aff = isl.MultiAff.zero(sp)
    for k in range(n):
        a = isl.Aff.var_on_domain(ls, _dt.set, k).add_constant_val(isl.Val(shift[k]))
        aff = aff.set_aff(k, a)
    return dom.preimage_multi_aff(aff)


@dataclass
class _Counter:
    """Counts one tile's distinct elements and lines at given tile sizes (memoised)."""

    nest: Nest
    band: Sequence[Loop]
    outer: Sequence[Loop]
    at: Mapping[str, int]
    line: int
    elem: Mapping[str, int]
    budget: Budget | None
    deadline: float

    def __post_init__(self) -> None:
        self.memo: dict[tuple[int, ...], tuple[int, int, dict[str, int]] | None] = {}
        self.origins: dict[tuple[int, ...], dict[str, int]] = {}

    def count(self, sizes: tuple[int, ...]) -> tuple[int, int, dict[str, int]] | None:
        """(elements, lines, lines per array) of one interior tile; None when it has no interior position."""
        if sizes in self.memo:
            return self.memo[sizes]
        if time.monotonic() > self.deadline:
            raise TimeoutError("tiling time limit")
        o = origin(self.nest, self.band, sizes, self.at)
        out = None if o is None else self._count(sizes, o)
        if o is not None:
            self.origins[sizes] = o
        self.memo[sizes] = out
        return out

    def _count(self, sizes: tuple[int, ...], o: Mapping[str, int]) -> tuple[int, int, dict[str, int]] | None:
        images: dict[str, isl.Set] = {}
        acc_of: dict[str, Any] = {}
        for s in self.nest.statements:
            if s.domain is None:
                return None
            dom = fix_params(s.domain, self.at)
            if dom is None:
                return None
            box = _box(dom, self.band, sizes, o, self.outer)
            for a in s.accesses:
                if a.map is None:
                    return None
                m = fix_params(a.map.intersect_domain(s.domain), self.at)
                if m is None:
                    return None
                img = m.intersect_domain(box).range().reset_tuple_id()
                if a.array in images:
                    if images[a.array].dim(_dt.set) != img.dim(_dt.set):
                        return None
                    images[a.array] = images[a.array].union(img)
                else:
                    images[a.array], acc_of[a.array] = img, a
        elements = lines = 0
        per: dict[str, int] = {}
        for name, img in images.items():
            a = acc_of[name]
            n = img.dim(_dt.set)
            e = self.elem.get(name)
            if not e:
                return None
            ext = inner_extents(a, self.at)
            lm = packed_line_map(n, ext, e, self.line) if ext is not None else aligned_line_map(n, e, self.line)
            elements += count_points(img.coalesce(), self.budget)
            k = count_points(img.apply(lm).coalesce(), self.budget)
            per[name] = k
            lines += k
        return elements, lines, per


def _elem_sizes(nest: Nest, options: Options) -> dict[str, int]:
    out: dict[str, int] = {}
    for s in nest.statements:
        for a in s.accesses:
            e = a.elem_size or (int(options.elem_size) if options.elem_size else 0)
            if e and a.array not in out:
                out[a.array] = e
    return out


def _largest_equal(c: _Counter, m: int, step: int, cap: int, lines_cap: int) -> tuple[int, ...] | None:
    """The largest equal sizes (a multiple of `step`) whose interior tile fits `lines_cap` lines: the
    tile's lines grow with its size, so doubling then bisection over the multiples of `step`."""
    def fits(k: int) -> bool:
        r = c.count((k * step,) * m)
        return r is not None and r[1] <= lines_cap

    if not fits(1):
        return None
    lo, hi = 1, 2  # fits(lo); hi is the first multiple tried past it
    while hi * step <= cap and fits(hi):
        lo, hi = hi, hi * 2
    hi = min(hi, cap // step + 1)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if fits(mid):
            lo = mid
        else:
            hi = mid
    return (lo * step,) * m


def _best_aspect(c: _Counter, start: tuple[int, ...], step: int, cap: int, lines_cap: int) -> tuple[int, ...]:
    """From `start`, doubling one size and halving another while the tile fits and has more iterations
    per line (the inner size stays a multiple of `step`)."""
    def score(sz: tuple[int, ...]) -> float:
        r = c.count(sz)
        return -1.0 if r is None or r[1] > lines_cap else math.prod(sz) / max(1, r[1])

    cur, cur_score = start, score(start)
    for _ in range(12):
        best = None
        for i in range(len(cur)):
            for j in range(len(cur)):
                if i == j:
                    continue
                sz = list(cur)
                sz[i] *= 2
                # the innermost size stays a multiple of the line length in elements
                if sz[j] % 2 or sz[j] < 2 or (j == len(cur) - 1 and (sz[j] // 2) % step) or sz[i] > cap:
                    continue
                sz[j] //= 2
                cand = tuple(sz)
                sc = score(cand)
                if sc > cur_score and (best is None or sc > best[1]):
                    best = (cand, sc)
        if best is None:
            break
        cur, cur_score = best
    return cur


def advise(nest: Nest, deps: Dependences, options: Options, levels: Sequence[CacheLevel], line: int,
           at: Mapping[str, int], budget: Budget | None = None, time_s: float = TIME_S) -> Tiling | None:
    """Tiling advice for the nest at the sizes `at` (see the module header); None without a band."""
    band, block = choose_band(nest, deps)
    if not band:
        return None
    headers = tuple(lp.header for lp in band)
    names = tuple(lp.display or lp.var for lp in band)
    indices = tuple(lp.index for lp in band)
    if block is not None:
        k = next(lp for lp in band if _backwards(block, lp))
        dirs = direction(block.bounds)
        reason = (f"the {block.kind} dependence on {block.array} from {block.source} to {block.sink} has "
                  f"direction ({', '.join(dirs)}), possibly negative in loop {k.display or k.var}")
        return Tiling(names, indices, headers, False, reason, skewing_text(nest, deps, band), (), dict(at), {})
    outer = perfect_chain(nest)[:band[0].depth]
    elem = _elem_sizes(nest, options)
    inner_elem = Counter(elem.values()).most_common(1)
    step = max(1, line // inner_elem[0][0]) if inner_elem else 1
    c = _Counter(nest, band, outer, at, line, elem, budget, time.monotonic() + time_s)
    fits: list[TileFit] = []
    m = len(band)
    try:
        for lv in levels:
            cap_lines = lv.size // line
            eq = _largest_equal(c, m, step, MAX_TILE, cap_lines)
            if eq is None or any(f.sizes == eq for f in fits):  # none, or the smaller level's tile already
                continue
            r = c.count(eq)
            assert r is not None
            fits.append(TileFit(lv.name, lv.size, eq, r[0], r[1], line, "equal"))
            top = max(r[2].values()) if r[2] else 0
            if top * 2 > r[1]:  # one array holds most of the tile's lines
                asp = _best_aspect(c, eq, step, MAX_TILE, cap_lines)
                if asp != eq:
                    ra = c.count(asp)
                    assert ra is not None
                    fits.append(TileFit(lv.name, lv.size, asp, ra[0], ra[1], line, "aspect"))
    except TimeoutError:  # the fits found so far stand; the result depends on the clock
        if budget is not None:
            budget.mark_time_cut()
    reason = "fully permutable: every dependence distance is non-negative in each of these loops"
    first = fits[0].sizes if fits else None
    pos = c.origins.get(first, {}) if first else {}
    return Tiling(names, indices, headers, True, reason, None, tuple(fits), dict(at), dict(pos))


# --------------------------------------------------------------------------
# The analysis unit


def _exceeds(result: NestResult) -> bool:
    """Whether a working set of the nest exceeds a cache level (at the sizes, or for large sizes)."""
    nf = result.extras.get("footprint")
    if nf is None:
        return False
    for ws in nf.levels:
        if any(v is False for v in ws.fits.values()):
            return True
        if any(not t.unbounded and t.largest is not None for t in ws.thresholds.values()):
            return True
    return False


def analyze(result: NestResult, options: Options, budget: Budget | None = None) -> None:
    """Nest extra "tiling" and its diagnostic, in full detail only, for a nest whose working sets
    exceed a cache level."""
    nest = result.nest
    deps = result.extras.get("dependences")
    if options.gate or deps is None or not deps.complete or not nest.loops or not _exceeds(result):
        return
    # advice only where the user gave sizes: "exceeds a cache level" needs them (as TC401 does), and
    # advice at invented sizes would be one more note on every nest
    at = options.sizes(nest.params)
    if at is None:
        return
    caches = hierarchy(options)
    levels = [lv for lv in caches.levels if lv.name in ("L1", "L2")] or caches.levels[:2]
    time_s = TIME_S if budget is None else max(0.05, min(TIME_S, budget.remaining()))
    try:
        t = advise(nest, deps, options, levels, caches.line_size, at, budget, time_s)
    except isl.Error:
        return
    if t is None:
        return
    result.extras["tiling"] = t
    span = nest.loops[t.loops[0]].header
    parts: list[str | Span] = []
    for v, h in zip(t.band, t.headers, strict=True):
        parts += [", " if parts else "", f"'{v}' (", h, ")"]
    loops = Phrase(tuple(parts))
    if not t.legal:
        result.diagnostics.append(TilingBlocked(span, loops=loops, reason=t.reason,
                                                skewing=t.skewing or ""))
    elif t.fits:
        advice = "; ".join(f"{'x'.join(map(str, f.sizes))} tiles keep one tile's working set ({fmt_bytes(f.bytes)}) "
                           f"in {f.level}" + (" (best aspect)" if f.shape == "aspect" else "") for f in t.fits)
        result.diagnostics.append(TilingAdvice(span, loops=loops, advice=advice,
                                               at=", ".join(f"{k}={v}" for k, v in t.at.items()) or "no sizes",
                                               assumptions=t.assumptions))
