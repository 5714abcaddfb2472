# The gate (`tripcount check` and the language server's budget findings):
#   budgets.py      budgets from [tool.tripcount], cache levels
#   readings.py     readings of the typed nest summaries (analysis/summary.py)
#   findings.py     findings_for: budgets, regressions, suppressions of one file
#   suppress.py     `tripcount: allow` comments and loop header spans
#   baseline.py     the baseline revision (git) and matching of nests
#   diagnostics.py  TC6xx
#   command.py      `tripcount check`
