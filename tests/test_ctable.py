# Tests of tripcount.ctable, the one table of C type and library knowledge:
# the front end, the affine stage and the flops analysis read it and agree on
# every name in it, checked through the whole pipeline.
#
# External references, named beside each check:
#   * type sizes: the LP64 data model of 64-bit Linux and macOS (common practice);
#   * float_t is float and double_t is double when FLT_EVAL_METHOD is 0
#     (C11 7.12p2, from memory), as on x86-64 with SSE;
#   * fma(x, y, z) computes x*y + z (C11 7.12.13.1, from memory).

from __future__ import annotations

import pytest

from tripcount import affine, ctable
from tripcount.analysis import flops
from tripcount.frontend import parser
from tripcount.options import Options
from tripcount.pipeline import analyze_text

BUILTIN = sorted(ctable.BUILTIN_SIZES)
STANDARD = sorted(ctable.STANDARD_TYPES)


@pytest.mark.parametrize("name", BUILTIN + STANDARD)
def test_model_and_flops_agree_on_every_type(name):
    kind = flops.type_class(name)
    assert affine.is_floating_type(name) == (kind == "float"), name
    assert affine.is_integer_type(name) == (kind == "int"), name
    assert affine.type_size(name) == ctable.type_size(name)


def test_standard_names_are_types_to_the_front_end():
    assert set(ctable.STANDARD_TYPES) <= parser.KNOWN_TYPES
    assert ctable.EXTENSION_FLOAT_NAMES <= parser.KNOWN_TYPES


def test_sizes_lp64():
    # LP64 (common practice)
    assert ctable.type_size("unsigned long int") == 8
    assert ctable.type_size("const size_t") == 8
    assert ctable.type_size("int32_t") == 4
    assert ctable.type_size("long long") == 8
    # float_t/double_t with FLT_EVAL_METHOD 0 (C11 7.12p2, from memory)
    assert ctable.type_size("float_t") == 4 and ctable.type_size("double_t") == 8
    assert ctable.type_size("struct cell") is None


NEST = """
void f(int N, {t} *A) {{
  for (int i = 0; i < N; i++)
    A[i] = A[i] * A[i];
}}
"""


@pytest.mark.parametrize("name", ["float", "double", "float_t", "double_t", "_Float64"])
def test_floating_typedef_through_the_pipeline(name):
    fr = analyze_text(NEST.format(t=name), "t.c", Options(at={"N": 10}))
    (nr,) = fr.nests
    # one multiplication per iteration: flops see a floating type
    assert nr.extras["flops"].count.value == 10
    # the footprint knows the element size: 10 elements of the type's size
    assert nr.extras["footprint"].footprint.bytes.value == 10 * ctable.type_size(name)
    # and the model refuses a loop over a variable of that type
    loop = f"void g(int N, double *A) {{ for ({name} x = 0; x < N; x++) A[0] = 1.0; }}"
    codes = {d.code for d in analyze_text(loop, "g.c", Options()).all_diagnostics()}
    assert "TC219" in codes


@pytest.mark.parametrize("name", ["int", "size_t", "int64_t", "uint_fast32_t", "wchar_t"])
def test_integer_typedef_through_the_pipeline(name):
    src = f"void f(int N, double *A) {{ for ({name} i = 0; i < N; i++) A[i] = A[i] * 2.0; }}"
    (nr,) = analyze_text(src, "t.c", Options(at={"N": 10})).nests
    assert nr.loops[0].trips.value == 10
    assert nr.extras["flops"].count.value == 10
    cast = f"void f(int N, double *A) {{ for (int i = 0; i < N; i++) A[({name})i] = 0.0; }}"
    (nr,) = analyze_text(cast, "t.c", Options(at={"N": 10})).nests
    # a cast to an integer type keeps the subscript affine: 10 distinct elements
    assert nr.extras["footprint"].footprint.elements.value == 10


def test_math_calls():
    assert ctable.math_call("sqrtf") == "sqrt" and ctable.math_call("expl") == "exp"
    assert ctable.math_call("fma") == "fma" and ctable.FUSED_CALLS["fma"] == ("mul", "add")
    assert ctable.math_call("printf") is None
    # fma(x, y, z) = x*y + z: one mul and one add (C11 7.12.13.1, from memory)
    src = "void f(int N, double *A) { for (int i = 0; i < N; i++) A[i] = fma(A[i], 2.0, 1.0); }"
    (nr,) = analyze_text(src, "t.c", Options(at={"N": 5})).nests
    kinds = nr.extras["flops"].kinds
    assert kinds["mul"].count.value == 5 and kinds["add"].count.value == 5
