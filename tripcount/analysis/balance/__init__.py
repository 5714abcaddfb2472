# Analysis (package): work balance of parallel loops.
#
# For every loop marked `#pragma omp parallel for` / `omp for` (and every loop
# named with --parallel LINE) this works out how much work each thread of the
# team gets:
#   * the work of one iteration, as a formula in the parameters and the loop
#     variable(s) (the engine counts the statement domains with the loop's
#     outer variables and its own variable moved into the parameters);
#   * for static schedules, each thread's exact work as a formula in the
#     parameters and the thread id, by counting the statement instances whose
#     normalized iteration counter falls in that thread's share (the split of
#     the GNU OpenMP runtime, libgomp, which gcc links);
#   * at the --at sizes, each thread's exact work, the imbalance (critical
#     path over the mean) and, for loops above the threshold, a what-if
#     comparison of other schedules and of a pairing rewrite.
# Dynamic and guided schedules, and all alternatives, are a model estimate:
# equal cost per unit of work, no scheduling overhead (tripcount/analysis/
# schedules.py deals the iterations out).
#
# Modules: results (balance objects, diagnostics), space (parallel loops,
# clause values, iteration spaces), profiles (work at fixed sizes), formulas
# (per-thread work formulas), choice (what-if comparison), run (entry).

from tripcount.analysis.balance.choice import alternatives, choose
from tripcount.analysis.balance.formulas import thread_formula, work_formula
from tripcount.analysis.balance.profiles import Profiles, profiles, static_per_thread_exact
from tripcount.analysis.balance.results import (
    ASSUMPTIONS,
    PAIR,
    REVERSE,
    Alternative,
    ParallelBalance,
    bar_chart,
    schedule_text,
)
from tripcount.analysis.balance.run import _space, analyze, analyze_loop
from tripcount.analysis.balance.space import (
    Space,
    const_value,
    fix_params,
    sizes_of,
    space_at,
    targets,
)

__all__ = [
    "ASSUMPTIONS", "PAIR", "REVERSE", "Alternative", "ParallelBalance", "Profiles", "Space",
    "_space", "alternatives", "analyze", "analyze_loop", "bar_chart", "choose", "const_value",
    "fix_params", "profiles", "schedule_text", "sizes_of", "space_at", "static_per_thread_exact",
    "targets", "thread_formula", "work_formula",
]
