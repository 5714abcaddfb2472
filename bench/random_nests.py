# Seeded random affine loop nests for the engine benchmark (bench_engine.py).
#
# The profile of what performance engineers write when loops get awkward:
# depth 1..5, min/max bounds, C division of bounds by 2..5, strides 1..5,
# downward loops, negative ranges (bounds such as -N or -3), `if` guards with
# `!=` comparisons and modulo tests with coefficients, `(i + 3*j) % 5 == 1`.
# The nests are built from the data model of the robustness suite
# (tests/robustness/strategies.py: Aff, Bound, Cond, Loop, GenNest), which
# renders them to C and executes them directly in Python with C semantics, so
# the benchmark can also check every formula it times. Drawn with
# random.Random(seed): the same seed gives the same nests on every machine.

from __future__ import annotations

import os
import random
import sys
from collections.abc import Sequence
from typing import Any

HERE = os.path.dirname(os.path.abspath(__file__))
# strategies.py imports the test helpers of tests/ (internal.py) as top-level modules
sys.path.insert(0, os.path.join(os.path.dirname(HERE), "tests"))
sys.path.insert(0, os.path.join(os.path.dirname(HERE), "tests", "robustness"))

from strategies import Aff, Bound, Cond, GenNest, If, Loop, Stmt  # noqa: E402

PARAMS = ("N", "M", "K")
VARS = "ijklm"


def _aff(rng: random.Random, names: Sequence[str], divide: bool = True) -> Aff:
    """sum of up to two coefficient*name terms and a constant, sometimes divided (C `/`)."""
    chosen = rng.sample(list(names), k=min(len(names), rng.choice([0, 1, 1, 2]))) if names else []
    coefs = tuple((n, rng.choice([-2, -1, 1, 1, 1, 2, 3])) for n in chosen)
    const = rng.randint(-4, 6)
    div = rng.choice([1, 1, 1, 2, 3, 4, 5]) if divide and coefs else 1
    return Aff(coefs, const, div)


def _bound(rng: random.Random, names: Sequence[str], op: str) -> Bound:
    if rng.randrange(4) == 0:  # min/max of two or three values
        return Bound(op, tuple(_aff(rng, names) for _ in range(rng.randint(2, 3))))
    if op == "max" and rng.randrange(6) == 0:  # a negative range: from -P or a negative constant
        p = rng.choice([n for n in names if n in PARAMS])
        return Bound("", (Aff(((p, -1),), rng.randint(-3, 0)),))
    return Bound("", (_aff(rng, names),))


def _guard(rng: random.Random, names: Sequence[str]) -> Cond:
    k = rng.randrange(5)
    if k <= 1:  # a modulo test on a combination with coefficients: (i + 3*j) % 5 == 1
        loops = [n for n in names if n not in PARAMS] or list(names)
        chosen = rng.sample(loops, k=min(len(loops), rng.choice([1, 2])))
        coefs = tuple((n, c) for n, c in zip(chosen, (1, rng.choice([1, 2, 3, -1])), strict=False))
        m = rng.randint(2, 5)
        return Cond("mod", op=rng.choice(["==", "==", "!="]), left=Aff(coefs, rng.randint(0, 3)),
                    modulus=m, residue=rng.randrange(m))
    if k == 2:  # a != guard
        return Cond("cmp", op="!=", left=_aff(rng, names, divide=False), right=_aff(rng, (), divide=False))
    op = rng.choice(["<", "<=", ">", ">="])
    return Cond("cmp", op=op, left=_aff(rng, names), right=_aff(rng, names, divide=False))


def random_nest(rng: random.Random, depth: int) -> GenNest:
    """One nest of exactly `depth` loops over one to three size parameters."""
    params = tuple(sorted(rng.sample(PARAMS, k=rng.randint(1, 3))))

    def loop(level: int, outer: list[str]) -> Loop:
        var = VARS[level]
        names = list(params) + outer
        inner = [*outer, var]
        sub = " + ".join(inner[-2:])
        body: list[Any] = []
        if level + 1 < depth:
            child: Any = loop(level + 1, inner)
            if rng.randrange(4) == 0:
                child = If(_guard(rng, list(params) + inner), (child,))
            body.append(child)
        else:
            s: Any = Stmt(f"A[{sub}] += 1.0;")
            if rng.randrange(3) == 0:
                s = If(_guard(rng, list(params) + inner), (s,))
            body.append(s)
        return Loop(var, _bound(rng, names, "max"), _bound(rng, names, "min"),
                    inclusive=rng.random() < 0.5, step=rng.choice([1, 1, 1, 2, 3, 4, 5]),
                    down=rng.randrange(5) == 0, body=tuple(body))

    return GenNest(params, loop(0, []))


def random_nests(seed: int, depth: int, n: int) -> list[GenNest]:
    """n nests of the given depth, the same for the same seed."""
    rng = random.Random(f"{seed}/{depth}")
    return [random_nest(rng, depth) for _ in range(n)]
