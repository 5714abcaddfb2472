# Where tripcount keeps its files: never inside the user's tree by accident.

from __future__ import annotations

import os

from tripcount.paths import cache_dir, is_inside


def test_relative_cache_dir_is_ignored(monkeypatch, tmp_path):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("XDG_CACHE_HOME", raising=False)
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", "cache-here")
    assert cache_dir() == str(tmp_path / "home" / ".cache" / "tripcount")
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "abs" / ".." / "mine"))
    assert cache_dir() == str(tmp_path / "mine")
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", "~/c")
    assert cache_dir() == str(tmp_path / "home" / "c")


def test_is_inside_resolves_symlinks(tmp_path):
    tree = tmp_path / "src"
    (tree / "sub").mkdir(parents=True)
    link = tmp_path / "alias"
    os.symlink(tree, link)
    assert is_inside(str(link / "sub"), [str(tree)])
    assert is_inside(str(tree), [str(link)])
    assert not is_inside(str(tmp_path / "srcx"), [str(tree)])
    assert not is_inside(str(tmp_path), [str(tree)])
