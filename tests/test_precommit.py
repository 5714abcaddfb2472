# Test of .pre-commit-hooks.yaml with the real pre-commit framework.
#
# pre-commit installs a hook from a git repository at a revision, so the test
# makes one: a temporary repository holding a copy of the files needed to
# pip-install this checkout, committed. A second temporary repository (the
# user's, with budgets in its pyproject.toml) uses it as a hook and commits:
# a compliant nest passes, a nest over budget fails with our diagnostic, and a
# nest whose leading term grew against HEAD fails with the regression one.
#
# pre-commit builds a virtualenv and pip-installs the package once (about a
# minute); the commits share it through one module-scoped environment.

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pre_commit  # noqa: F401 - the framework under test (a test extra): missing, the module fails
import pytest

ROOT = Path(__file__).resolve().parent.parent

pytestmark = [
    pytest.mark.precommit,
    pytest.mark.xdist_group("precommit"),  # one hook environment for both commits: one worker
    pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed"),
]

PACKAGE_FILES = ["pyproject.toml", "README.md", ".pre-commit-hooks.yaml"]
PACKAGE_DIRS = ["tripcount", "grammar"]


def git(cwd: Path, *args: str, check: bool = True, env: dict | None = None) -> subprocess.CompletedProcess:
    base = {**os.environ, "GIT_AUTHOR_NAME": "Velin Harbour", "GIT_AUTHOR_EMAIL": "harbour@velin.invalid",
            "GIT_COMMITTER_NAME": "Velin Harbour", "GIT_COMMITTER_EMAIL": "harbour@velin.invalid"}
    return subprocess.run(["git", *args], cwd=cwd, capture_output=True, text=True, check=check,
                          env={**base, **(env or {})}, timeout=600)


def make_hook_repo(dest: Path) -> str:
    """A committed copy of this checkout's installable files; returns its HEAD."""
    dest.mkdir()
    for name in PACKAGE_FILES:
        if (ROOT / name).exists():
            shutil.copy2(ROOT / name, dest / name)
    if not (dest / "README.md").exists():
        (dest / "README.md").write_text("tripcount\n")
    for d in PACKAGE_DIRS:
        shutil.copytree(ROOT / d, dest / d, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    git(dest, "init", "-q", "-b", "main")
    git(dest, "config", "commit.gpgsign", "false")
    git(dest, "add", "-A")
    git(dest, "commit", "-q", "-m", "tripcount hook under test")
    return git(dest, "rev-parse", "HEAD").stdout.strip()


SQUARE = """\
/* Velin wave basin: relax the surface heights once. */
void basin_relax(int N, double H[restrict N][N])
{
    for (int i = 1; i < N - 1; i++)
        for (int j = 1; j < N - 1; j++)
            H[i][j] = 0.25 * (H[i - 1][j] + H[i + 1][j] + H[i][j - 1] + H[i][j + 1]);
}
"""
# Over budget: a third loop (degree 3 > max_degree 2).
CUBIC = SQUARE.replace(
    "            H[i][j] = 0.25 * (H[i - 1][j] + H[i + 1][j] + H[i][j - 1] + H[i][j + 1]);",
    "            for (int k = 0; k < N; k++)\n                H[i][j] += H[i][k] * H[k][j];")
# Same degree, but the leading term of the work is 4x larger than at HEAD.
GROWN = SQUARE.replace("for (int j = 1; j < N - 1; j++)", "for (int j = 1; j < 4 * N - 1; j++)")


@pytest.fixture(scope="module")
def user_repo(tmp_path_factory):
    base = tmp_path_factory.mktemp("precommit")
    rev = make_hook_repo(base / "hook")
    repo = base / "user"
    repo.mkdir()
    git(repo, "init", "-q", "-b", "main")
    git(repo, "config", "commit.gpgsign", "false")
    (repo / ".pre-commit-config.yaml").write_text(
        f"repos:\n  - repo: {(base / 'hook').as_posix()}\n    rev: {rev}\n    hooks:\n      - id: tripcount-check\n")
    (repo / "pyproject.toml").write_text('[tool.tripcount]\nmax_degree = 2\nat = {N = 256}\n')
    env = {
        "PRE_COMMIT_HOME": str(base / "pre-commit-home"),  # a private hook environment, not the user's
        "TRIPCOUNT_CACHE_DIR": str(base / "tripcount-cache"),
        "PRE_COMMIT_COLOR": "never",
    }
    subprocess.run([sys.executable, "-m", "pre_commit", "install"], cwd=repo, check=True, capture_output=True,
                   env={**os.environ, **env}, timeout=120)
    return repo, env


def commit(repo: Path, env: dict, name: str, text: str, message: str) -> subprocess.CompletedProcess:
    (repo / name).write_text(text)
    git(repo, "add", name, ".pre-commit-config.yaml", "pyproject.toml", env=env)
    return git(repo, "commit", "-m", message, check=False, env=env)


def test_hook_passes_compliant_and_fails_over_budget(user_repo):
    repo, env = user_repo
    ok = commit(repo, env, "basin.c", SQUARE, "relax the basin")
    assert ok.returncode == 0, ok.stdout + ok.stderr
    assert "tripcount check" in ok.stdout + ok.stderr and "Passed" in ok.stdout + ok.stderr
    bad = commit(repo, env, "basin.c", CUBIC, "cubic update")
    out = bad.stdout + bad.stderr
    assert bad.returncode != 0, out
    assert "basin.c:4:5: error: work of this nest has degree 3" in out and "[TC601]" in out
    assert git(repo, "rev-list", "--count", "HEAD").stdout.strip() == "1"  # the commit was refused
    git(repo, "checkout", "--", ".", check=False)
    git(repo, "reset", "-q", "--hard", "HEAD")


def test_hook_flags_regression_against_head(user_repo):
    repo, env = user_repo
    if git(repo, "rev-parse", "--verify", "-q", "HEAD", check=False).returncode != 0:
        assert commit(repo, env, "basin.c", SQUARE, "relax the basin").returncode == 0
    grown = commit(repo, env, "basin.c", GROWN, "wider basin")
    out = grown.stdout + grown.stderr
    assert grown.returncode != 0, out
    assert "[TC611]" in out and "since HEAD" in out
    # accepted on purpose with a comment of our own syntax on the loop line
    allowed = GROWN.replace("for (int i = 1; i < N - 1; i++)",
                            "for (int i = 1; i < N - 1; i++)  // tripcount: allow growth")
    ok = commit(repo, env, "basin.c", allowed, "wider basin, on purpose")
    assert ok.returncode == 0, ok.stdout + ok.stderr
