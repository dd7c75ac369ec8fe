"""Fuzz runner: mutated traces through ``resweep check``, ``info`` and ``snapshot`` in one process.

Every command goes through the CLI's own entry point (``main([...])``), so the isolated
validator, the limits and the error boundary are the ones users get; running many cases in one
process keeps a few hundred cases within a couple of minutes. Each case records its exit
statuses and stderr and checks the input is unchanged. Prints one JSON document: counts by
outcome and the failures (a failure is a status outside 0/1/2, a traceback, an internal error, a
stderr that is not exactly one line naming the file on status 2, a changed input).

    python tests/fuzz/run_fuzz.py --cases 10000 --seed 1 [--snapshot-every 25] [--first K] [--progress P]

A crash or hang of this process itself is seen by the caller (its exit status, its timeout).
"""
from __future__ import annotations

import argparse
import contextlib
import hashlib
import io
import json
import os
import resource
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))  # tests/: fuzz_cases, hostile_traces


def _digest(path) -> str:
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return "missing"


def run_cli(argv) -> tuple[int, str]:
    from resweep.app.cli.main import main
    err, out = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        try:
            status = main(argv)
        except SystemExit as exc:
            status = exc.code if isinstance(exc.code, int) else 2
        except BaseException as exc:  # noqa: BLE001 - a leak through the boundary is a finding
            status = -1
            err.write(f"Traceback-like leak: {type(exc).__name__}: {exc}\n")
    return status, err.getvalue()


def judge(status: int, stderr: str, path: str) -> str | None:
    """None when the command behaved, else what was wrong."""
    if status not in (0, 1, 2):
        return f"exit status {status}"
    if "Traceback" in stderr or "internal error" in stderr:
        return "traceback or internal error"
    lines = stderr.splitlines()
    if status == 2:
        if len(lines) != 1 or path not in lines[0]:
            return f"stderr is not one line naming the file ({len(lines)} lines)"
    elif lines:
        return f"stderr on status {status}"
    return None


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=300)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--snapshot-every", type=int, default=25, help="run snapshot on every k-th case")
    ap.add_argument("--isolate-every", type=int, default=1,
                    help="isolated validation (a child process) on every k-th case and every named case; the "
                         "others validate in this process (same checks, no child; a file that hangs HDF5 then hangs the run)")
    ap.add_argument("--max-seconds", type=float, default=None, help="stop after this long; report the cases run")
    ap.add_argument("--first", type=int, default=0,
                    help="index of the first case (a long run continued in a later process: same seed, next index)")
    ap.add_argument("--progress", default=None,
                    help="write the summary so far to this JSON file every 100 cases (kept if the run is killed)")
    ap.add_argument("--workdir", default=None)
    args = ap.parse_args(argv)
    os.environ.setdefault("RESWEEP_VET_CPU", "3")
    import fuzz_cases
    import hostile_traces
    work = Path(args.workdir or tempfile.mkdtemp(prefix="resweep-fuzz-"))
    work.mkdir(parents=True, exist_ok=True)
    os.environ.setdefault("RESWEEP_VET_CACHE", str(work / "vetted.json"))  # the validator's verdict cache
    repo = HERE.parent.parent
    bases = [hostile_traces.one_row(work / "base_small.h5"), repo / "sample_traces" / "quarry.h5",
             repo / "sample_traces" / "quarry_far_f32.h5"]
    t_warm = time.perf_counter()
    from resweep.core.check.rows import warm_up
    for frame_dtype in ("float64", "float32"):  # compiling (or loading) kernels is not a case's cost
        warm_up("float64", frame_dtype)
    _reset_peak()  # compiling kernels (LLVM) can pass 1 GB once; the cases' peak is what is bounded
    t0 = time.perf_counter()
    outcomes: Counter = Counter()
    families: Counter = Counter()
    failures = []
    done = 0
    for k in range(args.first, args.first + args.cases):
        if args.progress and done and done % 100 == 0:
            _write_json(args.progress, _summary(args, done, t0, t_warm, families, outcomes, failures))
        if args.max_seconds is not None and time.perf_counter() - t0 > args.max_seconds:
            break
        done += 1
        path = str(work / f"case{k:05d}.h5")
        try:
            family = fuzz_cases.make_case(bases, k, args.seed, path)
        except Exception as exc:  # noqa: BLE001 - a mutation h5py cannot write is not a case
            outcomes["not built"] += 1
            families[f"not built: {type(exc).__name__}"] += 1
            continue
        families[family] += 1
        isolate = family == "named" or k % max(1, args.isolate_every) == 0
        os.environ["RESWEEP_ISOLATE"] = "1" if isolate else "0"
        outcomes["isolated" if isolate else "in process"] += 1
        before = _digest(path)
        cmds = [["check", "--quiet", path], ["info", path]]
        if args.snapshot_every and k % args.snapshot_every == 0:
            cmds.append(["snapshot", path, "--frame", "0", "--size", "160x120", "-o", str(work / "snap.png")])
        for cmd in cmds:
            status, err = run_cli(cmd)
            outcomes[f"{cmd[0]} exit {status}"] += 1
            bad = judge(status, err, path)
            if bad:
                failures.append({"case": k, "family": family, "command": cmd[0], "problem": bad,
                                 "stderr": err[-500:]})
        if _digest(path) != before:
            failures.append({"case": k, "family": family, "command": "-", "problem": "input changed"})
        os.unlink(path)
    doc = _summary(args, done, t0, t_warm, families, outcomes, failures)
    if args.progress:
        _write_json(args.progress, doc)
    print(json.dumps(doc, indent=1))
    return 0


def _summary(args, done, t0, t_warm, families, outcomes, failures) -> dict:
    from resweep.core.format import vet
    from resweep.core.format.vet_child import peak_rss
    self_rss = peak_rss() or resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    # The validator children report their own peak (VmHWM): getrusage's RUSAGE_CHILDREN also counts
    # the copy of this process each child was forked from before it exec'd.
    return {"cases": done, "seed": args.seed, "first": args.first, "seconds": round(time.perf_counter() - t0, 1),
            "warm_up_seconds": round(t0 - t_warm, 1),
            "peak_rss_bytes": self_rss, "peak_child_rss_bytes": vet.peak_child_rss,
            "families": dict(families), "outcomes": dict(sorted(outcomes.items())),
            "failures": failures[:50], "failure_count": len(failures)}


def _reset_peak() -> None:
    """Reset this process's peak resident set (``VmHWM``; Linux: writing 5 to clear_refs)."""
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as fh:
            fh.write("5")
    except OSError:
        pass  # elsewhere the peak then includes the warm-up


def _write_json(path, doc) -> None:
    tmp = f"{path}.tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump(doc, fh, indent=1)
    os.replace(tmp, path)


if __name__ == "__main__":
    sys.exit(main())
