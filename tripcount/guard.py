# Hardening: budgets that keep one hard nest (or one huge file) from hanging
# the tool, and the last-resort handler of the command line.
#
# A nest's analysis runs inside `nest_budget(options)`, which enforces four
# bounds at once, because no single mechanism covers every way to run long:
#   * a deadline (Options.time_limit seconds per nest) that cooperative code
#     checks (`check()`), and that the analyses also receive as their
#     remaining `time_limit`, so the engine's own between-step checks stop in time;
#   * an isl operation budget (Context.set_max_operations): a long isl call that
#     counts operations (simplification, ILP, coalescing) fails at once with
#     "maximal number of operations exceeded" when it is spent. isl holds the
#     GIL, so nothing else can stop such a call from Python;
#   * a guard on Set.count_val: isl's point counting
#     scans and does NOT count operations (measured: 15 operations for a
#     10^9-point cube whatever its size), so at a huge --at size it could run
#     for hours. Inside a budget, a count whose scan is estimated large runs in
#     a forked child that is killed at the deadline (EnumerationLimit);
#   * a hard alarm (SIGALRM, main thread only) at 1.5 x the limit + 1 s, for
#     pure-Python loops that never check the deadline.
# When a bound is hit the nest gets a limit diagnostic (TC310) instead of a
# result that could be wrong: partial counts that were completed are kept (each
# is exact), the unfinished analysis' outputs are dropped.
#
# Defaults: time_limit 20 s per nest and max_pieces 256 come from Options (the
# engine enforces max_pieces); the operation budget is ISL_OPS_PER_SECOND x
# time_limit (80 million); the hard stop comes at 1.5 x time_limit + 1 s (31 s);
# a file's nests share FILE_TIME_FACTOR x time_limit (600 s; past it, the
# remaining nests are reported as not analyzed, TC311).

from __future__ import annotations

import contextlib
import math
import os
import select
import signal
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any

import islpy as isl

from tripcount.engine import EngineLimit
from tripcount.engine.islconv import val_int
from tripcount.options import Options

# Calibrated on this project's 2-core machine (bench/guard_calibrate.py):
# isl ran 0.8e6 .. 5e6 operations per second of one call (lexmin, dim_max,
# make_disjoint, coalesce on unions of skewed, strided 3-D sets); 4e6 per second
# cuts the fastest kind at ~0.8 x the limit and lets the slowest run ~5 x.
ISL_OPS_PER_SECOND = 4_000_000
MIN_OPS = 2_000_000  # even a tiny --time-limit leaves room to parse and print a set
HARD_FACTOR = 1.5  # the alarm fires at HARD_FACTOR * time_limit + HARD_EXTRA_S
HARD_EXTRA_S = 1.0
REFIRE_S = 0.05  # the alarm repeats at this interval until the nest's analysis has stopped
FILE_TIME_FACTOR = 30  # seconds of one file's nests, in units of time_limit
# count_val scans the outer dimensions and counts the innermost interval at
# once: 0.3 .. 25 us per outer point (measured). Up to this many outer points
# the count runs in-process (< 0.5 s); beyond, in a child killed at the deadline.
INLINE_SCAN_POINTS = 20_000
# The fastest scan measured (0.3 us per outer point), rounded up: a count whose
# scan needs longer than the time left even at this rate is refused at once,
# instead of running in a child until the hard deadline (a nest with bounds of
# 10^30 spent its whole hard allowance, 31 s at the default limit, there).
MAX_SCAN_POINTS_PER_SECOND = 4_000_000

QUOTA_MESSAGE = "maximal number of operations exceeded"
DEFAULT_TIME_LIMIT = Options().time_limit  # 20 s per nest
MAX_TIME_LIMIT_S = 1e6  # `--time-limit inf` means this (about 11 days)


class NestLimit(BaseException):  # noqa: N818 - a BaseException so that `except Exception` cannot swallow it
    """The nest's time or isl-operation budget is spent; its analysis stops here."""


class EnumerationLimit(EngineLimit):
    """An exact enumeration that cannot finish within the nest's remaining time."""


@dataclass
class Budget:
    """The budgets of one nest."""

    time_limit: float
    deadline: float
    max_ops: int
    hard_deadline: float
    tripped: str | None = None  # why it ended early: "time", "operations", "enumeration"
    enumerations_refused: int = 0
    _owner_ops: bool = field(default=False, repr=False)
    _ctx: Any = field(default=None, repr=False)
    _alarm: Any = field(default=None, repr=False)

    def stop_alarm(self) -> None:
        """Disarm the hard-stop alarm (call first when handling NestLimit)."""
        if self._alarm is not None:
            self._alarm.stop()

    def remaining(self) -> float:
        """Seconds left before the deadline (may be negative)."""
        return self.deadline - time.monotonic()

    def expired(self) -> bool:
        """True once the deadline has passed."""
        return time.monotonic() > self.deadline

    def check(self, what: str = "analysis") -> None:
        """Raise NestLimit when the deadline has passed (for cooperative loops)."""
        if self.expired():
            self.tripped = self.tripped or "time"
            raise NestLimit(f"time limit of {self.time_limit:g} s per nest reached ({what})")

    def check_hard(self, what: str = "analysis") -> None:
        """Raise NestLimit when the hard deadline (HARD_FACTOR x the limit) has passed."""
        if time.monotonic() > self.hard_deadline:
            self.tripped = self.tripped or "time"
            raise NestLimit(f"time limit of {self.time_limit:g} s per nest reached ({what})")

    def ops_spent(self) -> bool:
        """Whether this budget's isl operations are spent (a small probe; False if not the owner)."""
        if not self._owner_ops or self._ctx is None:
            return False
        if _ops_spent(self._ctx):
            self.tripped = "operations"
            return True
        return False

    def reason(self) -> str:
        """The limit that was hit, in words."""
        if self.tripped == "operations":
            return (f"isl operation budget of {self.max_ops:,} operations spent "
                    f"({ISL_OPS_PER_SECOND:,} per second of the {self.time_limit:g} s time limit)")
        return f"time limit of {self.time_limit:g} s per nest reached"


def time_limit_of(options: Options) -> float:
    """Options.time_limit made usable: NaN gives the default, and at most MAX_TIME_LIMIT_S."""
    try:
        limit = float(options.time_limit)
    except (TypeError, ValueError):
        limit = DEFAULT_TIME_LIMIT
    if math.isnan(limit) or limit <= 0:
        limit = DEFAULT_TIME_LIMIT
    return min(limit, MAX_TIME_LIMIT_S)


_local = threading.local()
_ops_lock = threading.Lock()
_ops_owner: list[Budget] = []  # the one budget that set the isl operation limit


def current() -> Budget | None:
    """The budget of the nest being analyzed on this thread, if any."""
    stack = getattr(_local, "stack", None)
    return stack[-1] if stack else None


def check(what: str = "analysis") -> None:
    """Raise NestLimit if the current nest's deadline has passed (no-op outside a budget)."""
    b = current()
    if b is not None:
        b.check(what)


def is_quota_error(exc: BaseException | None) -> bool:
    """True for the isl error of a spent operation budget (also when chained).

    Not every such failure says so: a parse that runs out reports a syntax
    error; callers also ask Budget.ops_spent().
    """
    seen = 0
    while exc is not None and seen < 20:
        if isinstance(exc, isl.Error) and QUOTA_MESSAGE in str(exc):
            return True
        exc = exc.__cause__ or exc.__context__
        seen += 1
    return False


_PROBES: dict[int, isl.Set] = {}


def _probe_set(ctx: isl.Context) -> isl.Set:
    """A small set made while no budget is in force (made under a spent budget, a parse
    fails with a misleading "syntax error")."""
    key = id(ctx)
    if key not in _PROBES:
        _PROBES[key] = isl.Set.read_from_str(ctx, "[n] -> { [i] : 0 <= i <= n }")
    return _PROBES[key]


def _ops_spent(ctx: isl.Context) -> bool:
    """Whether the operation budget of `ctx` is (nearly) spent: a small ILP fails then."""
    probe = _PROBES.get(id(ctx))
    if probe is None:
        return False
    try:
        probe.dim_max(0)
        return False
    except isl.Error as exc:
        return QUOTA_MESSAGE in str(exc)


def _reset_ops(ctx: isl.Context) -> None:
    ctx.set_max_operations(0)
    ctx.reset_operations()


@contextlib.contextmanager
def nest_budget(options: Options, ctx: isl.Context | None = None) -> Iterator[Budget]:
    """Run the body under the nest budget of `options`; a spent budget raises NestLimit.

    Nested budgets share the outer deadline when it is earlier. On exit the isl
    operation limit and the alarm are removed, so reporters can use isl freely.
    """
    install_count_guard()
    ctx = ctx or isl.DEFAULT_CONTEXT
    limit = time_limit_of(options)
    now = time.monotonic()
    outer = current()
    deadline = now + limit
    hard = now + HARD_FACTOR * limit + HARD_EXTRA_S
    if outer is not None:
        deadline = min(deadline, outer.deadline)
        hard = min(hard, outer.hard_deadline)
    budget = Budget(time_limit=limit, deadline=deadline,
                    max_ops=max(MIN_OPS, int(limit * ISL_OPS_PER_SECOND)), hard_deadline=hard)
    with _ops_lock:
        if not _ops_owner:
            _probe_set(ctx)
            _ops_owner.append(budget)
            budget._owner_ops = True
            budget._ctx = ctx
            _reset_ops(ctx)
            ctx.set_max_operations(budget.max_ops)
    stack = getattr(_local, "stack", None)
    if stack is None:
        stack = _local.stack = []
    stack.append(budget)
    alarm = _Alarm(budget) if outer is None else None
    budget._alarm = alarm
    try:
        try:
            if alarm is not None:
                alarm.start()
            yield budget
        finally:
            if alarm is not None:
                alarm.stop()
    except NestLimit:
        budget.tripped = budget.tripped or "time"
        raise
    except isl.Error as exc:
        if is_quota_error(exc) or budget.ops_spent():
            budget.tripped = "operations"
            raise NestLimit(budget.reason()) from exc
        raise
    finally:
        stack.pop()
        if budget._owner_ops:
            with _ops_lock:
                if budget.tripped is None and _ops_spent(ctx):
                    budget.tripped = "operations"  # spent, and swallowed by a caller
                _reset_ops(ctx)
                _ops_owner.clear()
    if budget.tripped == "operations":
        raise NestLimit(budget.reason())


class _Alarm:
    """SIGALRM at the hard deadline, raising NestLimit between Python bytecodes.

    Only in the main thread and only when nobody else handles SIGALRM; a C call
    in progress is not interrupted (the operation budget covers those).
    """

    def __init__(self, budget: Budget) -> None:
        self.budget = budget
        self.previous: Any = None
        self.armed = False

    def start(self) -> None:
        if not hasattr(signal, "setitimer") or threading.current_thread() is not threading.main_thread():
            return
        try:
            if signal.getsignal(signal.SIGALRM) not in (signal.SIG_DFL, signal.SIG_IGN, None):
                return
            if signal.getitimer(signal.ITIMER_REAL)[0] > 0:
                return  # someone else's timer is running
            self.previous = signal.signal(signal.SIGALRM, self._fire)
        except (ValueError, OSError):
            return
        self.armed = True
        signal.setitimer(signal.ITIMER_REAL, max(0.001, self.budget.hard_deadline - time.monotonic()))

    def _fire(self, signum: int, frame: Any) -> None:
        if not self.armed:
            return
        self.budget.tripped = self.budget.tripped or "time"
        # Fire again shortly until the budget is left: in a __del__ or a gc callback
        # Python would drop the exception (and print it), so do not raise there at all.
        with contextlib.suppress(ValueError, OSError):
            signal.setitimer(signal.ITIMER_REAL, REFIRE_S)
        name = frame.f_code.co_name if frame is not None else ""
        if name in ("__del__", "__exit__", "_remove") or "callback" in name:
            return
        raise NestLimit(f"time limit of {self.budget.time_limit:g} s per nest reached (hard stop)")

    def stop(self) -> None:
        if not self.armed and self.previous is None:
            return
        self.armed = False
        try:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, self.previous if self.previous is not None else signal.SIG_DFL)
        except (ValueError, OSError):  # pragma: no cover - interpreter shutting down
            pass
        self.previous = None


# --------------------------------------------------------------------------
# Bounded point counting


_ORIGINAL: dict[type, Callable[..., Any]] = {}


def install_count_guard() -> None:
    """Route Set.count_val (and BasicSet's, where islpy has it) through `bounded_count_val`.

    Idempotent.

    Outside a nest budget the guarded method is the original one, unchanged.
    """
    for cls in (isl.Set, isl.BasicSet):
        if cls in _ORIGINAL or not hasattr(cls, "count_val"):
            continue
        original = cls.count_val
        _ORIGINAL[cls] = original

        def guarded(self: Any, _original: Callable[..., Any] = original) -> isl.Val:
            return bounded_count_val(self, _original)

        guarded.__doc__ = original.__doc__
        guarded.__wrapped__ = original  # type: ignore[attr-defined]
        cls.count_val = guarded


def scan_estimate(s: isl.Set | isl.BasicSet) -> int | None:
    """Upper bound on the outer points isl's count scans (None when unknown).

    The bounding box of every set dimension but the last, times the number of
    basic sets; None when a bound depends on a free parameter.
    """
    n = s.dim(isl.dim_type.set)
    if n <= 1:
        return 1
    rows = 1
    for i in range(n - 1):
        try:
            lo, hi = s.dim_min(i), s.dim_max(i)
        except isl.Error as exc:
            if QUOTA_MESSAGE in str(exc):
                raise
            return None  # unbounded: isl answers at once
        vals: list[list[int]] = []
        for pw in (lo, hi):
            vs = []
            for _dom, aff in pw.get_pieces():
                if not aff.is_cst():
                    return -1
                c = aff.get_constant_val()
                if not c.is_int():
                    return -1
                vs.append(val_int(c))
            if not vs:
                return 0  # empty set
            vals.append(vs)
        rows *= max(0, max(vals[1]) - min(vals[0]) + 1)
        if rows == 0:
            return 0
    if isinstance(s, isl.Set):
        rows *= max(1, s.n_basic_set())
    return rows


def bounded_count_val(s: isl.Set | isl.BasicSet, original: Callable[..., Any] | None = None) -> isl.Val:
    """count_val() that cannot outlive the current nest's deadline.

    Outside a budget, or when the scan is small, the original call; otherwise the
    count runs in a forked child that is killed at the deadline (EnumerationLimit).
    """
    original = original or _ORIGINAL.get(type(s)) or type(s).count_val
    b = current()
    if b is None:
        return original(s)
    # Past the soft deadline small counts still run (until the hard deadline): they
    # are the exact values at the --at sizes that a formula at the limit falls back to.
    b.check_hard("enumeration")
    rows = scan_estimate(s)
    if rows is None or (0 <= rows <= INLINE_SCAN_POINTS):
        return original(s)
    if rows > MAX_SCAN_POINTS_PER_SECOND * max(0.0, b.hard_deadline - time.monotonic()) and _box_is_tight(s):
        b.enumerations_refused += 1
        raise EnumerationLimit(f"enumeration of about {rows:.3g} rows cannot finish within the time left")
    return _count_in_child(s, original, b)


def _box_is_tight(s: isl.Set | isl.BasicSet) -> bool:
    """True when the scan estimate (a bounding box) can be trusted as the scan's
    size: no existentially quantified variables (strides, modulo guards), which
    isl's scan skips over but the box counts (by the product of the strides)."""
    parts = s.get_basic_sets() if isinstance(s, isl.Set) else [s]
    return all(bs.dim(isl.dim_type.div) == 0 for bs in parts)


def count_points(s: isl.Set | isl.BasicSet) -> int:
    """The number of points of a parameter-free set, under the current nest budget.

    The one way analyses should count: it states the budget at the call
    instead of relying on the count_val patch (tests/test_guard.py lists the
    direct calls still left).
    """
    return val_int(bounded_count_val(s))


def _count_in_child(s: Any, original: Callable[..., Any], b: Budget) -> isl.Val:
    ctx = s.get_ctx()
    timeout = b.hard_deadline - time.monotonic()
    if timeout <= 0:
        b.check_hard("enumeration")
    if not hasattr(os, "fork"):
        b.enumerations_refused += 1
        raise EnumerationLimit("enumeration too large to run without a time bound on this platform")
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # child: count, write the decimal value, leave without cleanup
        code = 0
        try:
            os.close(r)
            signal.setitimer(signal.ITIMER_REAL, 0)
            _reset_ops(ctx)
            os.write(w, str(original(s)).encode())
        except BaseException:  # noqa: BLE001 - the parent reports any failure
            code = 1
        finally:
            os._exit(code)
    os.close(w)
    chunks: list[bytes] = []
    done = False
    try:
        end = time.monotonic() + timeout
        while True:
            left = end - time.monotonic()
            if left <= 0:
                break
            ready, _, _ = select.select([r], [], [], min(left, 0.5))
            if ready:
                data = os.read(r, 65536)
                if not data:
                    done = True
                    break
                chunks.append(data)
    finally:
        os.close(r)
        if not done:
            with contextlib.suppress(OSError):
                os.kill(pid, signal.SIGKILL)
        with contextlib.suppress(OSError):
            os.waitpid(pid, 0)
    text = b"".join(chunks).decode()
    if not done or not text:
        b.enumerations_refused += 1
        raise EnumerationLimit(f"exact enumeration did not finish within the {b.time_limit:g} s time limit "
                               "of this nest")
    return isl.Val.read_from_str(ctx, text)


# --------------------------------------------------------------------------
# Files and the command line


def file_deadline(options: Options) -> float:
    """Monotonic time at which a file's remaining nests are no longer analyzed."""
    return time.monotonic() + FILE_TIME_FACTOR * time_limit_of(options)


def _short(exc: BaseException, limit: int = 200) -> str:
    text = " ".join(str(exc).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."
