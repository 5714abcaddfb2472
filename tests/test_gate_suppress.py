# Tests of tripcount/gate/suppress.py: `tripcount: allow` comments.

from __future__ import annotations

from tripcount.gate import suppress


def test_suppression_comments():
    text = "\n".join([
        "void f(int N) {",
        "    // tripcount: allow working-set",
        "    for (int i = 0; i < N; i++)  // tripcount: allow degree, growth",
        "        for (int j = 0; j < N; j++) /* tripcount: allow imbalance */",
        "            x++;  // tripcount: allow degre",
        "}",
    ])
    s = suppress.Suppressions.scan(text)
    assert s.by_line[3] == {"degree", "growth"}
    assert s.by_line[4] == {"imbalance"}
    assert s.unknown == [(5, text.split("\n")[4].index("degre") + 1, "degre")]
    lines = s.lines_for(3)
    assert 2 in lines and 3 in lines  # the comment-only line above the loop counts
    assert s.allows("TC601", lines) and s.allows("TC611", lines) and s.allows("TC602", lines)
    assert not s.allows("TC603", lines)
    assert s.allows("TC603", s.lines_for(4)) and not s.allows("TC601", s.lines_for(4))
    # a mention outside a comment is not a suppression
    assert suppress.Suppressions.scan('puts("tripcount: allow all");').by_line == {}


def test_suppression_all_and_pragma_line_above():
    text = "\n".join(["/* tripcount: allow all */", "#pragma omp parallel for", "for (;;) {}"])
    s = suppress.Suppressions.scan(text)
    assert s.allows("TC612", s.lines_for(3))
