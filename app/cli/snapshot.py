"""``resweep snapshot``: render the viewer's picture of one entity-frame off screen (no Qt)."""
from __future__ import annotations

import sys

from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE


def run(args) -> int:
    """``resweep snapshot TRACE --frame N [--entity ID] [--size WxH] -o PNG``: render off screen.

    Default entity: the first with a divergence at that frame, else the first active one. Bad
    frame, entity or output path: one line on stderr, status 2 (typed errors leave through cli).
    """
    import os
    from pathlib import Path

    from resweep.core.solve.settings import SolverSettings

    from resweep.core.analysis.frames import TraceSession

    out = Path(args.output)
    folder = out.parent if str(out.parent) else Path(".")
    if out.is_dir() or not folder.is_dir() or not os.access(folder, os.W_OK) or (
            out.exists() and not os.access(out, os.W_OK)):
        why = ("is a directory" if out.is_dir() else "folder does not exist" if not folder.is_dir()
               else "is not writable")
        sys.stderr.write(f"resweep snapshot: {args.output}: cannot write the picture ({why})\n")
        return EXIT_USAGE
    from resweep.core.format.vet import vet
    vet(args.trace)  # isolated first open
    settings = SolverSettings(tolerance=args.tolerance, skin=args.skin, passes=args.passes,
                              precision=args.precision)
    with TraceSession(args.trace, settings) as session:
        if out.exists() and out.resolve() == Path(session.trace.path).resolve():
            sys.stderr.write(f"resweep snapshot: {args.output}: is the input trace; pick another output\n")
            return EXIT_USAGE
        from resweep.app.scene.picture import pick_column, render_picture, save_png
        pick_column(session, args.frame, args.entity)  # bad frame or id fails before the render
        img = render_picture(session, args.frame, args.entity, tuple(args.size))
    try:
        save_png(img, out)
    except OSError as exc:
        sys.stderr.write(f"resweep snapshot: {args.output}: cannot write the picture: {exc.strerror or exc}\n")
        return EXIT_USAGE
    return EXIT_OK
