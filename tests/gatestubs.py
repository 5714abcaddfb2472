# Typed nest summaries of our own for the tests of the gate (the shape of
# analysis.summary.NestSummary.to_json), so that the gate's logic is tested
# apart from the engine.

from __future__ import annotations

from tripcount.analysis.summary import NestSummary


def count(value, degree, leading):
    """A count object as Count.to_json makes it."""
    return {"value": value, "pieces": [{"when": "true", "expr": leading}], "degree": degree, "leading": leading}


def typed(nest):
    """The typed summary the gate reads."""
    return NestSummary.from_json(nest)


def typed_all(nests):
    return [typed(n) for n in nests]


def working_set(size, estimate="exact"):
    """A working set summary of `size` bytes (None: no value)."""
    return {"scope": "s", "bytes": None if size is None else count(size, 0, str(size)), "occupancy_bytes": size,
            "estimate": estimate, "reason": "", "assumptions": ""}


def make_nest(function="f", line=3, degree=2, leading="N^2", ws=None, imb=None, inner_ws=None, text="A[i] += 1"):
    """A two-loop nest summary (NestSummary.to_json shape): outer loop on `line`, inner loop on the next line."""
    loops = [
        {"index": 0, "var": "i", "depth": 0, "parent": None, "line": line, "column": 5,
         "end_line": line + 3, "end_column": 6, "step": 1,
         "balance": ({"directive": "parallel for", "imbalance": str(imb), "threads": 4} if imb is not None else None),
         "trips": count(None, 1, "N"), "trips_per_entry": count(None, 1, "N")},
        {"index": 1, "var": "j", "depth": 1, "parent": 0, "line": line + 1, "column": 9,
         "end_line": line + 2, "end_column": 20, "step": 1, "balance": None,
         "trips": count(None, degree, leading), "trips_per_entry": None},
    ]
    if ws is not None:
        loops[0]["working_set"] = working_set(ws * 4)
    if inner_ws is not None or ws is not None:
        loops[1]["working_set"] = working_set(inner_ws if inner_ws is not None else ws)
    return {
        "function": function, "line": line, "column": 5, "end_line": line + 3, "end_column": 6,
        "parameters": ["N"], "symbolic": {}, "loops": loops,
        "statements": [{"id": "S1", "line": line + 2, "column": 13, "end_line": line + 2, "end_column": 22,
                        "text": text, "loops": [0, 1], "count": count(None, degree, leading)}],
    }


class Opts:
    """The Options fields the gate reads."""

    def __init__(self, at=None, caches=None, threads=None):
        self.at = at or {}
        self.caches = caches if caches is not None else {"L1": 32768, "L2": 262144, "L3": 8388608}
        self.threads = threads


LINES = ["void f(int N, double *A) {", "  // a comment", "    for (int i = 0; i < N; i++)",
         "        for (int j = 0; j < N; j++)", "            A[i] += 1;", "}"]
