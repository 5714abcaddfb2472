# The gate (`tripcount check` and the language server's budget findings):
#   budgets.py      budgets from [tool.tripcount], cache levels
#   readings.py     readings of the typed nest summaries (analysis/summary.py)
#   findings.py     findings_for: budgets, regressions, suppressions of one file
#   suppress.py     `tripcount: allow` comments and loop header spans
#   baseline.py     the baseline revision (git) and matching of nests
#   command.py      `tripcount check`
# Its findings (TC6xx) are in tripcount/diagnostics/gate.py.
