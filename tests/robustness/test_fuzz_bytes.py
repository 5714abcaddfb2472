# Robustness (c): raw bytes as source files. Invariants: no exception escapes
# the pipeline or `main`, no internal-error diagnostic, valid diagnostic
# locations, formulas equal isl enumeration, and the same exit status in every
# output format. Also: the tool never writes or changes the files it analyzes.

from __future__ import annotations

import hashlib
import json
import os
import shutil

import pytest
from hypothesis import given, settings
from strategies import CI, CORPUS, SLOW, check_bytes, raw_bytes, run_main


@settings(CI)
@given(raw_bytes)
def test_raw_bytes_keep_the_invariants(tmp_path_factory, data):
    check_bytes(data, str(tmp_path_factory.mktemp("bytes") / "input.c"))


@settings(CI, max_examples=6)
@given(raw_bytes)
def test_exit_status_is_the_same_in_every_format(tmp_path_factory, data):
    path = str(tmp_path_factory.mktemp("fmt") / "input.c")
    with open(path, "wb") as f:
        f.write(data)
    statuses = set()
    for fmt in ("text", "json", "sarif"):
        status, out, _ = run_main(["analyze", path, "--format", fmt, "--no-cache", "--time-limit", "3"])
        statuses.add(status)
        if fmt != "text":
            json.loads(out)
    assert len(statuses) == 1, statuses


@pytest.mark.slow
@settings(SLOW)
@given(raw_bytes)
def test_raw_bytes_keep_the_invariants_slow(tmp_path_factory, data):
    check_bytes(data, str(tmp_path_factory.mktemp("bytes") / "input.c"))


def _snapshot(root: str) -> dict[str, tuple[int, str]]:
    out = {}
    for dirpath, _dirs, files in os.walk(root):
        for name in files:
            p = os.path.join(dirpath, name)
            with open(p, "rb") as f:
                out[os.path.relpath(p, root)] = (os.stat(p).st_mtime_ns, hashlib.sha256(f.read()).hexdigest())
    return out


def test_analyze_and_check_change_no_user_file(tmp_path, monkeypatch, private_cache):
    work = tmp_path / "project"  # the tool's own cache is tmp_path/cache, outside it
    shutil.copytree(CORPUS, work / "corpus")
    (work / "notes.txt").write_text("not C\n")
    monkeypatch.chdir(work)
    before = _snapshot(str(work))
    files = sorted(str(work / "corpus" / n) for n in os.listdir(work / "corpus") if n.endswith(".c"))
    status, _, _ = run_main(["analyze", str(work / "corpus"), "--at", "N=8,M=6", "--time-limit", "5"])
    assert status == 0
    run_main(["analyze", files[0], "--format", "sarif", "--time-limit", "5"])
    run_main(["check", *files[:3], "--time-limit", "5"])
    out = tmp_path / "report.json"  # an output asked for: the only file written outside the cache
    run_main(["analyze", files[1], "--format", "json", "-o", str(out), "--time-limit", "5"])
    assert out.exists()
    assert _snapshot(str(work)) == before  # same files, same mtimes, same bytes
