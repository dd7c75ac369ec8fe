"""``resweep view`` and ``resweep snapshot`` entry points (the GUI modules load lazily)."""
from __future__ import annotations

import sys

from .cli import EXIT_USAGE


def run_view(args) -> int:
    sys.stderr.write("resweep view: the desktop viewer is not built yet\n")
    return EXIT_USAGE


def run_snapshot(args) -> int:
    sys.stderr.write("resweep snapshot: not built yet\n")
    return EXIT_USAGE
