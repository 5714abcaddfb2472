# Benchmark of the places users work: `tripcount check` on the generated
# 2,000-line file with 40 nests (cold cache, warm cache, warm after a comment
# edit, warm after editing one nest), wall time of a fresh process each time,
# interpreter start-up included; and the language server's hover latency once
# warm (a real stdio session: initialize, open, wait for diagnostics, then
# hovers on every loop header).
#
# Targets: cold <= 3 s, warm <= 0.5 s, hover <= 100 ms. Figures are wall-clock
# times on this machine (2 cores shared with whatever else runs), medians of
# the repeats; `--json` prints them for the README.

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT / "tests"))

from gen_check_file import generate  # noqa: E402
from lspwire import WireClient  # noqa: E402

PYPROJECT = """\
[tool.tripcount]
at = {N = 256, M = 256, K = 64}
caches = {L1 = "48KiB", L2 = "1MiB", L3 = "32MiB"}
threads = 4
max_degree = 3
max_working_set = "L2"
max_imbalance = 2.0
"""


def run_check(workdir: Path, env: dict[str, str], *extra: str) -> tuple[float, int, str]:
    """Wall time of one `python -m tripcount check` process."""
    t0 = time.perf_counter()
    p = subprocess.run([sys.executable, "-m", "tripcount", "check", *extra, "kernels.c"], cwd=workdir, env=env,
                       capture_output=True, text=True, timeout=3600)
    return time.perf_counter() - t0, p.returncode, p.stdout + p.stderr


def say(text: str) -> None:
    """Progress on stderr (a cold run can take long while the engine is slow)."""
    print(text, file=sys.stderr, flush=True)


def median(xs: list[float]) -> float:
    return statistics.median(xs) if xs else float("nan")


def bench_hover(workdir: Path, env: dict[str, str], text: str, rounds: int) -> dict[str, float]:
    """Hover latencies (ms) on every loop header once the document is analyzed."""
    c = WireClient(env, cwd=str(workdir))
    try:
        uri = (workdir / "kernels.c").as_uri()
        c.request("initialize", {"processId": os.getpid(), "rootUri": workdir.as_uri(), "capabilities": {}})
        c.notify("initialized", {})
        t0 = time.perf_counter()
        c.notify("textDocument/didOpen", {"textDocument": {"uri": uri, "languageId": "c", "version": 1, "text": text}})
        c.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"]["uri"] == uri)
        first_diag = time.perf_counter() - t0
        headers = [(k, line.index("for")) for k, line in enumerate(text.split("\n")) if line.lstrip().startswith("for")]
        lat = []
        for _ in range(rounds):
            for line, col in headers:
                t = time.perf_counter()
                r = c.request("textDocument/hover", {"textDocument": {"uri": uri},
                                                     "position": {"line": line, "character": col + 1}})
                lat.append((time.perf_counter() - t) * 1000)
                assert r.get("result"), r
        lat.sort()
        return {"open_to_diagnostics_s": first_diag, "hover_median_ms": median(lat),
                "hover_p95_ms": lat[int(0.95 * (len(lat) - 1))], "hover_max_ms": lat[-1], "hovers": len(lat)}
    finally:
        c.close()


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print the figures."""
    p = argparse.ArgumentParser(description=__doc__)
    p.add_argument("--repeat", type=int, default=5, help="repeats of each warm measurement")
    p.add_argument("--cold-repeat", type=int, default=1, help="repeats of the cold measurement")
    p.add_argument("--hover-rounds", type=int, default=3)
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    p.add_argument("--no-uncached", action="store_true", help="skip the --no-cache run (as slow as a cold one)")
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="tripcount-bench-") as tmp:
        # the project in one directory, its caches beside it: a cache inside the
        # analysed project is refused (exit status 2)
        work = Path(tmp) / "project"
        work.mkdir()
        caches = Path(tmp)
        text = generate(40, 2000)
        (work / "kernels.c").write_text(text)
        (work / "pyproject.toml").write_text(PYPROJECT)
        base_env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
        base_env.pop("PRE_COMMIT", None)
        figures: dict[str, float | int | str] = {"lines": text.count("\n"), "nests": 40}
        colds = []
        for k in range(args.cold_repeat):
            env = {**base_env, "TRIPCOUNT_CACHE_DIR": str(caches / f"cache-cold-{k}")}
            t, status, out = run_check(work, env)
            colds.append(t)
            say(f"cold {t:.2f} s (exit status {status})")
        figures["cold_s"] = median(colds)
        figures["status"] = status
        env = {**base_env, "TRIPCOUNT_CACHE_DIR": str(caches / "cache-cold-0")}
        figures["warm_s"] = median([run_check(work, env)[0] for _ in range(args.repeat)])
        say(f"warm {figures['warm_s']:.2f} s")
        # a comment edit: every nest from the cache, but the file must be parsed to find them
        (work / "kernels.c").write_text("/* reviewed */\n" + text)
        figures["warm_comment_edit_s"] = run_check(work, env)[0]
        # one nest edited: that nest is analyzed, the 39 others come from the cache
        edited = text.replace("gain * A[i][j];", "gain * A[i][j] + 1.0;", 1)
        (work / "kernels.c").write_text(edited)
        figures["warm_one_nest_edit_s"] = run_check(work, env)[0]
        (work / "kernels.c").write_text(text)
        say(f"comment edit {figures['warm_comment_edit_s']:.2f} s, one nest edited "
            f"{figures['warm_one_nest_edit_s']:.2f} s")
        figures.update(bench_hover(work, env, text, args.hover_rounds))
        say(f"hover median {figures['hover_median_ms']:.1f} ms")
        figures["no_cache_s"] = float("nan") if args.no_uncached else run_check(work, env, "--no-cache")[0]
    if args.json:
        print(json.dumps(figures, indent=2))
    else:
        print(f"tripcount check, generated file: {figures['lines']} lines, {figures['nests']} nests "
              f"(exit status {figures['status']})")
        print(f"  cold cache                 {figures['cold_s']:7.2f} s   (target <= 3 s)")
        print(f"  warm cache                 {figures['warm_s']:7.2f} s   (target <= 0.5 s)")
        print(f"  warm, comment edited       {figures['warm_comment_edit_s']:7.2f} s")
        print(f"  warm, one nest edited      {figures['warm_one_nest_edit_s']:7.2f} s")
        print(f"  --no-cache                 {figures['no_cache_s']:7.2f} s")
        print(f"language server: open to diagnostics {figures['open_to_diagnostics_s']:.2f} s (warm cache); "
              f"hover median {figures['hover_median_ms']:.1f} ms, p95 {figures['hover_p95_ms']:.1f} ms, "
              f"max {figures['hover_max_ms']:.1f} ms over {figures['hovers']} hovers (target <= 100 ms)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
