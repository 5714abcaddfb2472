# Tests of tripcount/names.py: parameter names as the model knows them, and
# `--at` naming a non-ASCII parameter by its C name (it used to be accepted and
# give no value, the parameter being the mangled `_uf1_`).

from __future__ import annotations

import os

from conftest import INPUTS

from tripcount.config import parse_sizes
from tripcount.names import mangle


def test_mangle():
    assert mangle("N") == "N"
    assert mangle("ñ") == "_uf1_"
    assert mangle("MAX") == "MAX_"  # a word of isl's notation, in any case
    assert mangle("2d") == "_2d"


def test_at_names_are_mangled_like_parameters():
    assert parse_sizes("ñ=3,N=4,*=5") == {"_uf1_": 3, "N": 4, "*": 5}


def test_at_a_unicode_parameter_gives_values(run_cli):
    path = os.path.join(INPUTS, "robustness", "unicode_param.c")
    status, out, err = run_cli("analyze", "--no-cache", "--at", "ñ=3", path)
    assert status == 0 and "--at names no parameter" not in err
    assert "stands for ñ" in out
    runs = [line for line in out.splitlines() if line.strip().startswith("runs")]
    assert len(runs) == 1 and runs[0].rstrip().endswith("= 3"), runs  # the loop runs ñ times
