# Property tests of the counting engine: random affine loop nests.
#
# Random nests of depth 1..4 (coefficients -3..3, constant strides 1..4,
# min/max bounds, modulo guards, disjunctions, a loop variable with a
# coefficient, i.e. integer-division bounds) are written as isl sets; the
# engine's formula evaluated at random parameter values must equal isl
# enumeration (islpy Set.count_val with the parameters fixed), and the C text
# of each piece must hold exactly on its domain (C99 6.5.5 semantics).
# The default (CI) profile runs about 760 examples (isl enumeration of each
# at 5-8 points); the `slow` test runs 20,000 with the same refusal allowance.

from __future__ import annotations

import os
import time

import islpy as isl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_engine import c_condition

from tripcount.engine import EngineLimit, Limits, count, enumerate_count

settings.register_profile(
    "engine-ci", deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True
)
settings.register_profile("engine-slow", deadline=None, suppress_health_check=[HealthCheck.too_slow])

PARAMS = ("N", "M")
SCALE = int(os.environ.get("TRIPCOUNT_ENGINE_EXAMPLES_SCALE", "1"))


@st.composite
def affine(draw, names, cmax=2, const=(-2, 3)):
    """A small affine expression over `names` (isl syntax)."""
    parts = []
    for n in names:
        c = draw(st.integers(-cmax, cmax))
        if c:
            parts.append(f"{c}*{n}")
    parts.append(str(draw(st.integers(*const))))
    return " + ".join(parts)


@st.composite
def nests(draw, max_depth=4, nparams=2):
    params = PARAMS[:nparams]
    depth = draw(st.integers(1, max_depth))
    vs = [f"i{k}" for k in range(depth)]
    cons = []
    exists = []
    for k, v in enumerate(vs):
        outer = vs[:k]
        # the first param always bounds the loop from above, so the set stays bounded
        lo = draw(affine(tuple(outer) + params, 1))
        up = draw(affine(tuple(outer) + params[1:], 1))
        up = f"{params[0]} + {up}" if draw(st.booleans()) else f"{params[0]} + -1"
        vc = draw(st.sampled_from([1, 1, 1, 1, 2, 3]))
        cons.append(f"{vc}*{v} >= {lo}")
        cons.append(f"{v} <= {up}")
        if draw(st.integers(0, 3)) == 0:  # min(...) upper bound
            cons.append(f"{v} <= {draw(affine(tuple(outer) + params, 2))}")
        if draw(st.integers(0, 3)) == 0:  # max(...) lower bound
            cons.append(f"{v} >= {draw(affine(tuple(outer) + params, 1))}")
        stride = draw(st.sampled_from([1, 1, 1, 1, 2, 3, 4])) if vc == 1 else 1
        if stride > 1:
            q = f"q{k}"
            exists.append(q)
            off = draw(st.sampled_from([lo, "0", "1", params[-1]]))
            cons.append(f"{v} = {stride}*{q} + {off}")
        if draw(st.integers(0, 5)) == 0:  # modulo guard, like `if ((i + j) % 3 == 1)`
            m = draw(st.integers(2, 4))
            other = draw(st.sampled_from(("",) + tuple(vs[:k]) + params))
            sign = draw(st.sampled_from(["+", "-"]))
            e = f"{v} {sign} {other}" if other else v
            cons.append(f"({e}) mod {m} = {draw(st.integers(0, m - 1))}")
    body = " and ".join(cons)
    if draw(st.integers(0, 3)) == 0:  # disjunction of two guards
        g1 = f"{vs[-1]} <= {draw(affine(tuple(vs[:-1]) + params, 1))}"
        g2 = f"{draw(st.integers(-3, 3))}*{vs[0]} + {draw(affine(params, 2))} >= 0"
        body = f"{body} and ({g1} or {g2})"
    if exists:
        body = f"exists {', '.join(exists)} : {body}"
    return f"[{', '.join(params)}] -> {{ S[{', '.join(vs)}] : {body} }}"


values = st.fixed_dictionaries({p: st.integers(-3, 8) for p in PARAMS})


# A refusal (EngineLimit: time or pieces) is allowed but must stay rare; a
# wrong number never is.
LIMITS = Limits(time_s=0.5)
STATS = {"run": 0, "refused": 0, "starved": 0}


def check_nest(text: str, points: list[dict[str, int]]) -> None:
    s = isl.Set(text)
    STATS["run"] += 1
    cpu = time.process_time()
    try:
        pw = count(s, limits=LIMITS)
    except EngineLimit:
        STATS["refused"] += 1
        # the budget is wall-clock time: a refusal after less than 80% of it on the CPU says
        # that other processes had the machine (parallel test workers, other jobs), not that
        # the nest is hard; those are counted apart from the engine's refusals
        if time.process_time() - cpu < 0.8 * LIMITS.time_s:
            STATS["starved"] += 1
        return
    for env in points:
        got = pw.evaluate(env)
        want = enumerate_count(s, env)
        assert got == want, f"{text} at {env}: formula {got} != isl enumeration {want}\n{pw}"
    for p in pw.pieces:
        pred = c_condition(p.when)
        for env in points:
            assert pred(env) == p.contains(env), f"C text {p.when!r} wrong at {env}"


@pytest.mark.parametrize("depth", [1, 2, 3, 4])
def test_random_nests_match_isl_enumeration(depth):
    # check: isl enumeration (Set.count_val) at random parameter values
    n = {1: 150, 2: 250, 3: 150, 4: 120}[depth] * SCALE

    @settings(settings.get_profile("engine-ci"), max_examples=n)
    @given(text=nests(max_depth=depth), pts=st.lists(values, min_size=3, max_size=6))
    def run(text, pts):
        check_nest(text, pts + [{"N": 6, "M": 3}, {"N": 0, "M": 0}])

    STATS.update(run=0, refused=0, starved=0)
    run()
    # known gap: deep nests mixing strides, modulo guards and floor bounds can
    # exceed the budget while making the pieces disjoint. Measured with the
    # earlier profile of 600/700/500/300 examples on the 2-core development
    # machine under load: 0%, 2.9%, 6.4-7.6% and 21-22% of the nests up to
    # depth 1..4 stop at the 0.5 s budget; with this one, serially at a load of
    # 8: 0%, 4.4%, 6.0%, 26.7%. The allowances leave room for a slower machine
    print("STATS", depth, STATS)
    assert STATS["refused"] - STATS["starved"] <= REFUSALS[depth] * STATS["run"] + 1, STATS


REFUSALS = {1: 0.01, 2: 0.05, 3: 0.12, 4: 0.28}  # allowed share of refused nests, by depth


def test_random_one_param_nests_match_isl_enumeration():
    # check: isl enumeration over a full range of N
    @settings(settings.get_profile("engine-ci"), max_examples=90 * SCALE)
    @given(text=nests(max_depth=3, nparams=1))
    def run(text):
        check_nest(text, [{"N": n} for n in range(-3, 14)])

    run()


@pytest.mark.slow
def test_random_nests_many_examples():
    # check: isl enumeration; the long profile
    @settings(settings.get_profile("engine-slow"), max_examples=20000)
    @given(text=nests(max_depth=4), pts=st.lists(values, min_size=3, max_size=8))
    def run(text, pts):
        check_nest(text, pts)

    STATS.update(run=0, refused=0, starved=0)
    run()
    assert STATS["refused"] - STATS["starved"] <= REFUSALS[4] * STATS["run"] + 1, STATS  # depths 1..4 mixed
