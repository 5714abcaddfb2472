# --verify for the working sets (tripcount.analysis.verify_memory): every
# element, byte and cache-line figure, per array and in total, against a
# brute-force reference -- every statement instance enumerated with isl's
# point scan at fixed sizes, every subscript evaluated, the distinct elements
# and lines collected in Python (packed row-major layout, arrays starting on
# a line boundary). The verifier passes on corpus kernels at small sizes and
# catches faults injected into the footprint analysis.

from __future__ import annotations

import json
import os

import pytest
from conftest import CORPUS, INPUTS

from tripcount.analysis import flops, verify_enum, verify_memory
from tripcount.analysis import footprint as footprint_pkg
from tripcount.analysis.footprint import exact

BASIN = os.path.join(INPUTS, "verify", "basin_rows.c")
SIZES = "steps=2,n=9,m=11,q=6"


def _diags(out: str) -> list[dict]:
    return [d for f in json.loads(out)["files"] for d in f["diagnostics"]]


def _run(run_cli, path: str, at: str, *more: str) -> tuple[int, list[dict]]:
    status, out, err = run_cli("analyze", path, "--verify", "--at", at, "--format", "json", "--threads", "3",
                               *more)
    assert out, err
    return status, _diags(out)


def _clean(status: int, diags: list[dict]) -> None:
    codes = [d["code"] for d in diags]
    assert status == 0, [d["message"] for d in diags if d["code"] in ("TC305", "TC302")]
    assert "TC305" not in codes and not any(c.startswith("TC9") for c in codes)
    notes = [d["message"] for d in diags if d["code"] == "TC306"]
    assert notes and all(m.startswith("verified ") for m in notes)


@pytest.mark.parametrize("name", ["tide_gain.c", "sediment_lu.c", "wave_shallow.c"])
def test_corpus_kernels_verify_at_small_sizes(run_cli, name):
    _clean(*_run(run_cli, os.path.join(CORPUS, name), "*=9"))


def test_rows_that_share_lines_verify(run_cli):
    """Rows of 11 doubles (88 B) and of 13 floats share cache lines with their neighbours."""
    _clean(*_run(run_cli, BASIN, SIZES))


def test_tiled_transpose_worst_case(run_cli):
    """Found by --verify: the worst case of one iteration of a tiled loop was taken at the last, partial
    tile (6 elements at H=34, W=35 where a full tile touches 64), claimed from probe sizes that all lay
    inside one tile. A probe size whose maximum is not had now leaves the claim out."""
    _clean(*_run(run_cli, os.path.join(CORPUS, "camera_tiles.c"), "*=9"))


def _wrapped(monkeypatch, change) -> None:
    """Run `change(result)` on every nest result right after the footprint analysis."""
    right = footprint_pkg.analyze

    def wrong(result, options, budget=None):
        right(result, options, budget)
        change(result)

    monkeypatch.setattr(footprint_pkg, "analyze", wrong)


def _mismatches(status: int, diags: list[dict]) -> list[str]:
    assert status == 1
    return [d["message"] for d in diags if d["code"] == "TC305"]


def test_a_wrong_working_set_value_is_caught(run_cli, monkeypatch):
    def one_line_more(result):
        fp = result.extras["footprint"]
        if fp.levels:
            fp.levels[-1].whole.by_array[sorted(fp.levels[-1].whole.by_array)[0]].lines.value += 1

    _wrapped(monkeypatch, one_line_more)
    msgs = _mismatches(*_run(run_cli, BASIN, SIZES))
    assert any(m.startswith("lines of the working set of loop 'j'") and "for array" in m for m in msgs), msgs


def test_a_wrong_layout_is_caught(run_cli, monkeypatch):
    """Lines of 32 bytes in the packed layout: the counts at the --at sizes are off."""
    right = exact.packed_line_map
    monkeypatch.setattr(exact, "packed_line_map", lambda n, ext, elem, line: right(n, ext, elem, line // 2))
    msgs = _mismatches(*_run(run_cli, BASIN, SIZES))
    assert any(m.startswith("lines of ") for m in msgs), msgs


def test_a_wrong_formula_is_caught(run_cli, monkeypatch):
    def doubled(result):
        fp = result.extras["footprint"]
        for ws in fp.levels:
            c = ws.whole.elements
            if c.formula is not None:
                c.formula = c.formula.scale(2)

    _wrapped(monkeypatch, doubled)
    msgs = _mismatches(*_run(run_cli, BASIN, SIZES))
    assert any(m.startswith("formula for elements of the working set") for m in msgs), msgs


def test_an_upper_bound_below_the_truth_is_caught(run_cli, monkeypatch):
    def too_low(result):
        fp = result.extras["footprint"].footprint
        fp.elements.value -= 1
        fp.elements.bound = True

    _wrapped(monkeypatch, too_low)
    msgs = _mismatches(*_run(run_cli, BASIN, SIZES))
    assert any("is the upper bound" in m for m in msgs), msgs


def test_a_wrong_reuse_and_fit_are_caught(run_cli, monkeypatch):
    def flipped(result):
        for ws in result.extras["footprint"].levels:
            if ws.reuse is not None:
                ws.reuse = not ws.reuse
            ws.fits = {k: not v for k, v in ws.fits.items()}

    _wrapped(monkeypatch, flipped)
    msgs = _mismatches(*_run(run_cli, BASIN, SIZES))
    assert any(m.startswith("reuse by loop ") for m in msgs), msgs
    assert any(m.startswith("whether the working set of loop ") for m in msgs), msgs


def test_a_wrong_flop_count_is_caught(run_cli, monkeypatch):
    right = flops.scaled
    monkeypatch.setattr(flops, "scaled", lambda count, weight: right(count, weight + 1) if weight else
                        right(count, weight))
    status, diags = _run(run_cli, BASIN, SIZES)
    assert status == 1
    assert any(d["code"] == "TC302" and "flops" in d["message"] for d in diags)


def test_over_the_budget_nothing_is_claimed(run_cli, monkeypatch):
    monkeypatch.setattr(verify_enum, "MAX_INSTANCES", 10)
    status, diags = _run(run_cli, BASIN, SIZES)
    assert status == 0 and not any(d["code"] == "TC305" for d in diags)
    notes = [d["message"] for d in diags if d["code"] == "TC306"]
    assert notes and all(m.startswith("not checked: working sets at ") for m in notes), notes


def test_line_numbers_of_the_reference_layouts():
    """Hand values: double A[.][11] (88-byte rows), 64-byte lines. Packed: A[1][0] is byte 88, line 1;
    A[2][5] is byte 8*27 = 216, line 3. Rows aligned: A[2][5] is line (2, 0), A[2][8] line (2, 1)."""
    strides = [11, 1]
    assert verify_memory._line_of((1, 0), 8, 64, strides) == 1
    assert verify_memory._line_of((2, 5), 8, 64, strides) == 3
    assert verify_memory._line_of((2, 5), 8, 64, None) == (2, 0)
    assert verify_memory._line_of((2, 8), 8, 64, None) == (2, 1)


TINY = ("--cache", "L1=512B", "--cache", "L2=4KiB", "--cache", "L3=32KiB")
PRODUCT = os.path.join(INPUTS, "verify", "quay_product.c")


def _threshold_checks(diags: list[dict]) -> str:
    return " ".join(d["message"] for d in diags if d["code"] == "TC306")


def test_cache_fit_thresholds_are_checked_at_and_past_them(run_cli):
    """With caches scaled down, the thresholds lie at sizes small enough to enumerate: each is checked
    (fits at it, not one past it) and none is listed as not checked for the L1 level."""
    status, diags = _run(run_cli, PRODUCT, "n=12", *TINY)
    _clean(status, diags)
    note = _threshold_checks(diags)
    assert "for L1 of" not in note, note  # every L1 threshold (n <= 5, n <= 6 here) was enumerated


def test_a_wrong_threshold_is_caught(run_cli, monkeypatch):
    def one_more(result):
        for ws in result.extras["footprint"].levels:
            for t in ws.thresholds.values():
                if t.largest is not None and not t.unbounded:
                    t.largest += 1

    _wrapped(monkeypatch, one_more)
    msgs = _mismatches(*_run(run_cli, PRODUCT, "n=12", *TINY))
    assert any(m.startswith("whether the working set of loop ") and "threshold" in m for m in msgs), msgs
