"""``resweep view``: the desktop viewer (the Qt modules load only here)."""
from __future__ import annotations

import sys

from resweep.app.cli.exits import EXIT_USAGE


def run(args) -> int:
    """``resweep view [TRACE] [--frame N] [--entity ID]``: the desktop viewer (demo trace without TRACE).

    Without a usable display this prints one line pointing to ``resweep snapshot`` and returns 2;
    Qt aborts the process when no platform plugin loads, so a child process tries first.
    """
    import os
    import subprocess
    from pathlib import Path

    if args.trace is not None and not Path(args.trace).is_file():
        what = "is a directory, not a trace file" if Path(args.trace).is_dir() else "no such file"
        sys.stderr.write(f"resweep view: {args.trace}: {what}\n")
        return EXIT_USAGE
    hint = "use 'resweep snapshot TRACE --frame N -o picture.png' to render without one"
    if sys.platform.startswith("linux") and not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
        sys.stderr.write(f"resweep view: no display (DISPLAY and WAYLAND_DISPLAY are unset); {hint}\n")
        return EXIT_USAGE
    probe = "from PyQt6.QtWidgets import QApplication; QApplication(['resweep'])"
    try:
        ok = subprocess.run([sys.executable, "-c", probe], capture_output=True, timeout=60).returncode == 0
    except (OSError, subprocess.TimeoutExpired):
        ok = False
    if not ok:
        sys.stderr.write(f"resweep view: no display could be opened (the Qt platform plugin failed to "
                         f"start); {hint}\n")
        return EXIT_USAGE
    from resweep.app.cli.solver_args import settings_from
    from resweep.app.viewer.window import run_window
    from resweep.core.solve.settings import SolverSettings
    settings = settings_from(args)  # bad values fail here, before a window opens
    # without solver options the viewer keeps the settings stored from the last session
    return run_window(args.trace, args.frame, args.entity, None if settings == SolverSettings() else settings)
