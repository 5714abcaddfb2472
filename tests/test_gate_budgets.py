# Tests of tripcount/gate/budgets.py: budgets read from [tool.tripcount]
# and per-path overrides.

from __future__ import annotations

import pytest

from tripcount.config import Config, ConfigError
from tripcount.gate import budgets


def test_budgets_from_table_and_errors():
    b = budgets.budgets_from({"max_degree": 3, "max_working_set": "l2", "max_imbalance": 1.25,
                            "max_leading_growth": 2}, "/x/pyproject.toml")
    assert (b.max_degree, b.max_working_set, b.max_imbalance, b.max_leading_growth) == (3, "L2", 1.25, 2.0)
    assert budgets.budgets_from({"max_working_set": "256KiB"}, None).max_working_set == "256KiB"
    for bad in ({"max_degree": "3"}, {"max_degree": -1}, {"max_working_set": "lots"},
                {"max_imbalance": 0.5}, {"max_leading_growth": True}, {"baseline": 3}):
        with pytest.raises(ConfigError):
            budgets.budgets_from(bad, "/x/pyproject.toml")


def test_overrides_match_relative_paths(tmp_path):
    cfg = Config(path=str(tmp_path / "pyproject.toml"), table={
        "max_degree": 3,
        "override": [{"paths": ["kernels/legacy/*.c"], "max_degree": 4},
                     {"paths": "kernels/legacy/worst.c", "max_degree": 5}]})
    assert budgets.effective_table(cfg, str(tmp_path / "kernels" / "fast.c"))["max_degree"] == 3
    assert budgets.effective_table(cfg, str(tmp_path / "kernels" / "legacy" / "a.c"))["max_degree"] == 4
    assert budgets.effective_table(cfg, str(tmp_path / "kernels" / "legacy" / "worst.c"))["max_degree"] == 5
    with pytest.raises(ConfigError):
        budgets.effective_table(Config(path="p", table={"override": [{"paths": [1]}]}), "a.c")
