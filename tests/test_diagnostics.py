# Diagnostic classes: registry, rendering, JSON form.

from __future__ import annotations

from tripcount.diagnostics import REGISTRY, InternalError, sort_key
from tripcount.ir import Span


def test_render_compiler_style():
    d = InternalError(Span(3, 5, 3, 9), path="a.c", what="x")
    assert d.render().startswith("a.c:3:5: error: internal error")
    assert d.to_dict()["code"] == "TC900"


def test_codes_are_unique_and_well_formed():
    import tripcount.pipeline  # noqa: F401  (imports every stage, registering its diagnostics)

    for code, cls in REGISTRY.items():
        assert code == cls.code
        assert code.startswith("TC") and code[2:].isdigit(), code
        assert cls.severity in ("error", "warning", "note")
        assert cls.title


def test_sort_key_orders_by_position():
    a = InternalError(Span(9, 1, 9, 2), path="a.c", what="")
    b = InternalError(Span(2, 7, 2, 8), path="a.c", what="")
    assert sorted([a, b], key=sort_key) == [b, a]
