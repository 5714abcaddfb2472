# The baseline of the gate: which revision a file is compared with, its text
# there (git), its analysis, and which of its nests is the counterpart of
# which current nest.

from __future__ import annotations

import difflib
import os
import subprocess
from dataclasses import dataclass, field
from typing import Any

from tripcount.analysis.summary import NestSummary
from tripcount.gate.budgets import Budgets
from tripcount.sources import SOURCE_SUFFIXES


def _signature(n: NestSummary) -> str:
    loops = ",".join(f"{lp.var}@{lp.depth}" for lp in n.loops)
    stmts = ";".join(" ".join(s.text.split()) for s in n.statements)
    return loops + "|" + stmts


def match_nests(old: list[NestSummary], new: list[NestSummary]) -> list[tuple[int, int]]:
    """Pairs (old index, new index) of counterpart nests.

    Within each function: by ordinal when both versions have as many nests;
    otherwise identical nests (same loops and statement texts) pair in order
    first, and each remaining new nest takes the unmatched old nest nearest
    in line (after the typical shift of the pairs already made).
    """
    pairs: list[tuple[int, int]] = []
    funcs: dict[str, tuple[list[int], list[int]]] = {}
    for i, n in enumerate(old):
        funcs.setdefault(n.function, ([], []))[0].append(i)
    for j, n in enumerate(new):
        funcs.setdefault(n.function, ([], []))[1].append(j)
    for _fn, (oi, nj) in funcs.items():
        if not oi or not nj:
            continue
        if len(oi) == len(nj):
            pairs.extend(zip(oi, nj, strict=True))
            continue
        sm = difflib.SequenceMatcher(a=[_signature(old[i]) for i in oi], b=[_signature(new[j]) for j in nj],
                                     autojunk=False)
        local: list[tuple[int, int]] = []
        for blk in sm.get_matching_blocks():
            for k in range(blk.size):
                local.append((oi[blk.a + k], nj[blk.b + k]))
        used_o = {a for a, _ in local}
        used_n = {b for _, b in local}
        shifts = sorted(new[b].span.line - old[a].span.line for a, b in local)
        shift = shifts[len(shifts) // 2] if shifts else 0
        for j in nj:
            if j in used_n:
                continue
            cands = [i for i in oi if i not in used_o]
            if not cands:
                break
            i = min(cands, key=lambda i: (abs(old[i].span.line + shift - new[j].span.line), i))
            used_o.add(i)
            local.append((i, j))
        pairs.extend(local)
    return sorted(pairs, key=lambda p: p[1])


# --------------------------------------------------------------------------
# git


class GitError(Exception):
    """git is missing or failed in a way that is not 'file absent at that revision'."""


# Repository settings that make git run programs of the repository's choosing
# (a cloned or downloaded repository can set them in .git/config): the gate
# reads the index and old blobs only, so it switches them all off.
_SAFE_GIT = ("--no-pager", "-c", "core.fsmonitor=false", "-c", "core.hooksPath=/dev/null",
             "-c", "diff.external=", "-c", "core.untrackedCache=false", "-c", "core.sshCommand=",
             "-c", "credential.helper=", "-c", "protocol.allow=never")


def git_run(args: list[str], cwd: str) -> subprocess.CompletedProcess[bytes]:
    """Run git with the repository's hooks and helper programs disabled (GitError
    when git is missing or hangs)."""
    env = {k: v for k, v in os.environ.items() if k not in ("GIT_EXTERNAL_DIFF", "GIT_PAGER", "PAGER")}
    env["GIT_OPTIONAL_LOCKS"] = "0"
    try:
        return subprocess.run(["git", *_SAFE_GIT, *args], cwd=cwd, capture_output=True, timeout=60,
                              stdin=subprocess.DEVNULL, env=env)
    except FileNotFoundError as exc:
        raise GitError("git is not installed") from exc
    except subprocess.TimeoutExpired as exc:
        raise GitError("git did not answer within 60 s") from exc


@dataclass
class Git:
    """Per-run memo of git questions (one subprocess per repository, not per file)."""

    _tops: dict[str, str | None] = field(default_factory=dict)
    _revs: dict[tuple[str, str], str | None] = field(default_factory=dict)

    def toplevel(self, directory: str) -> str | None:
        """The work tree containing `directory`, or None outside git."""
        if directory not in self._tops:
            try:
                r = git_run(["rev-parse", "--show-toplevel"], directory)
            except GitError:
                self._tops[directory] = None
            else:
                self._tops[directory] = os.path.realpath(r.stdout.decode().strip()) if r.returncode == 0 else None
        return self._tops[directory]

    def resolve(self, top: str, rev: str) -> str | None:
        """The commit `rev` names in the repository at `top`, or None."""
        if (top, rev) not in self._revs:
            r = git_run(["rev-parse", "--verify", "--quiet", rev + "^{commit}"], top)
            self._revs[(top, rev)] = r.stdout.decode().strip() if r.returncode == 0 else None
        return self._revs[(top, rev)]

    def show(self, top: str, commit: str, path: str) -> str | None:
        """The file's text at `commit`, or None when it did not exist there."""
        rel = os.path.relpath(os.path.realpath(path), top).replace(os.sep, "/")
        # cat-file, not show: show may run the repository's textconv filters
        r = git_run(["cat-file", "blob", f"{commit}:{rel}"], top)
        if r.returncode != 0:
            return None
        return r.stdout.decode("utf-8", errors="replace")




def staged_sources(git: Git) -> list[str]:
    """The C files staged in the git index of the working directory's repository."""
    top = git.toplevel(os.getcwd())
    if top is None:
        return []
    r = git_run(["diff", "--cached", "--name-only", "-z", "--diff-filter=ACMR"], top)
    names = [n for n in r.stdout.decode("utf-8", "replace").split("\0") if n.endswith(SOURCE_SUFFIXES)]
    return [os.path.relpath(os.path.join(top, n)) for n in names]


def baseline_rev(given: str | None, budgets: Budgets, staged: bool = False) -> tuple[str | None, str]:
    """The revision to compare a file with, and where it came from: 'cli', 'config' or 'default'.

    The command line wins, then `baseline` in [tool.tripcount], then the
    defaults: under pre-push the remote's revision, under pre-commit or when
    checking the staged files (`staged`: `check` without files) HEAD;
    otherwise no baseline, and git is not run at all.
    """
    if given:
        rev = given
        return (None, "cli") if rev.lower() == "none" else (rev, "cli")
    if budgets.baseline:
        return (None, "config") if budgets.baseline.lower() == "none" else (budgets.baseline, "config")
    if os.environ.get("PRE_COMMIT_FROM_REF"):  # pre-push: compare with what the remote has
        return os.environ["PRE_COMMIT_FROM_REF"], "default"
    if os.environ.get("PRE_COMMIT") or staged:  # pre-commit checks staged files
        return "HEAD", "default"
    return None, "default"


class BaselineError(Exception):
    """An explicit --baseline that cannot be used (exit status 2)."""


def baseline_nests(path: str, rev: str, origin: str, git: Git, options: Any,
                    use_cache: bool) -> tuple[list[NestSummary], str | None]:
    """The nests of the baseline version of `path` (empty when the file is new there).

    A revision from the command line that cannot be used is an error (exit
    2); one from the configuration gives a TC630 warning; the default one
    (HEAD) silently means nothing to compare with, e.g. before the first commit.
    """
    from tripcount.cached import analyze_file_cached
    from tripcount.gate.readings import summaries_of

    def problem(reason: str) -> tuple[list[NestSummary], str | None]:
        if origin == "cli":
            raise BaselineError(f"--baseline {rev}: {reason}")
        return [], (f"baseline = '{rev}' in the configuration: {reason}" if origin == "config" else None)

    try:
        top = git.toplevel(os.path.dirname(os.path.abspath(path)))
        if top is None:
            return problem(f"{path} is not in a git work tree")
        commit = git.resolve(top, rev)
        if commit is None:
            return problem(f"no such revision in {top}")
        old_text = git.show(top, commit, path)
    except GitError as exc:
        return problem(str(exc))
    if old_text is None:
        return [], None  # a new file: budgets only
    old = analyze_file_cached(path, old_text, options, use_cache=use_cache)
    return summaries_of(old), None


