"""``resweep export-lines TRACE -o LOG``: a trace as a JSON Lines log (the importer's format)."""
from __future__ import annotations

import os
import sys

from resweep.core.format.importers.export import export_lines
from resweep.core.format.reader import open_trace
from resweep.core.format.writer import remove_quietly, temp_path

from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE


def run(args) -> int:
    with open_trace(args.trace) as trace:
        if args.output == "-":
            export_lines(trace, sys.stdout)
            return EXIT_OK
        if os.path.exists(args.output) and os.path.samefile(args.output, args.trace):
            sys.stderr.write(f"resweep export-lines: {args.output}: is the input trace; refusing to overwrite it\n")
            return EXIT_USAGE
        tmp = temp_path(args.output)
        try:
            with open(tmp, "w", encoding="utf-8") as out:
                n = export_lines(trace, out)
            os.replace(tmp, args.output)
        except OSError as exc:
            remove_quietly(tmp)
            sys.stderr.write(f"resweep export-lines: {args.output}: cannot write: {exc.strerror or exc}\n")
            return EXIT_USAGE
        except BaseException:
            remove_quietly(tmp)
            raise
    sys.stderr.write(f"resweep export-lines: wrote {n} lines to {args.output}\n")
    return EXIT_OK
