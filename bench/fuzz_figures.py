# Fuzzing figures: run the robustness strategies of tests/robustness for many
# cases and print what happened, instead of stopping at the first failure.
#
#   python bench/fuzz_figures.py --cases 5000 --workers 2
#
# Per strategy (valid affine nests, mutated C, raw bytes): cases run, crashes
# (an exception escaping the pipeline), contained internal errors (the
# internal-error diagnostics of tests/internal.py), hangs (a case over
# --hang-s seconds), exactness failures (a count disagreeing with direct
# execution or isl enumeration), location failures (a diagnostic outside the
# text), comparisons made. Failing inputs are written under --save for replay.

from __future__ import annotations

import argparse
import json
import multiprocessing
import os
import random
import sys
import threading
import time
import traceback
from collections import Counter
from typing import Any

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.join(ROOT, "tests"))
sys.path.insert(0, os.path.join(ROOT, "tests", "robustness"))

STRATEGIES = ("valid", "mutated", "bytes")


def _classify(exc: BaseException) -> str:
    text = str(exc)
    if not isinstance(exc, AssertionError):
        return "crash"
    if "internal error" in text:
        return "internal"
    if any(w in text for w in ("out of range", "column < 1", "end before start")):
        return "location"
    if "expected one nest" in text or "loops/statements at lines" in text:
        return "shape"
    return "exactness"


def run_worker(strategy: str, cases: int, seed: int, hang_s: float, save: str) -> dict[str, Any]:
    """Run `cases` hypothesis examples of one strategy; count outcomes (never raises)."""
    import strategies as S
    from hypothesis import HealthCheck, given, settings
    from hypothesis import seed as hseed

    stats: Counter[str] = Counter()
    examples: dict[str, int] = Counter()
    os.makedirs(save, exist_ok=True)
    state = {"start": None, "source": ""}

    def watchdog() -> None:
        while True:
            time.sleep(1.0)
            t0 = state["start"]
            if t0 is not None and time.monotonic() - t0 > 20 * hang_s:
                _save(save, strategy, seed, "hang", state["source"], "still running after 20 x hang_s")
                os._exit(3)

    threading.Thread(target=watchdog, daemon=True).start()

    def record(kind: str, source: Any, detail: str) -> None:
        stats[kind] += 1
        if examples[kind] < 20:
            examples[kind] += 1
            _save(save, strategy, seed, kind, source, detail)

    def one(make_source: Any, check: Any) -> None:
        source = make_source()
        state["source"], state["start"] = source, time.monotonic()
        try:
            res = check(source)
            if strategy != "valid" and res is not None:
                res, compared = res
                stats["compared"] += compared
                codes = [d.code for d in res.all_diagnostics()]
                if any(c in ("TC310", "TC311", "TC301") for c in codes):
                    stats["limited"] += 1
            elif res is not None:
                stats["compared"] += res.compared
                stats["refused"] += res.refused
                stats["limited"] += res.limited
        except BaseException as exc:  # noqa: BLE001 - counted, never raised
            if isinstance(exc, KeyboardInterrupt):
                raise
            record(_classify(exc), source, "".join(traceback.format_exception(exc))[-4000:])
        finally:
            took = time.monotonic() - state["start"]
            state["start"] = None
            stats["cases"] += 1
            stats["seconds"] += took
            if took > hang_s:
                record("hang", source, f"{took:.1f} s")

    conf = settings(max_examples=cases, deadline=None, database=None, derandomize=False,
                    suppress_health_check=list(HealthCheck), print_blob=False)

    if strategy == "valid":
        @hseed(seed)
        @conf
        @given(S.affine_nests())
        def case(gen: Any) -> None:
            one(lambda: gen, lambda g: S.check_generated(g, random.Random(g.source())))
    elif strategy == "mutated":
        @hseed(seed)
        @conf
        @given(S.mutated_sources())
        def case(text: str) -> None:
            one(lambda: text, lambda t: S.check_text(t, random.Random(t)))
    else:
        import tempfile

        path = os.path.join(tempfile.mkdtemp(prefix="tripcount-fuzz-bytes-"), "input.c")

        @hseed(seed)
        @conf
        @given(S.raw_bytes)
        def case(data: bytes) -> None:
            one(lambda: data, lambda d: S.check_bytes(d, path))

    case()
    return dict(stats)


def _save(save: str, strategy: str, seed: int, kind: str, source: Any, detail: str) -> None:
    stamp = f"{strategy}-{kind}-{seed}-{time.time_ns()}"
    if hasattr(source, "source"):
        source = source.source()
    data = source if isinstance(source, bytes) else str(source).encode("utf-8", "surrogatepass")
    with open(os.path.join(save, stamp + ".c"), "wb") as f:
        f.write(data)
    with open(os.path.join(save, stamp + ".txt"), "w", encoding="utf-8") as f:
        f.write(detail)


def _job(args: tuple[str, int, int, float, str]) -> tuple[str, dict[str, Any]]:
    return args[0], run_worker(*args)


def main(argv: list[str] | None = None) -> int:
    """Run the profile and print the figures; exit 1 if anything but limits was found."""
    p = argparse.ArgumentParser(description=__doc__)
    p.add_argument("--cases", type=int, default=5000, help="cases per strategy (default 5000)")
    p.add_argument("--strategies", default=",".join(STRATEGIES), help="comma-separated: valid,mutated,bytes")
    p.add_argument("--workers", type=int, default=2, help="processes (cases are split among them)")
    p.add_argument("--seed", type=int, default=1, help="base seed (each worker adds its index)")
    p.add_argument("--hang-s", type=float, default=30.0, help="a case slower than this counts as a hang")
    p.add_argument("--save", default=os.path.join(os.environ.get("TMPDIR", "/tmp"), "tripcount-fuzz"),
                   help="directory for failing inputs")
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    a = p.parse_args(argv)
    jobs = []
    for s in a.strategies.split(","):
        per = [a.cases // a.workers + (1 if k < a.cases % a.workers else 0) for k in range(a.workers)]
        jobs += [(s.strip(), n, a.seed + k, a.hang_s, a.save) for k, n in enumerate(per) if n]
    start = time.monotonic()
    with multiprocessing.get_context("fork").Pool(a.workers, maxtasksperchild=1) as pool:
        results = pool.map(_job, jobs, chunksize=1)
    totals: dict[str, Counter[str]] = {}
    for s, stats in results:
        totals.setdefault(s, Counter()).update(stats)
    figures = {s: {k: (round(v, 1) if isinstance(v, float) else v) for k, v in sorted(c.items())}
               for s, c in totals.items()}
    if a.json:
        print(json.dumps(figures, indent=2))
    else:
        cols = ("cases", "crash", "internal", "hang", "exactness", "location", "shape", "limited", "compared")
        print(f"{'strategy':10s}" + "".join(f"{c:>11s}" for c in cols) + f"{'seconds':>11s}")
        for s, f in figures.items():
            print(f"{s:10s}" + "".join(f"{f.get(c, 0):>11}" for c in cols) + f"{f.get('seconds', 0):>11}")
        print(f"wall time {time.monotonic() - start:.0f} s; failing inputs (if any) under {a.save}")
    bad = sum(f.get(k, 0) for f in figures.values() for k in ("crash", "hang", "exactness", "location"))
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
