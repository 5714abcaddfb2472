# Tests of tripcount/machine.py: reading and validating a machine description
# (a TOML file, a [machine] table, [tool.tripcount.machine] in pyproject.toml,
# the legacy peak_gflops/bandwidth_gbs keys), and the clear errors (file,
# key, what was expected; exit status 2) on bad values.

from __future__ import annotations

from pathlib import Path

import pytest

from tripcount.config import CommandLine, ConfigError, build_options
from tripcount.machine import MachineError, load_machine, machine_from_table, machine_of_config

BOX = Path(__file__).parent / "inputs" / "roofline" / "box.toml"
SAXPY = "void tide(int N, double a, double *x, double *y) { for (int i = 0; i < N; i++) y[i] = a * x[i] + y[i]; }"


def test_file_with_top_level_keys():
    m = load_machine(str(BOX))
    assert (m.peak_gflops_per_core, m.cores, m.peak_gflops, m.memory_gbs) == (10.0, 2, 20.0, 8.0)
    assert m.bandwidth("L2") == 40.0 and m.bandwidth("memory") == 8.0 and m.bandwidth("L4") is None
    assert m.source == str(BOX) and "Velin test box" in m.describe()


def test_machine_table_and_pyproject_table(tmp_path):
    f = tmp_path / "m.toml"
    f.write_text("[machine]\npeak_gflops = 40\ncores = 4\nmemory_gbs = 12.5\n")
    assert load_machine(str(f)).peak_gflops_per_core == 10.0
    f.write_text("[tool.tripcount.machine]\npeak_gflops_per_core = 3\nmemory_gbs = 2\n")
    assert load_machine(str(f)).peak_gflops == 3.0


def test_legacy_keys_still_make_a_machine():
    m = machine_of_config({"peak_gflops": 100.0, "bandwidth_gbs": 10.0}, "/p/pyproject.toml")
    assert m is not None and m.peak_gflops == 100.0 and m.memory_gbs == 10.0
    assert machine_of_config({"peak_gflops": 100.0}, None) is None
    # the machine table takes the legacy figures for what it leaves out
    m = machine_of_config({"bandwidth_gbs": 10.0, "machine": {"peak_gflops": 5}}, None)
    assert m is not None and m.memory_gbs == 10.0


@pytest.mark.parametrize("table, words", [
    ({"peak_gflops": 1}, ["memory_gbs", "required"]),
    ({"memory_gbs": 1}, ["peak_gflops", "required"]),
    ({"peak_gflops": -1, "memory_gbs": 1}, ["peak_gflops", "a number > 0", "-1"]),
    ({"peak_gflops": "fast", "memory_gbs": 1}, ["peak_gflops", "'fast'"]),
    ({"peak_gflops": 1, "memory_gbs": 1, "cores": 0}, ["cores", "an integer from 1"]),
    ({"peak_gflops": 1, "memory_gbs": 1, "cores": True}, ["cores"]),
    ({"peak_gflops": 1, "memory_gbs": 1, "cache_gbs": {"L0": 3}}, ["cache_gbs", "L1..L9"]),
    ({"peak_gflops": 1, "memory_gbs": 1, "cache_gbs": {"L1": 0}}, ["cache_gbs"]),
    ({"peak_gflops": 1, "memory_gbs": 1, "bandwith": 3}, ["unknown key 'bandwith'"]),
    ({"peak_gflops": 8, "peak_gflops_per_core": 3, "cores": 2, "memory_gbs": 1}, ["not peak_gflops_per_core x cores"]),
    ({"peak_gflops": 1, "memory_gbs": float("inf")}, ["memory_gbs"]),
])
def test_bad_values_are_clear_errors(table, words):
    with pytest.raises(MachineError) as exc:
        machine_from_table(table, "m.toml")
    assert str(exc.value).startswith("m.toml: ")
    for w in words:
        assert w in str(exc.value)


def test_unreadable_file(tmp_path):
    f = tmp_path / "bad.toml"
    f.write_text("peak_gflops = = 3\n")
    with pytest.raises(MachineError, match="bad.toml: cannot read"):
        load_machine(str(f))


def test_build_options_fills_the_peak_and_bandwidth(tmp_path):
    o = build_options({}, CommandLine(machine=str(BOX)))
    assert o.machine is not None and o.peak_gflops == 10.0 and o.bandwidth_gbs == 8.0
    with pytest.raises(ConfigError, match=r"pyproject.toml: \[tool.tripcount.machine\]: cores"):
        build_options({"machine": {"peak_gflops": 1, "memory_gbs": 1, "cores": 0}}, base=str(tmp_path))


def test_cli_bad_machine_is_exit_2_with_file_and_key(tmp_path, run_cli):
    f = tmp_path / "m.toml"
    f.write_text("peak_gflops = 10\nmemory_gbs = 'lots'\n")
    status, _, err = run_cli("analyze", "--code", SAXPY, "--machine", str(f))
    assert status == 2 and str(f) in err and "memory_gbs must be a number > 0" in err
    status, _, err = run_cli("analyze", "--code", SAXPY, "--machine", str(tmp_path / "none.toml"))
    assert status == 2 and "cannot read the machine description" in err


def test_pyproject_machine_table_is_read(tmp_path, run_cli, monkeypatch):
    (tmp_path / "pyproject.toml").write_text(
        "[tool.tripcount.machine]\npeak_gflops_per_core = 10\nmemory_gbs = 8\n")
    src = tmp_path / "k.c"
    src.write_text(SAXPY)
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path.parent / "cache"))
    status, out, err = run_cli("analyze", str(src), "--at", "N=1000")
    assert status == 0, err
    assert "roofline: at least 2 us (model estimate), bound by memory" in out


def test_load_config_checks_the_machine_table(tmp_path):
    from tripcount.config import load_config

    (tmp_path / "pyproject.toml").write_text("[tool.tripcount.machine]\npeak_gflops = 1\n")
    with pytest.raises(ConfigError, match="memory_gbs .* is required"):
        load_config(str(tmp_path))


def test_machine_command_shows_the_description(run_cli):
    status, out, _ = run_cli("machine", "--machine", str(BOX))
    assert status == 0 and "peak 10 GFLOP/s per core x 2 core(s), memory 8 GB/s" in out
