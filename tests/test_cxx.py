# Tests of tripcount.frontend.cxx: the C++ subset (namespaces, classes,
# templates, qualified names, std::vector, references, range-based for).
#
# External reference: g++ compiling and executing the corpus's C++ file,
# line execution counts read with gcov (tests/oracle.py gxx_line_counts).

from __future__ import annotations

import os

import oracle
import pytest
from conftest import CORPUS

from tripcount import ir
from tripcount.frontend import parse_text
from tripcount.options import Options
from tripcount.pipeline import analyze_file, analyze_text

SWEEP = os.path.join(CORPUS, "harbour_sweep.cpp")
needs_gxx = pytest.mark.skipif(not oracle.gxx_available(), reason="g++ or gcov not available")


def _loops(fn: ir.Function) -> list[ir.For]:
    return [n for n in ir.walk(fn.body) if isinstance(n, ir.For)]


def test_scopes_templates_and_qualified_names_are_read():
    src = """
namespace velin { namespace tide {
template <typename T, int B>
void relax(std::vector<T> &v, const std::size_t n) {
  for (std::size_t i = 0; i < std::min(n, (std::size_t)B); i++) v[i] = static_cast<T>(i);
}
class Gauge : public Base {
 public:
  void scan(const double &k) const override { for (auto i = 0; i < n_; i++) h_[i] += k; }
 private:
  int n_;
};
void Gauge::flush(int m) { for (int i = 0; i < m; i++) h_[i] = 0; }
} }
"""
    tu, diags = parse_text(src, "gauge.cpp")
    assert [g for g in diags if g.severity != "note"] == []
    assert [f.name for f in tu.functions] == ["relax", "scan", "flush"]
    relax = tu.functions[0]
    assert [(p.name, p.ctype, p.pointer) for p in relax.params] == [("v", "T", 1), ("n", "const size_t", 0)]
    (loop,) = _loops(relax)
    assert ir.c_text(loop.cond) == "i < min(n, (size_t)B)"
    (scan,) = [f for f in tu.functions if f.name == "scan"]
    assert [(p.name, p.type_name) for p in scan.params] == [("k", "const double")]
    # lang overrides the suffix; a .h header with C++-only constructs is C++
    tu, _ = parse_text(src, "gauge.inc", lang="c++")
    assert [f.name for f in tu.functions] == ["relax", "scan", "flush"]
    tu, _ = parse_text(src, "gauge.h")
    assert [f.name for f in tu.functions] == ["relax", "scan", "flush"]
    tu, _ = parse_text("void f(int n, double *a) { for (int i = 0; i < n; i++) a[i] = 0; }", "plain.h")
    assert [f.name for f in tu.functions] == ["f"]


def test_range_for_counts_the_container_size():
    src = "double energy(const std::vector<double> &h) { double e = 0; for (const auto &x : h) e += x * x; return e; }"
    fr = analyze_text(src, "energy.cpp", Options(at={"size_h": 12}))
    (nr,) = fr.nests
    (sr,) = nr.statements
    assert sr.count.value == 12
    assert nr.nest.loops[0].var == "x"
    assert [g.code for g in nr.diagnostics + fr.diagnostics if g.code == "TC216"] == ["TC216"]
    fp = nr.extras["footprint"].footprint.to_json()
    assert fp["by_array"]["h"]["elem_size"] == 8 and fp["elements"]["value"] == 12


def test_element_writes_keep_the_size_invariant_a_resize_does_not():
    ok = "void f(std::vector<float> &v) { for (std::size_t i = 0; i < v.size(); i++) v[i] = 0; }"
    fr = analyze_text(ok, "f.cpp", Options(at={"v_size": 5}))
    (nr,) = fr.nests
    assert nr.statements[0].count.value == 5
    bad = "void f(std::vector<float> &v) { for (std::size_t i = 0; i < v.size(); i++) v.push_back(0); }"
    fr = analyze_text(bad, "f.cpp", Options())
    (nr,) = fr.nests
    assert "TC203" in [g.code for g in nr.diagnostics]


def test_what_is_not_understood_is_reported():
    src = "void f(std::vector<double> &v, int n) {\n for (int i = 0; i < n; i++) {\n" \
          "  auto g = [&](int k) { return v[k]; };\n  v[i] = g(i);\n }\n}\n"
    fr = analyze_text(src, "lambda.cpp", Options(at={"n": 4}))
    codes = [g.code for g in fr.all_diagnostics()]
    assert any(c in codes for c in ("TC101", "TC215")), codes
    assert not [c for c in codes if c.startswith("TC9")], codes
    (nr,) = fr.nests
    assert nr.nest.loops[0].var == "i"  # the loop stays; only the statement is not read


# the corpus file: every statement count against g++ executing it (gcov line counts)
DRIVER = """
std::vector<double> a(n + 512), b(n + 512), d(n * m + 1), h(k), w(g * g + 1);
velin::harbour_block_relax<double>(a, b, (std::size_t)n);
velin::harbour_depth_scale(d, (int)n, (int)m, 2.0);
velin::TideTable t;
t.energy(h);
t.pair_sweep(w, (int)g);
"""
POINTS = [{"n": 0, "m": 0, "k": 0, "g": 0}, {"n": 1, "m": 3, "k": 1, "g": 1},
          {"n": 300, "m": 2, "k": 5, "g": 2}, {"n": 513, "m": 7, "k": 9, "g": 6}]


@needs_gxx
def test_corpus_cpp_counts_agree_with_gxx():
    text = open(SWEEP, encoding="utf-8").read()
    got = oracle.gxx_line_counts(text, DRIVER, ["n", "m", "k", "g"], POINTS)
    checked = 0
    for pt, lines in zip(POINTS, got, strict=True):
        at = {"n": pt["n"], "m": pt["m"], "g": pt["g"], "size_h": pt["k"]}
        fr = analyze_file(SWEEP, Options(at=at))
        assert len(fr.nests) == 4
        for nr in fr.nests:
            for sr in nr.statements:
                assert sr.count.value == lines[sr.stmt.span.line], (nr.nest.function, sr.stmt.span.line, pt)
                checked += 1
    assert checked == 16


def test_member_sizes_are_named_parameters_with_a_note():
    src = "class Basin { void step(double k) { for (int i = 0; i < n_; i++) h_[i] += k; } int n_; double *h_; };"
    fr = analyze_text(src, "basin.cpp", Options(at={"n_": 6}))
    (nr,) = fr.nests
    assert nr.statements[0].count.value == 6
    (note,) = [g for g in nr.diagnostics if g.code == "TC216"]
    assert "'n_'" in note.message
    fp = nr.extras["footprint"].footprint.to_json()
    assert fp["by_array"]["h_"]["elem_size"] == 8  # the member's declaration gives the element type


@pytest.mark.parametrize("piece", ["namespace a { ", "class B { ", "template < ", "for ( auto & x : v ) ",
                                   "std :: vector < ", "static_cast < int > ( "])
def test_hostile_cxx_ends_quickly_with_diagnostics_only(piece):
    import time

    text = "void f(int n) {\n" + piece * 20000 + "\n}\n"
    t0 = time.perf_counter()
    fr = analyze_text(text, "hostile.cpp", Options(time_limit=2))
    codes = [g.code for g in fr.all_diagnostics()]
    assert not [c for c in codes if c.startswith("TC9")], codes
    assert time.perf_counter() - t0 < 60  # generous: a quadratic rewrite would take hours


def test_explicit_template_arguments_and_vectors_of_typedefs():
    # std::min<int>(t + 64, n) is min(t + 64, n): the inner loop runs n times in all (not once per tile);
    # std::vector<real> with real a typedef read after the vector: 4-byte elements
    src = """
typedef float real;
void scale(int n, std::vector<real> &a, real s) {
  for (int t = 0; t < n; t += 64)
    for (int i = t; i < std::min<int>(t + 64, n); ++i)
      a[i] = a[i] * s;
}
"""
    fr = analyze_text(src, "scale.cpp", Options(at={"n": 1000}))
    (nr,) = fr.nests
    assert [g.code for g in fr.all_diagnostics() if g.severity != "note"] == []
    assert [sr.count.value for sr in nr.statements] == [1000]
    fp = nr.extras["footprint"].footprint.to_json()
    assert fp["by_array"]["a"]["elem_size"] == 4 and fp["bytes"]["value"] == 4000
