# The diagnostics catalogue (tripcount/diagnostics/): registry by code,
# rendering, structured arguments, JSON form; one test per family module.

from __future__ import annotations

import json
import re

from tripcount.diagnostics import (
    FAMILIES,
    RETIRED,
    Diagnostic,
    LoopRef,
    Phrase,
    arg_from_json,
    arg_json,
    by_code,
    catalogue,
    from_dict,
    rerendered,
    sort_key,
)
from tripcount.diagnostics.internal import InternalError
from tripcount.ir import Span

RANGES = {"source": "TC1", "model": "TC2", "engine": "TC3", "memory": "TC4", "balance": "TC5", "gate": "TC6",
          "internal": "TC9"}


def test_render_compiler_style():
    d = InternalError(Span(3, 5, 3, 9), path="a.c", what="x")
    assert d.render().startswith("a.c:3:5: error: internal error")
    assert d.to_dict()["code"] == "TC900"


def test_codes_are_unique_and_well_formed():
    classes = catalogue()
    assert [c.code for c in classes] == sorted({c.code for c in classes})
    for cls in classes:
        assert re.fullmatch(r"TC\d{3}", cls.code), cls.code
        assert cls.severity in ("error", "warning", "note")
        assert re.fullmatch(r"[a-z][a-z0-9-]*", cls.title), cls.title
        assert by_code(cls.code) is cls


def test_each_family_module_holds_its_code_range():
    for mod in FAMILIES:
        family = mod.__name__.rpartition(".")[2]
        classes = [c for c in catalogue() if c.__module__ == mod.__name__]
        assert classes, family
        assert all(c.code.startswith(RANGES[family]) for c in classes), family
    assert {c.__module__ for c in catalogue()} == {m.__name__ for m in FAMILIES}


def test_every_class_has_a_real_description():
    for cls in catalogue():
        text = cls.description()
        assert len(text) > 20 and text not in (cls.title, cls.template), cls.code
        assert not re.search(r"\{\w*\}", text), cls.code  # a description, not a message template


def test_retired_codes_map_to_their_replacement():
    assert RETIRED["TC199"] == "TC903"
    assert by_code("TC199") is by_code("TC903")
    assert by_code("TC903").severity == "error" and by_code("TC903").__module__.endswith(".internal")
    assert by_code("TC000") is None


def test_a_code_cannot_be_registered_twice():
    try:
        type("Twice", (Diagnostic,), {"code": "TC900", "template": "x"})
    except ValueError as exc:
        assert "TC900" in str(exc)
    else:
        raise AssertionError("a second class for TC900 was accepted")
    assert by_code("TC900") is InternalError


def test_sort_key_orders_by_position():
    a = InternalError(Span(9, 1, 9, 2), path="a.c", what="")
    b = InternalError(Span(2, 7, 2, 8), path="a.c", what="")
    assert sorted([a, b], key=sort_key) == [b, a]


# ------------------------------------------------------------------ rendering and JSON

HEADER = Span(4, 5, 4, 30)


def sample_args(cls: type[Diagnostic]) -> dict:
    """A value of the right kind for every argument the template names."""
    out: dict = {}
    for name, spec in cls.fields():
        if spec == "line" or name in ("where", "pos"):
            out[name] = Span(7, 3, 7, 9)
        elif name == "loop":
            out[name] = LoopRef("i", HEADER)
        elif spec:
            out[name] = 2.5
        else:
            out[name] = f"<{name}>"
    return out


def test_every_registered_class_renders_with_sample_args():
    for cls in catalogue():
        args = sample_args(cls)
        d = cls(Span(2, 1, 2, 4), path="a.c", **args)
        msg = d.message
        assert repr(args) not in msg and "{" not in msg.replace("'{'", ""), (cls.code, msg)
        for name, value in args.items():
            if isinstance(value, str):
                assert value in msg, (cls.code, name)
        if any(isinstance(v, Span) for v in args.values()):
            assert "7:3" in msg or "line 7" in msg, (cls.code, msg)
        assert d.render() == f"a.c:2:1: {cls.severity}: {msg} [{cls.code}]"
        data = json.loads(json.dumps(d.to_dict()))
        again = from_dict(data)
        assert type(again) is cls and again.to_dict() == data and again.message == msg, cls.code


def test_positions_are_arguments_rendered_late():
    assert LoopRef("i", HEADER).__str__() == "loop 'for (i ...)' at 4:5"
    assert str(LoopRef("?", HEADER)) == "loop 'for (...)' at 4:5"
    phrase = Phrase(("unexpected '}' at ", Span.point(5, 3), " in ", LoopRef("k", HEADER)))
    assert str(phrase) == "unexpected '}' at 5:3 in loop 'for (k ...)' at 4:5"
    assert arg_from_json(arg_json(phrase)) == phrase
    assert arg_json(LoopRef("k", HEADER)) == {"loop": "k", "line": 4, "column": 5, "end_line": 4, "end_column": 30}
    assert arg_from_json({"line": 1, "column": 2, "end_line": 1, "end_column": 3}) == Span(1, 2, 1, 3)
    # a moved argument renders the new position: nothing is baked into text
    d = by_code("TC204")(Span.point(9, 13), pos=Span.point(9, 13), loop=LoopRef("i", HEADER))
    moved = {**d.to_dict(), "args": {**d.to_dict()["args"], "loop": arg_json(LoopRef("i", Span(6, 5, 6, 30)))}}
    assert "at 4:5" in d.message and "at 6:5" in rerendered(moved)["message"]


def test_arguments_of_other_types_travel_as_their_text():
    from fractions import Fraction

    d = by_code("TC302")(None, what="flops of S1", got=Fraction(7, 2), want=3, point="n=5")
    data = json.loads(json.dumps(d.to_dict()))
    assert data["args"]["got"] == "7/2" and data["args"]["want"] == 3
    assert from_dict(data).message == d.message == "formula for flops of S1 gives 7/2 but enumeration counts 3 at n=5"


def test_a_template_that_cannot_be_filled_still_renders():
    d = InternalError(Span.point(1, 1))  # `what` missing: shown, not raised
    assert d.message.startswith("internal error") and "{}" in d.message


def test_from_dict_of_an_unknown_code_is_none():
    assert from_dict({"code": "TC999", "line": 1, "column": 1}) is None
    assert rerendered({"code": "TC999", "message": "m"}) == {"code": "TC999", "message": "m"}


# ------------------------------------------------------------------ one test per family

def test_source_family_syntax_problem_names_positions_as_spans():
    from tripcount.frontend import parse_text

    _, diags = parse_text("void velin_quay(int n, double *d)\n{\n    for (int i = 0; i < n; i++)\n"
                          "        d[i] = @ 2;\n}\n", path="quay.c")
    d = next(x for x in diags if x.code == "TC101")
    assert d.render() == ("quay.c:4:9: warning: cannot read this as C at 4:9: unexpected character '@' at 4:16; "
                          "skipped [TC101]")
    assert d.args["where"] == Span.point(4, 9)
    assert d.to_dict()["args"]["reason"] == ["unexpected character '@' at ",
                                             {"line": 4, "column": 16, "end_line": 4, "end_column": 16}]


def test_model_family_names_loops_as_loop_refs():
    from tripcount.frontend import parse_text
    from tripcount.model import build_nests

    tu, _ = parse_text("void scan(int n, const double *depth)\n{\n    for (int i = 0; i < n; i++) {\n"
                       "        if (depth[i] < 0.0)\n            break;\n    }\n}\n", path="scan.c")
    nests, diags = build_nests(tu, path="scan.c")
    d = next(x for x in diags + [y for n in nests for y in n.diagnostics] if x.code == "TC204")
    assert isinstance(d.args["loop"], LoopRef) and d.args["loop"].var == "i"
    assert d.args["pos"].line == 5
    assert d.message.startswith("'break' at 5:13 can leave loop 'for (i ...)' at 3:5 early")


def test_engine_family_time_bound_is_an_argument():
    from tripcount.diagnostics.engine import AnalysisLimit, FileBudgetSpent, FormulaLimit

    d = FormulaLimit(Span.point(3, 1), what="S1", reason="more than 256 pieces", fallback="values below are exact",
                     time_bound=False)
    assert d.message == "no closed formula for S1: more than 256 pieces; values below are exact"
    assert d.to_dict()["args"]["time_bound"] is False
    assert "2.5 s" in FileBudgetSpent(None, seconds=2.5, factor=3).message
    assert AnalysisLimit(None, reason="r", kept="k").severity == "warning"


def test_memory_family_line_of_a_loop_is_a_span():
    from tripcount.diagnostics.memory import WorkingSetExceedsCache

    args = sample_args(WorkingSetExceedsCache)
    args["loop_at"] = Span(12, 9, 13, 1)
    d = WorkingSetExceedsCache(HEADER, **{**args, "var": "q"})
    assert "working set of loop 'q' (line 12) is" in d.message
    assert d.to_dict()["args"]["loop_at"]["line"] == 12


def test_balance_family_imbalance_message_from_arguments():
    from tripcount.diagnostics.balance import LoadImbalance, NestedParallel

    d = LoadImbalance(HEADER, var="i", loop_at=HEADER, state="schedule(static) gives 4 threads imbalance 1.75",
                      advice="; use schedule(dynamic)")
    assert d.message == "parallel loop 'i' (line 4): schedule(static) gives 4 threads imbalance 1.75; use " \
                        "schedule(dynamic)"
    assert "{message}" not in LoadImbalance.template
    n = NestedParallel(HEADER, var="j", outer="i", outer_at=Span(2, 5, 2, 30))
    assert "inside parallel loop 'i' (line 2)" in n.message


def test_gate_family_kinds_cover_the_findings():
    from tripcount.diagnostics import gate
    from tripcount.gate.suppress import KINDS, SUPPRESSES

    for code, kind in SUPPRESSES.items():
        assert by_code(code).__module__ == gate.__name__ and kind in KINDS
    d = gate.UnknownSuppression(Span(3, 20, 3, 25), kind="speed", known=", ".join(KINDS))
    assert d.message.startswith("unknown kind 'speed' in 'tripcount: allow'")
    assert gate.BudgetsUnusable(None, reason="no cache level L4").message == "budgets not checked: no cache level L4"


def test_internal_family_is_the_tc9_range():
    from tripcount.diagnostics import internal

    classes = [c for c in catalogue() if c.__module__ == internal.__name__]
    assert {c.code for c in classes} == {"TC900", "TC901", "TC902", "TC903", "TC904"}
    assert all(c.severity == "error" for c in classes)
    d = internal.FrontEndError(Span.point(1, 1), what="RuntimeError: bust")
    assert d.code == "TC903" and "internal error while reading this file" in d.message
