# Schedule models for the balance analysis: which thread runs which loop
# iterations, and how much work each thread gets.
#
# The input is a work profile: the work (statement instances or flops) of
# each iteration of one entry of a parallel loop, in iteration order (the
# normalized counter k = 0 .. n-1). The static schedules follow the split of
# the GNU OpenMP runtime (libgomp, which gcc links) and are exact for the
# profile; dynamic and guided are a model estimate (list scheduling: each
# chunk, in iteration order, goes to the thread that has the least work so
# far; equal cost per unit of work; no scheduling overhead).
#
# Pure Python, no isl: the analysis builds the profiles, this module only
# deals them out, so every schedule of the what-if comparison is cheap.

from __future__ import annotations

import heapq
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Protocol

Number = int | Fraction


class Profile(Protocol):
    """Work of the iterations of one loop entry, in iteration order."""

    n: int

    def range_sum(self, a: int, b: int) -> Number:
        """Work of iterations a .. b-1 (0 <= a <= b <= n)."""
        ...


@dataclass(frozen=True)
class ConstProfile:
    """Every iteration has the same work (rectangular bodies)."""

    n: int
    w: Number

    def range_sum(self, a: int, b: int) -> Number:
        """Work of iterations a .. b-1."""
        return (b - a) * self.w


class VectorProfile:
    """Explicit work of every iteration (prefix sums make range sums O(1))."""

    def __init__(self, work: list[Number]) -> None:
        self.n = len(work)
        self.work = list(work)
        self.prefix: list[Number] = [0]
        acc: Number = 0
        for w in work:
            acc += w
            self.prefix.append(acc)

    def range_sum(self, a: int, b: int) -> Number:
        """Work of iterations a .. b-1."""
        return self.prefix[b] - self.prefix[a]


class BlockProfile:
    """Work known per block of `size` consecutive iterations only.

    Used when an entry has too many iterations to weigh one by one. Range sums
    are exact at block boundaries and interpolated linearly inside a block, so
    results computed from it are estimates.
    """

    def __init__(self, n: int, size: int, block_work: list[Number]) -> None:
        self.n = n
        self.size = size
        self.blocks = VectorProfile(block_work)

    def _upto(self, k: int) -> Number:
        b, rest = divmod(k, self.size)
        total = self.blocks.prefix[min(b, self.blocks.n)]
        if rest and b < self.blocks.n:
            width = min(self.size, self.n - b * self.size)
            total += Fraction(self.blocks.work[b] * rest, width)
        return total

    def range_sum(self, a: int, b: int) -> Number:
        """Work of iterations a .. b-1 (interpolated inside blocks)."""
        return self._upto(b) - self._upto(a)


# --------------------------------------------------------------------------
# Static schedules (libgomp's split)


def static_start(n: int, threads: int, t: int) -> int:
    """First iteration of thread t under schedule(static) without a chunk.

    libgomp: q = n / P, r = n % P; threads t < r get q + 1 iterations starting
    at t*(q+1), the others q starting at t*q + r; both are t*q + min(t, r).
    """
    q, r = divmod(n, threads)
    return t * q + min(t, r)


def static_work(profile: Profile, threads: int) -> list[Number]:
    """Work of each thread under schedule(static): one contiguous block each."""
    n = profile.n
    bounds = [static_start(n, threads, t) for t in range(threads + 1)]
    return [profile.range_sum(bounds[t], bounds[t + 1]) for t in range(threads)]


def chunked_iterations(n: int, threads: int, chunk: int, t: int) -> int:
    """Number of iterations thread t gets when chunks of `chunk` are dealt round-robin."""
    rounds, rest = divmod(n, chunk * threads)
    return rounds * chunk + min(chunk, max(0, rest - t * chunk))


def static_chunked_work(profile: Profile, threads: int, chunk: int) -> list[Number]:
    """Work of each thread under schedule(static, chunk): chunk k goes to thread k % P."""
    n = profile.n
    if isinstance(profile, ConstProfile):
        return [chunked_iterations(n, threads, chunk, t) * profile.w for t in range(threads)]
    out: list[Number] = [0] * threads
    for k, a in enumerate(range(0, n, chunk)):
        out[k % threads] += profile.range_sum(a, min(n, a + chunk))
    return out


# --------------------------------------------------------------------------
# Dynamic and guided (model estimate)


def _list_schedule(profile: Profile, threads: int, chunks: list[tuple[int, int]]) -> list[Number]:
    """Deal chunks in order, each to the least-loaded thread (ties: lowest id)."""
    heap: list[tuple[Number, int]] = [(0, t) for t in range(threads)]
    out: list[Number] = [0] * threads
    for a, b in chunks:
        load, t = heapq.heappop(heap)
        w = profile.range_sum(a, b)
        out[t] = load + w
        heapq.heappush(heap, (load + w, t))
    return out


def dynamic_work(profile: Profile, threads: int, chunk: int = 1) -> list[Number]:
    """Model estimate of schedule(dynamic, chunk)."""
    n = profile.n
    if isinstance(profile, ConstProfile):
        # Equal chunks go round-robin under list scheduling: the same split as static.
        return static_chunked_work(profile, threads, chunk)
    return _list_schedule(profile, threads, [(a, min(n, a + chunk)) for a in range(0, n, chunk)])


def guided_chunks(n: int, threads: int, chunk: int = 1) -> list[tuple[int, int]]:
    """Chunk boundaries of schedule(guided, chunk): max(chunk, ceil(remaining / P)) each."""
    out: list[tuple[int, int]] = []
    a = 0
    while a < n:
        rem = n - a
        size = min(rem, max(chunk, -(-rem // threads)))
        out.append((a, a + size))
        a += size
    return out


def guided_work(profile: Profile, threads: int, chunk: int = 1) -> list[Number]:
    """Model estimate of schedule(guided, chunk)."""
    return _list_schedule(profile, threads, guided_chunks(profile.n, threads, chunk))


def thread_work(schedule: str, chunk: int | None, profile: Profile, threads: int) -> list[Number]:
    """Work of each thread for one entry under `schedule` ("static", "dynamic", "guided")."""
    if profile.n <= 0:
        return [0] * threads
    if schedule == "static":
        if chunk is None:
            return static_work(profile, threads)
        return static_chunked_work(profile, threads, chunk)
    if schedule == "dynamic":
        return dynamic_work(profile, threads, chunk or 1)
    if schedule == "guided":
        return guided_work(profile, threads, chunk or 1)
    raise ValueError(f"unknown schedule {schedule!r}")


def paired(profile: Profile) -> VectorProfile:
    """The profile of the rewrite that runs iteration k together with n-1-k.

    One iteration p < ceil(n/2) of the rewritten loop does iterations p and
    n-1-p of the original (the middle one once when n is odd): for a
    triangular body the pairs all weigh the same.
    """
    n = profile.n
    work = []
    for p in range((n + 1) // 2):
        w = profile.range_sum(p, p + 1)
        if n - 1 - p != p:
            w += profile.range_sum(n - 1 - p, n - p)
        work.append(w)
    return VectorProfile(work)


def reversed_profile(profile: Profile) -> VectorProfile:
    """The profile of the loop run backwards (the rewrite that hands out the last iterations first)."""
    return VectorProfile([profile.range_sum(k, k + 1) for k in range(profile.n - 1, -1, -1)])


# --------------------------------------------------------------------------
# Outcome over all entries of a loop


@dataclass
class Outcome:
    """Per-thread work summed over every entry of the loop, and its critical path.

    Each entry of a work-sharing loop ends with a barrier, so the time the
    team spends is the sum over entries of the most loaded thread's work
    (`critical`), not the maximum of the per-thread totals.
    """

    threads: int
    per_thread: list[Number] = field(default_factory=list)
    critical: Number = 0
    total: Number = 0

    def add(self, work: list[Number], times: int = 1) -> None:
        """Add one entry's per-thread work, `times` identical entries."""
        if not self.per_thread:
            self.per_thread = [0] * self.threads
        for t, w in enumerate(work):
            self.per_thread[t] += w * times
        self.critical += max(work, default=0) * times
        self.total += sum(work) * times

    @property
    def imbalance(self) -> Fraction:
        """Critical path over the mean thread work (1 is perfect balance)."""
        if not self.total:
            return Fraction(1)
        return Fraction(self.critical) * self.threads / Fraction(self.total)

    @property
    def efficiency(self) -> Fraction:
        """Mean thread work over the critical path (1 is perfect)."""
        return 1 / self.imbalance


def outcome(schedule: str, chunk: int | None, entries: list[tuple[int, Profile]], threads: int,
            pair: bool = False, reverse: bool = False) -> Outcome:
    """Deal every entry's iterations under one schedule and sum up (optionally after the
    pairing rewrite or with the loop reversed)."""
    out = Outcome(threads)
    for times, prof in entries:
        if pair:
            prof = paired(prof)
        elif reverse:
            prof = reversed_profile(prof)
        out.add(thread_work(schedule, chunk, prof, threads), times)
    if not out.per_thread:
        out.per_thread = [0] * threads
    return out
