# Pipeline driver: stage order, per-nest isolation of failures, directories.

from __future__ import annotations

import os

from conftest import CORPUS, INPUTS

from tripcount import pipeline
from tripcount.analysis.protocol import Analysis
from tripcount.options import Options

FLUSH = os.path.join(INPUTS, "cli", "harbour_flush.c")


def test_collect_paths_walks_directories():
    paths = pipeline.collect_paths([os.path.join(INPUTS, "cli")])
    assert FLUSH in paths
    assert all(p.endswith((".c", ".h")) for p in paths)
    # C++ sources are found too (the corpus has one)
    corpus = pipeline.collect_paths([CORPUS])
    assert any(p.endswith("harbour_sweep.cpp") for p in corpus)
    assert all(p.endswith((".c", ".h", ".cpp", ".cc", ".cxx", ".hpp", ".hh", ".hxx")) for p in corpus)


def test_failure_in_one_nest_is_contained(monkeypatch):
    calls = []

    def broken(result, options, budget):
        calls.append(result.nest.function)
        if result.nest.function == "flush_basin":
            raise RuntimeError("boom")

    real = pipeline.analyses

    def patched():
        return real() + [Analysis("broken", broken)]

    monkeypatch.setattr(pipeline, "analyses", patched)
    fr = pipeline.analyze_file(FLUSH, Options(at={"n": 4}))
    assert calls == ["flush_basin", "basin_mean"]
    internal = [d for d in fr.all_diagnostics() if d.code == "TC900"]
    assert len(internal) == 1
    assert internal[0].span.line == fr.nests[0].nest.span.line
    # the counts of the failing nest are still there
    assert fr.nests[0].statements[0].count.value == 10


def test_unreadable_file(tmp_path):
    fr = pipeline.analyze_file(str(tmp_path / "missing.c"), Options())
    assert [d.code for d in fr.all_diagnostics()] == ["TC901"]


def test_invalid_utf8_is_reported_not_fatal(tmp_path):
    p = tmp_path / "bad.c"
    p.write_bytes(b"void f(int n, double *x) {\n  /* \xff\xfe */\n  for (int i = 0; i < n; i++) x[i] = 0;\n}\n")
    fr = pipeline.analyze_file(str(p), Options(at={"n": 3}))
    codes = [d.code for d in fr.all_diagnostics()]
    assert "TC190" in codes
    assert fr.nests[0].statements[0].count.value == 3


def test_work_groups_keep_equal_nests_together_and_strided_first():
    # scheduling only (common practice: longest jobs first): equal iteration
    # domains share a worker, a nest with a non-unit step is handed out first
    from types import SimpleNamespace as NS

    plain = NS(loops=(NS(step=1, domain="[N] -> { L0[i0] : 0 <= i0 < N }"),), statements=(1,))
    strided = NS(loops=(NS(step=2, domain="[N] -> { L0[i0] : 0 <= i0 < N and i0 % 2 = 0 }"),), statements=(1,))
    other = NS(loops=(NS(step=1, domain="[M] -> { L0[i0] : 0 <= i0 < M }"),), statements=(1,))
    nests = [plain, strided, plain, other, strided]
    groups = pipeline.work_groups(nests, [0, 1, 2, 3, 4])
    assert groups[0] == [1, 4]
    assert sorted(map(sorted, groups)) == [[0, 2], [1, 4], [3]]


# --------------------------------------------------------------------------
# One driver: analyze, check and serve give the same numbers


def _numbers_of_report(nest):
    """The numbers of a nest of the JSON report: counts, trips, innermost cache-fit occupancy, imbalance."""
    parents = {lp["parent"] for lp in nest["loops"]}
    return ([(s["id"], s["count"]["value"], s["count"].get("degree")) for s in nest["statements"]],
            [(lp["var"], lp["trips"]["value"]) for lp in nest["loops"]],
            [(lp["var"], (lp["working_set"]["cache_fit"] or {}).get("occupancy_bytes"))
             for lp in nest["loops"] if lp["index"] not in parents and lp.get("working_set")],
            [(lp["var"], (lp["parallel"] or {}).get("imbalance_exact")) for lp in nest["loops"]])


def _numbers_of_summary(n):
    """The numbers of a typed summary (what the gate and the language server read)."""
    inner = {lp.index for lp in n.innermost_loops()}
    return ([(s.id, s.count.value, s.count.degree) for s in n.statements],
            [(lp.var, lp.trips.value) for lp in n.loops],
            [(lp.var, lp.working_set.occupancy, lp.working_set.estimate)
             for lp in n.loops if lp.index in inner and lp.working_set is not None],
            [(lp.var, None if lp.balance is None or lp.balance.imbalance is None else str(lp.balance.imbalance))
             for lp in n.loops])


def test_analyze_check_and_serve_give_the_same_numbers_on_the_corpus(tmp_path, private_cache, monkeypatch):
    # the whole corpus through the three entry points, the cache cold and warm:
    # the reports of `analyze` and of `check` (JSON) agree on every number, and
    # so do the typed summaries that `check` holds against budgets and that the
    # language server shows
    import io
    import json
    import shutil

    from tripcount import lsp
    from tripcount.analysis.summary import NestSummary
    from tripcount.cli import main
    from tripcount.config import CommandLine
    from tripcount.gate.baseline import Git
    from tripcount.gate.command import check_file
    from tripcount.gate.readings import summaries_of

    root = os.path.join(os.path.dirname(__file__), "..", "corpus")
    names = sorted(n for n in os.listdir(root) if n.endswith(".c"))
    for n in names:
        shutil.copy(os.path.join(root, n), tmp_path / n)
    (tmp_path / "pyproject.toml").write_text('[tool.tripcount]\nat = { "*" = 100 }\nthreads = 4\n'
                                             'caches = { L1 = "32KiB", L2 = "1MiB", L3 = "8MiB" }\n')
    monkeypatch.chdir(tmp_path)

    def cli(*argv):
        out, err = io.StringIO(), io.StringIO()
        status = main(list(argv), stdout=out, stderr=err)
        assert status in (0, 1), err.getvalue()
        return {os.path.basename(f["path"]): f["nests"] for f in json.loads(out.getvalue())["files"]}

    reported = {k: [_numbers_of_report(n) for n in v] for k, v in cli("analyze", "--format", "json", *names).items()}
    assert sum(len(v) for v in reported.values()) >= 40
    for run in ("cold", "warm"):
        checked = cli("check", "--format", "json", *names)
        assert {k: [_numbers_of_report(n) for n in v] for k, v in checked.items()} == reported, run
        for name in names:
            gate = [_numbers_of_summary(n) for n in summaries_of(check_file(name, CommandLine(), Git(), True).result)]
            assert [(c, t, i) for c, t, _ws, i in gate] == [(c, t, i) for c, t, _ws, i in reported[name]]
            a = lsp.analyze_document(str(tmp_path / name), (tmp_path / name).read_text())
            assert [_numbers_of_summary(n) for n in a.nests] == gate, (run, name)
            assert [NestSummary.from_json(n.to_json()) for n in a.nests] == a.nests
