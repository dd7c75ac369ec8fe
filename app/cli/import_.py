"""``resweep import LOG [--world WORLD] -o TRACE``: a lines log (JSON Lines or CSV) to a trace."""
from __future__ import annotations

import os
import sys

from resweep.core.format.importers.log_import import import_log

from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE


def _usage(msg: str) -> int:
    sys.stderr.write(f"resweep import: {msg}\n")
    return EXIT_USAGE


def _inputs_ok(args) -> str | None:
    """One line about what is wrong with the paths, or None."""
    for p in [args.log] + ([args.world] if args.world else []):
        if not os.path.exists(p):
            return f"{p}: no such file"
        if os.path.isdir(p):
            return f"{p}: is a directory, not a log file"
    out = os.path.abspath(args.output)
    if any(os.path.exists(p) and os.path.samefile(p, out) for p in [args.log] + ([args.world] if args.world else [])
           if os.path.exists(out)):
        return f"{args.output}: is an input; refusing to overwrite it"
    folder = os.path.dirname(out)
    if not os.path.isdir(folder):
        return f"{args.output}: folder {folder} does not exist"
    return None


def run(args) -> int:
    bad = _inputs_ok(args)
    if bad:
        return _usage(bad)
    bar = None
    if not args.quiet and sys.stderr.isatty():
        from tqdm import tqdm
        bar = tqdm(total=1, unit="B", unit_scale=True, desc="import", file=sys.stderr, leave=False,
                   dynamic_ncols=True)

    def progress(done, total):
        bar.total = total
        bar.update(done - bar.n)

    try:
        report = import_log(args.log, args.output, world_path=args.world, fmt=args.format, skip_bad=args.skip_bad,
                            flush_every=args.flush_every, progress=progress if bar is not None else None)
    except OSError as exc:
        return _usage(f"{getattr(exc, 'filename', None) or args.log}: {exc.strerror or exc}")
    finally:
        if bar is not None:
            bar.close()
    if not args.quiet:
        _summary(args, report)
    return EXIT_OK


def _summary(args, report):
    w = sys.stdout.write
    w(f"{args.log}: {report.lines} lines -> {args.output}: {report.frames} frames, {report.entities} entities, "
      f"{report.edits} edits\n")
    if report.skipped:
        total = sum(report.skipped.values())
        w(f"  skipped {total} bad lines: " + ", ".join(f"{k} {n}" for k, n in report.skipped.most_common()) + "\n")
        for kind, msgs in report.examples.items():
            for m in msgs:
                w(f"    {m}\n")
    for note in report.notes:
        w(f"  note: {note}\n")
