# Diagnostics of the working-set, cache-fit and footprint analysis (TC4xx).

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class WorkingSetExceedsCache(Diagnostic):
    """A loop's working set at the --at sizes is larger than a cache level that the enclosing loop needs.

    Flagged only when the enclosing loop touches this loop's data (cache lines)
    again in a later iteration: that reuse then finds the data evicted.
    """

    code = "TC401"
    severity = "note"
    title = "working-set-exceeds-cache"
    template = ("working set of loop '{var}' (line {loop_at:line}) is {size} at {at}, more than {level} ({capacity}): "
                "lines that loop '{outer}' uses again in its next iteration are evicted first{fits}{threshold} "
                "({assumptions})")


class FootprintLimit(Diagnostic):
    """The engine could not give a footprint formula; values at the --at sizes are still exact."""

    # args: what, reason, fallback; time_bound (a time limit stopped it: the result is not cached)

    code = "TC402"
    severity = "note"
    title = "footprint-formula-limit"
    template = "no footprint formula for {what}: {reason}; {fallback}"


class ElementSizeUnknown(Diagnostic):
    """Arrays whose element size is not known (undeclared, or a template parameter or unread type): bytes and cache lines cannot be given."""

    code = "TC403"
    severity = "note"
    title = "element-size-unknown"
    # args: arrays; why: "" for undeclared arrays, else what their declared element type is
    template = ("element size unknown for {arrays}{why}: working sets in bytes and cache lines are not computed "
                "({remedy})")


class FootprintRefused(Diagnostic):
    """Statements of a loop, or an array's references (e.g. an array used with different numbers of
    subscripts), could not be modelled, so their footprint is unknown."""

    code = "TC404"
    severity = "note"
    title = "footprint-unknown"
    template = "working sets of {what} unknown: {reason}"


class TilingAdvice(Diagnostic):
    """A nest whose working sets exceed a cache level has a band of loops that may be tiled
    rectangularly; the tile sizes whose one-tile working set fits each level are given."""

    code = "TC405"
    severity = "note"
    title = "tiling-advice"
    template = "loops {loops} may be tiled; {advice} (at {at}; {assumptions})"


class TilingBlocked(Diagnostic):
    """A nest whose working sets exceed a cache level, where no band of two loops may be tiled
    rectangularly: the dependence that prevents it, and whether skewing would help."""

    code = "TC406"
    severity = "note"
    title = "tiling-not-legal"
    template = "loops {loops} may not be tiled rectangularly: {reason}; {skewing}"
