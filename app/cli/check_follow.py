"""``resweep check TRACE --follow``: check frames as a recorder commits them."""
from __future__ import annotations

import signal
import sys

from resweep.core.analysis.describe import ended_early_text
from resweep.core.check.follow import follow_trace
from resweep.core.format.reader import open_trace

from resweep.app.cli.check import compile_notice, json_doc, print_summary
from resweep.app.cli.exits import EXIT_DIVERGED, EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import Stdout, emit_json


def run_follow(args, settings, fail_on) -> int:
    """Follow one trace until its writer closes it; Ctrl-C ends after the round in progress and
    prints (and writes to ``--json``) the counts so far, with exit status 130."""
    if len(args.traces) != 1:
        sys.stderr.write("resweep check: error: --follow takes exactly one TRACE\n")
        return EXIT_USAGE
    path = args.traces[0]
    stopped = []

    def on_round(report):
        if not args.quiet:
            sys.stderr.write(f"resweep check: {path}: {report.frames} frames checked, "
                             f"{sum(report.counts.values())} divergences so far\n")

    with open_trace(path, swmr=True) as trace:
        compile_notice(settings.precision, trace.frame_dtype, quiet=args.quiet)
        if trace.ended_early and not args.quiet:
            sys.stderr.write(f"resweep check: {path}: following the recording until it is closed (Ctrl-C stops)\n")
        # Ctrl-C sets a flag instead of raising, so the counts so far survive it.
        previous = signal.signal(signal.SIGINT, lambda *_: stopped.append(True))
        try:
            report = follow_trace(trace, settings, limit=args.limit, should_stop=lambda: bool(stopped),
                                  on_round=on_round)
        finally:
            signal.signal(signal.SIGINT, previous)
    out = Stdout()
    if not args.quiet:
        if report.cancelled:
            sys.stderr.write("resweep check: interrupted; counts so far:\n")
        if report.ended_early is not None:
            sys.stderr.write(f"resweep check: {path}: {ended_early_text(report.ended_early)}\n")
        if args.json != "-":
            print_summary(report, settings, fail_on, out=out, json_path=args.json, limit=args.limit)
    if args.json and not emit_json(json_doc([report], settings, fail_on, args.limit), args.json, "check", out):
        return EXIT_USAGE
    if report.cancelled:
        return EXIT_INTERRUPTED
    return EXIT_DIVERGED if report.failing(fail_on) else EXIT_OK
