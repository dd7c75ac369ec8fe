"""The ``resweep`` entry point: the parser of every command and the error boundary.

Errors from the core arrive as typed exceptions and leave as one line on stderr that names the
file and the problem (exit status 2); no traceback reaches the user unless RESWEEP_DEBUG is set.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys

from resweep.app.cli import explain as explain_cmd
from resweep.app.cli.exits import EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import silence_stdout
from resweep.app.cli.solver_args import add_solver_opts as solver_opts


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors."""

    def error(self, message):
        sys.stderr.write(f"{self.prog}: error: {message} (see '{self.prog} --help')\n")
        raise SystemExit(EXIT_USAGE)


def _fail_on_arg(text: str):
    """Kinds and severities, comma-separated: a severity stands for every kind of that severity or
    worse (``warning`` = warning and error kinds); ``none`` alone never fails. -> tuple of kinds."""
    from resweep.core.check.kinds import KINDS, SEVERITIES, SEVERITY, SEVERITY_RANK
    items = [k.strip().lower() for k in text.split(",")]
    if not text.strip() or not all(items):
        raise argparse.ArgumentTypeError(f"empty kind in {text!r}; give kinds or severities "
                                         f"({', '.join(KINDS)}; {', '.join(SEVERITIES)}) or none")
    if items == ["none"]:
        return ()
    chosen = set()
    for item in items:
        if item in SEVERITY_RANK:
            chosen |= {k for k in KINDS if SEVERITY_RANK[SEVERITY[k]] >= SEVERITY_RANK[item]}
        elif item in KINDS:
            chosen.add(item)
        else:
            extra = " ('none' only alone)" if item == "none" else ""
            raise argparse.ArgumentTypeError(f"unknown kind or severity {item!r}{extra}; kinds are "
                                             f"{', '.join(KINDS)}; severities {', '.join(SEVERITIES)}; or none")
    return tuple(k for k in KINDS if k in chosen)


def _frame_range(text: str):
    """``A:B`` -> (A, B), frames A to B with both ends included."""
    try:
        a, b = (int(v) for v in text.split(":"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"frames must look like 40:60 (both ends included), got {text!r}") from None
    if not 0 <= a <= b:
        raise argparse.ArgumentTypeError(f"frames {text!r}: need 0 <= A <= B")
    return a, b


def _positive_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not an integer: {text!r}") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"must be >= 0, got {v}")
    return v


def _size_arg(text: str):
    try:
        w, h = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"size must look like 1280x720, got {text!r}") from None
    if not (16 <= w <= 8192 and 16 <= h <= 8192):
        raise argparse.ArgumentTypeError(f"size {w}x{h} is out of range (16..8192 per side)")
    return w, h


def farm_opts(c):
    """Options of ``resweep check`` over many traces (folders, globs; see README "Many traces")."""
    g = c.add_argument_group("many traces (TRACE may also be a folder, searched recursively, or a glob)")
    g.add_argument("--workers", type=int, default=None, metavar="N",
                   help="local worker processes (default: one per core; 1 checks in this process)")
    g.add_argument("--scheduler", metavar="ADDRESS", help="run on the Dask cluster at ADDRESS (tcp://host:port)")
    g.add_argument("--summary-only", action="store_true",
                   help="only the farm summary and per-trace counts (no divergence lists)")
    g.add_argument("--baseline", metavar="FILE.json",
                   help="a saved --json report; exit 1 when a failing kind appears or grows in a trace")
    g.add_argument("--kernel-cache", metavar="DIR",
                   help="kernel cache folder for the workers (default: each worker's own)")


def _limits_opt(sp):
    sp.add_argument("--max", action="append", default=[], metavar="NAME=N",
                    help="raise a size limit for hostile-file protection, e.g. --max voxels=500000000 "
                         "(limits: see the trace format reference)")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="resweep", description="Re-solve recorded voxel collision traces with a reference "
                "swept-AABB solver and report where the recorded run diverged.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser, metavar="COMMAND")

    c = sub.add_parser("check", help="re-solve traces and report divergences",
                       description="Re-solve every recorded entity-frame and report divergences. Exit status: "
                                   "0 no failing divergence, 1 failing divergence found, 2 usage error or bad "
                                   "trace, 3 internal error, 130 interrupted.")
    c.add_argument("traces", nargs="+", metavar="TRACE")
    _limits_opt(c)
    solver_opts(c)
    c.add_argument("--fail-on", type=_fail_on_arg, default=None, metavar="KIND|SEVERITY,...",
                   help="kinds, or severities (= every kind of that severity or worse), that make the exit "
                        "status 1 (default: error; 'none' never fails)")
    c.add_argument("--json", metavar="PATH|-", help="write the JSON report to PATH, or to stdout with '-'")
    c.add_argument("--limit", type=_positive_int, default=1000, metavar="N",
                   help="divergences listed per trace (counts stay exact; default 1000)")
    c.add_argument("--threads", type=int, default=None, metavar="N",
                   help="solver threads (default: all cores; more than the cores is clamped with a notice)")
    c.add_argument("--quiet", action="store_true", help="no progress bar and no summary")
    farm_opts(c)
    c.add_argument("--follow", action="store_true",
                   help="check a trace a recorder is still writing, as frames are flushed; ends when the writer "
                        "closes it (Ctrl-C: counts so far)")

    i = sub.add_parser("info", help="describe a trace and list validation problems")
    i.add_argument("trace", metavar="TRACE")
    _limits_opt(i)
    i.add_argument("--json", metavar="-", help="write JSON to stdout ('-') or to a file")

    v = sub.add_parser("view", help="open the desktop viewer")
    v.add_argument("trace", nargs="?", metavar="TRACE", help="trace to open (default: the bundled demo)")
    v.add_argument("--frame", type=_positive_int, default=0, metavar="N")
    v.add_argument("--entity", type=int, default=None, metavar="ID")
    solver_opts(v, remembered=True)
    v.add_argument("--follow", action="store_true",
                   help="pick up frames a recorder keeps flushing to TRACE (View > Follow recording)")
    _limits_opt(v)

    s = sub.add_parser("snapshot", help="render the viewer picture off screen to a PNG or JPEG")
    s.add_argument("trace", metavar="TRACE")
    _limits_opt(s)
    which = s.add_mutually_exclusive_group(required=True)
    which.add_argument("--frame", type=_positive_int, metavar="N")
    which.add_argument("--frames", type=_frame_range, metavar="A:B",
                       help="frames A to B (both included), one picture each into the folder -o DIR")
    s.add_argument("--entity", type=int, default=None, metavar="ID")
    s.add_argument("--size", type=_size_arg, default=(1280, 720), metavar="WxH")
    s.add_argument("-o", "--output", required=True, metavar="FILE|DIR",
                   help="picture file (.png, .jpg or .jpeg); with --frames an existing folder")
    solver_opts(s)

    im = sub.add_parser("import", help="turn a JSON Lines or CSV log into a trace",
                        description="Import a lines log (one record per line; schema in the core's "
                                    "format/importers/log_format.md and log_schema.json) into a trace, streaming.")
    im.add_argument("log", metavar="LOG")
    im.add_argument("--world", metavar="WORLD", help="JSON Lines file with the header, chunk, voxel and edit records")
    im.add_argument("-o", "--output", required=True, metavar="TRACE", help="trace to write (atomically)")
    im.add_argument("--format", choices=("auto", "jsonl", "csv"), default="auto",
                    help="LOG format (default: by extension, then by content)")
    im.add_argument("--skip-bad", action="store_true", help="skip bad lines, counting them by reason")
    im.add_argument("--flush-every", type=_positive_int, default=256, metavar="N", help=argparse.SUPPRESS)
    im.add_argument("--quiet", action="store_true", help="no progress bar and no summary")

    ex = sub.add_parser("export-lines", help="write a trace as a JSON Lines log (the import format)")
    ex.add_argument("trace", metavar="TRACE")
    ex.add_argument("-o", "--output", required=True, metavar="LOG|-")

    explain_cmd.add_parser(sub)
    return p


#: Commands whose module name differs from the command (keywords, dashes).
_MODULES = {"import": "import_", "export-lines": "export_lines"}


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    from resweep.core.errors import ResweepError
    from resweep.core.format.limits import raise_limits
    try:
        raise_limits(",".join(getattr(args, "max", [])))  # also read by the isolated validator and the viewer
    except ValueError as exc:
        parser.error(f"--max: {exc}")
    try:
        # One module per command, imported only when used (a check never loads the viewer).
        command = importlib.import_module(f"resweep.app.cli.{_MODULES.get(args.command, args.command)}")
        status = command.run(args)
        if argv is None and getattr(command, "QUICK_EXIT", False):
            leave_now(status)
        return status
    except ResweepError as exc:
        sys.stderr.write(f"resweep {args.command}: {exc}\n")
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("resweep: interrupted\n")
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        # Commands write through output.Stdout, which keeps their status on a closed pipe; this is
        # the fallback for output written otherwise. The reader left, so nothing was lost on our side.
        silence_stdout()
        return EXIT_OK
    except Exception as exc:  # the boundary: one line, never a traceback (unless debugging)
        if os.environ.get("RESWEEP_DEBUG"):
            raise
        from resweep.core.errors import printable
        sys.stderr.write(f"resweep {args.command}: internal error: {type(exc).__name__}: {printable(exc)} "
                         "(set RESWEEP_DEBUG=1 for a traceback)\n")
        return EXIT_INTERNAL


def leave_now(status: int) -> None:
    """End the process with ``status`` at once, after flushing the standard streams.

    For commands whose outputs are all written and closed when ``run`` returns (``QUICK_EXIT``):
    a process that loaded the solver's kernels and VTK spends about half a CPU-second in the
    interpreter's final clean-up, freeing compiled code and GL state nobody will use. Only when
    ``main`` runs as the program (no ``argv``): a caller of ``main([...])`` keeps its process.
    """
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    os._exit(status)


if __name__ == "__main__":
    sys.exit(main())
