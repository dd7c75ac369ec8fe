"""``resweep view``: the desktop viewer (the Qt modules load only here)."""
from __future__ import annotations

import sys

from resweep.app.cli.exits import EXIT_USAGE

from resweep.app.cli.solver_args import SOLVER_OPTIONS


def run(args) -> int:
    """``resweep view [TRACE] [--frame N] [--entity ID] [solver options]``: the desktop viewer
    (the bundled demo without TRACE).

    The trace, frame, entity and settings are checked first, as ``snapshot`` checks them (one
    line, status 2). Solver options given override the viewer's remembered settings for this run.
    Without a usable display this prints one line pointing to ``resweep snapshot`` and returns 2;
    Qt aborts the process when no platform plugin loads, so a child process tries first.
    """
    import os
    import subprocess
    from pathlib import Path

    from resweep.sample_traces import demo_path

    path = args.trace if args.trace is not None else demo_path()
    if not Path(path).is_file():
        what = "is a directory, not a trace file" if Path(path).is_dir() else "no such file"
        sys.stderr.write(f"resweep view: {path}: {what}\n")
        return EXIT_USAGE
    overrides = {k: getattr(args, k) for k in SOLVER_OPTIONS if getattr(args, k) is not None}
    if overrides.get("axis_order"):
        overrides["axis_order"] = overrides["axis_order"].lower()
    _validate(path, args.frame, args.entity, overrides)
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
    from resweep.app.viewer.window import run_window
    return run_window(path, args.frame, args.entity, overrides, follow=getattr(args, "follow", False))


def _validate(path, frame: int, entity_id, overrides: dict) -> None:
    """Raise the core's typed error (one line at the boundary) for a malformed trace, a frame out
    of range, an unknown entity id or a setting out of range."""
    from resweep.core.analysis.frames import TraceSession
    from resweep.core.solve.settings import SolverSettings

    SolverSettings(**overrides)
    with TraceSession(path) as session:  # a malformed file raises the format's one-line error
        session.check_frame(frame)
        if entity_id is not None:
            session.column_of(entity_id)
