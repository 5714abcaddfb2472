# Traffic results: the lines and bytes the cache model moves into each cache
# level for one nest (nest extra `traffic`), their JSON list and text block,
# and the model's stated assumptions.

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

from tripcount.analysis.results import Count

MODEL = ("model estimate: each cache level a fully associative LRU cache with the level's capacity and line "
         "size, cold at nest entry, no other traffic (other data, other threads, prefetching), write-allocate "
         "(a written line is brought in like a read one), packed row-major layout of the declared types with "
         "every array starting on a line boundary")
METHOD = ("layer condition per loop level: when one iteration of a loop fits the level, each execution of the "
          "loop brings in its distinct lines once (its reuse across iterations is served); otherwise every "
          "iteration brings in again what its inner loops and statements touch")
KNOWN_WRONG = ("known limits: whether a level holds one iteration is decided on the largest iteration, so "
               "triangular loops whose small iterations fit are counted as not fitting; LRU needs somewhat more "
               "than one iteration's lines to serve reuse one iteration apart (a working set just under the "
               "capacity is counted as served though LRU still misses); data shared by sibling loops whose "
               "common parent does not fit is counted once per sibling")


@dataclass
class TrafficCount(Count):
    """A count object of the cache model, with the side of a value that is only a bound."""

    bound: str | None = None  # "upper" / "lower" when the value is only a bound on the model's count

    def to_json(self) -> dict[str, Any]:
        """The usual count object, plus `bound` (the side) when the value is only a bound."""
        out = super().to_json()
        if self.bound:
            out["bound"] = self.bound
        return out


def _scaled(c: TrafficCount, k: int) -> TrafficCount:
    return TrafficCount(value=None if c.value is None else c.value * k,
                        formula=None if c.formula is None else c.formula.scale(k),
                        note=c.note, exact=c.exact, at_piece=c.at_piece, bound=c.bound)


@dataclass(frozen=True)
class LevelTraffic:
    """Lines brought into one cache level over the whole nest (its misses under the model), and bytes."""

    level: str
    line_size: int
    lines: TrafficCount
    bytes: TrafficCount
    assumptions: tuple[str, ...] = ()

    @classmethod
    def of_lines(cls, level: str, line_size: int, lines: TrafficCount,
                 assumptions: tuple[str, ...] = ()) -> LevelTraffic:
        """The level's traffic from its line count (bytes = lines * line size)."""
        return cls(level, line_size, lines, _scaled(lines, line_size), assumptions)

    def to_json(self) -> dict[str, Any]:
        """{"level", "lines", "bytes", "assumptions"}."""
        return {"level": self.level, "lines": self.lines.to_json(), "bytes": self.bytes.to_json(),
                "assumptions": list(self.assumptions)}


def _fmt(v: int | Fraction | None) -> str:
    if v is None:
        return "?"
    return f"{int(v):,}" if not isinstance(v, Fraction) or v.denominator == 1 else f"{float(v):,.2f}"


@dataclass(frozen=True)
class NestTraffic:
    """Nest extra `traffic`: lines and bytes into each cache level, smallest level first."""

    levels: tuple[LevelTraffic, ...]
    assumptions: tuple[str, ...] = ()
    flops: int | Fraction | None = field(default=None, compare=False)  # the nest's flops at the --at sizes

    def level(self, name: str) -> LevelTraffic | None:
        """The traffic into the level `name` ("L1", ...), None when the model has no such level."""
        return next((lv for lv in self.levels if lv.level == name), None)

    def memory_bytes(self) -> TrafficCount:
        """Bytes moved from main memory: the lines brought into the last cache level times its line size."""
        if not self.levels:
            return TrafficCount(note="no cache level in the model")
        return self.levels[-1].bytes

    def intensity(self) -> Fraction | None:
        """Flops per byte moved from main memory under the model, at the --at sizes (None when unknown)."""
        mem = self.memory_bytes()
        if self.flops is None or mem.value is None or mem.value <= 0:
            return None
        return Fraction(self.flops) / Fraction(mem.value)

    def largest(self) -> LevelTraffic | None:
        """The level with the most bytes moved into it at the --at sizes."""
        known = [lv for lv in self.levels if lv.bytes.value is not None]
        return max(known, key=lambda lv: lv.bytes.value) if known else None  # type: ignore[arg-type,return-value]

    def to_json(self) -> list[dict[str, Any]]:
        """One entry per level in cache order: {"level", "lines", "bytes", "assumptions"}."""
        return [lv.to_json() for lv in self.levels]

    def text_lines(self) -> list[str]:
        """A short block: lines and bytes per level, bytes from memory, intensity, the largest level."""
        if not self.levels:
            return []
        out = ["traffic (model estimate: fully associative LRU per level, cold at nest entry, no other traffic,"
               " write-allocate, packed row-major layout, arrays on line boundaries):"]
        for lv in self.levels:
            c = lv.lines
            if c.value == 0 and c.bound == "lower":
                out.append(f"  into {lv.level:<3} not modelled")
            elif c.value is not None:
                side = {"upper": "<= ", "lower": ">= "}.get(c.bound or "", "")
                out.append(f"  into {lv.level:<3} {side}{_fmt(c.value)} lines = {side}{_fmt(lv.bytes.value)} B")
            elif c.formula is not None:
                pieces = c.formula.to_json().get("pieces") or []
                text = "; ".join(p["expr"] + ("" if len(pieces) == 1 else f" when {p['when']}") for p in pieces)
                out.append(f"  into {lv.level:<3} {text or '0'} lines of {lv.line_size} B")
            else:
                out.append(f"  into {lv.level:<3} unknown ({c.note or 'no value'})")
        mem = self.memory_bytes()
        if mem.value is not None and not (mem.value == 0 and mem.bound == "lower"):
            ai = self.intensity()
            side = {"upper": "<= ", "lower": ">= "}.get(mem.bound or "", "")
            text = f"  from memory {side}{_fmt(mem.value)} B"
            if ai is not None:
                flip = {"<= ": ">= ", ">= ": "<= "}.get(side, "")
                text += f"; intensity {flip}{float(ai):.3g} flop/B against this traffic"
            big = self.largest()
            if big is not None:
                text += (f"; most bytes move into {big.level} (which level limits the time needs the bandwidths: "
                         "the roofline line, given a machine description)")
            out.append(text)
        notes = sorted({a for lv in self.levels for a in lv.assumptions if a not in (MODEL, METHOD, KNOWN_WRONG)})
        out.extend(f"  note: {n}" for n in notes)
        return out
