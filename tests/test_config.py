# Configuration discovery and value parsing.

from __future__ import annotations

import os
import shutil

import pytest
from conftest import INPUTS

from tripcount.config import (
    ConfigError,
    check_table,
    find_pyproject,
    load_config,
    parse_bytes,
    parse_sizes,
)


def test_parse_sizes():
    assert parse_sizes("N=64,M=32") == {"N": 64, "M": 32}
    assert parse_sizes("N=64 M=0x10") == {"N": 64, "M": 16}
    assert parse_sizes("*=8") == {"*": 8}
    with pytest.raises(ValueError):
        parse_sizes("N")
    with pytest.raises(ValueError):
        parse_sizes("N=abc")


def test_parse_bytes():
    assert parse_bytes("48KiB") == 48 * 1024
    assert parse_bytes("2 MiB") == 2 * 1024 * 1024
    assert parse_bytes(32768) == 32768
    with pytest.raises(ValueError):
        parse_bytes("lots")


def test_walks_up_to_pyproject(tmp_path):
    (tmp_path / "pyproject.toml").write_text('[tool.tripcount]\nat = {N = 128}\nassume = "N >= 4"\n')
    sub = tmp_path / "kernels" / "deep"
    sub.mkdir(parents=True)
    (sub / "k.c").write_text("")
    assert find_pyproject(str(sub / "k.c")) == str(tmp_path / "pyproject.toml")
    cfg = load_config(str(sub / "k.c"))
    assert cfg.get("at") == {"N": 128}


def test_bad_toml_is_a_config_error(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.tripcount\n")
    with pytest.raises(ConfigError):
        load_config(str(tmp_path))


CASES = os.path.join(INPUTS, "robustness", "config")
# case directory -> the key the message must name
BAD = {"caches_string": "caches", "max_pieces_list": "max_pieces", "caches_overflow": "caches",
       "imbalance_nan": "imbalance_threshold", "threads_negative": "threads", "caches_negative": "caches",
       "time_limit_inf": "time_limit", "at_float": "at", "work_other": "work", "override_threads": "threads"}
SRC = "void f(int N, double *a) {\n  for (int i = 0; i < N; i++)\n    a[i] = 0;\n}\n"


@pytest.mark.parametrize("case", sorted(BAD))
@pytest.mark.parametrize("command", ["analyze", "check"])
def test_bad_values_are_clear_errors(tmp_path, run_cli, private_cache, case, command):
    # each used to be an internal error or to be silently accepted
    shutil.copy(os.path.join(CASES, case, "pyproject.toml"), tmp_path / "pyproject.toml")
    (tmp_path / "k.c").write_text(SRC)
    status, out, err = run_cli(command, str(tmp_path / "k.c"))
    assert status == 2, (out, err)
    assert str(tmp_path / "pyproject.toml") in err and f"{BAD[case]} must be" in err, err
    assert "internal error" not in err + out and "TC9" not in out


def test_every_case_directory_is_listed():
    assert sorted(d for d in os.listdir(CASES) if os.path.isdir(os.path.join(CASES, d))) == sorted(BAD)


def test_good_values_pass():
    check_table({"at": {"N": 4}, "caches": {"L1": "48KiB", "l2": 2097152}, "threads": 8, "time_limit": 0.5,
                 "imbalance_threshold": 1.1, "max_working_set": "L2", "work": "flops", "parallel": [3],
                 "assume": ["N >= 1"], "override": [{"paths": ["*.c"], "max_degree": 4}], "future_key": 1},
                "p.toml")


@pytest.mark.parametrize("flag", [["--threads", "-1"], ["--cache", "L1=-5"], ["--cache", "L1=1e400KiB"],
                                  ["--line-size", "0"]])
def test_bad_command_line_values(run_cli, flag):
    status, _, err = run_cli("analyze", "--code", "for (i = 0; i < n; i++) s += 1;", *flag)
    assert status == 2 and flag[0] in err and "internal error" not in err


def test_parse_bytes_refuses_what_is_not_a_size():
    for bad in ("1e400KiB", "-5", "0", "nan", "infKiB", -5, 0, 1.5, True, [1]):
        with pytest.raises(ValueError):
            parse_bytes(bad)
