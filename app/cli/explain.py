"""``resweep explain``: which solver model does a recording follow? (fit: core/analysis/explain.py)"""
from __future__ import annotations

import sys

from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE

SHOWN_MODELS = 10
SHOWN_ROWS = 20


def _frames_arg(text: str):
    import argparse
    try:
        a, b = text.split(":")
        lo, hi = int(a) if a else 0, int(b) if b else 2**62
    except ValueError:
        raise argparse.ArgumentTypeError(f"frames must look like A:B, got {text!r}") from None
    if lo < 0 or hi <= lo:
        raise argparse.ArgumentTypeError(f"frames {text!r}: need 0 <= A < B")
    return lo, hi


def add_parser(sub) -> None:
    """The ``explain`` sub-parser."""
    from resweep.app.cli.solver_args import add_solver_opts
    e = sub.add_parser("explain", help="fit which solver model a recording follows",
                       description="Fit the documented model family (slide 1..4 passes, axis in six orders, each "
                                   "with step heights 0/0.5/0.6/1.0; pushout with and without 0.5-voxel substeps) "
                                   "to the recording and rank the models by agreement.")
    e.add_argument("traces", nargs="+", metavar="TRACE")
    e.add_argument("--entity", type=int, action="append", default=None, metavar="ID",
                   help="only this entity id (repeat for several)")
    e.add_argument("--frames", type=_frames_arg, default=None, metavar="A:B", help="only frames A..B-1")
    e.add_argument("--json", metavar="PATH|-", help="write the JSON result to PATH, or to stdout with '-'")
    e.add_argument("--quiet", action="store_true", help="no human output")
    add_solver_opts(e, model=False)


def print_explanation(ex, out=sys.stdout) -> None:
    from resweep.core.analysis.explain import check_command, model_label as label
    w = out.write
    skin = "none (no row stops at a face; default 0.001 used)" if ex.skin_estimate is None else \
        f"{ex.skin_estimate:g} voxels (median of {ex.skin_rows} rows)"
    w(f"{ex.path}: {ex.rows_used} moving entity-frames, engine skin {skin}\n")
    w(f"  {ex.rows_undecided} rows tell no model apart (every model agrees, or every one disagrees)\n")
    w(f"  {'rank':>4}  {'model':<28}{'agree':>8}{'rows':>9}  ties\n")
    for r, m in enumerate(ex.models[:SHOWN_MODELS]):
        tie = "" if m.tie == r else f"same ends as #{m.tie + 1}"
        w(f"  {r + 1:>4}  {label(m.settings):<28}{m.agree:>8.2%}{m.rows:>9}  {tie}\n")
    if ex.screened:
        w("  (models after the leaders were scored on a sample of the contact rows)\n")
    if not ex.decided:
        w("  result: cannot decide: no row tells the best-scoring models apart\n")
    else:
        w(f"  best: {label(ex.best)}\n  check with: {check_command(ex.path, ex.best)}\n")
    if ex.disagreements:
        w(f"  rows where even the best model disagrees (likely real bugs), first {SHOWN_ROWS}:\n")
        w(f"  {'frame':>7} {'entity':>8}  kind\n")
        for d in ex.disagreements[:SHOWN_ROWS]:
            w(f"  {d['frame']:>7} {d['entity']:>8}  {d['kind']}\n")


def run(args) -> int:
    from resweep.app.cli.check import compile_notice
    from resweep.app.cli.output import emit_json
    from resweep.core.analysis.explain import explain_trace
    from resweep.core.errors import TraceFormatError
    from resweep.core.format.reader import open_trace
    from resweep.core.solve.settings import SolverSettings
    SolverSettings(tolerance=args.tolerance, precision=args.precision)  # validate before any work
    docs, status = [], EXIT_OK
    for path in args.traces:
        try:
            with open_trace(path) as trace:
                compile_notice(args.precision, quiet=args.quiet)
                ex = explain_trace(trace, args.tolerance, args.entity, args.frames, args.precision)
        except TraceFormatError as exc:
            sys.stderr.write(f"resweep explain: {exc.one_line()}\n")
            status = EXIT_USAGE
            continue
        docs.append(ex.as_json())
        if not args.quiet and args.json != "-":
            print_explanation(ex)
    if args.json and not emit_json({"version": 1, "traces": docs}, args.json, "explain"):
        return EXIT_USAGE
    return status
