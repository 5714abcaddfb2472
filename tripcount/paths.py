# Where tripcount keeps its own files (the result cache and the compiled
# grammar): $TRIPCOUNT_CACHE_DIR, else $XDG_CACHE_HOME/tripcount, else
# ~/.cache/tripcount -- never inside the user's source tree. Shared by the
# front end and the result cache, so it depends on nothing else.

from __future__ import annotations

import os

ENV_DIR = "TRIPCOUNT_CACHE_DIR"


def cache_dir() -> str:
    """The cache directory (not created here)."""
    env = os.environ.get(ENV_DIR)
    if env:
        return os.path.abspath(os.path.expanduser(env))
    xdg = os.environ.get("XDG_CACHE_HOME")
    base = xdg if xdg and os.path.isabs(xdg) else os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "tripcount")
