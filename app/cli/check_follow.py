"""``resweep check TRACE --follow``: check frames as a recorder commits them."""
from __future__ import annotations

import signal
import sys

from resweep.core.check.follow import follow_trace
from resweep.core.format.reader import open_trace

from resweep.app.cli.exits import EXIT_DIVERGED, EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE


def run_follow(args, settings, fail_on, print_summary, compile_notice) -> int:
    """Follow one trace until its writer closes it; Ctrl-C ends after the round in progress and
    prints the counts so far (exit status 130)."""
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
    if report.cancelled and not args.quiet:
        sys.stderr.write("resweep check: interrupted; counts so far:\n")
    if not args.quiet:
        print_summary(report, settings, fail_on)
    if report.cancelled:
        return EXIT_INTERRUPTED
    return EXIT_DIVERGED if report.failing(fail_on) else EXIT_OK
