# Analysis contract: how an analysis plugs into the driver.
#
# An analysis is a small unit: a name, the Options fields it reads, the
# analyses whose results it needs, and the result names it produces. The
# driver (pipeline.py) calls `run(nest, options, budget, inputs)`, which
# returns a frozen Output: the analysis' results by name (for the nest, per
# loop, per statement), its diagnostics, and, for the counts, the loop and
# statement counts. An analysis never touches another analysis' results: it
# reads its inputs through `inputs.view()`, a NestResult assembled afresh
# from the earlier outputs, and fills a private copy of it; only what it
# declares in `produces` is taken from that copy into its Output. The driver
# assembles the nest's NestResult from the outputs (`assemble`), so an
# analysis cut short by its budget is simply left out.
#
# The counts analysis is `partial`: cut by a limit, it returns what it has
# (each completed count is exact) with `stopped` set; the driver completes
# the rest as "unknown".

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

from tripcount.analysis.results import LoopResult, NestResult, StatementResult
from tripcount.budget import Budget, LimitReached, NestLimit, is_quota_error
from tripcount.diagnostics import Diagnostic
from tripcount.options import Options

if TYPE_CHECKING:
    from tripcount.model import Nest


def _empty() -> Mapping[Any, Any]:
    return MappingProxyType({})


@dataclass(frozen=True)
class Output:
    """What one analysis produced for one nest (read-only)."""

    name: str
    extras: Mapping[str, Any] = field(default_factory=_empty)  # nest-level results by name, in the order produced
    loop_extras: Mapping[int, Mapping[str, Any]] = field(default_factory=_empty)  # loop index -> results by name
    stmt_extras: Mapping[str, Mapping[str, Any]] = field(default_factory=_empty)  # statement id -> results by name
    diagnostics: tuple[Diagnostic, ...] = ()
    loops: tuple[LoopResult, ...] | None = None  # the counts: trip counts of the loops done
    statements: tuple[StatementResult, ...] | None = None  # ... and execution counts of the statements
    stopped: str | None = None  # a partial output: the limit that cut it
    error: BaseException | None = field(default=None, compare=False)  # a partial output after a failure


@dataclass(frozen=True)
class Inputs:
    """The outputs of the analyses that ran before, in order."""

    nest: Nest
    outputs: tuple[Output, ...] = ()

    def get(self, name: str) -> Output | None:
        """The output of the analysis `name`, if it ran."""
        return next((o for o in self.outputs if o.name == name), None)

    def view(self) -> NestResult:
        """A NestResult of the earlier outputs, new at each call (the caller's own to fill)."""
        return assemble(self.nest, self.outputs)


Fill = Callable[[NestResult, Options, Budget], Any]


@dataclass(frozen=True)
class Analysis:
    """One analysis: `fill` adds its results to a private NestResult; `run` returns them as an Output."""

    name: str
    fill: Fill
    reads: tuple[str, ...] = ()  # the Options fields it reads (documentation, and the cache key's)
    needs: tuple[str, ...] = ()  # analyses whose outputs it reads
    produces: tuple[str, ...] = ()  # the result names it adds to the nest, loops or statements
    partial: bool = False  # cut short, it still returns what it completed (the counts)

    def run(self, nest: Nest, options: Options, budget: Budget, inputs: Inputs) -> Output:
        """Run on one nest within `budget`; the Output holds only what this analysis made."""
        scratch = inputs.view()
        seen = len(scratch.diagnostics)
        try:
            self.fill(scratch, options, budget)
        except (NestLimit, LimitReached) as exc:
            if not self.partial:
                raise
            budget.stop_alarm()
            root = budget.root()
            root.tripped = root.tripped or "time"
            return self._collect(scratch, seen, stopped=str(exc) or budget.reason())
        except Exception as exc:
            if not self.partial:
                raise
            if is_quota_error(exc) or budget.ops_spent():
                budget.root().tripped = "operations"
                return self._collect(scratch, seen, stopped=budget.reason())
            return self._collect(scratch, seen, error=exc)
        return self._collect(scratch, seen)

    def _collect(self, scratch: NestResult, seen: int, stopped: str | None = None,
                 error: BaseException | None = None) -> Output:
        keys = set(self.produces)

        def mine(extras: Mapping[str, Any]) -> Mapping[str, Any]:
            return MappingProxyType({k: v for k, v in extras.items() if k in keys})

        loops = {lr.loop.index: mine(lr.extras) for lr in scratch.loops}
        stmts = {sr.stmt.id: mine(sr.extras) for sr in scratch.statements}
        return Output(
            name=self.name,
            extras=mine(scratch.extras),
            loop_extras=MappingProxyType({k: v for k, v in loops.items() if v}),
            stmt_extras=MappingProxyType({k: v for k, v in stmts.items() if v}),
            diagnostics=tuple(scratch.diagnostics[seen:]),
            loops=tuple(scratch.loops) if self.partial else None,
            statements=tuple(scratch.statements) if self.partial else None,
            stopped=stopped,
            error=error,
        )


def assemble(nest: Nest, outputs: Sequence[Output]) -> NestResult:
    """The NestResult of `outputs` (new objects: nothing of the outputs is shared for writing)."""
    loops: list[LoopResult] = []
    stmts: list[StatementResult] = []
    for o in outputs:
        if o.loops is not None:
            loops = [LoopResult(lr.loop, lr.trips, lr.per_entry) for lr in o.loops]
        if o.statements is not None:
            stmts = [StatementResult(sr.stmt, sr.count) for sr in o.statements]
    result = NestResult(nest=nest, loops=loops, statements=stmts, diagnostics=list(nest.diagnostics))
    by_loop = {lr.loop.index: lr for lr in loops}
    by_stmt = {sr.stmt.id: sr for sr in stmts}
    for o in outputs:
        result.diagnostics.extend(o.diagnostics)
        result.extras.update(o.extras)
        for k, ex in o.loop_extras.items():
            if k in by_loop:
                by_loop[k].extras.update(ex)
        for k, ex in o.stmt_extras.items():
            if k in by_stmt:
                by_stmt[k].extras.update(ex)
    return result


def analyses() -> list[Analysis]:
    """The analyses run on every nest, in order (counts first: the others read them)."""
    from tripcount.analysis import (
        balance,
        counts,
        dependences,
        flops,
        footprint,
        roofline,
        tiling,
        traffic,
        verify,
    )

    return [
        Analysis("counts", counts.analyze, reads=("at", "time_limit", "max_pieces", "verify"), partial=True),
        Analysis("flops", flops.analyze, needs=("counts",), produces=("flops", "loads", "stores")),
        Analysis("footprint", footprint.analyze, needs=("counts", "flops"), produces=("working_set", "footprint", "intensity"),
                 reads=("at", "time_limit", "max_pieces", "line_size", "caches", "elem_size", "solve_for", "detail",
                        "peak_gflops", "bandwidth_gbs")),
        Analysis("traffic", traffic.analyze, needs=("counts", "flops", "footprint"), produces=("traffic",),
                 reads=("at", "time_limit", "max_pieces", "line_size", "caches", "elem_size", "detail")),
        Analysis("dependences", dependences.analyze, needs=("counts",), produces=("dependences",),
                 reads=("at", "parallel_lines", "time_limit")),
        Analysis("tiling", tiling.analyze, needs=("footprint", "dependences"), produces=("tiling",),
                 reads=("at", "line_size", "caches", "elem_size", "detail", "time_limit")),
        Analysis("balance", balance.analyze, needs=("counts", "flops", "dependences"), produces=("parallel",),
                 reads=("at", "threads", "work", "parallel_lines", "imbalance_threshold", "time_limit", "max_pieces")),
        Analysis("roofline", roofline.analyze, needs=("counts", "flops", "footprint", "traffic", "balance"),
                 produces=("roofline",), reads=("machine", "detail")),
        Analysis("verify", verify.analyze, needs=("counts", "flops"), reads=("verify", "at")),
    ]
