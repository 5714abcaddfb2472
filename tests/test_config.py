# Configuration discovery and value parsing.

from __future__ import annotations

import pytest

from tripcount.config import ConfigError, find_pyproject, load_config, parse_bytes, parse_sizes


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
