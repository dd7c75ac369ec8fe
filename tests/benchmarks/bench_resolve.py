"""Whole-trace re-solve against the compiled C yardstick, as whole processes (run on demand).

    python tests/benchmarks/bench_resolve.py [--entities 200] [--frames 30000] [--repeat 3]

Times ``resweep check TRACE --quiet`` (all cores, then ``--threads 1`` and ``--threads 2``) and
``python yardstick.py solve TRACE`` (reading the trace, solving every entity-frame in C,
single-threaded) on the same yardstick trace, runs interleaved, each the median of ``--repeat``
runs in this one run. Reported: the ratio resweep / yardstick in wall time (target <= 0.35) and in
CPU seconds, and the speed-up of 2 threads over 1 (target >= 1.6x; the median of back-to-back
pairs, which drifts least on a shared machine). The trace (6 M entity-frames by default) is
generated once into ``--workdir``.
"""
from __future__ import annotations

import statistics
import sys

from _bench import PYTHON, Row, common_args, median_runs, print_table, rate, resweep_cmd, yardstick_trace


def run(args) -> list[Row]:
    trace = yardstick_trace(args, args.frames)
    n = args.entities * args.frames
    ours = resweep_cmd(trace, "--quiet")
    one, two = ours + ["--threads", "1"], ours + ["--threads", "2"]
    yard = [PYTHON, str(args.yardstick / "yardstick.py"), "solve", str(trace)]
    median_runs(ours, 1)  # compile or load the kernels once, outside the timing
    runs = {k: [] for k in ("ours", "yard", "one", "two")}
    for _ in range(args.repeat):  # interleaved, so drift of the shared machine hits all alike
        for key, cmd in (("ours", ours), ("yard", yard), ("one", one), ("two", two)):
            runs[key].append(median_runs(cmd, 1))
    med = {k: (statistics.median(r.wall for r in v), statistics.median(r.cpu for r in v),
               statistics.median(r.rss for r in v)) for k, v in runs.items()}
    c_only = next((float(f.split("=")[1]) for f in runs["yard"][-1].out.split() if f.startswith("seconds=")),
                  float("nan"))
    paired = statistics.median(a.wall / b.wall for a, b in zip(runs["one"], runs["two"]))
    (tw, tc, trss), (yw, yc, yrss) = med["ours"], med["yard"]
    return [
        Row("resweep check, whole process", f"{tw:.2f} s wall, {tc:.2f} CPU-s  ({rate(n, tw)})", "",
            " ".join(map(str, ours))),
        Row("yardstick solve, whole process", f"{yw:.2f} s wall, {yc:.2f} CPU-s  ({rate(n, yw)}; C loop alone "
            f"{c_only:.2f} s)", "", " ".join(yard)),
        Row("ratio resweep / yardstick (wall; CPU-s)", f"{tw / yw:.2f}; {tc / yc:.2f}", "<= 0.35 (wall)"),
        Row("resweep check --threads 1 / 2", f"{med['one'][0]:.2f} s / {med['two'][0]:.2f} s wall, "
            f"{med['one'][1]:.2f} / {med['two'][1]:.2f} CPU-s", "", " ".join(map(str, one))),
        Row("speed-up 2 threads / 1 (paired runs; medians)", f"{paired:.2f}x; {med['one'][0] / med['two'][0]:.2f}x",
            ">= 1.6x"),
        Row("peak RSS resweep / yardstick", f"{trss / 2**20:.0f} MiB / {yrss / 2**20:.0f} MiB"),
    ]


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000)
    args = ap.parse_args(argv)
    print_table(f"re-solve vs compiled C ({args.entities} entities x {args.frames} frames)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
