# Tests of tripcount.analysis.caches: reading the host's data-cache hierarchy
# (Linux sysfs layout, faked in a temporary directory), configured overrides,
# labelled defaults, line size precedence and byte formatting.
#
# External reference: the Linux sysfs cache attributes (files level, type,
# size, coherency_line_size under /sys/devices/system/cpu/cpu0/cache/index*),
# as documented for the kernel's cacheinfo interface (from memory).

from __future__ import annotations

import os

from tripcount.analysis import caches
from tripcount.options import Options


def fake_sysfs(root, entries):
    for k, (level, kind, size, line) in enumerate(entries):
        d = os.path.join(root, f"index{k}")
        os.makedirs(d)
        for name, value in (("level", level), ("type", kind), ("size", size), ("coherency_line_size", line)):
            with open(os.path.join(d, name), "w") as f:
                f.write(f"{value}\n")


def test_parse_size():
    assert caches.parse_size("48K") == 48 * 1024
    assert caches.parse_size("1024K") == 1 << 20
    assert caches.parse_size("32M") == 32 << 20
    assert caches.parse_size("65536") == 65536
    assert caches.parse_size("") is None and caches.parse_size("lots") is None


def test_read_sysfs_skips_instruction_caches(tmp_path):
    fake_sysfs(str(tmp_path), [(1, "Data", "48K", 64), (1, "Instruction", "32K", 64),
                               (2, "Unified", "1280K", 64), (3, "Unified", "30720K", 64)])
    levels, line = caches.read_sysfs(str(tmp_path))
    assert levels == {"L1": 48 * 1024, "L2": 1280 * 1024, "L3": 30720 * 1024}
    assert line == 64


def test_missing_sysfs(tmp_path):
    assert caches.read_sysfs(str(tmp_path / "nothing")) == ({}, None)


def test_defaults_are_labelled():
    h = caches.hierarchy(Options(line_size=0), host=({}, None))
    assert [(lv.name, lv.size, lv.source) for lv in h.levels] == [
        ("L1", 32 * 1024, "default"), ("L2", 1 << 20, "default"), ("L3", 8 << 20, "default")]
    assert h.line_size == 64 and h.line_source == "default"
    assert "default" in h.describe()


def test_configured_overrides_host():
    host = ({"L1": 32768, "L2": 1 << 20, "L3": 16 << 20}, 64)
    h = caches.hierarchy(Options(caches={"L1": 48 * 1024}, line_size=0), host=host)
    assert [(lv.name, lv.size, lv.source) for lv in h.levels] == [
        ("L1", 48 * 1024, "configured"), ("L2", 1 << 20, "host"), ("L3", 16 << 20, "host")]
    assert h.line_source == "host"
    h2 = caches.hierarchy(Options(line_size=128), host=host)
    assert h2.line_size == 128 and h2.line_source == "configured"
    assert h2.to_json()["levels"][0] == {"name": "L1", "bytes": 32768, "source": "host"}


def test_host_detection_never_fails():
    levels, line = caches.host_caches()
    assert isinstance(levels, dict) and (line is None or line > 0)
    h = caches.hierarchy(Options(line_size=0))
    assert h.levels and h.line_size > 0


def test_fmt_bytes_binary_units():
    assert caches.fmt_bytes(0) == "0 B"
    assert caches.fmt_bytes(1023) == "1023 B"
    assert caches.fmt_bytes(1024) == "1 KiB"
    assert caches.fmt_bytes(33 * 1024 + 512) == "33.5 KiB"
    assert caches.fmt_bytes(130 * 1024) == "130 KiB"
    assert caches.fmt_bytes(int(1.25 * 1024**2)) == "1.25 MiB"


def test_fmt_bytes_beyond_gib():
    # common practice: binary prefixes continue with TiB, PiB, EiB (IEC 80000-13)
    assert caches.fmt_bytes(3 * 1024**4) == "3 TiB"
    assert caches.fmt_bytes(1.5 * 1024**5) == "1.5 PiB"
    assert caches.fmt_bytes(2**63) == "8 EiB"
