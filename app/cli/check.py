"""``resweep check``: re-solve traces, print a summary or JSON, set the exit status."""
from __future__ import annotations

import gc
import sys
import threading
from concurrent.futures import ThreadPoolExecutor

from resweep.core.check.kinds import DEFAULT_FAIL_ON, KINDS, SEVERITY
from resweep.core.check.stream import check_trace
from resweep.core.errors import TraceFormatError
from resweep.core.check.rows import warm_up
from resweep.core.solve.settings import SolverSettings
from resweep.core.format.reader import open_trace
from resweep.core.format.vet import vet

from resweep.app.cli.exits import EXIT_DIVERGED, EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import emit_json

SHOWN = 20  # divergences listed in the human summary


_frozen = False


def compile_notice(precision: str, frame_dtype=None, stream=sys.stderr, quiet: bool = False):
    """Build the solver kernels; say so on ``stream`` if that takes more than a second."""
    global _frozen
    msg = "resweep: compiling solver kernels (first run after install; later runs use the cache)...\n"
    timer = threading.Timer(1.0, lambda: (stream.write(msg), stream.flush()))
    if not quiet:
        timer.start()
    try:
        warm_up(precision, frame_dtype)
    finally:
        timer.cancel()
    if not _frozen:
        # numba's compiler state (~100k objects) lives as long as the process; leaving it out of
        # garbage collection saves the collector's walks over it, ~0.2 s of every exit.
        gc.freeze()
        _frozen = True


class _NoBar:
    n = 0

    def update(self, k):
        pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def _bar(total: int, label: str, enabled: bool):
    if not enabled:
        return _NoBar()  # tqdm costs a noticeable share of a small check's start-up
    from tqdm import tqdm
    return tqdm(total=total, desc=label, unit="frame", file=sys.stderr, leave=False, dynamic_ncols=True)


def _fmt_vec(v) -> str:
    return "(" + ", ".join("nan" if x is None else f"{x:.4f}" for x in v) + ")"


def print_summary(report, settings, fail_on, out=sys.stdout, shown: int = SHOWN):
    w = out.write
    w(f"{report.path}: {report.frames} frames, {report.entities} entities, {report.entity_frames} entity-frames "
      f"re-solved ({settings.precision}, tolerance {settings.tolerance:g}, skin {settings.skin:g}, "
      f"passes {settings.passes})\n")
    w(f"  {'kind':<14}{'severity':<10}{'count':>8}\n")
    for k in KINDS:
        w(f"  {k:<14}{SEVERITY[k]:<10}{report.counts[k]:>8}\n")
    if report.divergences:
        w(f"  first divergences:\n  {'frame':>7} {'entity':>8}  {'kind':<14}{'error':>10}  recorded end -> reference end\n")
        for d in report.divergences[:shown]:
            err = "-" if d.error is None else f"{d.error:.4f}"
            w(f"  {d.frame:>7} {d.entity:>8}  {d.kind:<14}{err:>10}  {_fmt_vec(d.recorded_end)} -> "
              f"{_fmt_vec(d.reference_end)}\n")
        total = sum(report.counts.values())
        if total > shown:
            w(f"  ... {total - min(shown, len(report.divergences))} more (use --json for the list)\n")
    failing = {k: report.counts[k] for k in fail_on if report.counts[k]}
    if failing:
        w("  result: FAIL (" + ", ".join(f"{k} {n}" for k, n in failing.items()) + ")\n")
    else:
        w("  result: pass\n")


def run(args) -> int:
    settings = SolverSettings(tolerance=args.tolerance, skin=args.skin, passes=args.passes,
                              precision=args.precision)
    fail_on = DEFAULT_FAIL_ON if args.fail_on is None else args.fail_on
    if args.threads is not None:
        import numba
        if not 1 <= args.threads <= numba.config.NUMBA_NUM_THREADS:
            sys.stderr.write(f"resweep check: error: --threads must be in 1..{numba.config.NUMBA_NUM_THREADS}\n")
            return EXIT_USAGE
        numba.set_num_threads(args.threads)
    show_progress = not args.quiet and sys.stderr.isatty()
    json_to_stdout = args.json == "-"
    # Isolated first open of every trace (one child at a time) while another thread loads the
    # solver kernels: the validation's start-up hides behind the kernels'. The compile notice
    # (first run only) is printed later, for a trace that passed, so a refused file still gives
    # exactly one line; the loader is joined before returning (never left compiling at exit).
    pool = ThreadPoolExecutor(1, thread_name_prefix="resweep-vet")
    vetted = [pool.submit(vet, path) for path in args.traces]
    pool.shutdown(wait=False)
    loader = ThreadPoolExecutor(1, thread_name_prefix="resweep-warm")
    loader.submit(warm_up, settings.precision)  # errors resurface in compile_notice below
    try:
        return _check_all(args, settings, fail_on, vetted, show_progress, json_to_stdout)
    finally:
        loader.shutdown(wait=True)


def _check_all(args, settings, fail_on, vetted, show_progress, json_to_stdout) -> int:
    warmed = set()
    reports, status = [], EXIT_OK
    for path, verdict in zip(args.traces, vetted):
        try:
            verdict.result()  # a file that hangs or crashes HDF5 stops here, never opened in this process
            with open_trace(path) as trace:
                if trace.frame_dtype not in warmed:  # only the kernels this trace needs
                    compile_notice(settings.precision, trace.frame_dtype, quiet=args.quiet)
                    warmed.add(trace.frame_dtype)
                with _bar(trace.frame_count, _short(path), show_progress) as bar:
                    def progress(done, total, bar=bar):
                        bar.update(done - bar.n)
                    report = check_trace(trace, settings, limit=args.limit, progress=progress)
        except TraceFormatError as exc:
            sys.stderr.write(f"resweep check: {exc.one_line()}\n")
            status = EXIT_USAGE
            continue
        reports.append(report)
        if not args.quiet and not json_to_stdout:
            print_summary(report, settings, fail_on)
        if report.failing(fail_on) and status == EXIT_OK:
            status = EXIT_DIVERGED
    if args.json:
        doc = {"version": 1, "settings": {**settings.as_dict(), "fail_on": list(fail_on), "limit": args.limit},
               "traces": [r.as_json() for r in reports]}
        if not emit_json(doc, args.json, "check"):
            return EXIT_USAGE
    return status


def _short(path: str) -> str:
    name = str(path).replace("\\", "/").rsplit("/", 1)[-1]
    return name if len(name) <= 28 else name[:25] + "..."
