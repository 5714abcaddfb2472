# Diagnostics of counting (TC3xx): the engine's limits, --verify, and the
# per-nest and per-file time and operation budgets.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class FormulaLimit(Diagnostic):
    """The engine hit a limit; the value at the given sizes is still exact."""

    # args: what, reason, fallback; time_bound (a time limit stopped it: the result is not cached)

    code = "TC301"
    severity = "warning"
    title = "formula-limit"
    template = "no closed formula for {what}: {reason}; {fallback}"


class VerifyMismatch(Diagnostic):
    """--verify found a formula or figure that disagrees with enumeration (a bug: please report)."""

    code = "TC302"
    severity = "error"
    title = "verify-mismatch"
    template = "formula for {what} gives {got} but enumeration counts {want} at {point}"


class VerifyPassed(Diagnostic):
    """--verify summary for one nest."""

    code = "TC303"
    severity = "note"
    title = "verified"
    template = ("verified {n} formulas of this nest, as computed and as printed, "
                "against enumeration at {points} parameter points")


class WorkVerified(Diagnostic):
    """--verify summary for the flop, load and store figures of one nest."""

    code = "TC304"
    severity = "note"
    title = "work-verified"
    template = ("verified {n} flop, load and store figures of this nest, as computed and as printed, "
                "against weights times enumerated statement counts at {points} parameter points")


class FigureMismatch(Diagnostic):
    """--verify found a working-set or per-thread figure that disagrees with brute-force enumeration
    (a bug: please report)."""

    code = "TC305"
    severity = "error"
    title = "verify-figure-mismatch"
    template = "{what} is {got} but brute-force enumeration gives {want} at {point}"


class FiguresVerified(Diagnostic):
    """--verify summary of the working-set and per-thread figures of one nest: what was checked,
    and what was not and why."""

    code = "TC306"
    severity = "note"
    title = "figures-verified"
    template = "{message}"


class AnalysisLimit(Diagnostic):
    """A nest's analysis stopped at its time or operation budget (partial, never wrong)."""

    code = "TC310"
    severity = "warning"
    title = "nest-limit"
    template = ("analysis of this nest stopped: {reason}; {kept}. "
                "Raise --time-limit to go further")


class FileBudgetSpent(Diagnostic):
    """A nest not analyzed because its file's time budget was spent on earlier nests."""

    code = "TC311"
    severity = "warning"
    title = "file-limit"
    template = ("nest not analyzed: the file's budget of {seconds:g} s "
                "({factor} x --time-limit) was spent on the nests before it")
