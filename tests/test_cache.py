# Tests of the result cache (tripcount/cache.py, the store; cachekeys.py, keys
# and positions; cached.py, the cached way through the driver): where the
# cache lives, atomic and concurrent writes, corrupt entries, keys that ignore spacing and comments but not
# code, macros or options, positions moved to where the same tokens now are,
# results equal to the uncached pipeline's, and a warm path that imports
# neither islpy nor sympy nor the engine.

from __future__ import annotations

import io
import json
import multiprocessing
import os
import subprocess
import sys
from pathlib import Path

import pytest
from unhurried import TIME_SHARES

from tripcount import cache, cached, cachekeys
from tripcount.ir import Span
from tripcount.options import Options

ROOT = Path(__file__).resolve().parent.parent
INPUTS = Path(__file__).parent / "inputs" / "check"


@pytest.fixture(autouse=True)
def cache_dir(private_cache, unhurried):
    # unhurried: whether a result is stored must not depend on how busy the machine is
    return private_cache


# --------------------------------------------------------------------------
# Location and store


def test_cache_directory_precedence(monkeypatch, tmp_path):
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "mine"))
    assert cache.cache_dir() == str(tmp_path / "mine")
    monkeypatch.delenv("TRIPCOUNT_CACHE_DIR")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert cache.cache_dir() == str(tmp_path / "xdg" / "tripcount")
    monkeypatch.delenv("XDG_CACHE_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert cache.cache_dir() == str(tmp_path / "home" / ".cache" / "tripcount")


def test_store_round_trip_corruption_and_clear(cache_dir):
    st = cache.Store()
    assert st.get("nest", "ab" * 20) is None
    entry = {"nest": None, "diagnostics": [], "anchors": [], "wide": False}
    st.put("nest", "ab" * 20, entry)
    assert st.get("nest", "ab" * 20) == {**entry, "key": "ab" * 20}
    path = cache_dir / "v1" / "nest" / "ab" / ("ab" * 20 + ".json")
    assert path.is_file()
    assert not [p for p in path.parent.iterdir() if p.name.startswith(".tmp-")]  # no temporary left
    path.write_text('{"nest": {"x"')  # a torn or corrupt entry is a miss, never an error
    assert st.get("nest", "ab" * 20) is None
    path.write_text(json.dumps({"key": "other", "nest": 1}))  # an entry under the wrong name
    assert st.get("nest", "ab" * 20) is None
    st.put("file", "cd" * 20, {"file": {}})
    out = io.StringIO()
    assert cache.run_cache_command("info", out) == 0
    assert "file" in out.getvalue() and str(cache_dir) in out.getvalue()
    (cache_dir / "grammar-0123.json").write_bytes(b"tables")  # the compiled grammar goes too
    (cache_dir / "grammar-0123.lark").write_bytes(b"tables")  # and that of older versions
    (cache_dir / "mine.txt").write_text("not ours")
    out = io.StringIO()
    assert cache.run_cache_command("clear", out) == 0
    assert "removed 2 cache entries" in out.getvalue()
    assert not (cache_dir / "v1").exists()
    assert sorted(p.name for p in cache_dir.iterdir()) == ["mine.txt"]


def test_unwritable_cache_is_no_error(tmp_path, monkeypatch):
    blocker = tmp_path / "file-not-dir"
    blocker.write_text("")
    st = cache.Store(root=str(blocker))
    st.put("nest", "ef" * 20, {"a": 1})  # cannot create a directory under a file: silently uncached
    assert st.get("nest", "ef" * 20) is None


def test_prune_removes_least_recently_used(cache_dir):
    st = cache.Store()
    for k in range(10):
        key = f"{k:02d}" * 20
        st.put("nest", key, {"nest": None, "diagnostics": [], "anchors": [], "wide": False, "pad": "x" * 10_000})
        p = cache_dir / "v1" / "nest" / key[:2] / (key + ".json")
        os.utime(p, (1_000_000 + k, 1_000_000 + k))  # entry k used at time k
    assert st.prune(max_bytes=10**9) == 0
    removed = st.prune(max_bytes=60_000)
    assert removed >= 4
    left = sorted(p.name[:2] for p in (cache_dir / "v1" / "nest").rglob("*.json"))
    assert left == [f"{k:02d}" for k in range(10 - len(left), 10)]  # the newest stay
    # a hit refreshes an old entry's time, so it is kept over entries not used since
    key = left[0] * 20
    assert st.get("nest", key) is not None
    assert (cache_dir / "v1" / "nest" / key[:2] / (key + ".json")).stat().st_mtime > 2_000_000


def _writer(args):
    root, n = args
    st = cache.Store(root=root)
    big = {"nest": None, "diagnostics": [], "anchors": [], "wide": False, "payload": "x" * 200_000}
    for k in range(n):
        st.put("nest", "77" * 20, {**big, "k": k})
        got = st.get("nest", "77" * 20)
        assert got is not None and len(got["payload"]) == 200_000
    return True


def test_concurrent_writers_never_expose_half_an_entry(tmp_path):
    root = str(tmp_path / "shared")
    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(4) as pool:
        assert all(pool.map(_writer, [(root, 25)] * 4))


# --------------------------------------------------------------------------
# Tokens and keys


def test_tokens_ignore_spacing_and_comments():
    a = cachekeys.tokenize("for (int i=0;i<N;i++) /* c */ x += 1; // tail\n")
    b = cachekeys.tokenize("for ( int i = 0 ;\n  i < N ; i ++ )\n  x+=1;")
    assert a.spell == b.spell
    assert "+=" in a.spell and "++" in a.spell
    c = cachekeys.tokenize('s = "a  b"; t = \'x\';')
    assert '"a  b"' in c.spell  # spacing inside literals is kept


def test_directives_end_with_their_line():
    a = cachekeys.tokenize("#define N 4\nint x = N;")
    b = cachekeys.tokenize("#define N\n4 int x = N;")
    assert a.spell != b.spell
    assert a.spell[:4] == ["#", "define", "N", "4"] and a.spell[4] == cachekeys.EOL


def test_position_round_trip():
    t = cachekeys.tokenize("ab\ncd\n\nef")
    for off in range(len(t.text) + 1):
        assert t.offset(*t.position(off)) == off


TIDE = """\
/* Velin tide model: harmonic sums over the constituents. */
#define VELIN_CONSTITUENTS 8

void tide_levels(int N, int T, double L[restrict T][N], const double A[restrict N][VELIN_CONSTITUENTS])
{
    for (int t = 0; t < T; t++)
        for (int q = 0; q < N; q++)
            for (int c = 0; c < VELIN_CONSTITUENTS; c++)
                L[t][q] += A[q][c];
}

void tide_smooth(int N, double L[restrict N])
{
    for (int i = 1; i < N - 1; i++)
        L[i] = 0.5 * L[i] + 0.25 * (L[i - 1] + L[i + 1]);
    for (int i = 0; i < N; i += 2)
        L[i] *= 2;
}
"""


def test_keys_follow_code_not_layout():
    o = Options(at={"N": 8, "T": 3})
    base = [s.key for s in cached.locate(TIDE, "t.c", o).sites]
    assert len(base) == 3 and len(set(base)) == 3
    relaid = TIDE.replace("    for (int t", "  // comment line\n  for (int t").replace("q++)", "q ++ )")
    assert [s.key for s in cached.locate(relaid, "t.c", o).sites] == base
    edited = TIDE.replace("L[i] *= 2;", "L[i] *= 3;")
    keys = [s.key for s in cached.locate(edited, "t.c", o).sites]
    assert keys[:2] == base[:2] and keys[2] != base[2]  # only the edited nest misses
    macro = TIDE.replace("VELIN_CONSTITUENTS 8", "VELIN_CONSTITUENTS 9")
    assert all(a != b for a, b in zip([s.key for s in cached.locate(macro, "t.c", o).sites], base, strict=True))
    other_opts = Options(at={"N": 9, "T": 3})
    assert all(a != b for a, b in zip([s.key for s in cached.locate(TIDE, "t.c", other_opts).sites], base,
                                      strict=True))
    # a statement before the loop in the same function is part of the nest's context
    prelude = TIDE.replace("{\n    for (int i = 1", "{\n    N = N - 1;\n    for (int i = 1")
    k2 = [s.key for s in cached.locate(prelude, "t.c", o).sites]
    assert k2[0] == base[0] and k2[1] != base[1]


def test_cached_equals_uncached_after_edits(cache_dir, unhurried):
    o = Options(at={"N": 8, "T": 3}, time_limit=600)
    fresh = cached.analyze_file_uncached("t.c", TIDE, o)
    cold = cached.analyze_file_cached("t.c", TIDE, o)
    warm = cached.analyze_file_cached("t.c", TIDE, o)
    assert fresh == cold == warm
    # spacing, comments and a new line above: positions move, nothing is recomputed
    moved = "// Velin harbour office\n\n" + TIDE.replace("                L[t][q] += A[q][c];",
                                                         "          /* sum */  L[t][q]  +=  A[q][c];")
    st = cache.Store()
    got = cached.analyze_file_cached("t.c", moved, o, store=st)
    assert st.writes == 1  # only the file-level entry: every nest came from the cache
    assert got == cached.analyze_file_uncached("t.c", moved, o)
    stmt = got["nests"][0]["statements"][0]
    assert stmt["line"] == 11 and stmt["text"] == "L[t][q]  +=  A[q][c]"


QUAY = """\
void quay_scan(int N, const double *depth, double *mark)
{
    for (int i = 0; i < N; i++) {
        if (depth[i] < 0.0)
            break;
        mark[i] = depth[i];
    }
}
"""


def test_cached_diagnostics_keep_structured_args_and_move_with_the_code(cache_dir):
    # TC204 names the 'break' and the loop header: both are arguments, moved with an edit
    # above the nest and rendered again, never found in the message text afterwards
    o = Options()
    cold = cached.analyze_file_cached("q.c", QUAY, o)
    brk = next(d for d in cold["diagnostics"] if d["code"] == "TC204")
    assert brk["args"]["pos"]["line"] == 5 and brk["args"]["loop"] == {
        "loop": "i", "line": 3, "column": 5, "end_line": 3, "end_column": 32}
    assert brk["message"].startswith("'break' at 5:13 can leave loop 'for (i ...)' at 3:5 early")
    assert cached.analyze_file_cached("q.c", QUAY, o) == cold == cached.analyze_file_uncached("q.c", QUAY, o)
    moved = "// Velin quay survey\n\n\n" + QUAY
    st = cache.Store()
    got = cached.analyze_file_cached("q.c", moved, o, store=st)
    assert st.writes == 1  # the nest came from the cache
    assert got == cached.analyze_file_uncached("q.c", moved, o)
    brk = next(d for d in got["diagnostics"] if d["code"] == "TC204")
    assert (brk["line"], brk["args"]["pos"]["line"], brk["args"]["loop"]["line"]) == (8, 8, 6)
    assert brk["message"].startswith("'break' at 8:13 can leave loop 'for (i ...)' at 6:5 early")


def test_one_changed_nest_is_the_only_one_analyzed(monkeypatch, unhurried):
    o = Options(at={"N": 8, "T": 3}, time_limit=600)
    cached.analyze_file_cached("t.c", TIDE, o)
    import tripcount.pipeline as pipeline

    calls = []
    real = pipeline.analyze_nest

    def counting(nest, options):
        calls.append(nest.span.line)
        return real(nest, options)

    monkeypatch.setattr(pipeline, "analyze_nest", counting)
    edited = TIDE.replace("L[i] *= 2;", "L[i] *= 3;")
    got = cached.analyze_file_cached("t.c", edited, o)
    assert calls == [16]
    assert got == cached.analyze_file_uncached("t.c", edited, o)


@pytest.mark.parametrize("share", TIME_SHARES, ids=lambda s: f"{s[0].rsplit('.', 1)[1]}.{s[1]}")
def test_nothing_cut_by_a_time_share_is_stored(monkeypatch, unhurried, share):
    # A loaded machine runs out of one share (a threshold search, the exact values, the
    # dependence pairs) long before the nest's limit: what it left out must not be kept,
    # or the next run, with time to spare, reads the poorer result from the cache.
    import importlib

    from tripcount import engine

    o = Options(at={"N": 8, "T": 3}, time_limit=600)
    text = TIDE + STRIDED_TILE
    afresh = cached.analyze_file_uncached("t.c", text, o)
    with monkeypatch.context() as m:
        m.setattr(importlib.import_module(share[0]), share[1], 1e-6)
        engine.clear_memos()
        cached.analyze_file_cached("t.c", text, o)
    engine.clear_memos()
    assert cached.analyze_file_cached("t.c", text, o) == afresh


STRIDED_TILE = """
void drift_blocks(int N, double D[restrict N][N])
{
    for (int i = 0; i < N; i += 3)
        for (int j = i; j < N; j += 2)
            D[i][j] = D[j][i] + 1.0;
}
"""


def test_use_cache_false_writes_nothing(cache_dir):
    cached.analyze_file_cached("t.c", TIDE, Options(), use_cache=False)
    assert not cache_dir.exists()


def _heavy_modules_after(argv: list[str], cache_dir: Path) -> str:
    """Run `tripcount ARGV` in a fresh interpreter; prints its status, the heavy modules it
    loaded and whether it wrote a report."""
    env = {**os.environ, "TRIPCOUNT_CACHE_DIR": str(cache_dir),
           "PYTHONPATH": os.pathsep.join([str(ROOT), str(ROOT / "tests")])}
    probe = (
        "import sys, io\n"
        "import unhurried; unhurried.install()\n"
        "from tripcount.cli import main\n"
        "out = io.StringIO()\n"
        f"status = main({argv!r}, stdout=out, stderr=io.StringIO())\n"
        "heavy = [m for m in ('islpy', 'sympy', 'tripcount.engine', 'tripcount.model') if m in sys.modules]\n"
        "print(status, heavy, len(out.getvalue()) > 200)\n"
    )
    run = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, env=env, timeout=300)
    return run.stdout.strip() + run.stderr


def test_warm_path_imports_no_engine(tmp_path, cache_dir):
    src = tmp_path / "tide.c"
    src.write_text(TIDE)
    cold = _heavy_modules_after(["check", str(src)], cache_dir)
    assert cold.startswith("0 ") and "islpy" in cold
    assert _heavy_modules_after(["check", str(src)], cache_dir).startswith("0 [] ")
    # a comment edit: nests from the cache, still no engine
    src.write_text("/* edited */\n" + TIDE)
    assert _heavy_modules_after(["check", str(src)], cache_dir).startswith("0 [] ")


def test_file_with_errors_and_unicode(cache_dir):
    text = "/* caf\u00e9 \U0001F30A */\nvoid f(int N, double *a) {\n  for (int i = 0; i < N; i++) { a[i] = \"\u00e9\"[0]; }\n" \
           "  for (int j = 0; j < N; j *= 2) a[j] = 0;\n}\n"
    o = Options(at={"N": 5})
    first = cached.analyze_file_cached("u.c", text, o)
    assert first == cached.analyze_file_uncached("u.c", text, o)
    moved = "\n" + text
    assert cached.analyze_file_cached("u.c", moved, o) == cached.analyze_file_uncached("u.c", moved, o)
    bom = "\ufeff" + moved
    assert cached.analyze_file_cached("u.c", bom, o) == cached.analyze_file_uncached("u.c", bom, o)


def test_read_source_reports_bad_bytes(tmp_path):
    p = tmp_path / "b.c"
    p.write_bytes(b"int x;\nint \xff y;\n")
    text, diag = cached.read_source(str(p))
    assert "\ufffd" in text and diag["code"] == "TC190" and (diag["line"], diag["column"]) == (2, 5)


def test_results_cut_short_by_time_are_not_kept():
    # a time limit depends on the machine's load: such results are computed again; the
    # decision reads the diagnostics' structured arguments, never their message text
    from tripcount.diagnostics.engine import AnalysisLimit, FileBudgetSpent, FormulaLimit
    from tripcount.diagnostics.internal import InternalError
    from tripcount.diagnostics.memory import FootprintLimit

    span = Span.point(3, 5)
    keep = FormulaLimit(span, what="S1", reason="more than 256 pieces", fallback="", time_bound=False)
    assert not cachekeys.depends_on_time(keep.to_dict())
    worded = FormulaLimit(span, what="S1", reason="time of day", fallback="", time_bound=False).to_dict()
    assert not cachekeys.depends_on_time(worded)  # the word "time" alone decides nothing
    for d in (AnalysisLimit(span, reason="time limit", kept="the counts"),
              FileBudgetSpent(span, seconds=2.0, factor=3),
              InternalError(span, what="x"),
              FormulaLimit(span, what="S1", reason="time limit of 2 s exceeded (sum)", fallback="", time_bound=True),
              FootprintLimit(span, what="some working sets", reason="no formula within 0.5 s", fallback="",
                             time_bound=True)):
        assert cachekeys.depends_on_time(d.to_dict()), d


def test_an_entry_without_its_summary_is_a_miss(tmp_path):
    # an entry written by other code (or cut short) must be computed again, never crash the gate
    import shutil

    st = cache.Store(str(tmp_path))
    o = Options(at={"N": 8})
    first = cached.analyze_file_cached("t.c", TIDE, o, store=st)
    for dirpath, _dirs, files in os.walk(os.path.join(st.root, "nest")):
        for name in files:
            p = os.path.join(dirpath, name)
            with open(p, encoding="utf-8") as f:
                e = json.load(f)
            e.pop("summary", None)
            with open(p, "w", encoding="utf-8") as f:
                json.dump(e, f)
    shutil.rmtree(os.path.join(st.root, "file"), ignore_errors=True)
    assert cached.analyze_file_cached("t.c", TIDE, o, store=st) == first


# --------------------------------------------------------------------------
# Damaged entries that still parse as JSON


ROBUST = Path(__file__).parent / "inputs" / "robustness"

DAMAGE = {
    "deep": lambda e: "[" * 100_000,  # json.load: RecursionError
    "key only": lambda e: json.dumps({"key": e["key"]}),  # used to make every nest vanish
    "nest of the wrong type": lambda e: json.dumps({**e, "nest": [1, 2]}),
    "summary of the wrong type": lambda e: json.dumps({**e, "summary": "x"}),
    "summary with bad fields": lambda e: json.dumps({**e, "summary": {**e["summary"], "loops": [{"index": "x"}]}}),
    "anchors not numbers": lambda e: json.dumps({**e, "anchors": ["a", None]}),
    "anchors too many": lambda e: json.dumps({**e, "anchors": e["anchors"] + [1, 1]}),
    "diagnostics not a list": lambda e: json.dumps({**e, "diagnostics": {"line": 1}}),
    "diagnostic without a position": lambda e: json.dumps({**e, "diagnostics": [{"code": "TC301"}]}),
    "no nest but a summary": lambda e: json.dumps({**e, "nest": None}),
}


@pytest.mark.parametrize("damage", sorted(DAMAGE))
def test_damaged_nest_entries_are_misses(cache_dir, run_cli, damage):
    src = str(ROBUST / "tide_gauge_cache.c")
    status, clean, _ = run_cli("check", "--format", "json", "--no-cache", src)
    assert status == 0 and len(json.loads(clean)["files"][0]["nests"]) == 2
    assert run_cli("check", "--format", "json", src)[1] == clean  # fills the cache
    entries = sorted((cache_dir / "v1" / "nest").rglob("*.json"))
    assert len(entries) == 2
    for p in entries:
        p.write_text(DAMAGE[damage](json.loads(p.read_text())))
    for p in (cache_dir / "v1" / "file").rglob("*.json"):
        p.unlink()  # the whole-file entry would answer before the nest entries are read
    status, out, err = run_cli("check", "--format", "json", src)
    assert status == 0, err
    assert "TC9" not in out and "internal error" not in err
    assert out == clean  # both nests, as computed afresh
    status, _, err = run_cli("check", src)
    assert status == 0 and "2 nest(s)" in err


def test_damaged_file_entries_are_misses(cache_dir, run_cli):
    src = str(ROBUST / "tide_gauge_cache.c")
    clean = run_cli("check", "--format", "json", src)[1]
    (entry,) = sorted((cache_dir / "v1" / "file").rglob("*.json"))
    e = json.loads(entry.read_text())
    for bad in ({"key": e["key"]}, {**e, "file": {**e["file"], "nests": []}},
                {**e, "file": {**e["file"], "summaries": [{"loops": 5}] * 2}}, "[" * 100_000):
        entry.write_text(bad if isinstance(bad, str) else json.dumps(bad))
        status, out, _ = run_cli("check", "--format", "json", src)
        assert status == 0 and out == clean and "TC9" not in out


# --------------------------------------------------------------------------
# The text report of `analyze`, kept per file


def _text_entries(cache_dir: Path) -> list[Path]:
    return sorted((cache_dir / "v1" / "text").rglob("*.json"))


def test_text_report_from_the_cache_equals_the_fresh_one(cache_dir, run_cli, tmp_path):
    src = tmp_path / "tide.c"
    src.write_text(TIDE)
    fresh = run_cli("analyze", "--no-cache", "--at", "*=1000", str(src))
    assert not cache_dir.exists()
    cold = run_cli("analyze", "--at", "*=1000", str(src))
    assert len(_text_entries(cache_dir)) == 1
    warm = run_cli("analyze", "--at", "*=1000", str(src))
    assert fresh == cold == warm and fresh[0] == 0 and "nest(s)" in fresh[1]
    # another path with the same text is another report (every line names the path)
    other = tmp_path / "tide_copy.c"
    other.write_text(TIDE)
    status, out, _ = run_cli("analyze", "--at", "*=1000", str(other))
    assert status == 0 and str(other) in out and f"{src}:" not in out
    # other options, another entry; --verify is never answered from the cache
    run_cli("analyze", "--at", "*=500", str(src))
    assert len(_text_entries(cache_dir)) == 3
    run_cli("analyze", "--verify", "--at", "*=10", str(src))
    assert len(_text_entries(cache_dir)) == 3


def test_warm_text_report_imports_no_engine(tmp_path, cache_dir):
    src = tmp_path / "tide.c"
    src.write_text(TIDE)
    argv = ["analyze", "--at", "*=100", str(src)]
    cold = _heavy_modules_after(argv, cache_dir)
    assert cold.startswith("0 ") and "islpy" in cold, cold
    assert _heavy_modules_after(argv, cache_dir) == "0 [] True"


TEXT_DAMAGE = {
    "key only": lambda e: {"key": e["key"]},
    "terminal escape in the text": lambda e: {**e, "report": {**e["report"], "text": "\x1b]0;owned\x07" + e["report"]["text"]}},
    "nests not a number": lambda e: {**e, "report": {**e["report"], "nests": "3"}},
    "codes not codes": lambda e: {**e, "report": {**e["report"], "codes": ["rm -rf"]}},
    "ranking time a string": lambda e: {**e, "report": {**e["report"], "entries": [
        {"line": 1, "function": "f", "roofline": {**{k: None for k in e["report"]["entries"][0]["roofline"]},
                                                   "seconds": "soon"}}]}},
    "line of a ranking row zero": lambda e: {**e, "report": {**e["report"], "entries": [
        {**e["report"]["entries"][0], "line": 0}]}},
}


@pytest.mark.parametrize("damage", sorted(TEXT_DAMAGE))
def test_damaged_text_entries_are_misses(cache_dir, run_cli, tmp_path, damage):
    src = tmp_path / "tide.c"
    src.write_text(TIDE)
    clean = run_cli("analyze", "--at", "*=100", str(src))
    (entry,) = _text_entries(cache_dir)
    e = json.loads(entry.read_text())
    assert e["report"]["entries"], "the damage needs a ranking row to change"
    entry.write_text(json.dumps(TEXT_DAMAGE[damage](e)))
    again = run_cli("analyze", "--at", "*=100", str(src))
    assert again == clean and "\x1b" not in again[1] and "TC9" not in again[1]
