"""``resweep snapshot``: render the viewer's picture of entity-frames off screen (no Qt)."""
from __future__ import annotations

import os
import sys
from pathlib import Path

from resweep.app.cli.solver_args import settings_from
from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import output_problem

#: Every picture is written and closed when ``run`` returns: the process may skip the
#: interpreter's clean-up (see ``main.leave_now``).
QUICK_EXIT = True

#: Suffixes of the pictures snapshot writes (the scene's PICTURE_TYPES; restated here so that a
#: refused name fails before pyvista loads, and a test holds the two equal).
SUFFIXES = (".png", ".jpg", ".jpeg")


def run(args) -> int:
    """``resweep snapshot TRACE (--frame N | --frames A:B) [--entity ID] [--size WxH] -o FILE|DIR``.

    One frame goes to the file ``-o`` names (PNG or JPEG by its suffix); ``--frames A:B`` renders
    frames A..B (both included) with one plotter into the existing folder ``-o`` as
    ``<trace stem>-f<frame>-e<id>.png``. Default entity: the first with a divergence at the (first)
    frame, else the first active one; a sequence keeps that entity. Bad frame, entity or output
    path: one line on stderr, status 2, before anything is rendered. Pictures are written atomically.
    """
    from resweep.core.analysis.frames import TraceSession

    problem = _output_problem(args)
    if problem:
        sys.stderr.write(f"resweep snapshot: {problem}\n")
        return EXIT_USAGE
    from resweep.core.format.vet import vet
    vet(args.trace)  # isolated first open
    settings = settings_from(args)
    first, last = args.frames if args.frames is not None else (args.frame, args.frame)
    with TraceSession(args.trace, settings) as session:
        from resweep.app.scene.picture import PictureMaker, pick_column, save_picture
        session.check_frame(last)  # bad frames or id fail before the first render
        col = pick_column(session, first, args.entity)
        eid = int(session.trace.ids[col])
        if args.frames is None:
            targets = [(first, Path(args.output))]
        else:
            stem = Path(session.path).stem
            targets = [(f, Path(args.output) / f"{stem}-f{f}-e{eid}.png") for f in range(first, last + 1)]
        with PictureMaker(session, tuple(args.size)) as maker:
            for frame, out in targets:
                img = maker.picture(frame, eid if args.frames is not None else args.entity)
                try:
                    save_picture(img, out)
                except OSError as exc:
                    sys.stderr.write(f"resweep snapshot: {out}: cannot write the picture: "
                                     f"{exc.strerror or exc}\n")
                    return EXIT_USAGE
    return EXIT_OK


def _output_problem(args) -> str | None:
    """Why ``-o`` cannot take the pictures asked for, or None (checked before the trace is read)."""
    out = Path(args.output)
    if args.frames is not None:
        if not out.is_dir():
            why = "is a file" if out.exists() else "no such folder"
            return f"{args.output}: --frames writes one picture per frame into a folder ({why})"
        if not os.access(out, os.W_OK):
            return f"{args.output}: cannot write the pictures (folder is not writable)"
        return None
    if not out.is_dir() and out.suffix.lower() not in SUFFIXES:
        shown = f"'{out.suffix}'" if out.suffix else "no suffix"
        return (f"{args.output}: unknown picture type ({shown}); name the file .png, .jpg or .jpeg")
    return output_problem(out, "the picture", [args.trace])
