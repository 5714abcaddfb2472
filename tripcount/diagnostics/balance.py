# Diagnostics of the parallel work balance (TC5xx), and of --parallel lines
# that name no loop.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class LoadImbalance(Diagnostic):
    """A parallel loop whose threads get unequal work at the given sizes."""

    code = "TC501"
    severity = "warning"
    title = "load-imbalance"
    template = "parallel loop '{var}' (line {loop_at:line}): {state}{advice}"


class FlopsUnavailable(Diagnostic):
    """--work flops asked for, but there are no flop counts for these statements."""

    code = "TC502"
    severity = "note"
    title = "balance-work-fallback"
    template = "parallel loop '{var}': no flop counts for {what}; balancing statement instances instead"


class BalanceNotModelled(Diagnostic):
    """A parallel loop whose balance could not be modelled (the reason is given)."""

    code = "TC503"
    severity = "note"
    title = "balance-not-modelled"
    template = "balance of parallel loop '{var}' not modelled: {reason}"


class NestedParallel(Diagnostic):
    """A parallel loop inside another one (nested parallelism is off by default)."""

    code = "TC504"
    severity = "note"
    title = "nested-parallel-loop"
    template = ("parallel loop '{var}' is inside parallel loop '{outer}' (line {outer_at:line}); with nested "
                "parallelism off (the default) it runs on the thread of the enclosing iteration, so "
                "only the outer loop's balance is modelled")


class BalancePartial(Diagnostic):
    """Part of the balance result is missing or approximate (the reason is given)."""

    code = "TC505"
    severity = "note"
    title = "balance-partial"
    template = "parallel loop '{var}': {what}"


class UnmatchedParallel(Diagnostic):
    """`--parallel LINE` names a line where no analysed loop starts."""

    code = "TC506"
    severity = "warning"
    title = "parallel-line-unmatched"
    template = "--parallel {line}: no loop of the analysed files starts on line {line}"


class ParallelLoopCarriesDependence(Diagnostic):
    """A loop run in parallel (OpenMP work-sharing or --parallel) carries a dependence that no
    reduction/private clause covers: two of its iterations touch the same element, one writing it."""

    code = "TC507"
    severity = "warning"
    title = "parallel-loop-dependence"
    template = ("parallel loop '{var}' (line {loop_at:line}) carries a {kind} dependence on {array}: {pair}; "
                "its iterations are not independent (a data race unless a clause or synchronisation "
                "covers it), so no schedule advice is given")


class ParallelCandidate(Diagnostic):
    """A loop outside any parallel construct that holds all the nest's work and carries no dependence
    (or only reductions): it may run in parallel as it is."""

    code = "TC508"
    severity = "note"
    title = "parallel-candidate"
    template = ("loop '{var}' (line {loop_at:line}) carries no dependence{how}: the outermost candidate for "
                "'#pragma omp parallel for'{clause}")
