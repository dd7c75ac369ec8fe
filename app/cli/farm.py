"""``resweep check`` over many traces: folders, globs, a local pool or a Dask cluster.

The work is planned, run and summarised by the core (``core/analysis/farm_*``); this module reads
the options, picks the engine, shows progress and prints the summary, the JSON and the exit status.
Exit status: 130 when interrupted (the partial summary is printed); otherwise 1 when a failing
kind was found (with ``--baseline``: when one appears or grows in a trace), else 2 when some trace
could not be read, else 0.
"""
from __future__ import annotations

import os
import sys
import time

from resweep.core.analysis.farm_baseline import compare, load_baseline, vanished
from resweep.core.analysis.farm_inputs import find_traces
from resweep.core.analysis.farm_report import summary
from resweep.core.analysis.farm_run import run_farm
from resweep.core.analysis.farm_task import FarmOptions
from resweep.core.check.kinds import DEFAULT_FAIL_ON, KINDS, SEVERITY

from resweep.app.cli.solver_args import settings_from
from resweep.app.cli.exits import EXIT_DIVERGED, EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import KIND_COLUMN, emit_json

WORST = 10  # traces listed under "worst traces" in the human summary
_GLOB = set("*?[")


def wanted(args) -> bool:
    """True when ``resweep check`` should run as a farm: a folder or glob among the inputs, or a
    farm option given."""
    if getattr(args, "workers", None) is not None or getattr(args, "scheduler", None) \
            or getattr(args, "baseline", None) or getattr(args, "summary_only", False):
        return True
    return any(os.path.isdir(t) or (any(c in _GLOB for c in t) and not os.path.exists(t)) for t in args.traces)


def run(args) -> int:
    settings = settings_from(args)
    fail_on = DEFAULT_FAIL_ON if args.fail_on is None else args.fail_on
    workers = _workers(args)
    if workers is None:
        return EXIT_USAGE
    baseline = load_baseline(args.baseline) if args.baseline else None  # a bad file stops here (exit 2)
    traces, missing = find_traces(args.traces)
    if not traces:
        for m in missing:
            sys.stderr.write(f"resweep check: {m.input}: {m.reason}\n")
        sys.stderr.write("resweep check: no trace to check\n")
        return EXIT_USAGE
    options = FarmOptions(settings, limit=0 if args.summary_only else args.limit,
                          threads=_threads(args, workers), cache_dir=args.kernel_cache)
    engine = _engine(args, workers)
    t0 = time.perf_counter()
    try:
        with _Progress(len(traces), not args.quiet and sys.stderr.isatty()) as bar:
            res = run_farm(traces, options, engine, progress=bar.update, missing=missing)
    finally:
        engine.close()
    seconds = time.perf_counter() - t0
    doc = summary(res, fail_on)
    doc.update(engine=engine.name, workers=engine.workers, seconds=round(seconds, 3))
    regressions = _baseline_part(doc, res, baseline, args.baseline, fail_on)
    if not args.quiet and args.json != "-":
        _print(res, doc, settings, fail_on, args)
    if args.json:
        out = {"version": 1, "settings": {**settings.as_dict(), "fail_on": list(fail_on), "limit": args.limit}}
        if not args.summary_only:
            out["traces"] = [res.reports[t.path].as_json() for t in res.traces if t.path in res.reports]
        out["farm"] = doc
        if not emit_json(out, args.json, "check"):
            return EXIT_USAGE
    return _status(res, doc, regressions)


def _workers(args):
    if args.scheduler:
        return None if _bad(args.workers is not None, "--workers and --scheduler exclude each other") else 0
    n = args.workers if args.workers is not None else (os.cpu_count() or 1)
    return None if _bad(n < 1, f"--workers must be >= 1, got {n}") else n


def _bad(cond: bool, message: str) -> bool:
    if cond:
        sys.stderr.write(f"resweep check: error: {message}\n")
    return cond


def _threads(args, workers: int):
    """Solver threads per worker: --threads, else the cores shared out among local workers (the
    cluster's own default on a remote scheduler)."""
    if args.threads is not None:
        return max(1, args.threads)
    if args.scheduler or workers == 1:
        return None
    return max(1, (os.cpu_count() or 1) // workers)


def _engine(args, workers: int):
    from resweep.core.analysis.farm_engines import DaskEngine, ThreadEngine
    if args.scheduler:
        return DaskEngine(address=args.scheduler)
    if workers == 1:
        return ThreadEngine()
    return DaskEngine(workers=workers)


def _baseline_part(doc, res, baseline, path, fail_on):
    if baseline is None:
        return None
    today = {res.keys[p]: r.counts for p, r in res.reports.items()}
    regressions = compare(today, baseline, fail_on)
    doc["baseline"] = {"path": str(path), "regressions": [
        {"key": r.key, "kind": r.kind, "before": r.before, "after": r.after} for r in regressions],
        "vanished": vanished(today, baseline)}
    return regressions


def _status(res, doc, regressions) -> int:
    if res.interrupted:
        return EXIT_INTERRUPTED
    worse = bool(regressions) if regressions is not None else doc["failing"] > 0
    if worse:
        return EXIT_DIVERGED
    return EXIT_USAGE if doc["unreadable"] else EXIT_OK


def _print(res, doc, settings, fail_on, args, out=sys.stdout):
    if not args.summary_only:
        from resweep.app.cli.check import print_summary
        for t in res.traces:
            if t.path in res.reports:
                print_summary(res.reports[t.path], settings, fail_on, out=out)
    w = out.write
    w(f"farm: {doc['traces']} traces, {doc['checked']} checked, {doc['failing']} failing, "
      f"{len(doc['unreadable'])} unreadable; {doc['entity_frames']} entity-frames in {doc['seconds']:.1f} s "
      f"({doc['engine']})\n")
    w(f"  {'kind':<{KIND_COLUMN}}{'severity':<10}{'count':>10}\n")
    for k in KINDS:
        w(f"  {k:<{KIND_COLUMN}}{SEVERITY[k]:<10}{doc['counts'][k]:>10}\n")
    if doc["worst"]:
        w(f"  worst traces ({', '.join(fail_on)}):\n")
        for row in doc["worst"][:WORST]:
            w(f"  {row['failing']:>10}  {row['path']}\n")
        if len(doc["worst"]) > WORST:
            w(f"  ... {len(doc['worst']) - WORST} more failing traces (--json lists them)\n")
    for row in doc["unreadable"]:
        w(f"  unreadable: {row['reason']}\n")
    if doc["not_checked"]:
        w(f"  not checked (interrupted): {len(doc['not_checked'])} traces\n")
    if "baseline" in doc:
        b = doc["baseline"]
        w(f"  baseline {b['path']}: {len(b['regressions'])} regressions, {len(b['vanished'])} traces gone\n")
        for r in b["regressions"]:
            before = "new trace" if r["before"] is None else r["before"]
            w(f"    {r['key']}: {r['kind']} {before} -> {r['after']}\n")


class _Progress:
    """tqdm bar of traces done, with entity-frames done beside it (nothing when disabled); it moves
    as workers report, not only when their tasks end (see ``run_farm``)."""

    def __init__(self, total: int, enabled: bool):
        self.bar = None
        if enabled:
            from tqdm import tqdm
            self.bar = tqdm(total=total, desc="traces", unit="trace", file=sys.stderr, leave=False,
                            dynamic_ncols=True)

    def update(self, done: int, total: int, rows: int):
        if self.bar is not None:
            if done > self.bar.n:
                self.bar.update(done - self.bar.n)
            self.bar.set_postfix_str(f"{rows:,} entity-frames", refresh=done <= self.bar.n)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if self.bar is not None:
            self.bar.close()
        return False
