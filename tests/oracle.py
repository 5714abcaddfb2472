# Test helper: gcc as the reference for statement execution counts.
#
# The oracle answers "how many times does this statement run?" by letting the
# C compiler run the loops. It takes a C source, a function and the spans of
# some statements of that function, and builds an instrumented copy in which
# every listed statement is replaced by a counter increment. A generated
# `main` calls the function once per parameter point (integer parameters set
# from the point, pointer/array parameters aimed into large zeroed buffers,
# floating parameters 0) and prints the counters. Everything runs in one
# process per call, with the points read from standard input.
#
# Replacing statements (rather than adding a counter beside them) keeps the
# statement bodies from touching memory: the buffers stay zero and no
# out-of-range write can happen at any size. Three kinds of statement are
# kept and counted beside, because removing them would change the very counts
# being measured: declarations (later code and loop bounds use the names they
# declare), jumps (break/continue/return/goto steer the loops) and
# assignments to plain scalar variables (a local bound, a loop variable
# modified in the body). Those never write arrays.
#
# Counters are updated with __atomic_fetch_add, so functions with OpenMP
# parallel loops count correctly. `count_per_thread` keeps one row of counters
# per omp_get_thread_num(), for checks of parallel work balance.

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Callable, Mapping, Sequence
from functools import lru_cache

SpanTuple = tuple[int, int, int, int]  # line, column, end_line, end_column (1-based, end exclusive)
ParamType = tuple[str, str, bool]  # name, C type, is pointer or array

BUFFER_BYTES = 64 << 20  # zeroed buffer per pointer/array parameter
GUARD_BYTES = 16 << 20  # the parameter points this far into its buffer: negative offsets stay inside
MAX_THREAD_ROWS = 64  # per-thread counter rows (a num_threads clause may exceed OMP_NUM_THREADS)
DEFAULT_TIMEOUT = 60.0

# Calls a kept scalar assignment may make: pure math, no memory written.
PURE_CALLS = frozenset(
    "sqrt sqrtf fabs fabsf fmax fmin fmaxf fminf exp expf log logf log2 log10 sin sinf cos cosf "
    "tan atan atan2 pow powf floor floorf ceil ceilf round abs labs llabs".split()
)

_TYPE_WORDS = (
    "const volatile static register auto extern restrict unsigned signed short long int char "
    "float double _Bool bool size_t ptrdiff_t int8_t int16_t int32_t int64_t uint8_t uint16_t "
    "uint32_t uint64_t"
).split()
_DECL_RE = re.compile(r"^(?:(?:" + "|".join(_TYPE_WORDS) + r")\b\s*)+\**\s*[A-Za-z_]\w*\s*(?:=|;|,|\[|$)")
_JUMP_RE = re.compile(r"^(?:break|continue|return|goto)\b")
_SCALAR_ASSIGN_RE = re.compile(r"^([A-Za-z_]\w*)\s*(?:<<=|>>=|[-+*/%&|^]?=)(?!=)(.*)$", re.S)
_SCALAR_INCDEC_RE = re.compile(r"^(?:(?:\+\+|--)\s*[A-Za-z_]\w*|[A-Za-z_]\w*\s*(?:\+\+|--))$")
_ASSIGN_OP_RE = re.compile(r"(?<![=!<>])=(?!=)|\+\+|--")
_CALL_RE = re.compile(r"\b([A-Za-z_]\w*)\s*\(")
_KEYWORDS = frozenset("if for while do switch return sizeof else".split())


class OracleError(RuntimeError):
    """The instrumented program could not be built or run (message has gcc's output)."""


# --------------------------------------------------------------------------
# Tool discovery


def _compiler() -> str | None:
    return shutil.which("gcc")


@lru_cache(maxsize=1)
def gcc_available() -> bool:
    """True when gcc can compile and run a C99 program here."""
    try:
        out = _build_and_run("int main(void) { return 0; }\n", openmp=False, stdin="", timeout=30)
    except OracleError:
        return False
    return out == ""


@lru_cache(maxsize=1)
def openmp_available() -> bool:
    """True when gcc can build and run an OpenMP program with a team of 2 threads."""
    if not gcc_available():
        return False
    prog = (
        "#include <stdio.h>\nint omp_get_num_threads(void);\n"
        "int main(void) { int n = 0;\n#pragma omp parallel num_threads(2)\n"
        "{\n#pragma omp single\nn = omp_get_num_threads();\n}\nprintf(\"%d\\n\", n); return 0; }\n"
    )
    try:
        out = _build_and_run(prog, openmp=True, stdin="", timeout=30)
    except OracleError:
        return False
    return out.strip() == "2"


# --------------------------------------------------------------------------
# Source editing


def _line_starts(src: str) -> list[int]:
    starts = [0]
    for m in re.finditer("\n", src):
        starts.append(m.end())
    return starts


def _offset(starts: list[int], line: int, column: int) -> int:
    if not 1 <= line <= len(starts):
        raise OracleError(f"line {line} outside the source ({len(starts)} lines)")
    return starts[line - 1] + column - 1


def _skip_space_and_comments(src: str, i: int) -> int:
    while i < len(src):
        if src[i].isspace():
            i += 1
        elif src.startswith("/*", i):
            j = src.find("*/", i + 2)
            i = len(src) if j < 0 else j + 2
        elif src.startswith("//", i):
            j = src.find("\n", i)
            i = len(src) if j < 0 else j + 1
        else:
            break
    return i


def _statement_range(src: str, starts: list[int], span: SpanTuple) -> tuple[int, int]:
    """Offsets of a statement including its trailing ';' (whether the span had it or not)."""
    line, col, end_line, end_col = span
    a = _offset(starts, line, col)
    b = _offset(starts, end_line, end_col)
    if not 0 <= a < b <= len(src):
        raise OracleError(f"bad statement span {span}")
    if src[a:b].rstrip().endswith(";"):
        return a, b
    k = _skip_space_and_comments(src, b)
    if k < len(src) and src[k] == ";":
        return a, k + 1
    raise OracleError(f"no ';' after the statement at {line}:{col}: {src[a:b]!r}")


def _function_macros(src: str) -> set[str]:
    return set(re.findall(r"^\s*#\s*define\s+([A-Za-z_]\w*)\(", src, re.M))


def _typedef_names(src: str) -> set[str]:
    return set(re.findall(r"\btypedef\b[^;{}]*?\b([A-Za-z_]\w*)\s*;", src))


def _is_declaration(text: str, typedefs: set[str]) -> bool:
    if _DECL_RE.match(text):
        return True
    m = re.match(r"^(?:(?:const|volatile|static|register)\s+)*([A-Za-z_]\w*)\s*\**\s*[A-Za-z_]\w*\s*(?:=|,|\[|$)", text)
    return bool(m and m.group(1) in typedefs)


def _kept_kind(body: str, macros: set[str], typedefs: set[str] = frozenset()) -> str | None:
    """Why a statement must still run ('decl', 'jump', 'scalar'), or None to drop it."""
    text = body.strip()
    if _JUMP_RE.match(text):
        return "jump"
    if _is_declaration(text, typedefs):
        return "decl"
    if _SCALAR_INCDEC_RE.match(text):
        return "scalar"
    m = _SCALAR_ASSIGN_RE.match(text)
    if m:
        rhs = m.group(2)
        if _ASSIGN_OP_RE.search(rhs):
            return None  # a chained or embedded assignment may write an array
        calls = {c for c in _CALL_RE.findall(rhs) if c not in _KEYWORDS}
        if calls <= (PURE_CALLS | macros):
            return "scalar"
    return None


def _instrument_statement(text: str, counter: str, macros: set[str],
                          typedefs: set[str] = frozenset()) -> str:
    """Replacement text for one statement (`text` includes its ';')."""
    body = text.rstrip()[:-1]
    kind = _kept_kind(body, macros, typedefs)
    if kind == "decl":
        # stays at the same block level: the declared names must remain visible
        return f"{text.rstrip()} {counter}"
    if kind in ("jump", "scalar"):
        return f"{{ {counter} {text.rstrip()} }}"
    return f"{{ {counter} }}"


def _find_function(src: str, name: str) -> tuple[int, int]:
    """Offsets of the body `{...}` of the definition of `name` (not a prototype)."""
    for m in re.finditer(r"\b" + re.escape(name) + r"\s*\(", src):
        depth, i = 1, m.end()
        while i < len(src) and depth:
            depth += {"(": 1, ")": -1}.get(src[i], 0)
            i += 1
        k = _skip_space_and_comments(src, i)
        if k < len(src) and src[k] == "{":
            depth, j = 1, k + 1
            while j < len(src) and depth:
                if src.startswith("/*", j) or src.startswith("//", j):
                    j = _skip_space_and_comments(src, j)
                    continue
                if src[j] in "\"'":
                    q, j = src[j], j + 1
                    while j < len(src) and src[j] != q:
                        j += 2 if src[j] == "\\" else 1
                depth += {"{": 1, "}": -1}.get(src[j], 0) if j < len(src) else 0
                j += 1
            return k, j
    raise OracleError(f"no definition of function {name!r} in the source")


def _text_pattern(text: str) -> re.Pattern[str]:
    """Whitespace-insensitive pattern for a C expression text."""
    tokens = re.findall(r"[A-Za-z_]\w*|\d+\w*|\S", text)
    if not tokens:
        raise OracleError(f"empty symbol text {text!r}")
    pat = r"\s*".join(re.escape(t) for t in tokens)
    if re.match(r"\w", tokens[0]):
        pat = r"(?<![\w.])" + pat
    if re.match(r"\w", tokens[-1][-1]):
        pat += r"(?!\w)"
    return re.compile(pat)


def _symbol_var(name: str) -> str:
    return "__tc_sym_" + re.sub(r"\W", "_", name)


def instrument(c_source: str, function: str, statements: Sequence[SpanTuple],
               symbols: Mapping[str, str] | None = None, per_thread: bool = False) -> str:
    """The source with each listed statement replaced by a counter (and symbols by variables).

    `symbols` maps a parameter name to the C text it stands for (e.g. a call
    used as a loop bound); every occurrence of that text in the function body
    becomes a variable the driver sets from the point.
    """
    starts = _line_starts(c_source)
    macros = _function_macros(c_source)
    typedefs = _typedef_names(c_source)
    edits: list[tuple[int, int, str]] = []
    for k, span in enumerate(statements):
        a, b = _statement_range(c_source, starts, tuple(span))
        if per_thread:
            counter = f"__atomic_fetch_add(&__tc_count[__tc_row()][{k}], 1ULL, __ATOMIC_RELAXED);"
        else:
            counter = f"__atomic_fetch_add(&__tc_count[{k}], 1ULL, __ATOMIC_RELAXED);"
        edits.append((a, b, _instrument_statement(c_source[a:b], counter, macros, typedefs)))
    stmt_edits = sorted(edits)
    for k in range(1, len(stmt_edits)):
        if stmt_edits[k][0] < stmt_edits[k - 1][1]:
            raise OracleError("statement spans overlap")
    if symbols:
        body_a, body_b = _find_function(c_source, function)
        for name, text in symbols.items():
            for m in _text_pattern(text).finditer(c_source, body_a, body_b):
                if any(a <= m.start() < b for a, b, _ in stmt_edits):
                    continue  # the statement is replaced anyway
                edits.append((m.start(), m.end(), f"({_symbol_var(name)})"))
    out = c_source
    for a, b, repl in sorted(edits, reverse=True):
        out = out[:a] + repl + out[b:]
    return out


# --------------------------------------------------------------------------
# Driver generation


def _is_floating(ctype: str) -> bool:
    return bool(re.search(r"\b(?:float|double)\b", ctype))


def _prelude(n_counters: int, symbols: Sequence[str], per_thread: bool, path: str) -> str:
    lines = [
        "#include <stdio.h>",
        "#include <stdlib.h>",
        "#include <string.h>",
    ]
    size = max(n_counters, 1)
    if per_thread:
        lines += [
            "int omp_get_thread_num(void);",
            f"static unsigned long long __tc_count[{MAX_THREAD_ROWS}][{size}];",
            "static int __tc_row(void) { int t = omp_get_thread_num();"
            f" return t < {MAX_THREAD_ROWS} ? t : {MAX_THREAD_ROWS - 1}; }}",
        ]
    else:
        lines.append(f"static unsigned long long __tc_count[{size}];")
    for s in symbols:
        lines.append(f"static long long {_symbol_var(s)};")
    # a `main` of the user's own would clash with the driver's
    lines.append("#define main __tc_user_main")
    # keep gcc's messages in the coordinates of the original file
    lines.append(f'#line 1 "{_c_path(path)}"')
    return "\n".join(lines) + "\n"


def _c_path(path: str) -> str:
    return re.sub(r'["\\\n]', "_", path)


def call_arguments(function: str, param_types: Sequence[ParamType],
                   pointer: Callable[[int, str], tuple[str, str]]) -> tuple[list[str], str]:
    """Declarations of the argument variables and the call expression of a driver: integer
    parameters read into __tc_v[...] in order, floating ones 0.0, and `pointer(k, name)` giving
    (declaration, argument) of the k-th parameter when it is a pointer or array."""
    decls: list[str] = []
    args: list[str] = []
    n_int = 0
    for k, (name, ctype, is_ptr) in enumerate(param_types):
        if is_ptr:
            decl, arg = pointer(k, name)
            decls.append(decl)
            args.append(arg)
        elif _is_floating(ctype):
            args.append("0.0")
        else:
            args.append(f"__tc_v[{n_int}]")
            n_int += 1
    return decls, f"(void){function}({', '.join(args)});"


def _zeroed_buffer(k: int, _name: str) -> tuple[str, str]:
    """A zeroed buffer per pointer parameter, the argument GUARD_BYTES into it."""
    return (f"    char *__tc_buf{k} = calloc(1, {BUFFER_BYTES}ULL);\n"
            f"    if (!__tc_buf{k}) {{ fprintf(stderr, \"out of memory\\n\"); return 3; }}",
            f"(void *)(__tc_buf{k} + {GUARD_BYTES}ULL)")


def _driver(function: str, param_types: Sequence[ParamType], symbols: Sequence[str],
            n_counters: int, per_thread: bool) -> str:
    decls, call = call_arguments(function, param_types, _zeroed_buffer)
    n_int = sum(1 for _n, t, p in param_types if not p and not _is_floating(t))
    n_in = n_int + len(symbols)
    set_syms = "\n".join(
        f"        {_symbol_var(s)} = __tc_v[{n_int + i}];" for i, s in enumerate(symbols)
    )
    if per_thread:
        printing = (
            f"        for (int t = 0; t < {MAX_THREAD_ROWS}; t++) {{\n"
            f"            for (int k = 0; k < {n_counters}; k++)\n"
            "                printf(\" %llu\", __tc_count[t][k]);\n"
            "        }\n"
        )
    else:
        printing = (
            f"        for (int k = 0; k < {n_counters}; k++)\n"
            "            printf(\" %llu\", __tc_count[k]);\n"
        )
    return f"""
#undef main
#line 1 "tripcount-oracle-driver.c"
int main(void)
{{
    long long __tc_v[{max(n_in, 1)}];
    long long __tc_points;
{chr(10).join(decls)}
    if (scanf("%lld", &__tc_points) != 1)
        return 2;
    (void)__tc_v;
    for (long long p = 0; p < __tc_points; p++) {{
        for (int k = 0; k < {n_in}; k++)
            if (scanf("%lld", &__tc_v[k]) != 1)
                return 2;
        memset(__tc_count, 0, sizeof __tc_count);
{set_syms}
        {call}
        printf("point");
{printing}        printf("\\n");
        fflush(stdout);
    }}
    return 0;
}}
"""


def _stdin_for(param_types: Sequence[ParamType], symbols: Sequence[str],
               points: Sequence[Mapping[str, int]]) -> str:
    names = [n for n, t, p in param_types if not p and not _is_floating(t)] + list(symbols)
    rows = [str(len(points))]
    for pt in points:
        # an integer parameter the point does not mention is 0 (a flag, a stride, ...)
        rows.append(" ".join(str(int(pt.get(n, 0))) for n in names))
    return "\n".join(rows) + "\n"


def _environment(threads: int | None) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("OMP_", "GOMP_"))}
    env["OMP_NUM_THREADS"] = str(threads or 2)
    env["OMP_DYNAMIC"] = "false"  # the team size must be what was asked for
    env["OMP_SCHEDULE"] = "static"  # fixed, for loops with schedule(runtime)
    return env


def _build(program: str, openmp: bool, workdir: str, timeout: float,
           flags: Sequence[str] = (), cxx: bool = False) -> str:
    """Compile `program` (C, or C++17 with `cxx`) in `workdir`; the path of the executable."""
    cc = "g++" if cxx else _compiler()
    if cc is None:
        raise OracleError("gcc not found")
    src = os.path.join(workdir, "prog.cpp" if cxx else "prog.c")
    exe = os.path.join(workdir, "prog")
    with open(src, "w", encoding="utf-8") as f:
        f.write(program)
    std = "-std=gnu++17" if cxx else "-std=gnu99"
    cmd = [cc, "-O0", std, "-w", *(["-fopenmp"] if openmp else []), *flags, src, "-o", exe, "-lm"]
    try:
        built = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=workdir)
    except (OSError, subprocess.TimeoutExpired) as exc:
        raise OracleError(f"{cc} failed to run: {exc}") from exc
    if built.returncode != 0:
        raise OracleError(f"{cc} could not build the program:\n" + built.stderr[-4000:])
    return exe


def _run(exe: str, stdin: str, timeout: float, threads: int | None = None) -> str:
    """Run a built program; its standard output."""
    try:
        ran = subprocess.run([exe], input=stdin, capture_output=True, text=True, timeout=timeout,
                             env=_environment(threads), cwd=os.path.dirname(exe))
    except subprocess.TimeoutExpired as exc:
        raise OracleError(f"instrumented program did not finish in {timeout} s") from exc
    if ran.returncode != 0:
        raise OracleError(f"instrumented program exited with {ran.returncode}:\n"
                          + ran.stderr[-2000:] + ran.stdout[-2000:])
    return ran.stdout


def _build_and_run(program: str, openmp: bool, stdin: str, timeout: float,
                   threads: int | None = None, flags: Sequence[str] = ()) -> str:
    with tempfile.TemporaryDirectory(prefix="tripcount-oracle-") as tmp:
        return _run(_build(program, openmp, tmp, timeout, flags), stdin, timeout, threads)


def _run_counts(c_source: str, function: str, statements: Sequence[SpanTuple],
                param_types: Sequence[ParamType], points: Sequence[Mapping[str, int]],
                symbols: Mapping[str, str] | None, per_thread: bool, threads: int | None,
                timeout: float, path: str, flags: Sequence[str] = ()) -> list[list[int]]:
    syms = list(symbols or {})
    openmp = openmp_available()
    if per_thread and not openmp:
        raise OracleError("per-thread counts need OpenMP")
    edited = instrument(c_source, function, statements, symbols, per_thread)
    program = (_prelude(len(statements), syms, per_thread, path) + edited
               + _driver(function, param_types, syms, len(statements), per_thread))
    out = _build_and_run(program, openmp, _stdin_for(param_types, syms, points), timeout, threads, flags)
    rows = [line.split()[1:] for line in out.splitlines() if line.startswith("point")]
    if len(rows) != len(points):
        raise OracleError(f"expected {len(points)} result lines, got {len(rows)}:\n{out[-2000:]}")
    return [[int(v) for v in row] for row in rows]


def count_statements(c_source: str, function: str, statements: Sequence[SpanTuple],
                     param_types: Sequence[ParamType], points: Sequence[Mapping[str, int]],
                     symbols: Mapping[str, str] | None = None, timeout: float = DEFAULT_TIMEOUT,
                     path: str = "input.c", flags: Sequence[str] = ()) -> list[list[int]]:
    """Execution count of every listed statement, per point, as gcc runs `function`.

    statements: spans (line, column, end_line, end_column), 1-based, exclusive
    end, with or without the trailing ';'. param_types: the function's
    parameters in order as (name, C type, is pointer or array). points: values
    of the integer parameters (missing ones are 0); symbols: see `instrument`,
    their values come from the points under the same names.
    Returns counts[point][statement]. Raises OracleError on failure.
    """
    return _run_counts(c_source, function, statements, param_types, points, symbols,
                       per_thread=False, threads=None, timeout=timeout, path=path, flags=flags)


def count_per_thread(c_source: str, function: str, statements: Sequence[SpanTuple],
                     param_types: Sequence[ParamType], points: Sequence[Mapping[str, int]],
                     threads: int = 4, symbols: Mapping[str, str] | None = None,
                     timeout: float = DEFAULT_TIMEOUT,
                     path: str = "input.c") -> list[list[list[int]]]:
    """Like `count_statements`, split by omp_get_thread_num(): counts[point][thread][statement].

    Runs with OMP_NUM_THREADS=threads, OMP_DYNAMIC=false, OMP_SCHEDULE=static.
    There are `threads` rows, or more when a num_threads clause made a larger
    team (up to the highest thread number that counted something).
    Deterministic for static schedules only.
    """
    flat = _run_counts(c_source, function, statements, param_types, points, symbols,
                       per_thread=True, threads=threads, timeout=timeout, path=path)
    n = len(statements)
    out: list[list[list[int]]] = []
    for row in flat:
        table = [row[t * n:(t + 1) * n] for t in range(MAX_THREAD_ROWS)]
        used = max((t + 1 for t, r in enumerate(table) if any(r)), default=0)
        out.append(table[:max(threads, used)])
    return out


def evaluate_c(c_source: str, expressions: Sequence[str], param_types: Sequence[ParamType],
               points: Sequence[Mapping[str, int]], timeout: float = DEFAULT_TIMEOUT,
               flags: Sequence[str] = ()) -> list[list[int]]:
    """Values of C expressions (as long long) per point, evaluated by gcc after `c_source`.

    `flags` go to gcc after the defaults (e.g. "-O2", so that a counting loop
    of 2^32 iterations is closed by the compiler instead of run).

    The expressions see the source's macros and functions, and the parameters
    in `param_types` as local variables (integers from the point, pointers into
    zeroed buffers, floating 0), so `n / 2` or `MIN(n, 64)` get C semantics.
    """
    decls: list[str] = []
    n_int = 0
    for k, (name, ctype, is_ptr) in enumerate(param_types):
        if is_ptr:
            decls.append(f"        void *{name} = __tc_buf{k} + {GUARD_BYTES}ULL; (void){name};")
        elif _is_floating(ctype):
            decls.append(f"        double {name} = 0.0; (void){name};")
        else:
            decls.append(f"        long long {name} = __tc_v[{n_int}]; (void){name};")
            n_int += 1
    bufs = "\n".join(f"    char *__tc_buf{k} = calloc(1, {BUFFER_BYTES}ULL);\n"
                     f"    if (!__tc_buf{k}) return 3;"
                     for k, (_n, _t, p) in enumerate(param_types) if p)
    prints = "\n".join(f'        printf(" %lld", (long long)({e}));' for e in expressions)
    program = f"""#include <stdio.h>
#include <stdlib.h>
#define main __tc_user_main
{c_source}
#undef main
#line 1 "tripcount-oracle-eval.c"
int main(void)
{{
    long long __tc_points, __tc_v[{max(n_int, 1)}];
{bufs}
    if (scanf("%lld", &__tc_points) != 1)
        return 2;
    for (long long p = 0; p < __tc_points; p++) {{
        for (int k = 0; k < {n_int}; k++)
            if (scanf("%lld", &__tc_v[k]) != 1)
                return 2;
{chr(10).join(decls)}
        printf("point");
{prints}
        printf("\\n");
    }}
    return 0;
}}
"""
    out = _build_and_run(program, openmp_available(), _stdin_for(param_types, [], points), timeout,
                         flags=flags)
    rows = [line.split()[1:] for line in out.splitlines() if line.startswith("point")]
    if len(rows) != len(points):
        raise OracleError(f"expected {len(points)} result lines, got {len(rows)}")
    return [[int(v) for v in row] for row in rows]


def gcov_line_counts(c_source: str, function: str, param_types: Sequence[ParamType],
                     points: Sequence[Mapping[str, int]], timeout: float = DEFAULT_TIMEOUT,
                     openmp: bool | None = None) -> list[dict[int, int]]:
    """Execution counts per source line (gcov), per point, of the *unmodified* function.

    An independent reference for the instrumented counts: the same driver
    calls the original code built with --coverage (atomic counter updates, for
    OpenMP). Lines gcov calls non-executable are absent from the result.
    `openmp=False` builds without OpenMP (the pragmas ignored, the counts the
    same): gcc's coverage does not report the lines of a parallel region that
    is nested inside another loop.
    """
    if shutil.which("gcov") is None:
        raise OracleError("gcov not found")
    program = _prelude(0, [], False, "input.c") + c_source + _driver(function, param_types, [], 0, False)
    openmp = openmp_available() if openmp is None else openmp
    with tempfile.TemporaryDirectory(prefix="tripcount-gcov-") as tmp:
        with open(os.path.join(tmp, "input.c"), "w", encoding="utf-8") as f:
            f.write(c_source)
        flags = ["--coverage"] + (["-fprofile-update=atomic"] if openmp else [])
        exe = _build(program, openmp, tmp, timeout, flags)
        return [_gcov_run(exe, "prog.c", "input.c", _stdin_for(param_types, [], [pt]), timeout) for pt in points]


def _gcov_run(exe: str, program: str, source: str, stdin: str, timeout: float) -> dict[int, int]:
    """Run a --coverage build once (from fresh counters); gcov's counts per line of `source`."""
    data = os.path.join(os.path.dirname(exe), "prog.gcda")
    if os.path.exists(data):
        os.remove(data)
    _run(exe, stdin, timeout)
    try:
        rep = subprocess.run(["gcov", "-t", program], capture_output=True, text=True,
                             timeout=timeout, cwd=os.path.dirname(exe))
    except subprocess.TimeoutExpired as exc:
        raise OracleError("gcov did not finish") from exc
    return _parse_gcov(rep.stdout, source)


def _parse_gcov(report: str, source: str) -> dict[int, int]:
    counts: dict[int, int] = {}
    inside = False
    for line in report.splitlines():
        parts = line.split(":", 2)
        if len(parts) < 3:
            continue
        count, lineno = parts[0].strip(), parts[1].strip()
        if lineno == "0":
            if parts[2].startswith("Source:"):
                inside = parts[2][len("Source:"):] == source
            continue
        if not inside or count == "-":
            continue
        # '#####' / '=====' mark executable lines never run; a '*' suffix marks partial blocks
        value = 0 if count.startswith(("#", "=")) else int(count.rstrip("*"))
        counts[int(lineno)] = value
    return counts


@lru_cache(maxsize=1)
def gxx_available() -> bool:
    """True when g++ and gcov can build and run a C++17 program here."""
    if shutil.which("g++") is None or shutil.which("gcov") is None:
        return False
    try:
        with tempfile.TemporaryDirectory(prefix="tripcount-gxx-") as tmp:
            src = os.path.join(tmp, "p.cpp")
            with open(src, "w", encoding="utf-8") as f:
                f.write("#include <vector>\nint main() { std::vector<int> v(3); return (int)v.size() - 3; }\n")
            subprocess.run(["g++", "-std=gnu++17", src, "-o", os.path.join(tmp, "p")], check=True,
                           capture_output=True, timeout=60)
            return subprocess.run([os.path.join(tmp, "p")], timeout=30).returncode == 0
    except (OSError, subprocess.SubprocessError):
        return False


def gxx_line_counts(cpp_source: str, driver: str, names: Sequence[str],
                    points: Sequence[Mapping[str, int]], timeout: float = DEFAULT_TIMEOUT
                    ) -> list[dict[int, int]]:
    """Execution counts per line of a C++ source (g++ --coverage, then gcov), per point.

    `driver`: C++ statements run once per point; they see the point's values
    as `long long NAME` for each of `names` and call the source's functions.
    Lines gcov calls non-executable are absent from the result.
    """
    program = (f'#include <cstdio>\n#line 1 "input.cpp"\n{cpp_source}\n#line 1 "tripcount-oracle-driver.cpp"\n'
               "int main() {\n"
               + "".join(f'    long long {n}; if (scanf("%lld", &{n}) != 1) return 2;\n' for n in names)
               + f"    {driver}\n    return 0;\n}}\n")
    with tempfile.TemporaryDirectory(prefix="tripcount-gxx-") as tmp:
        with open(os.path.join(tmp, "input.cpp"), "w", encoding="utf-8") as f:
            f.write(cpp_source)
        exe = _build(program, False, tmp, timeout, ["--coverage"], cxx=True)
        return [_gcov_run(exe, "prog.cpp", "input.cpp", " ".join(str(pt.get(n, 0)) for n in names) + "\n", timeout)
                for pt in points]
