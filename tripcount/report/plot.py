# Optional plot of the cache-fit model: working set against a size parameter.
#
# For every nest with working-set formulas, one panel: the worst-case working
# set of each loop level (in bytes of whole cache lines) as the chosen size
# parameter grows, the other sizes held at the --at values, with the cache
# capacities drawn across. It is a picture of the model estimate, labelled
# as such. With a machine description, one more panel: the roofline chart
# (flops per byte from memory against the attainable flop rate, one point per
# nest at the --at sizes, under the peak and bandwidth ceilings).
# matplotlib is an optional extra: it is imported only here, and
# only when a plot is asked for.

from __future__ import annotations

import math
from typing import Any

from tripcount.analysis.results import Report
from tripcount.machine import Machine

MAX_PANELS = 12


def _levels(nr: Any) -> list[Any]:
    fp = nr.extras.get("footprint")
    return [] if fp is None else [ws for ws in fp.levels if ws.lines_at is not None]


def roofline_points(report: Report) -> list[tuple[str, float, float]]:
    """(label, flops per memory byte, attainable GFLOP/s) of every nest with a time estimate."""
    out = []
    for fr in report.files:
        for nr in fr.nests:
            rf = nr.extras.get("roofline")
            x = None if rf is None else rf.intensity
            y = None if rf is None else rf.attainable_gflops
            if x and y:
                out.append((f"{fr.path.rsplit('/', 1)[-1]}:{nr.nest.span.line}", x, y))
    return out


def draw_roofline(ax: Any, machine: Machine, points: list[tuple[str, float, float]]) -> None:
    """The roofline chart on `ax`: ceilings of the machine and one point per nest."""
    xs = [x for _, x, _ in points]
    lo, hi = min(xs + [1 / 16]) / 4, max(xs + [64]) * 4
    grid = [lo * (hi / lo) ** (k / 64) for k in range(65)]
    for peak, style, name in ((machine.peak_gflops_per_core, "-", "one core"),
                              (machine.peak_gflops, "--", f"{machine.cores} cores")):
        ax.plot(grid, [min(peak, machine.memory_gbs * x) for x in grid], style, color="black", linewidth=1,
                label=f"peak {peak:g} GFLOP/s ({name}), memory {machine.memory_gbs:g} GB/s")
        if machine.cores == 1:
            break
    for level, bw in machine.cache_gbs:
        ax.plot(grid, [min(machine.peak_gflops_per_core, bw * x) for x in grid], ":", linewidth=0.8,
                label=f"{level} {bw:g} GB/s")
    ax.scatter(xs, [y for _, _, y in points], s=14, color="tab:red", zorder=3)
    for label, x, y in points[:40]:
        ax.annotate(label, (x, y), fontsize=6, xytext=(3, 2), textcoords="offset points")
    ax.set_xscale("log", base=2)
    ax.set_yscale("log", base=10)
    ax.set_xlabel("flops per byte from memory")
    ax.set_ylabel("attainable GFLOP/s")
    ax.set_title("roofline, model estimate at the --at sizes", fontsize=8)
    ax.legend(fontsize=6)


def write_plot(report: Report, path: str, param: str | None = None, machine: Machine | None = None) -> str | None:
    """Plot working sets against `param` (default: the nest's first parameter) into a PNG file.

    With `machine`, a roofline chart of the nests is the last panel.
    Returns None when the file was written, otherwise a one-line reason
    (matplotlib not installed, nothing to plot) for the CLI to print.
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        return "--plot needs matplotlib (pip install matplotlib); no plot written"
    panels = []
    for fr in report.files:
        for nr in fr.nests:
            levels = _levels(nr)
            params = list(nr.nest.params)
            solved = [t.param for ws in levels for t in ws.thresholds.values()]
            p = param if param in params else (solved[0] if solved else (params[0] if params else None))
            if levels and p is not None and all(q in report.at for q in params if q != p):
                panels.append((fr.path, nr, levels, p))
    points = roofline_points(report) if machine is not None else []
    if not panels and not points:
        return "nothing to plot: no working-set formulas (give --at sizes for every parameter but one)"
    panels = panels[:MAX_PANELS]
    n = len(panels) + (1 if points else 0)
    cols = min(3, n)
    rows = math.ceil(n / cols)
    fig, axes = plt.subplots(rows, cols, figsize=(5.2 * cols, 3.8 * rows), squeeze=False)
    for ax in axes.flat[n:]:
        ax.set_visible(False)
    if points and machine is not None:
        draw_roofline(axes.flat[len(panels)], machine, points)
    for ax, (fpath, nr, levels, p) in zip(axes.flat, panels, strict=False):
        base = {q: v for q, v in report.at.items() if q in nr.nest.params}
        top = max(64, 4 * base.get(p, 256))
        xs = sorted({max(1, int(round(2 ** (k / 4)))) for k in range(0, 4 * int(math.log2(top)) + 1)})
        for ws in levels:
            pts = [(x, ws.occupancy_at({**base, p: x})) for x in xs]
            pts = [(x, y) for x, y in pts if y]
            if pts:
                ax.plot([x for x, _ in pts], [y for _, y in pts], label=f"loop {ws.loop.var} (line {ws.loop.span.line})")
        caches = nr.extras["footprint"].caches
        for lv in caches.levels:
            ax.axhline(lv.size, linestyle="--", linewidth=0.8, color="grey")
            ax.annotate(lv.name, (xs[0], lv.size), fontsize=7, color="grey", va="bottom")
        ax.set_xscale("log", base=2)
        ax.set_yscale("log", base=2)
        ax.set_xlabel(p + (f"  ({', '.join(f'{k}={v}' for k, v in base.items() if k != p)})" if len(base) > 1 else ""))
        ax.set_ylabel("working set, bytes of lines")
        ax.set_title(f"{fpath}:{nr.nest.span.line} {nr.nest.function}()", fontsize=8)
        ax.legend(fontsize=7)
    # two short lines: one panel is only 5 inches wide
    fig.suptitle(("working set per loop level" if panels else "roofline") + "\nmodel estimate: fully associative, capacity-only caches", fontsize=9)
    fig.tight_layout(rect=(0, 0, 1, 0.93))  # room for the title above the panels
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return None
