"""``resweep view`` and ``resweep snapshot`` entry points (the GUI modules load lazily)."""
from __future__ import annotations

import sys

from .cli import EXIT_USAGE


def run_view(args) -> int:
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
    from .window import run_window
    return run_window(args.trace, args.frame, args.entity)


def run_snapshot(args) -> int:
    """``resweep snapshot TRACE --frame N [--entity ID] [--size WxH] -o PNG``: render off screen.

    Default entity: the first with a divergence at that frame, else the first active one. Bad
    frame, entity or output path: one line on stderr, status 2 (typed errors leave through cli).
    """
    import os
    from pathlib import Path

    from resweep.core.solver import SolverSettings

    from .session import TraceSession

    out = Path(args.output)
    folder = out.parent if str(out.parent) else Path(".")
    if out.is_dir() or not folder.is_dir() or not os.access(folder, os.W_OK) or (
            out.exists() and not os.access(out, os.W_OK)):
        why = ("is a directory" if out.is_dir() else "folder does not exist" if not folder.is_dir()
               else "is not writable")
        sys.stderr.write(f"resweep snapshot: {args.output}: cannot write the picture ({why})\n")
        return EXIT_USAGE
    settings = SolverSettings(tolerance=args.tolerance, skin=args.skin, passes=args.passes,
                              precision=args.precision)
    with TraceSession(args.trace, settings) as session:
        if out.exists() and out.resolve() == Path(session.trace.path).resolve():
            sys.stderr.write(f"resweep snapshot: {args.output}: is the input trace; pick another output\n")
            return EXIT_USAGE
        from .snapshot import pick_column, render_picture, save_png
        pick_column(session, args.frame, args.entity)  # bad frame or id fails before the render
        img = render_picture(session, args.frame, args.entity, tuple(args.size))
    try:
        save_png(img, out)
    except OSError as exc:
        sys.stderr.write(f"resweep snapshot: {args.output}: cannot write the picture: {exc.strerror or exc}\n")
        return EXIT_USAGE
    return 0
