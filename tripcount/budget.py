# The one budget of an analysis: how long a nest (or a part of its work) may
# run, passed down explicitly from the driver to the analyses and the engine.
#
# A `Budget` holds four bounds, because no single mechanism covers every way
# to run long:
#   * a soft deadline that cooperative code checks (`check()`, `remaining()`);
#     the engine's between-step checks and the analyses' own time shares are
#     read from it, and a child budget (`sub(seconds)`) ends no later than its
#     parent;
#   * an isl operation budget (Context.set_max_operations, while `enforce()`
#     is in force): a long isl call that counts operations (simplification,
#     ILP, coalescing) fails at once with "maximal number of operations
#     exceeded" when it is spent. isl holds the GIL, so nothing else can stop
#     such a call from Python;
#   * bounded point counting: isl's count_val scans and does NOT count
#     operations (measured: 15 operations for a 10^9-point cube whatever its
#     size), so at a huge --at size it could run for hours. `count_points(s,
#     budget)` is the only place in tripcount that calls count_val
#     (tests/test_budget.py fails on any other call); a count whose scan is
#     estimated large runs in a forked child killed at the hard deadline
#     (EnumerationLimit);
#   * a hard alarm (SIGALRM, main thread only, while `enforce()` is in force)
#     at 1.5 x the limit + 1 s, for pure-Python loops that never check.
# Nothing here is global: there is no patched isl method and no "current"
# budget; whoever needs a bound is handed the budget.
#
# Defaults: a nest's limit is Options.time_limit (20 s); the operation budget
# is ISL_OPS_PER_SECOND x the limit (80 million); the hard stop comes at
# 1.5 x the limit + 1 s (31 s).

from __future__ import annotations

import contextlib
import math
import os
import select
import signal
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import islpy as isl

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


class LimitReached(Exception):  # noqa: N818 - the engine's name for it is EngineLimit
    """A computation gave up at one of its limits (time, pieces, enumeration size).

    What was computed before is exact; the caller falls back (values by
    enumeration, a bound, or "unknown") and says so. The engine's EngineLimit
    is this class.
    """


class TimeLimit(LimitReached):
    """A child budget's deadline passed (its parent may still have time)."""


class EnumerationLimit(LimitReached):
    """An exact enumeration that cannot finish within the budget's remaining time."""


def time_dependent(exc: BaseException) -> bool:
    """Whether a limit was a matter of time (a less busy machine may do better: the result is
    not cached), as opposed to the size of the problem (pieces, an unbounded set)."""
    return isinstance(exc, TimeLimit | EnumerationLimit)


def limit_seconds(value: Any) -> float:
    """A time limit made usable: NaN, non-numbers and non-positive values give the
    default, and at most MAX_TIME_LIMIT_S."""
    try:
        limit = float(value)
    except (TypeError, ValueError):
        limit = DEFAULT_TIME_LIMIT
    if math.isnan(limit) or limit <= 0:
        limit = DEFAULT_TIME_LIMIT
    return min(limit, MAX_TIME_LIMIT_S)


@dataclass
class Budget:
    """A deadline (soft and hard) and an isl operation budget, with the reason it was spent.

    Make one with `Budget.start(seconds)`; `enforce()` puts its operation
    budget and hard alarm in force around a body; `sub(seconds)` is a child
    that ends no later than this one.
    """

    time_limit: float
    deadline: float
    hard_deadline: float
    max_ops: int
    parent: Budget | None = field(default=None, repr=False)
    tripped: str | None = None  # why it ended early: "time", "operations", "enumeration"
    # On the root: some part of the nest's result was decided by the clock (a deadline passed,
    # a time share ran out, an optional pass was skipped for lack of time). Such a result may
    # differ on a less busy machine, so it is not cached. Set through `mark_time_cut()`.
    time_cut: bool = False
    enumerations_refused: int = 0
    _owner_ops: bool = field(default=False, repr=False)
    _ctx: Any = field(default=None, repr=False)
    _alarm: Any = field(default=None, repr=False)

    @classmethod
    def start(cls, seconds: float) -> Budget:
        """A budget of `seconds` from now (made usable by limit_seconds)."""
        limit = limit_seconds(seconds)
        now = time.monotonic()
        return cls(time_limit=limit, deadline=now + limit, hard_deadline=now + HARD_FACTOR * limit + HARD_EXTRA_S,
                   max_ops=max(MIN_OPS, int(limit * ISL_OPS_PER_SECOND)))

    def sub(self, seconds: float) -> Budget:
        """A child budget of at most `seconds`, ending no later than this one (same hard deadline).

        Its `check()` raises TimeLimit when only the child's share is spent,
        NestLimit when the root's is.
        """
        now = time.monotonic()
        return Budget(time_limit=seconds, deadline=min(now + seconds, self.deadline),
                      hard_deadline=self.hard_deadline, max_ops=self.max_ops, parent=self)

    def root(self) -> Budget:
        """The outermost budget (the nest's)."""
        b = self
        while b.parent is not None:
            b = b.parent
        return b

    def mark_time_cut(self) -> None:
        """Record that a result of this nest was decided by the clock (see `time_cut`)."""
        self.root().time_cut = True

    def remaining(self) -> float:
        """Seconds left before the soft deadline (may be negative; nothing left marks the
        nest's result as cut by time)."""
        left = self.deadline - time.monotonic()
        if left <= 0:
            self.mark_time_cut()
        return left

    def expired(self) -> bool:
        """True once the soft deadline has passed (which marks the result as cut by time)."""
        if time.monotonic() > self.deadline:
            self.mark_time_cut()
            return True
        return False

    def check(self, what: str = "analysis") -> None:
        """Raise when the deadline has passed (for cooperative loops): NestLimit for the
        root's, TimeLimit for a child's own share."""
        root = self.root()
        if root.expired():
            root.tripped = root.tripped or "time"
            raise NestLimit(f"time limit of {root.time_limit:g} s per nest reached ({what})")
        if self.expired():  # marks the cut
            raise TimeLimit(f"time share of {self.time_limit:.2g} s spent ({what})")

    def check_hard(self, what: str = "analysis") -> None:
        """Raise NestLimit when the hard deadline (HARD_FACTOR x the limit) has passed."""
        if time.monotonic() > self.hard_deadline:
            root = self.root()
            root.tripped = root.tripped or "time"
            root.time_cut = True
            raise NestLimit(f"time limit of {root.time_limit:g} s per nest reached ({what})")

    def ops_spent(self) -> bool:
        """Whether the isl operations are spent (a small probe; False unless `enforce()` set them)."""
        root = self.root()
        if not root._owner_ops or root._ctx is None:
            return False
        if _ops_spent(root._ctx):
            root.tripped = "operations"
            return True
        return False

    def stop_alarm(self) -> None:
        """Disarm the hard-stop alarm (call first when handling NestLimit)."""
        root = self.root()
        if root._alarm is not None:
            root._alarm.stop()

    def reason(self) -> str:
        """The limit that was hit, in words."""
        root = self.root()
        if root.tripped == "operations":
            return (f"isl operation budget of {root.max_ops:,} operations spent "
                    f"({ISL_OPS_PER_SECOND:,} per second of the {root.time_limit:g} s time limit)")
        return f"time limit of {root.time_limit:g} s per nest reached"

    @contextlib.contextmanager
    def enforce(self, ctx: isl.Context | None = None) -> Iterator[Budget]:
        """Put the operation budget and the hard alarm in force around the body.

        A spent operation budget raises NestLimit. On exit the isl operation
        limit and the alarm are removed, so reporters can use isl freely. Only
        one budget at a time owns the operation limit of the process (isl's
        context is shared); a budget enforced while another is, runs on the
        other's operations and alarm.
        """
        ctx = ctx or isl.DEFAULT_CONTEXT
        with _ops_lock:
            if not _ops_owner:
                _probe_set(ctx)
                _ops_owner.append(self)
                self._owner_ops = True
                self._ctx = ctx
                _reset_ops(ctx)
                ctx.set_max_operations(self.max_ops)
        alarm = _Alarm(self) if self._owner_ops else None
        self._alarm = alarm
        try:
            try:
                if alarm is not None:
                    alarm.start()
                yield self
            finally:
                if alarm is not None:
                    alarm.stop()
        except NestLimit:
            self.tripped = self.tripped or "time"
            raise
        except isl.Error as exc:
            if is_quota_error(exc) or self.ops_spent():
                self.tripped = "operations"
                raise NestLimit(self.reason()) from exc
            raise
        finally:
            if self._owner_ops:
                with _ops_lock:
                    if self.tripped is None and _ops_spent(ctx):
                        self.tripped = "operations"  # spent, and swallowed by a caller
                    _reset_ops(ctx)
                    _ops_owner.clear()
                    self._owner_ops = False
        if self.tripped == "operations":
            raise NestLimit(self.reason())


_ops_lock = threading.Lock()
_ops_owner: list[Budget] = []  # the one budget that set the isl operation limit


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
# Bounded point counting: the one caller of isl's count_val


def _val_int(v: isl.Val) -> int:
    """An integer isl Val read without islpy's to_python(), which leaks the C string it reads
    (engine.islconv.val_int says more; kept here so the budget needs nothing of the engine)."""
    if v.n_abs_num_chunks(4) <= 1:
        return v.get_num_si()
    return int(v.to_str())


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
                vs.append(_val_int(c))
            if not vs:
                return 0  # empty set
            vals.append(vs)
        rows *= max(0, max(vals[1]) - min(vals[0]) + 1)
        if rows == 0:
            return 0
    if isinstance(s, isl.Set):
        rows *= max(1, s.n_basic_set())
    return rows


def count_points(s: isl.Set | isl.BasicSet, budget: Budget | None) -> int:
    """The number of points of a parameter-free set, within `budget` (None: no bound).

    Small scans run here; a large one runs in a forked child killed at the
    hard deadline, and one that cannot finish even at the fastest scan rate
    is refused at once (EnumerationLimit). Past the soft deadline small counts
    still run (until the hard deadline): they are the exact values at the --at
    sizes that a formula at the limit falls back to.
    """
    if budget is None:
        return _val_int(s.count_val())
    budget.check_hard("enumeration")
    rows = scan_estimate(s)
    if rows is None or (0 <= rows <= INLINE_SCAN_POINTS):
        return _val_int(s.count_val())
    if rows > MAX_SCAN_POINTS_PER_SECOND * max(0.0, budget.hard_deadline - time.monotonic()) and _box_is_tight(s):
        budget.root().enumerations_refused += 1
        budget.mark_time_cut()
        raise EnumerationLimit(f"enumeration of about {rows:.3g} rows cannot finish within the time left")
    return _count_in_child(s, budget)


def _box_is_tight(s: isl.Set | isl.BasicSet) -> bool:
    """True when the scan estimate (a bounding box) can be trusted as the scan's
    size: no existentially quantified variables (strides, modulo guards), which
    isl's scan skips over but the box counts (by the product of the strides)."""
    parts = s.get_basic_sets() if isinstance(s, isl.Set) else [s]
    return all(bs.dim(isl.dim_type.div) == 0 for bs in parts)


def _count_in_child(s: Any, b: Budget) -> int:
    ctx = s.get_ctx()
    timeout = b.hard_deadline - time.monotonic()
    if timeout <= 0:
        b.check_hard("enumeration")
    root = b.root()
    if not hasattr(os, "fork"):
        root.enumerations_refused += 1
        raise EnumerationLimit("enumeration too large to run without a time bound on this platform")
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # child: count, write the decimal value, leave without cleanup
        code = 0
        try:
            os.close(r)
            signal.setitimer(signal.ITIMER_REAL, 0)
            _reset_ops(ctx)
            os.write(w, str(s.count_val()).encode())
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
        root.enumerations_refused += 1
        root.time_cut = True
        raise EnumerationLimit(f"exact enumeration did not finish within the {root.time_limit:g} s time limit "
                               "of this nest")
    return int(text)
