"""The per-user cache folder of resweep (no numba here: the isolated validator reads it too)."""
from __future__ import annotations

from pathlib import Path


def user_cache_root() -> Path:
    """The platform's user cache folder for resweep (``~/.cache/resweep`` on Linux)."""
    try:
        from platformdirs import user_cache_dir
        return Path(user_cache_dir("resweep", appauthor=False))
    except ImportError:  # pragma: no cover - platformdirs is a dependency
        return Path.home() / ".cache" / "resweep"
