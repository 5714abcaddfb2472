# `tripcount check`: the pre-commit gate.
#
# For every given C file: analyze it (through the result cache), hold each
# nest against the budgets of the nearest `[tool.tripcount]` (degree of the
# work, innermost working set, thread imbalance; per-path overrides), and,
# with a baseline revision, against its counterpart in the baseline version
# of the same file (read with `git show REV:path` and analyzed in memory),
# flagging a higher degree, a leading term grown beyond `max_leading_growth`
# or an innermost working set that moved out to a larger cache level.
#
# Findings are TC6xx diagnostics in compiler style; an inline comment on the
# loop line suppresses them:  `// tripcount: allow degree, working-set`.
# Exit status: 0 all within budget, 1 findings, 2 usage or tool errors.
#
# This module must stay light: on a warm cache nothing here may import
# islpy, sympy or the engine (the leading terms are evaluated with a small
# exact evaluator of our own for that reason).

from __future__ import annotations

import argparse
import ast
import dataclasses
import difflib
import fnmatch
import json
import math
import os
import re
import subprocess
import sys
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any, TextIO

from tripcount.analysis.caches import fmt_bytes
from tripcount.analysis.summary import (
    EXACT,
    LOWER,
    UPPER,
    LoopSummary,
    NestSummary,
    WorkingSetSummary,
)
from tripcount.config import Config, ConfigError, load_config, parse_bytes
from tripcount.diagnostics import Diagnostic
from tripcount.ir import Span
from tripcount.sources import SOURCE_SUFFIXES, collect_paths

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2
BUDGET_KEYS = ("max_degree", "max_working_set", "max_imbalance", "max_leading_growth")
DEFAULT_LEADING_GROWTH = 1.5
# Typical cache sizes of current x86-64 server cores, used only when neither the
# configuration nor the host says anything (common practice, not a measurement).
DEFAULT_LEVELS = {"L1": 32 * 1024, "L2": 1024 * 1024, "L3": 8 * 1024 * 1024}


# --------------------------------------------------------------------------
# Diagnostics (TC6xx)


class DegreeBudget(Diagnostic):
    """The work of a nest grows faster in the sizes than `max_degree` allows."""

    code = "TC601"
    severity = "error"
    title = "degree-budget"
    template = ("work of this nest has degree {degree} in the sizes ({what} ~ {leading}); "
                "the budget is degree {budget} (max_degree{where})")


class WorkingSetBudget(Diagnostic):
    """The innermost working set of a nest does not fit the cache level `max_working_set` allows."""

    code = "TC602"
    severity = "error"
    title = "working-set-budget"
    template = ("innermost working set of loop '{var}' is {size} at {at}, which needs {level}; "
                "the budget is {budget} (max_working_set{where})")


class ImbalanceBudget(Diagnostic):
    """A parallel loop's work is less even across threads than `max_imbalance` allows."""

    code = "TC603"
    severity = "error"
    title = "imbalance-budget"
    template = ("parallel loop '{var}' has imbalance {imbalance} (busiest thread / mean){threads}; "
                "the budget is {budget} (max_imbalance{where})")


class BudgetUnchecked(Diagnostic):
    """A budget is configured but this nest gives no value to hold against it."""

    code = "TC604"
    severity = "note"
    title = "budget-unchecked"
    template = "{budget} not checked for this nest: {reason}"


class DegreeRegression(Diagnostic):
    """The work of a nest has a higher degree than in the baseline revision."""

    code = "TC610"
    severity = "error"
    title = "degree-regression"
    template = "work of this nest grew from degree {old} to degree {new} since {rev} (was ~ {old_leading}, now ~ {new_leading})"


class LeadingGrowth(Diagnostic):
    """Same degree as the baseline, but the leading term grew beyond `max_leading_growth`."""

    code = "TC611"
    severity = "error"
    title = "leading-term-growth"
    template = ("leading term of the work grew {ratio}x since {rev} (was ~ {old_leading}, now ~ {new_leading}); "
                "allowed {allowed}x (max_leading_growth{where})")


class WorkingSetRegression(Diagnostic):
    """The innermost working set moved out to a larger cache level than in the baseline."""

    code = "TC612"
    severity = "error"
    title = "working-set-regression"
    template = ("innermost working set of loop '{var}' now needs {new_level} ({new_size}), "
                "it fit {old_level} ({old_size}) at {rev}; at {at}")


class UnknownSuppression(Diagnostic):
    """A `tripcount: allow ...` comment names a kind of finding that does not exist."""

    code = "TC620"
    severity = "warning"
    title = "unknown-suppression"
    template = "unknown kind '{kind}' in 'tripcount: allow'; known kinds: {known}"


class BaselineUnavailable(Diagnostic):
    """The baseline version of a file could not be read or analyzed; budgets only."""

    code = "TC630"
    severity = "warning"
    title = "baseline-unavailable"
    template = "no baseline comparison for this file: {reason}"


# Which suppression kind silences which finding.
SUPPRESSES = {
    "TC601": "degree", "TC610": "degree", "TC611": "growth",
    "TC602": "working-set", "TC612": "working-set", "TC603": "imbalance",
}
KINDS = ("degree", "growth", "working-set", "imbalance", "all")


# --------------------------------------------------------------------------
# Budgets


@dataclass
class Budgets:
    """The budgets in force for one file (after per-path overrides)."""

    max_degree: int | None = None
    max_working_set: str | int | None = None  # a cache level name ("L2") or bytes
    max_imbalance: float | None = None
    max_leading_growth: float = DEFAULT_LEADING_GROWTH
    source: str = ""  # ' in path/pyproject.toml' for messages
    baseline: str | None = None  # `baseline = "origin/main"` in the configuration

    def any(self) -> bool:
        """True when at least one budget is set."""
        return any(x is not None for x in (self.max_degree, self.max_working_set, self.max_imbalance))


def effective_table(config: Config, path: str) -> dict[str, Any]:
    """`[tool.tripcount]` with the overrides whose `paths` match `path` merged in (later wins)."""
    table = {k: v for k, v in config.table.items() if k != "override"}
    overrides = config.table.get("override", [])
    if isinstance(overrides, dict):
        overrides = [overrides]
    if not isinstance(overrides, list):
        raise ConfigError(f"{config.path}: [[tool.tripcount.override]] must be an array of tables")
    base = os.path.dirname(os.path.abspath(config.path)) if config.path else os.getcwd()
    rel = os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/")
    for k, ov in enumerate(overrides):
        if not isinstance(ov, dict):
            raise ConfigError(f"{config.path}: override #{k + 1} must be a table")
        pats = ov.get("paths", [])
        if isinstance(pats, str):
            pats = [pats]
        if not isinstance(pats, list) or not all(isinstance(p, str) for p in pats):
            raise ConfigError(f"{config.path}: override #{k + 1}: 'paths' must be a list of glob patterns")
        if any(fnmatch.fnmatchcase(rel, p.lstrip("./") if p.startswith("./") else p) for p in pats):
            table.update({key: v for key, v in ov.items() if key != "paths"})
    return table


def budgets_from(table: dict[str, Any], config_path: str | None) -> Budgets:
    """Read and check the budget keys of a (merged) table."""
    where = f" in {os.path.relpath(config_path)}" if config_path else ""
    b = Budgets(source=where)

    def bad(key: str, want: str) -> ConfigError:
        return ConfigError(f"{config_path}: [tool.tripcount] {key} must be {want}, got {table[key]!r}")

    if "max_degree" in table:
        v = table["max_degree"]
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            raise bad("max_degree", "a non-negative integer")
        b.max_degree = v
    if "max_working_set" in table:
        v = table["max_working_set"]
        if isinstance(v, bool) or not isinstance(v, (str, int)):
            raise bad("max_working_set", 'a cache level name ("L2") or a size ("256KiB")')
        if isinstance(v, str) and not _is_level(v):
            try:
                parse_bytes(v)
            except ValueError:
                raise bad("max_working_set", 'a cache level name ("L2") or a size ("256KiB")') from None
        b.max_working_set = v.strip().upper() if isinstance(v, str) and _is_level(v) else v
    for key in ("max_imbalance", "max_leading_growth"):
        if key in table:
            v = table[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v < 1:
                raise bad(key, "a number >= 1")
            setattr(b, key, float(v))
    if "baseline" in table:
        v = table["baseline"]
        if not isinstance(v, str):
            raise bad("baseline", "a git revision")
        b.baseline = v
    return b


def _is_level(text: str) -> bool:
    return re.fullmatch(r"[Ll][1-9]", text.strip()) is not None


# --------------------------------------------------------------------------
# Readings of the typed nest summaries


def worst_innermost(nest: NestSummary) -> tuple[LoopSummary, WorkingSetSummary] | None:
    """The innermost loop with the largest working set value (exact or bound), and that working set."""
    best: tuple[LoopSummary, WorkingSetSummary] | None = None
    for lp in nest.innermost_loops():
        ws = lp.working_set
        if ws is not None and ws.occupancy is not None and (best is None or ws.occupancy > best[1].occupancy):
            best = (lp, ws)
    return best


def has_working_sets(nest: NestSummary) -> bool:
    """True when the footprint analysis attached working sets to this nest's loops."""
    return any(lp.working_set is not None for lp in nest.loops)


def cache_levels(options: Any) -> dict[str, int]:
    """Cache level capacities: configuration, else host, else labelled defaults.

    The same precedence as the footprint analysis (tripcount.analysis.caches),
    so the gate and the report agree. Configure `caches` in [tool.tripcount]
    for a gate that answers the same on every machine.
    """
    try:
        from tripcount.analysis.caches import hierarchy

        levels = {lv.name: lv.size for lv in hierarchy(options).levels}
        if levels:
            return levels
    except Exception:  # no hierarchy: fall back to the labelled defaults
        pass
    if getattr(options, "caches", None):
        return dict(options.caches)
    return dict(DEFAULT_LEVELS)


def level_of(size: float, levels: dict[str, int]) -> str:
    """The innermost cache level that holds `size` bytes ('memory' when none does)."""
    for name, cap in sorted(levels.items(), key=lambda kv: (kv[1], kv[0])):
        if size <= cap:
            return name
    return "memory"


def _level_rank(name: str, levels: dict[str, int]) -> int:
    order = [n for n, _ in sorted(levels.items(), key=lambda kv: (kv[1], kv[0]))]
    return order.index(name) if name in order else len(order)


# --------------------------------------------------------------------------
# Exact evaluation of leading terms (no sympy on this path)

_ALLOWED = (ast.Expression, ast.BinOp, ast.UnaryOp, ast.Constant, ast.Name, ast.Load, ast.Call,
            ast.Add, ast.Sub, ast.Mult, ast.Div, ast.Pow, ast.USub, ast.UAdd, ast.FloorDiv, ast.Mod)


def eval_expr(text: str, values: dict[str, int]) -> Fraction:
    """Evaluate our formula notation (+ - * / ^, parentheses, floor/ceil/min/max) exactly."""
    tree = ast.parse(text.replace("^", "**"), mode="eval")
    for node in ast.walk(tree):
        if not isinstance(node, _ALLOWED):
            raise ValueError(f"unexpected {type(node).__name__} in '{text}'")

    def ev(n: ast.AST) -> Fraction:
        if isinstance(n, ast.Expression):
            return ev(n.body)
        if isinstance(n, ast.Constant) and isinstance(n.value, int | float) and not isinstance(n.value, bool):
            return Fraction(n.value)
        if isinstance(n, ast.Name):
            if n.id not in values:
                raise KeyError(n.id)
            return Fraction(values[n.id])
        if isinstance(n, ast.UnaryOp):
            v = ev(n.operand)
            return -v if isinstance(n.op, ast.USub) else v
        if isinstance(n, ast.BinOp):
            a, b = ev(n.left), ev(n.right)
            if isinstance(n.op, ast.Add):
                return a + b
            if isinstance(n.op, ast.Sub):
                return a - b
            if isinstance(n.op, ast.Mult):
                return a * b
            if isinstance(n.op, ast.Div):
                return a / b
            if isinstance(n.op, ast.FloorDiv):
                return Fraction(a // b)
            if isinstance(n.op, ast.Mod):
                return a - b * (a // b)
            if isinstance(n.op, ast.Pow):
                if b.denominator != 1 or abs(b) > 64:
                    raise ValueError("unsupported exponent")
                return a ** int(b)
        if isinstance(n, ast.Call) and isinstance(n.func, ast.Name):
            args = [ev(a) for a in n.args]
            f = n.func.id
            if f == "floor" and len(args) == 1:
                return Fraction(math.floor(args[0]))
            if f == "ceil" and len(args) == 1:
                return Fraction(math.ceil(args[0]))
            if f == "min" and args:
                return min(args)
            if f == "max" and args:
                return max(args)
        raise ValueError(f"cannot evaluate '{text}'")

    return ev(tree)


def _names(text: str) -> set[str]:
    return set(re.findall(r"[A-Za-z_]\w*", text)) - {"floor", "ceil", "min", "max"}


def leading_ratio(old: list[str], new: list[str], at: dict[str, int]) -> float | None:
    """new/old of the summed leading terms at the sizes (scale-free: both are homogeneous).

    Parameters without a size are given the largest configured size (or 1000),
    i.e. the sizes are taken as comparable.
    """
    if not old or not new:
        return None
    names = set().union(*(_names(t) for t in old + new))
    fill = at.get("*") or (max(at.values()) if at else 1000)
    point = {n: at.get(n, fill) for n in names}
    try:
        a = sum((eval_expr(t, point) for t in old), Fraction(0))
        b = sum((eval_expr(t, point) for t in new), Fraction(0))
    except (ValueError, KeyError, ZeroDivisionError, SyntaxError, OverflowError):
        return None
    if a <= 0:
        return None
    return float(b / a)


# --------------------------------------------------------------------------
# Suppressions:  // tripcount: allow degree, working-set   (on the loop line)

SUPPRESS_RE = re.compile(r"(?://|/\*).*?\btripcount\s*:\s*allow\s+([A-Za-z][\w-]*(?:\s*,\s*[A-Za-z][\w-]*)*)")


@dataclass
class Suppressions:
    """Kinds allowed per line, read from comments in the file text."""

    by_line: dict[int, set[str]] = field(default_factory=dict)
    unknown: list[tuple[int, int, str]] = field(default_factory=list)  # (line, column, kind)
    lines: list[str] = field(default_factory=list)

    @staticmethod
    def scan(text: str) -> Suppressions:
        """Find every `tripcount: allow` comment."""
        s = Suppressions(lines=text.split("\n"))
        if "tripcount" not in text:
            return s
        for no, line in enumerate(s.lines, start=1):
            if "tripcount" not in line:
                continue
            m = SUPPRESS_RE.search(line)
            if not m:
                continue
            kinds = set()
            for part in re.finditer(r"[A-Za-z][\w-]*", m.group(1)):
                k = part.group().lower().replace("_", "-")
                if k in KINDS:
                    kinds.add(k)
                else:
                    s.unknown.append((no, part.start() + m.start(1) + 1, part.group()))
            s.by_line[no] = kinds
        return s

    def lines_for(self, line: int, end_line: int | None = None) -> list[int]:
        """The lines whose comments apply to a loop starting on `line`.

        The loop header's own lines, and the block of comment-only or
        preprocessor lines right above it (so that a comment may sit above
        a `#pragma omp` line or a long header).
        """
        out = list(range(line, (end_line or line) + 1))
        k = line - 1
        while k >= 1 and k <= len(self.lines):
            t = self.lines[k - 1].strip()
            if t.startswith(("//", "/*", "*", "#")) and t:
                out.append(k)
                k -= 1
                continue
            break
        return out

    def allows(self, code: str, lines: list[int]) -> bool:
        """True when a comment on one of `lines` allows findings of `code`."""
        kind = SUPPRESSES.get(code)
        for ln in lines:
            kinds = self.by_line.get(ln)
            if kinds and ("all" in kinds or kind in kinds):
                return True
        return False


# --------------------------------------------------------------------------
# Spans of loop headers (for tighter regions than whole nests)


def header_span(lines: list[str], line: int, column: int) -> Span:
    """The span of `for (...)` starting at (line, column), found by matching parentheses."""
    depth = 0
    seen = False
    ln, col = line, column
    while 1 <= ln <= len(lines):
        text = lines[ln - 1]
        i = col - 1
        while i < len(text):
            ch = text[i]
            if text.startswith("//", i):
                break
            if ch == "(":
                depth += 1
                seen = True
            elif ch == ")":
                depth -= 1
                if seen and depth == 0:
                    return Span(line, column, ln, i + 2)
            i += 1
        ln, col = ln + 1, 1
        if ln - line > 40:  # not a loop header we can read: a point will do
            break
    end = min(len(lines[line - 1]) + 1, column + 3) if 1 <= line <= len(lines) else column
    return Span(line, column, line, max(end, column))


def _loop_span(lp: LoopSummary | NestSummary, lines: list[str]) -> Span:
    return header_span(lines, lp.span.line, lp.span.column)


# --------------------------------------------------------------------------
# Checking one file


def _outer_loop(nest: NestSummary) -> LoopSummary | NestSummary:
    """The outermost loop, or the nest itself (its span) when it has none."""
    return nest.outer_loop() or nest


def _at_text(at: dict[str, int]) -> str:
    return ", ".join(f"{k}={v}" for k, v in at.items()) or "the given sizes"


def _capacity(limit: str | int, levels: dict[str, int]) -> tuple[int, str]:
    """Bytes of a `max_working_set` budget and how to name it."""
    if isinstance(limit, str) and _is_level(limit):
        if limit not in levels:
            raise ConfigError(f"max_working_set = '{limit}': no cache level {limit} "
                              f"(known: {', '.join(sorted(levels)) or 'none'}; set `caches`)")
        return levels[limit], f"{limit} ({fmt_bytes(levels[limit])})"
    cap = parse_bytes(limit)
    return cap, fmt_bytes(cap)


def _bound_text(lp: LoopSummary, ws: WorkingSetSummary, cap_text: str) -> str:
    """Why a working set bound cannot be held against the budget."""
    size = fmt_bytes(ws.occupancy or 0)
    if ws.estimate == LOWER:
        return (f"the working set of loop '{lp.var}' is only known as a lower bound "
                f"({size}: {ws.reason or 'references that are not modelled are left out'})")
    return (f"the working set of loop '{lp.var}' is only known as an upper bound "
            f"(at most {size}, more than {cap_text}: {ws.reason or 'the exact value was not computed'})")


def working_set_findings(nest: NestSummary, limit: str | int, options: Any, lines: list[str],
                         levels: dict[str, int], where: str) -> list[Diagnostic]:
    """TC602 for an innermost working set proven larger than the budget; TC604 when none can be held.

    A bound proves something only on one side: a lower bound above the
    budget, or an upper bound within it. Anything else is not checked.
    """
    nest_span = _loop_span(_outer_loop(nest), lines)
    cap, cap_text = _capacity(limit, levels)
    readings = [(lp, lp.working_set) for lp in nest.innermost_loops()
                if lp.working_set is not None and lp.working_set.occupancy is not None]
    if not readings:
        at = options.at or {}
        missing = [] if "*" in at else [p for p in nest.parameters if p not in at]
        if has_working_sets(nest) and missing:
            reason = (f"no value without sizes for {', '.join(missing)}: give them with `at` in "
                      "[tool.tripcount] (or --at)")
        else:
            reason = "no working set computed for its innermost loops"
        return [BudgetUnchecked(nest_span, budget="max_working_set", reason=reason)]
    readings.sort(key=lambda r: -(r[1].occupancy or 0))
    over = [(lp, ws) for lp, ws in readings if ws.proves_above(cap)]
    if over:
        lp, ws = over[0]
        size = ws.occupancy or 0
        return [WorkingSetBudget(_loop_span(lp, lines), var=lp.var,
                                 size=("at least " if ws.estimate == LOWER else "") + fmt_bytes(size),
                                 at=_at_text(options.at), level=level_of(size, levels), budget=cap_text, where=where)]
    unproven = [(lp, ws) for lp, ws in readings if not ws.proves_within(cap)]
    if unproven:
        lp, ws = unproven[0]
        return [BudgetUnchecked(nest_span, budget="max_working_set", reason=_bound_text(lp, ws, cap_text))]
    return []


def budget_findings(nest: NestSummary, budgets: Budgets, options: Any, lines: list[str],
                    levels: dict[str, int]) -> list[Diagnostic]:
    """Budget diagnostics of one nest (before suppressions)."""
    out: list[Diagnostic] = []
    nest_span = _loop_span(_outer_loop(nest), lines)
    where = budgets.source
    if budgets.max_degree is not None:
        work = nest.work()
        if work.degree is None:
            if nest.statements:
                out.append(BudgetUnchecked(nest_span, budget="max_degree", reason="no formula for its counts"))
        elif work.degree > budgets.max_degree:
            out.append(DegreeBudget(nest_span, degree=work.degree, what=work.who,
                                    leading=" + ".join(work.leading) or "?", budget=budgets.max_degree, where=where))
    if budgets.max_working_set is not None and nest.loops:
        out += working_set_findings(nest, budgets.max_working_set, options, lines, levels, where)
    if budgets.max_imbalance is not None:
        threads = getattr(options, "threads", None)
        for lp in nest.loops:
            bal = lp.balance
            if bal is None or bal.imbalance is None or bal.imbalance <= Fraction(budgets.max_imbalance):
                continue
            t = bal.threads or threads
            out.append(ImbalanceBudget(_loop_span(lp, lines), var=lp.var, imbalance=f"{float(bal.imbalance):.3g}",
                                       threads=f" with {t} threads" if t else "",
                                       budget=f"{budgets.max_imbalance:g}", where=where))
    return out


def regression_findings(old: NestSummary, new: NestSummary, budgets: Budgets, options: Any,
                        lines: list[str], levels: dict[str, int], rev: str) -> list[Diagnostic]:
    """Baseline diagnostics of one matched pair of nests.

    A working set regression needs proof on both sides: the new value exact
    or a lower bound, the old one exact or an upper bound.
    """
    out: list[Diagnostic] = []
    span = _loop_span(_outer_loop(new), lines)
    w_old, w_new = old.work(), new.work()
    l_old, l_new = list(w_old.leading), list(w_new.leading)
    if w_old.degree is not None and w_new.degree is not None:
        if w_new.degree > w_old.degree:
            out.append(DegreeRegression(span, old=w_old.degree, new=w_new.degree, rev=rev,
                                        old_leading=" + ".join(l_old) or "?", new_leading=" + ".join(l_new) or "?"))
        elif w_new.degree == w_old.degree and w_new.degree > 0:
            r = leading_ratio(l_old, l_new, options.at)
            if r is not None and r > budgets.max_leading_growth + 1e-12:
                out.append(LeadingGrowth(span, ratio=f"{r:.3g}", rev=rev, old_leading=" + ".join(l_old),
                                         new_leading=" + ".join(l_new), allowed=f"{budgets.max_leading_growth:g}",
                                         where=budgets.source))
    wo, wn = worst_innermost(old), worst_innermost(new)
    if wo is not None and wn is not None and wo[1].estimate in (EXACT, UPPER) and wn[1].estimate in (EXACT, LOWER):
        so, sn = wo[1].occupancy or 0, wn[1].occupancy or 0
        a, b = level_of(so, levels), level_of(sn, levels)
        if _level_rank(b, levels) > _level_rank(a, levels):
            out.append(WorkingSetRegression(_loop_span(wn[0], lines), var=wn[0].var, new_level=b,
                                            new_size=fmt_bytes(sn), old_level=a, old_size=fmt_bytes(so),
                                            rev=rev, at=_at_text(options.at)))
    return out


def _signature(n: NestSummary) -> str:
    loops = ",".join(f"{lp.var}@{lp.depth}" for lp in n.loops)
    stmts = ";".join(" ".join(s.text.split()) for s in n.statements)
    return loops + "|" + stmts


def match_nests(old: list[NestSummary], new: list[NestSummary]) -> list[tuple[int, int]]:
    """Pairs (old index, new index) of counterpart nests.

    Within each function: by ordinal when both versions have as many nests;
    otherwise identical nests (same loops and statement texts) pair in order
    first, and each remaining new nest takes the unmatched old nest nearest
    in line (after the typical shift of the pairs already made).
    """
    pairs: list[tuple[int, int]] = []
    funcs: dict[str, tuple[list[int], list[int]]] = {}
    for i, n in enumerate(old):
        funcs.setdefault(n.function, ([], []))[0].append(i)
    for j, n in enumerate(new):
        funcs.setdefault(n.function, ([], []))[1].append(j)
    for _fn, (oi, nj) in funcs.items():
        if not oi or not nj:
            continue
        if len(oi) == len(nj):
            pairs.extend(zip(oi, nj, strict=True))
            continue
        sm = difflib.SequenceMatcher(a=[_signature(old[i]) for i in oi], b=[_signature(new[j]) for j in nj],
                                     autojunk=False)
        local: list[tuple[int, int]] = []
        for blk in sm.get_matching_blocks():
            for k in range(blk.size):
                local.append((oi[blk.a + k], nj[blk.b + k]))
        used_o = {a for a, _ in local}
        used_n = {b for _, b in local}
        shifts = sorted(new[b].span.line - old[a].span.line for a, b in local)
        shift = shifts[len(shifts) // 2] if shifts else 0
        for j in nj:
            if j in used_n:
                continue
            cands = [i for i in oi if i not in used_o]
            if not cands:
                break
            i = min(cands, key=lambda i: (abs(old[i].span.line + shift - new[j].span.line), i))
            used_o.add(i)
            local.append((i, j))
        pairs.extend(local)
    return sorted(pairs, key=lambda p: p[1])


# --------------------------------------------------------------------------
# git


class GitError(Exception):
    """git is missing or failed in a way that is not 'file absent at that revision'."""


def _git(args: list[str], cwd: str) -> subprocess.CompletedProcess[bytes]:
    try:
        return subprocess.run(["git", *args], cwd=cwd, capture_output=True, timeout=60,
                              env={**os.environ, "GIT_OPTIONAL_LOCKS": "0"})
    except FileNotFoundError as exc:
        raise GitError("git is not installed") from exc
    except subprocess.TimeoutExpired as exc:
        raise GitError("git did not answer within 60 s") from exc


@dataclass
class Git:
    """Per-run memo of git questions (one subprocess per repository, not per file)."""

    _tops: dict[str, str | None] = field(default_factory=dict)
    _revs: dict[tuple[str, str], str | None] = field(default_factory=dict)
    _staged: dict[str, set[str]] = field(default_factory=dict)

    def toplevel(self, directory: str) -> str | None:
        """The work tree containing `directory`, or None outside git."""
        if directory not in self._tops:
            try:
                r = _git(["rev-parse", "--show-toplevel"], directory)
            except GitError:
                self._tops[directory] = None
            else:
                self._tops[directory] = os.path.realpath(r.stdout.decode().strip()) if r.returncode == 0 else None
        return self._tops[directory]

    def resolve(self, top: str, rev: str) -> str | None:
        """The commit `rev` names in the repository at `top`, or None."""
        if (top, rev) not in self._revs:
            r = _git(["rev-parse", "--verify", "--quiet", rev + "^{commit}"], top)
            self._revs[(top, rev)] = r.stdout.decode().strip() if r.returncode == 0 else None
        return self._revs[(top, rev)]

    def staged(self, top: str) -> set[str]:
        """Real paths of the files staged in the index."""
        if top not in self._staged:
            r = _git(["diff", "--cached", "--name-only", "-z"], top)
            names = r.stdout.decode("utf-8", "replace").split("\0") if r.returncode == 0 else []
            self._staged[top] = {os.path.realpath(os.path.join(top, n)) for n in names if n}
        return self._staged[top]

    def show(self, top: str, commit: str, path: str) -> str | None:
        """The file's text at `commit`, or None when it did not exist there."""
        rel = os.path.relpath(os.path.realpath(path), top).replace(os.sep, "/")
        r = _git(["show", f"{commit}:{rel}"], top)
        if r.returncode != 0:
            return None
        return r.stdout.decode("utf-8", errors="replace")


# --------------------------------------------------------------------------
# The command


@dataclass
class FileCheck:
    """Everything found for one file."""

    path: str
    result: dict[str, Any]
    findings: list[Diagnostic]
    tool_errors: list[dict[str, Any]]
    at: dict[str, int] = field(default_factory=dict)


def _staged_sources(git: Git) -> list[str]:
    top = git.toplevel(os.getcwd())
    if top is None:
        return []
    r = _git(["diff", "--cached", "--name-only", "-z", "--diff-filter=ACMR"], top)
    names = [n for n in r.stdout.decode("utf-8", "replace").split("\0") if n.endswith(SOURCE_SUFFIXES)]
    return [os.path.relpath(os.path.join(top, n)) for n in names]


def baseline_rev(args: argparse.Namespace, budgets: Budgets, path: str, git: Git) -> tuple[str | None, str]:
    """The revision to compare `path` with, and where it came from: 'cli', 'config' or 'default'.

    The command line wins, then `baseline` in [tool.tripcount], then the
    defaults: under pre-push the remote's revision, under pre-commit (or for
    a file staged in git) HEAD; otherwise no baseline.
    """
    if getattr(args, "baseline", None):
        rev = args.baseline
        return (None, "cli") if rev.lower() == "none" else (rev, "cli")
    if budgets.baseline:
        return (None, "config") if budgets.baseline.lower() == "none" else (budgets.baseline, "config")
    if os.environ.get("PRE_COMMIT_FROM_REF"):  # pre-push: compare with what the remote has
        return os.environ["PRE_COMMIT_FROM_REF"], "default"
    if os.environ.get("PRE_COMMIT"):  # pre-commit checks staged files
        return "HEAD", "default"
    top = git.toplevel(os.path.dirname(os.path.abspath(path)))
    if top is not None and os.path.realpath(path) in git.staged(top):
        return "HEAD", "default"
    return None, "default"


def check_file(path: str, args: argparse.Namespace, git: Git, use_cache: bool) -> FileCheck:
    """Analyze one file, hold it against its budgets and its baseline."""
    from tripcount.cache import analyze_file_cached, read_source
    from tripcount.cli import options_from

    config = load_config(path)
    table = effective_table(config, path)
    budgets = budgets_from(table, config.path)
    options = dataclasses.replace(options_from(args, Config(path=config.path, table=table)), detail="gate")
    text, bad = read_source(path)
    result = analyze_file_cached(path, text, options, use_cache=use_cache)
    if bad is not None:
        result["diagnostics"].insert(0, bad)
    lines = text.split("\n")
    levels = cache_levels(options)
    sup = Suppressions.scan(text)
    findings: list[Diagnostic] = []
    for line, col, kind in sup.unknown:
        findings.append(UnknownSuppression(Span(line, col, line, col + len(kind)), kind=kind, known=", ".join(KINDS)))
    raw: list[tuple[Diagnostic, list[int]]] = []
    nests = summaries_of(result)
    for n in nests:
        outer_lines = _suppress_lines(sup, _outer_loop(n), lines)
        for d in budget_findings(n, budgets, options, lines, levels):
            raw.append((d, outer_lines + sup.lines_for(d.span.line, d.span.end_line)))
    rev, origin = baseline_rev(args, budgets, path, git)
    if rev is not None:
        old_nests, problem = _baseline_nests(path, rev, origin, git, options, use_cache)
        if problem:
            findings.append(BaselineUnavailable(Span(1, 1, 1, 1), reason=problem))
        for i, j in match_nests(old_nests, nests):
            n = nests[j]
            outer_lines = _suppress_lines(sup, _outer_loop(n), lines)
            for d in regression_findings(old_nests[i], n, budgets, options, lines, levels, rev):
                raw.append((d, outer_lines + sup.lines_for(d.span.line, d.span.end_line)))
    for d, ls in raw:
        if not sup.allows(d.code, ls):
            findings.append(d)
    for d in findings:
        d.path = path
    tool_errors = [d for d in result.get("diagnostics", []) if str(d.get("code", "")).startswith("TC9")]
    return FileCheck(path, result, findings, tool_errors, dict(options.at))


def summaries_of(result: dict[str, Any]) -> list[NestSummary]:
    """The typed summaries of an analyzed file (what the cache or the pipeline gave)."""
    return [NestSummary.from_json(s) for s in result.get("summaries", [])]


def _suppress_lines(sup: Suppressions, loop: LoopSummary | NestSummary, lines: list[str]) -> list[int]:
    span = _loop_span(loop, lines)
    return sup.lines_for(span.line, span.end_line)


class BaselineError(Exception):
    """An explicit --baseline that cannot be used (exit status 2)."""


def _baseline_nests(path: str, rev: str, origin: str, git: Git, options: Any,
                    use_cache: bool) -> tuple[list[NestSummary], str | None]:
    """The nests of the baseline version of `path` (empty when the file is new there).

    A revision from the command line that cannot be used is an error (exit
    2); one from the configuration gives a TC630 warning; the default one
    (HEAD) silently means nothing to compare with, e.g. before the first commit.
    """
    from tripcount.cache import analyze_file_cached

    def problem(reason: str) -> tuple[list[NestSummary], str | None]:
        if origin == "cli":
            raise BaselineError(f"--baseline {rev}: {reason}")
        return [], (f"baseline = '{rev}' in the configuration: {reason}" if origin == "config" else None)

    try:
        top = git.toplevel(os.path.dirname(os.path.abspath(path)))
        if top is None:
            return problem(f"{path} is not in a git work tree")
        commit = git.resolve(top, rev)
        if commit is None:
            return problem(f"no such revision in {top}")
        old_text = git.show(top, commit, path)
    except GitError as exc:
        return problem(str(exc))
    if old_text is None:
        return [], None  # a new file: budgets only
    old = analyze_file_cached(path, old_text, options, use_cache=use_cache)
    return summaries_of(old), None


def run_check(args: argparse.Namespace, stdout: TextIO, stderr: TextIO) -> int:
    """`tripcount check [FILES...]`; returns the exit status."""
    use_cache = not getattr(args, "no_cache", False)
    git = Git()
    paths = list(getattr(args, "paths", []) or [])
    if not paths:
        paths = _staged_sources(git)
        if not paths:
            stderr.write("tripcount check: nothing to check (give C files, or stage some in git)\n")
            return EXIT_OK if git.toplevel(os.getcwd()) is not None else EXIT_USAGE
    missing = [p for p in paths if not os.path.exists(p)]
    if missing:
        stderr.write(f"tripcount: error: no such file or directory: {missing[0]}\n")
        return EXIT_USAGE
    files = collect_paths(paths)
    checks: list[FileCheck] = []
    status = EXIT_OK
    for path in files:
        try:
            checks.append(check_file(path, args, git, use_cache))
        except OSError as exc:
            stderr.write(f"tripcount: error: cannot read {path}: {exc.strerror or exc}\n")
            status = EXIT_USAGE
        except BaselineError as exc:
            stderr.write(f"tripcount: error: {exc}\n")
            return EXIT_USAGE
    n_find = sum(1 for c in checks for d in c.findings if d.severity == "error")
    if n_find and status == EXIT_OK:
        status = EXIT_FINDINGS
    if any(c.tool_errors for c in checks):
        status = EXIT_USAGE
    out = stdout
    if getattr(args, "output", None):
        out = open(args.output, "w", encoding="utf-8")
    try:
        write_results(checks, getattr(args, "format", "text"), out, args)
    finally:
        if out is not stdout:
            out.close()
    n_nests = sum(len(c.result.get("nests", [])) for c in checks)
    if n_find:
        stderr.write(f"tripcount check: {n_find} finding(s) in {len(checks)} file(s), {n_nests} nest(s); "
                     "see `tripcount: allow` comments to accept one on purpose\n")
    elif status == EXIT_OK:
        stderr.write(f"tripcount check: {len(checks)} file(s), {n_nests} nest(s) within budget\n")
    return status


def shown_diagnostics(c: FileCheck) -> list[dict[str, Any]]:
    """What the gate reports for a file: its findings and the analysis errors that limit them."""
    out = [d.to_dict() for d in c.findings]
    out += [d for d in c.result.get("diagnostics", []) if d.get("severity") == "error"]
    return sorted(out, key=lambda d: (d["line"], d["column"], d["code"]))


def write_results(checks: list[FileCheck], fmt: str, out: TextIO, args: argparse.Namespace) -> None:
    """Render the findings: compiler-style lines, the JSON report, or SARIF."""
    if fmt == "text":
        for c in checks:
            for d in shown_diagnostics(c):
                out.write(f"{c.path}:{d['line']}:{d['column']}: {d['severity']}: {d['message']} [{d['code']}]\n")
        return
    report = check_report(checks, args)
    if fmt == "json":
        json.dump(report, out, indent=2)
        out.write("\n")
        return
    from tripcount.report.sarif import SarifReporter

    SarifReporter(out).write({**report, "files": [
        {"path": c.path, "nests": [], "diagnostics": shown_diagnostics(c)} for c in checks]})


def check_report(checks: list[FileCheck], args: argparse.Namespace) -> dict[str, Any]:
    """The JSON report of a check run: the analysis of each file with the findings added."""
    from tripcount import __version__

    files = []
    at: dict[str, int] = {}
    for c in checks:
        diags = list(c.result.get("diagnostics", [])) + [d.to_dict() for d in c.findings]
        files.append({**{k: v for k, v in c.result.items() if k != "summaries"}, "path": c.path,
                      "diagnostics": sorted(diags, key=lambda d: (d["line"], d["column"], d["code"]))})
        at.update(c.at)
    return {"schema_version": 1, "tool": {"name": "tripcount", "version": __version__},
            "at": at, "settings": {}, "files": files}


if __name__ == "__main__":  # pragma: no cover - convenience for profiling
    from tripcount.cli import main

    sys.exit(main(["check", *sys.argv[1:]]))
