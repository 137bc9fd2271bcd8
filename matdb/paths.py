"""Where matdb keeps files it can always rebuild (caches)."""

from __future__ import annotations

import os
from pathlib import Path


def cache_root() -> Path:
    """``MATDB_CACHE_DIR``, else the user's cache folder for matdb (not created here)."""
    env = os.environ.get("MATDB_CACHE_DIR")
    if env:
        return Path(env)
    from platformdirs import user_cache_dir  # lazy: only when no folder is given

    return Path(user_cache_dir("matdb"))
