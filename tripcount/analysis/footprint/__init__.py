# Analysis (package): data footprint and cache fit per loop level, flops and arithmetic intensity.
#
# For every loop of a nest and every array, the number of distinct elements
# (and bytes, and cache lines) touched
#   * by the whole loop with the enclosing loop variables fixed -- the loop's
#     "working set", what a tiling engineer compares with a cache; and
#   * by one iteration of the loop (its own variable fixed too: everything
#     its body does for one value of the variable);
# and, for the nest, by all of it (the compulsory footprint). Each is the
# exact number of points of the image of the iteration domains under the
# access maps (the union over all references to an array, across the
# statements of the loop), counted by the engine as a formula in the size
# parameters and the fixed loop variables -- a projection count, not a sum of
# references. Cache lines are the image of those elements under a line map
# (row-major C layout; see LAYOUT_NOTE).
#
# Values at the --at sizes are exact (exact.py): every extent is then a
# number, so lines follow the packed layout of the declared type (arrays
# starting on a line boundary), and the largest value over the fixed loop
# variables is found by splitting their values into regions of one shifted
# shape and alignment classes; a value that is only a bound says which side
# and why. Formulas in the sizes assume aligned rows unless the inner extents
# are constants, and say so where the value does not share that assumption.
# The worst case as a function of the sizes is the per-level formula at the
# extreme values of the outer variables (substituted symbolically, e.g.
# i = N - 1) when evaluation at the --at sizes and at a small probe size shows
# the maximum is there; otherwise a safe upper bound (the footprint with the
# outer variables free), marked `bound`.
#
# The cache-fit model compares each loop's worst-case working set (in cache
# lines times the line size) with the host's data caches and solves for the
# largest size that still fits; findings are TC4xx diagnostics. A loop is
# flagged only when its enclosing loop touches the same lines again in a later
# iteration: without such reuse, exceeding a cache costs nothing beyond the
# compulsory misses. The model is
# an estimate with stated assumptions (CACHE_ASSUMPTIONS), not a simulation.
# Flops come from tripcount.analysis.flops; the arithmetic intensity divides
# them by the compulsory footprint in bytes.
#
# Modules: results (result objects, diagnostics, assumptions), isets (integer
# set helpers, layout model, counting under neutral names), exact (exact
# values at the --at sizes), quantities (counts with the engine, maxima over
# outer variables), scopes (footprints of statement sets), worst (worst case
# over outer variables), fit (cache fit), intensity, table (text), run (entry).

from tripcount.analysis.footprint.intensity import asymptotic_ratio, intensity
from tripcount.analysis.footprint.isets import (
    _SIMPLIFY_MAX_BASIC,
    access_image,
    enum_count,
    fix_params,
    line_map,
    points,
    simplify,
)
from tripcount.analysis.footprint.quantities import max_over
from tripcount.analysis.footprint.results import (
    CACHE_ASSUMPTIONS,
    CACHE_MODEL_SHORT,
    INTENSITY_ASSUMPTIONS,
    LAYOUT_NOTE,
    ArrayFootprint,
    FCount,
    Footprint,
    Intensity,
    NestFootprint,
    Threshold,
    WorkingSet,
    Worst,
)
from tripcount.analysis.footprint.run import analyze
from tripcount.analysis.footprint.table import text_table
from tripcount.analysis.footprint.worst import aff_qpoly

__all__ = [
    "CACHE_ASSUMPTIONS", "CACHE_MODEL_SHORT", "INTENSITY_ASSUMPTIONS", "LAYOUT_NOTE", "_SIMPLIFY_MAX_BASIC",
    "ArrayFootprint", "FCount", "Footprint", "Intensity", "NestFootprint", "Threshold", "WorkingSet", "Worst",
    "access_image", "aff_qpoly", "analyze", "asymptotic_ratio", "enum_count", "fix_params", "intensity",
    "line_map", "max_over", "points", "simplify", "text_table",
]
