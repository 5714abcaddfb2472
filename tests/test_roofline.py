# Tests of tripcount/analysis/roofline.py: the time estimate against hand
# arithmetic of the roofline model (Williams, Waterman & Patterson, "Roofline:
# an insightful visual performance model for multicore architectures", CACM
# 52(4), 2009: attainable = min(peak, intensity x bandwidth), so the time is
# max(flops / peak, bytes / bandwidth)); flop counts from Golub & Van Loan,
# Matrix Computations (matrix product 2n^3 flops, saxpy 2n flops); the
# traffic path with a stand-in of the traffic analysis' result.

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from types import SimpleNamespace

import pytest

from tripcount.analysis import roofline
from tripcount.analysis.results import Count
from tripcount.machine import Machine
from tripcount.options import Options
from tripcount.pipeline import analyze_text

pytestmark = pytest.mark.usefixtures("compulsory_only")

BOX = Machine(peak_gflops_per_core=10.0, cores=2, memory_gbs=8.0,
              cache_gbs=(("L1", 100.0), ("L2", 40.0), ("L3", 20.0)), name="Velin test box")
MATMUL = """void quay_loads(int N, double A[N][N], double B[N][N], double C[N][N]) {
    %s
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            for (int k = 0; k < N; k++)
                C[i][j] += A[i][k] * B[k][j];
}"""
SAXPY = "void tide(int N, double a, double *x, double *y) { for (int i = 0; i < N; i++) y[i] = a * x[i] + y[i]; }"


def estimate(code: str, n: int, machine: Machine | None = BOX, **kw) -> roofline.Roofline:
    fr = analyze_text(code, "k.c", Options(at={"N": n}, machine=machine, **kw))
    return fr.nests[0].extras["roofline"]


def test_memory_bound_saxpy_by_hand():
    r = estimate(SAXPY, 1000)
    # 2N flops (Golub & Van Loan, saxpy); compulsory bytes: x and y, 8 bytes each = 16N
    assert (r.flops, r.memory_bytes, r.memory_from) == (2000, 16000, "compulsory footprint")
    # compute 2000 / 10e9 = 0.2 us; memory 16000 / 8e9 = 2 us: memory binds
    assert math.isclose(r.seconds, 2e-6) and r.binding == "memory"
    # attainable = intensity x bandwidth = (2000/16000) x 8 = 1 GFLOP/s, 10% of one core's peak
    assert math.isclose(r.attainable_gflops, 1.0) and math.isclose(r.fraction_of_peak, 0.1)
    assert math.isclose(r.attainable_gflops, min(10.0, r.intensity * 8.0))


def test_compute_bound_matrix_product_by_hand():
    r = estimate(MATMUL % "", 64)
    # 2n^3 flops (Golub & Van Loan); three 64x64 double matrices = 98304 bytes
    assert r.flops == 2 * 64**3 and r.memory_bytes == 3 * 64 * 64 * 8
    # compute 524288 / 10e9 = 52.4288 us > memory 98304 / 8e9 = 12.288 us
    assert math.isclose(r.seconds, 2 * 64**3 / 10e9) and r.binding == "compute"
    assert math.isclose(r.fraction_of_peak, 1.0) and r.threads == 1


def test_parallel_loop_takes_the_slowest_threads_share():
    r = estimate(MATMUL % "#pragma omp parallel for schedule(static)", 64, threads=2)
    # static schedule, 64 rows over 2 threads: 32 rows each, share 1/2 (balance analysis)
    assert r.threads == 2 and r.slowest_share == Fraction(1, 2)
    assert math.isclose(r.seconds, 2 * 64**3 / 2 / 10e9) and math.isclose(r.peak_used, 20.0)


def test_no_machine_no_time_and_a_hint():
    r = estimate(SAXPY, 1000, machine=None)
    assert r.seconds is None and r.terms == () and r.text_lines() == []
    j = r.to_json()
    assert j["seconds"] is None and "machine --measure" in j["hint"] and j["flops"] == 2000


def test_the_gate_computes_no_estimate():
    fr = analyze_text(SAXPY, "k.c", Options(at={"N": 10}, machine=BOX, detail="gate"))
    assert "roofline" not in fr.nests[0].extras


def test_text_says_model_estimate_and_compulsory_bytes():
    lines = estimate(SAXPY, 1000).text_lines()
    assert "model estimate" in lines[0] and "bound by memory" in lines[0]
    assert "lower bound on the bytes moved" in lines[1]


@dataclass(frozen=True)
class LevelTraffic:
    """Stand-in of the traffic analysis' per-level result."""

    level: str
    line_size: int
    lines: Count
    bytes: Count
    assumptions: tuple[str, ...] = ()


@dataclass(frozen=True)
class NestTraffic:
    """Stand-in of the traffic analysis' nest result."""

    levels: tuple[LevelTraffic, ...]

    def level(self, name: str) -> LevelTraffic | None:
        return next((lv for lv in self.levels if lv.level == name), None)

    def memory_bytes(self) -> Count:
        return self.levels[-1].bytes


def with_traffic(l1: int, l2: int, l3: int, flops: int) -> roofline.Roofline:
    levels = tuple(LevelTraffic(n, 64, Count(b // 64), Count(b)) for n, b in (("L1", l1), ("L2", l2), ("L3", l3)))
    result = SimpleNamespace(extras={"traffic": NestTraffic(levels), "flops": SimpleNamespace(count=Count(flops))},
                             loops=[], statements=[])
    roofline.analyze(result, Options(machine=BOX))
    return result.extras["roofline"]


def test_traffic_levels_are_divided_by_the_bandwidth_of_the_level_below():
    r = with_traffic(l1=4_000_000, l2=1_000_000, l3=160_000, flops=100_000)
    # bytes into L1 come from L2: 4e6 / 40e9 = 100 us; into L2 from L3: 1e6 / 20e9 = 50 us;
    # into L3 from memory: 1.6e5 / 8e9 = 20 us; compute 1e5 / 10e9 = 10 us
    got = {t.resource: t.seconds for t in r.terms}
    assert got == pytest.approx({"compute": 1e-5, "L2": 1e-4, "L3": 5e-5, "memory": 2e-5})
    assert r.binding == "L2" and math.isclose(r.seconds, 1e-4) and r.memory_from == "traffic"
    assert r.intensity == pytest.approx(100_000 / 160_000)
    assert not any("compulsory" in a for a in r.assumptions())


def test_memory_binds_when_the_traffic_from_memory_dominates():
    r = with_traffic(l1=400_000, l2=400_000, l3=400_000, flops=1000)
    assert r.binding == "memory" and math.isclose(r.seconds, 400_000 / 8e9)


def test_json_fields_and_rounding():
    j = estimate(SAXPY, 1000).to_json()
    assert j["estimate"] is True and j["lower_bound"] is True and j["binding"] == "memory"
    assert [t["resource"] for t in j["terms"]] == ["compute", "memory"]
    assert j["machine"]["name"] == "Velin test box" and any("vectorisation" in a for a in j["assumptions"])


@pytest.mark.parametrize("s, text", [(4910, "1.36 h"), (189, "3.15 min"), (2.5, "2.5 s"), (0.0412, "41.2 ms"), (7.5e-6, "7.5 us"), (1.2e-8, "12 ns")])
def test_fmt_seconds(s, text):
    assert roofline.fmt_seconds(s) == text


@pytest.mark.with_traffic
def test_memory_bytes_come_from_the_traffic_analysis():
    """With the traffic unit in the pipeline, a streaming saxpy moves each line of x and y once from memory:
    2N doubles = 16N bytes (the same as its compulsory bytes; what changes is where the figure comes from)."""
    r = estimate(SAXPY, 1000)
    assert r.memory_from == "traffic" and r.memory_bytes == 16000
