"""The ``resweep`` entry point: the parser of every command and the error boundary.

Errors from the core arrive as typed exceptions and leave as one line on stderr that names the
file and the problem (exit status 2); no traceback reaches the user unless RESWEEP_DEBUG is set.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys

from resweep.app.cli.exits import EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors."""

    def error(self, message):
        sys.stderr.write(f"{self.prog}: error: {message} (see '{self.prog} --help')\n")
        raise SystemExit(EXIT_USAGE)


def _kinds_arg(text: str):
    from resweep.core.check.kinds import KINDS
    if text.strip().lower() in ("", "none"):
        return ()
    kinds = tuple(k.strip() for k in text.split(",") if k.strip())
    bad = [k for k in kinds if k not in KINDS]
    if bad:
        raise argparse.ArgumentTypeError(f"unknown kind {bad[0]!r}; kinds are {', '.join(KINDS)} (or none)")
    return kinds


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


def _limits_opt(sp):
    sp.add_argument("--max", action="append", default=[], metavar="NAME=N",
                    help="raise a size limit for hostile-file protection, e.g. --max voxels=500000000 "
                         "(limits: see the trace format reference)")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="resweep", description="Re-solve recorded voxel collision traces with a reference "
                "swept-AABB solver and report where the recorded run diverged.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser, metavar="COMMAND")

    def solver_opts(sp):
        sp.add_argument("--tolerance", type=float, default=0.01, metavar="T",
                        help="voxels; ends closer than this agree (default 0.01)")
        sp.add_argument("--skin", type=float, default=0.001, metavar="E",
                        help="voxels kept between a box and a hit face (default 0.001)")
        sp.add_argument("--passes", type=int, default=3, metavar="N", help="slide passes per frame (default 3)")
        sp.add_argument("--precision", choices=("float64", "float32"), default="float64",
                        help="solve precision (default float64)")

    c = sub.add_parser("check", help="re-solve traces and report divergences",
                       description="Re-solve every recorded entity-frame and report divergences. Exit status: "
                                   "0 no failing divergence, 1 failing divergence found, 2 usage error or bad trace.")
    c.add_argument("traces", nargs="+", metavar="TRACE")
    _limits_opt(c)
    solver_opts(c)
    c.add_argument("--fail-on", type=_kinds_arg, default=None, metavar="KIND,...",
                   help="kinds that make the exit status 1 (default: every error-severity kind; 'none' never)")
    c.add_argument("--json", metavar="PATH|-", help="write the JSON report to PATH, or to stdout with '-'")
    c.add_argument("--limit", type=_positive_int, default=1000, metavar="N",
                   help="divergences listed per trace (counts stay exact; default 1000)")
    c.add_argument("--threads", type=int, default=None, metavar="N", help="solver threads (default: all cores)")
    c.add_argument("--quiet", action="store_true", help="no progress bar and no summary")

    i = sub.add_parser("info", help="describe a trace and list validation problems")
    i.add_argument("trace", metavar="TRACE")
    _limits_opt(i)
    i.add_argument("--json", metavar="-", help="write JSON to stdout ('-') or to a file")

    v = sub.add_parser("view", help="open the desktop viewer")
    v.add_argument("trace", nargs="?", metavar="TRACE", help="trace to open (default: the bundled demo)")
    v.add_argument("--frame", type=_positive_int, default=0, metavar="N")
    v.add_argument("--entity", type=int, default=None, metavar="ID")
    _limits_opt(v)

    s = sub.add_parser("snapshot", help="render the viewer picture off screen to a PNG")
    s.add_argument("trace", metavar="TRACE")
    _limits_opt(s)
    s.add_argument("--frame", type=_positive_int, required=True, metavar="N")
    s.add_argument("--entity", type=int, default=None, metavar="ID")
    s.add_argument("--size", type=_size_arg, default=(1280, 720), metavar="WxH")
    s.add_argument("-o", "--output", required=True, metavar="PNG")
    solver_opts(s)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    from resweep.core.errors import ResweepError
    from resweep.core.format.limits import raise_limits
    try:
        raise_limits(",".join(args.max))  # also read by the isolated validator and the viewer
    except ValueError as exc:
        parser.error(f"--max: {exc}")
    try:
        # One module per command, imported only when used (a check never loads the viewer).
        command = importlib.import_module(f"resweep.app.cli.{args.command}")
        return command.run(args)
    except ResweepError as exc:
        sys.stderr.write(f"resweep {args.command}: {exc}\n")
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("resweep: interrupted\n")
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # the boundary: one line, never a traceback (unless debugging)
        if os.environ.get("RESWEEP_DEBUG"):
            raise
        from resweep.core.errors import printable
        sys.stderr.write(f"resweep {args.command}: internal error: {type(exc).__name__}: {printable(exc)} "
                         "(set RESWEEP_DEBUG=1 for a traceback)\n")
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
