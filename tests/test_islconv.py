# Tests of tripcount/engine/islconv.py: exact values read from isl without
# going through islpy's to_str (whose C string islpy does not free).

from __future__ import annotations

import gc
from fractions import Fraction

import islpy as isl
import pytest

from tripcount.engine.islconv import val_frac, val_int


@pytest.mark.parametrize("text", ["0", "1", "-1", "255", "-256", "4294967295", "4294967296", "-4294967296",
                                  "9223372036854775807", "-9223372036854775808", "10" * 15 + "1"])
def test_integers_are_read_exactly(text):
    v = isl.Val(text)
    assert val_int(v) == int(text)
    assert val_frac(v) == Fraction(int(text))


def test_fractions_and_infinity():
    assert val_frac(isl.Val("-3/4")) == Fraction(-3, 4)
    with pytest.raises(ValueError):
        val_int(isl.Val("3/4"))
    with pytest.raises(ValueError):
        val_int(isl.Val("infty"))


def _rss_kib() -> int:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * 4


@pytest.mark.skipif(not __import__("os").path.exists("/proc/self/statm"), reason="needs /proc")
def test_reading_small_values_does_not_grow_memory():
    # islpy 2026.2.2: Val.to_python() went through to_str() and kept every C
    # string (about 32 bytes a call, ~9 MB over these 300,000 reads, measured);
    # a point scan reads one value per coordinate
    v = isl.Val("12345")
    for _ in range(1000):
        val_int(v)
    gc.collect()
    before = _rss_kib()
    for _ in range(300_000):
        val_int(v)
        val_frac(v)
    gc.collect()
    assert _rss_kib() - before < 3 * 1024
