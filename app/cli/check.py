"""``resweep check``: re-solve traces, print a summary or JSON, set the exit status."""
from __future__ import annotations

import gc
import sys
import threading

from resweep.core.analysis.describe import ended_early_line
from resweep.core.check.kinds import DEFAULT_FAIL_ON, KINDS, SEVERITY
from resweep.core.check.stream import check_trace
from resweep.core.errors import TraceFormatError
from resweep.core.check.rows import warm_up
from resweep.core.format.reader import open_trace
from resweep.core.format.vet import vet_many

from resweep.app.cli.solver_args import settings_from
from resweep.app.cli.exits import EXIT_DIVERGED, EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import KIND_COLUMN, Stdout, emit_json, output_problem

SHOWN = 20  # divergences listed in the human summary


_frozen = False


def compile_notice(precision: str, frame_dtype=None, stream=sys.stderr, quiet: bool = False):
    """Build the solver kernels; say so on ``stream`` if they are not on disk (cached or prebuilt)
    and compiling takes more than a second."""
    global _frozen
    msg = "resweep: compiling solver kernels (first run after install; later runs use the cache)...\n"
    timer = threading.Timer(1.0, lambda: (stream.write(msg), stream.flush()))
    if not quiet and not _kernels_on_disk():  # loading a cached build can pass 1 s on a busy machine
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


def print_summary(report, settings, fail_on, out=sys.stdout, shown: int = SHOWN, json_path: str | None = None,
                  limit: int | None = None):
    """The human summary of one trace. ``json_path``: the file the JSON report goes to (it lists
    ``report.divergences``, at most ``limit``), so the "more" line can say where the rest is."""
    w = out.write
    w(f"{report.path}: {report.frames} frames, {report.entities} entities, {report.entity_frames} entity-frames "
      f"re-solved ({settings.describe()}, {settings.precision}, tolerance {settings.tolerance:g}, "
      f"skin {settings.skin:g})\n")
    kw = KIND_COLUMN
    w(f"  {'kind':<{kw}}{'severity':<10}{'count':>8}\n")
    for k in KINDS:
        w(f"  {k:<{kw}}{SEVERITY[k]:<10}{report.counts[k]:>8}\n")
    if report.divergences:
        w(f"  first divergences:\n  {'frame':>7} {'entity':>8}  {'kind':<{kw}}{'error':>10}  recorded end -> "
          "reference end\n")
        for d in report.divergences[:shown]:
            if d.reason is not None:  # an invalid row has no error or reference: say what is wrong
                w(f"  {d.frame:>7} {d.entity:>8}  {d.kind:<{kw}}{'-':>10}  {d.reason}\n")
                continue
            err = "-" if d.error is None else f"{d.error:.4f}"
            w(f"  {d.frame:>7} {d.entity:>8}  {d.kind:<{kw}}{err:>10}  {_fmt_vec(d.recorded_end)} -> "
              f"{_fmt_vec(d.reference_end)}\n")
        w(_more_line(report, shown, json_path, limit))
    failing = {k: report.counts[k] for k in fail_on if report.counts[k]}
    if failing:
        w("  result: FAIL (" + ", ".join(f"{k} {n}" for k, n in failing.items()) + ")\n")
    else:
        w("  result: pass\n")


def _more_line(report, shown: int, json_path: str | None, limit: int | None) -> str:
    """"... N more" after the listed divergences, naming where they can be read ("" when none)."""
    total = sum(report.counts.values())
    listed = min(shown, len(report.divergences))
    if total <= listed:
        return ""
    rest = total - listed
    if json_path is None:
        return f"  ... {rest} more (--json PATH lists them, up to --limit per trace)\n"
    in_json = len(report.divergences) - listed
    if in_json >= rest:
        return f"  ... {rest} more, listed in {json_path}\n"
    return (f"  ... {rest} more; {in_json} of them listed in {json_path}, the other {rest - in_json} cut by "
            f"--limit {limit} (counts stay exact)\n")


def set_threads(requested: int | None, stderr=sys.stderr) -> int | None:
    """Apply ``--threads``: None keeps numba's default (all cores); more than the cores is clamped
    with a notice on ``stderr``. Returns the count in use, or None after a usage error (< 1)."""
    import numba
    cores = numba.config.NUMBA_NUM_THREADS
    if requested is None:
        return cores
    if requested < 1:
        stderr.write(f"resweep check: error: --threads must be >= 1, got {requested}\n")
        return None
    if requested > cores:
        stderr.write(f"resweep check: --threads {requested} is more than the {cores} cores here; using {cores}\n")
        requested = cores
    numba.set_num_threads(requested)
    return requested


def open_all(paths) -> list[str]:
    """Open and validate every trace before any is checked (header, world, dataset shapes; no
    frames are solved): one line per bad file, [] when all are readable."""
    bad = []
    for path in paths:
        try:
            open_trace(path).close()
        except TraceFormatError as exc:
            bad.append(exc.one_line())
    return bad


def vet_all(paths) -> list[str]:
    """One line per trace the isolated validator refuses (``core/format/vet.py``), in order."""
    got = vet_many(paths)  # one child validates them all, one after the other
    return [err.one_line() for err in (got[str(p)] for p in dict.fromkeys(map(str, paths))) if err is not None]


def vet_all_while(paths, work=None) -> list[str]:
    """:func:`vet_all` in a background thread while ``work()`` (if any) runs on this one.

    The validator children spend most of their time starting an interpreter and importing h5py;
    loading the solver kernels meanwhile hides that on a machine with a second core. Returns
    vet_all's lines.
    """
    if work is None:
        return vet_all(paths)
    got: list = []
    t = threading.Thread(target=lambda: got.append(vet_all(paths)), name="resweep-vet", daemon=True)
    t.start()
    work()
    t.join()
    return got[0] if got else ["the isolated validator did not report"]


def _kernels_on_disk() -> bool:
    """True when the kernels would be loaded rather than compiled (a cached or prebuilt build):
    only then are they loaded before the validators answer (a bad file must not wait for a
    compile)."""
    from resweep.core.jit.nb_jit import CACHE_DIR, PREBUILT_DIR
    return PREBUILT_DIR.is_dir() or any(CACHE_DIR.glob("*.nbi"))


def run(args) -> int:
    from resweep.app.cli import farm
    if farm.wanted(args):  # folders, globs or farm options: many traces on a pool or a cluster
        return farm.run(args)
    settings = settings_from(args)
    fail_on = DEFAULT_FAIL_ON if args.fail_on is None else args.fail_on
    json_to_stdout = args.json == "-"
    if args.json and not json_to_stdout:
        problem = output_problem(args.json, "the JSON report", args.traces)
        if problem:
            sys.stderr.write(f"resweep check: {problem}\n")
            return EXIT_USAGE
    if set_threads(args.threads) is None:
        return EXIT_USAGE
    if getattr(args, "follow", False):
        from resweep.app.cli.check_follow import run_follow
        return run_follow(args, settings, fail_on)
    warm = None
    if _kernels_on_disk():
        def warm():  # quietly: loading can pass the notice's 1 s on a busy machine, and a bad
            # file's refusal must stay the only line
            compile_notice(settings.precision, quiet=True)
    bad = vet_all_while(args.traces, warm)  # isolated first open of every trace, then a normal open
    bad = bad or open_all(args.traces)
    if bad:
        for line in bad:
            sys.stderr.write(f"resweep check: {line}\n")
        return EXIT_USAGE
    out = Stdout()
    show_progress = not args.quiet and sys.stderr.isatty()
    warmed = set()
    reports, status = [], EXIT_OK
    for path in args.traces:
        try:
            with open_trace(path) as trace:
                if trace.frame_dtype not in warmed:  # only the kernels this trace needs
                    compile_notice(settings.precision, trace.frame_dtype, quiet=args.quiet)
                    warmed.add(trace.frame_dtype)
                with _bar(trace.frame_count, _short(path), show_progress) as bar:
                    def progress(done, total, bar=bar):
                        bar.update(done - bar.n)
                    report = check_trace(trace, settings, limit=args.limit, progress=progress)
                early = ended_early_line(trace)
            if early and not args.quiet:
                sys.stderr.write(f"resweep check: {path}: {early}\n")
        except TraceFormatError as exc:  # a frame block that fails to read part-way through
            sys.stderr.write(f"resweep check: {exc.one_line()}\n")
            status = EXIT_USAGE
            continue
        reports.append(report)
        if not args.quiet and not json_to_stdout:
            print_summary(report, settings, fail_on, out=out, json_path=args.json, limit=args.limit)
        if report.failing(fail_on) and status == EXIT_OK:
            status = EXIT_DIVERGED
    if args.json and not emit_json(json_doc(reports, settings, fail_on, args.limit), args.json, "check", out):
        return EXIT_USAGE
    return status


def json_doc(reports, settings, fail_on, limit: int) -> dict:
    """The ``--json`` report of single traces (README "Commands")."""
    return {"version": 1, "settings": {**settings.as_dict(), "fail_on": list(fail_on), "limit": limit},
            "traces": [r.as_json() for r in reports]}


def _short(path: str) -> str:
    name = str(path).replace("\\", "/").rsplit("/", 1)[-1]
    return name if len(name) <= 28 else name[:25] + "..."
