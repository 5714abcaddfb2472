# Where tripcount keeps its own files (the result cache and the compiled
# grammar): $TRIPCOUNT_CACHE_DIR, else $XDG_CACHE_HOME/tripcount, else
# ~/.cache/tripcount -- never inside the user's source tree. Like XDG's
# variables, a relative TRIPCOUNT_CACHE_DIR is ignored: resolved against the
# working directory it would put the cache inside whatever tree the command
# runs in. Shared by the front end and the result cache, so it depends on
# nothing else.

from __future__ import annotations

import os

ENV_DIR = "TRIPCOUNT_CACHE_DIR"


def cache_dir() -> str:
    """The cache directory (not created here)."""
    env = os.path.expanduser(os.environ.get(ENV_DIR) or "")
    if os.path.isabs(env):
        return os.path.normpath(env)
    xdg = os.environ.get("XDG_CACHE_HOME")
    base = xdg if xdg and os.path.isabs(xdg) else os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "tripcount")


def is_inside(path: str, roots: list[str]) -> bool:
    """True when `path` is one of `roots` or lies under one (symlinks resolved)."""
    real = os.path.realpath(path)
    for r in roots:
        root = os.path.realpath(r)
        if real == root or real.startswith(root.rstrip(os.sep) + os.sep):
            return True
    return False
