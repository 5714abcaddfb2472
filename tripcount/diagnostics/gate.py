# Diagnostics of the gate, `tripcount check` (TC6xx): budget findings, baseline
# regressions, suppression comments and an unusable baseline. `kind` is the
# suppression kind (`tripcount: allow KIND`) that silences a finding.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class DegreeBudget(Diagnostic):
    """The work of a nest grows faster in the sizes than `max_degree` allows."""

    code = "TC601"
    severity = "error"
    title = "degree-budget"
    template = ("work of this nest has degree {degree} in the sizes ({what} ~ {leading}); "
                "the budget is degree {budget} (max_degree{source})")


class WorkingSetBudget(Diagnostic):
    """The innermost working set of a nest does not fit the cache level `max_working_set` allows."""

    code = "TC602"
    severity = "error"
    title = "working-set-budget"
    template = ("innermost working set of loop '{var}' is {size} at {at}, which needs {level}; "
                "the budget is {budget} (max_working_set{source})")


class ImbalanceBudget(Diagnostic):
    """A parallel loop's work is less even across threads than `max_imbalance` allows."""

    code = "TC603"
    severity = "error"
    title = "imbalance-budget"
    template = ("parallel loop '{var}' has imbalance {imbalance} (busiest thread / mean){threads}; "
                "the budget is {budget} (max_imbalance{source})")


class BudgetUnchecked(Diagnostic):
    """A budget is configured but this nest gives no value to hold against it."""

    code = "TC604"
    severity = "note"
    title = "budget-unchecked"
    template = "{budget} not checked for this nest: {reason}"


class BudgetsUnusable(Diagnostic):
    """The configured budgets cannot be applied at all (e.g. a budget names a cache level that the
    machine lacks); no budget of the file is checked."""

    code = "TC605"
    severity = "warning"
    title = "budgets-unusable"
    template = "budgets not checked: {reason}"


class DegreeRegression(Diagnostic):
    """The work of a nest has a higher degree than in the baseline revision."""

    code = "TC610"
    severity = "error"
    title = "degree-regression"
    template = "work of this nest grew from degree {old} to degree {new} since {rev} (was ~ {old_leading}, now ~ {new_leading})"


class LeadingGrowth(Diagnostic):
    """Same degree as the baseline, but the leading term grew beyond `max_leading_growth`."""

    code = "TC611"
    severity = "error"
    title = "leading-term-growth"
    template = ("leading term of the work grew {ratio}x since {rev} (was ~ {old_leading}, now ~ {new_leading}); "
                "allowed {allowed}x (max_leading_growth{source})")


class WorkingSetRegression(Diagnostic):
    """The innermost working set moved out to a larger cache level than in the baseline."""

    code = "TC612"
    severity = "error"
    title = "working-set-regression"
    template = ("innermost working set of loop '{var}' now needs {new_level} ({new_size}), "
                "it fit {old_level} ({old_size}) at {rev}; at {at}")


class UnknownSuppression(Diagnostic):
    """A `tripcount: allow ...` comment names a kind of finding that does not exist."""

    code = "TC620"
    severity = "warning"
    title = "unknown-suppression"
    template = "unknown kind '{kind}' in 'tripcount: allow'; known kinds: {known}"


class BaselineUnavailable(Diagnostic):
    """The baseline version of a file could not be read or analyzed; budgets only."""

    code = "TC630"
    severity = "warning"
    title = "baseline-unavailable"
    template = "no baseline comparison for this file: {reason}"
