"""Whole-trace re-solve against the compiled C yardstick, as whole processes (run on demand).

    python tests/benchmarks/bench_resolve.py [--entities 200] [--frames 30000] [--repeat 3]

Times ``resweep check TRACE --quiet`` and ``python yardstick.py solve TRACE`` (reading the trace,
solving every entity-frame in C, single-threaded) on the same yardstick trace, each the median of
``--repeat`` runs in this one run, and reports their ratio (target: resweep <= 1.5x the yardstick).
The trace (6 M entity-frames by default) is generated once into ``--workdir``.
"""
from __future__ import annotations

import sys

from _bench import PYTHON, Row, common_args, median_timed, print_table, rate, resweep_cmd, yardstick_trace


def run(args) -> list[Row]:
    trace = yardstick_trace(args, args.frames)
    n = args.entities * args.frames
    ours = resweep_cmd(trace, "--quiet")
    yard = [PYTHON, str(args.yardstick / "yardstick.py"), "solve", str(trace)]
    median_timed(ours, 1)  # compile or load the kernels once, outside the timing
    t_ours, rss_ours, _ = median_timed(ours, args.repeat)
    t_yard, rss_yard, out = median_timed(yard, args.repeat)
    c_only = next((float(f.split("=")[1]) for f in out.split() if f.startswith("seconds=")), float("nan"))
    return [
        Row("resweep check, whole process", f"{t_ours:.2f} s  ({rate(n, t_ours)})", "", " ".join(map(str, ours))),
        Row("yardstick solve, whole process", f"{t_yard:.2f} s  ({rate(n, t_yard)}; C loop alone {c_only:.2f} s)",
            "", " ".join(yard)),
        Row("ratio resweep / yardstick", f"{t_ours / t_yard:.2f}", "<= 1.5"),
        Row("peak RSS resweep / yardstick", f"{rss_ours / 2**20:.0f} MiB / {rss_yard / 2**20:.0f} MiB"),
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
