# Optional plot of the cache-fit model: working set against a size parameter.
#
# For every nest with working-set formulas, one panel: the worst-case working
# set of each loop level (in bytes of whole cache lines) as the chosen size
# parameter grows, the other sizes held at the --at values, with the cache
# capacities drawn across. It is a picture of the model estimate, labelled
# as such. matplotlib is an optional extra: it is imported only here, and
# only when a plot is asked for.

from __future__ import annotations

import math
from typing import Any

from tripcount.analysis.results import Report

MAX_PANELS = 12


def _levels(nr: Any) -> list[Any]:
    fp = nr.extras.get("footprint")
    return [] if fp is None else [ws for ws in fp.levels if ws.lines_at is not None]


def write_plot(report: Report, path: str, param: str | None = None) -> str | None:
    """Plot working sets against `param` (default: the nest's first parameter) into a PNG file.

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
    if not panels:
        return "nothing to plot: no working-set formulas (give --at sizes for every parameter but one)"
    panels = panels[:MAX_PANELS]
    cols = min(3, len(panels))
    rows = math.ceil(len(panels) / cols)
    fig, axes = plt.subplots(rows, cols, figsize=(5.2 * cols, 3.8 * rows), squeeze=False)
    for ax in axes.flat[len(panels):]:
        ax.set_visible(False)
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
    fig.suptitle("working set per loop level\nmodel estimate: fully associative, capacity-only caches", fontsize=9)
    fig.tight_layout(rect=(0, 0, 1, 0.93))  # room for the title above the panels
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return None
