# Test helper: gcc as the reference for memory accesses.
#
# `access_trace` runs a C function compiled by gcc, with every array reference
# of the listed statements wrapped so that the program records, in execution
# order, which statement instance (statement, values of its enclosing loop
# variables) touched which bytes of which array, reading or writing. The
# addresses are the ones gcc computes from the declared types, so the layout
# is real C layout: `double A[n][m]` rows are packed, a VLA's row length is
# its run-time extent, a flattened `a[i*n + j]` is what it is.
#
# Every pointer or array parameter points into its own zeroed buffer whose
# start (the address the function receives) lies on a 64-byte boundary, the
# alignment the working-set model assumes for arrays; offsets are in bytes
# from that start (negative offsets stay inside the buffer's guard area).
#
# From a trace, the tests derive the references of the trade by brute force:
# distinct elements and cache lines per loop level with the outer loop
# variables fixed (working sets), an LRU cache simulation (traffic), and the
# dependences between statement instances.
#
# Limits: references are found as `name[...]...[...]` with `name` a pointer or
# array parameter of the function; arrays read inside subscripts are not
# recorded. Within one statement instance reads are ordered before writes (C
# leaves the order of the two sides of an assignment unspecified; the model
# reads first).

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from oracle import (
    GUARD_BYTES,
    OracleError,
    ParamType,
    SpanTuple,
    _build_and_run,
    _is_floating,
    _line_starts,
    _statement_range,
    call_arguments,
    openmp_available,
)

MAX_EVENTS = 2_000_000
MAX_DEPTH = 8
BUFFER = 64 << 20

_ASSIGN = re.compile(r"\s*(<<=|>>=|[-+*/%&|^]=|=(?!=)|\+\+|--)")


@dataclass(frozen=True)
class Access:
    """One access of a statement instance to an array parameter."""

    stmt: int  # index into the statements passed to access_trace
    iters: tuple[int, ...]  # values of the statement's enclosing loop variables, outermost first
    array: str  # the parameter name
    offset: int  # bytes from the array's start
    size: int  # bytes accessed
    write: bool


def _bracket_end(text: str, i: int) -> int:
    """Index after the ']' matching the '[' at text[i]."""
    depth = 0
    while i < len(text):
        c = text[i]
        if c in "[(":
            depth += 1
        elif c in "])":
            depth -= 1
            if depth == 0:
                return i + 1
        i += 1
    raise OracleError(f"unbalanced brackets in {text!r}")


def _wrap_references(text: str, arrays: Sequence[str], k: int, iv: str) -> str:
    """`text` with each reference to one of `arrays` recorded through __tc_at."""
    if not arrays:
        return text
    pat = re.compile(r"(?<![\w.>])(" + "|".join(map(re.escape, arrays)) + r")\s*\[")
    out, pos = [], 0
    for m in pat.finditer(text):
        if m.start() < pos:
            continue  # inside a reference already wrapped (a subscript)
        end = m.end() - 1
        while True:
            end = _bracket_end(text, end)
            j = end
            while j < len(text) and text[j].isspace():
                j += 1
            if j < len(text) and text[j] == "[":
                end = j
                continue
            break
        ref = text[m.start():end]
        after = _ASSIGN.match(text, end)
        before = text[:m.start()].rstrip()
        pre_incdec = before.endswith(("++", "--"))
        if after and after.group(1) == "=":
            mode = 2  # write
        elif after or pre_incdec:
            mode = 3  # read, then write
        else:
            mode = 1  # read
        out.append(text[pos:m.start()])
        out.append(f"(*(__typeof__({ref}) *)__tc_at(&({ref}), sizeof({ref}), {k}, {mode}, {iv}))")
        pos = end
    out.append(text[pos:])
    return "".join(out)


def _prelude(arrays: Sequence[str]) -> str:
    n = max(len(arrays), 1)
    return f"""#include <stdio.h>
#include <stdlib.h>
#include <string.h>
static char *__tc_base[{n}];
static long long __tc_ev[{MAX_EVENTS}][{5 + MAX_DEPTH}];
static long long __tc_n;
static void *__tc_at(void *p, long long size, int stmt, int mode, int nv, const long long *iv)
{{
    long long arr = -1, off = 0;
    for (int a = 0; a < {len(arrays)}; a++) {{
        char *b = __tc_base[a];
        if ((char *)p >= b - {GUARD_BYTES}LL && (char *)p < b - {GUARD_BYTES}LL + {BUFFER}LL) {{
            arr = a; off = (char *)p - b; break;
        }}
    }}
    for (int w = 1; w <= 2; w++) {{
        if (!(mode & w)) continue;
        if (__tc_n >= {MAX_EVENTS}) {{ fprintf(stderr, "trace too long\\n"); exit(4); }}
        long long *e = __tc_ev[__tc_n++];
        e[0] = stmt; e[1] = arr; e[2] = off; e[3] = size; e[4] = (w == 2) | (nv << 1);
        for (int d = 0; d < nv && d < {MAX_DEPTH}; d++) e[5 + d] = iv[d];
    }}
    return p;
}}
#define main __tc_user_main
"""


def _driver(function: str, param_types: Sequence[ParamType], arrays: Sequence[str]) -> str:
    def aligned_buffer(_k: int, name: str) -> tuple[str, str]:
        a = arrays.index(name)
        return (f"    char *__tc_buf{a} = aligned_alloc(64, {BUFFER}ULL);\n"
                f"    if (!__tc_buf{a}) return 3;\n"
                f"    memset(__tc_buf{a}, 0, {BUFFER}ULL);\n"
                f"    __tc_base[{a}] = __tc_buf{a} + {GUARD_BYTES}LL;", f"(void *)__tc_base[{a}]")

    decls, call = call_arguments(function, param_types, aligned_buffer)
    n_int = sum(1 for _n, t, p in param_types if not p and not _is_floating(t))
    return f"""
#undef main
#line 1 "tripcount-trace-driver.c"
int main(void)
{{
    long long __tc_v[{max(n_int, 1)}];
{chr(10).join(decls)}
    for (int k = 0; k < {n_int}; k++)
        if (scanf("%lld", &__tc_v[k]) != 1)
            return 2;
    {call}
    for (long long e = 0; e < __tc_n; e++) {{
        long long *v = __tc_ev[e];
        int nv = (int)(v[4] >> 1);
        printf("%lld %lld %lld %lld %lld", v[0], v[1], v[2], v[3], v[4] & 1);
        for (int d = 0; d < nv; d++)
            printf(" %lld", v[5 + d]);
        printf("\\n");
    }}
    return 0;
}}
"""


def access_trace(c_source: str, function: str, param_types: Sequence[ParamType],
                 point: Mapping[str, int], statements: Sequence[tuple[SpanTuple, Sequence[str]]],
                 timeout: float = 120.0, openmp: bool = True) -> list[Access]:
    """The accesses of the listed statements to array parameters, in execution order
    (`openmp` False: built without OpenMP, so a parallel loop runs in order).

    statements: (span, loop variables as written in C, outermost first) per
    statement. Integer parameters take their values from `point` (0 when
    missing), floating ones 0.0. Raises OracleError on failure.
    """
    arrays = [n for n, _t, p in param_types if p]
    starts = _line_starts(c_source)
    edits = []
    for k, (span, loop_vars) in enumerate(statements):
        a, b = _statement_range(c_source, starts, tuple(span))
        if len(loop_vars) > MAX_DEPTH:
            raise OracleError("nest too deep for the trace")
        iv = (f"{len(loop_vars)}, (const long long[]){{{', '.join(loop_vars)}}}"
              if loop_vars else "0, (const long long *)0")
        edits.append((a, b, _wrap_references(c_source[a:b], arrays, k, iv)))
    out = c_source
    for a, b, repl in sorted(edits, reverse=True):
        out = out[:a] + repl + out[b:]
    program = _prelude(arrays) + out + _driver(function, param_types, arrays)
    ints = [n for n, t, p in param_types if not p and not _is_floating(t)]
    stdin = " ".join(str(int(point.get(n, 0))) for n in ints) + "\n"
    text = _build_and_run(program, openmp and openmp_available(), stdin, timeout)
    events = []
    for line in text.splitlines():
        v = [int(x) for x in line.split()]
        arr = arrays[v[1]] if v[1] >= 0 else "?"
        events.append(Access(v[0], tuple(v[5:]), arr, v[2], v[3], bool(v[4])))
    return _reads_first(events)


def _reads_first(events: list[Access]) -> list[Access]:
    """Within each run of one statement instance, reads before writes (stable)."""
    out: list[Access] = []
    run: list[Access] = []
    for e in events:
        if run and (e.stmt, e.iters) != (run[0].stmt, run[0].iters):
            out.extend(sorted(run, key=lambda x: x.write))
            run = []
        run.append(e)
    out.extend(sorted(run, key=lambda x: x.write))
    return out


# --------------------------------------------------------------------------
# Brute-force quantities from a trace


def working_sets(events: Sequence[Access], depth: int, line: int = 64
                 ) -> dict[tuple[int, ...], tuple[int, int, int]]:
    """Per value of the loop variables outside depth `depth` (their tuple):
    (distinct elements, distinct bytes, distinct cache lines) touched by the
    statement instances below. Elements are (array, offset) pairs; lines are
    (array, offset // line), each array starting on a line boundary."""
    elems: dict[tuple[int, ...], set] = {}
    byts: dict[tuple[int, ...], set] = {}
    lines: dict[tuple[int, ...], set] = {}
    for e in events:
        if len(e.iters) < depth:
            continue
        key = e.iters[:depth]
        elems.setdefault(key, set()).add((e.array, e.offset))
        bs = byts.setdefault(key, set())
        ls = lines.setdefault(key, set())
        for b in range(e.offset, e.offset + e.size):
            bs.add((e.array, b))
            ls.add((e.array, b // line))
    return {k: (len(elems[k]), len(byts[k]), len(lines[k])) for k in elems}


def lru_misses(events: Sequence[Access], capacity_lines: int, line: int = 64) -> int:
    """Lines brought into a fully associative LRU cache of `capacity_lines`
    lines, cold at the start, by the trace (write-allocate: a write misses
    like a read)."""
    from collections import OrderedDict

    cache: OrderedDict = OrderedDict()
    misses = 0
    for e in events:
        for ln in range(e.offset // line, (e.offset + e.size - 1) // line + 1):
            key = (e.array, ln)
            if key in cache:
                cache.move_to_end(key)
                continue
            misses += 1
            cache[key] = True
            if len(cache) > capacity_lines:
                cache.popitem(last=False)
    return misses
