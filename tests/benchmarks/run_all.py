"""Run every re-solve benchmark and print one table (on demand; takes several minutes).

    python tests/benchmarks/run_all.py [--frames 30000] [--repeat 3] [--cold]
        [--yardstick ../shared/yardstick] [--workdir ../bench]

Rows: the kernel per core against the yardstick's tight C loop (CPU seconds), throughput against
the compiled C yardstick and 2 threads against 1 (whole processes), trace-length scaling (2, 4 and
8 M entity-frames: time and peak RSS), reading frames (h5py against the chunk kernels), long sweeps (4, 16, 64 voxels), the kernel on 1 vs 2
threads, warm start, and the kernel against a pure-numpy solve. Each target is printed as a ratio
measured in this one run. Traces are generated once into ``--workdir``. Other
benchmarks in this folder (e.g. the viewport's) run on their own.
"""
from __future__ import annotations

import sys
import time

import bench_decode
import bench_kernel
import bench_length
import bench_numpy
import bench_resolve
import bench_startup
import bench_sweeps
import bench_threads
from _bench import Row, common_args, print_table


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000, help="frames of the 1x trace (default 30000)")
    ap.add_argument("--cold", action="store_true", help="also time a first run with an empty kernel cache")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    rows: list[Row] = []
    for title, bench, extra in (
        ("kernel vs tight C", bench_kernel, {"frames": 5000, "repeat": max(args.repeat, 5)}),
        ("vs compiled C", bench_resolve, {}),
        ("reading frames", bench_decode, {"frames": args.frames}),
        ("trace length", bench_length, {"frames": 10000}),
        ("long sweeps", bench_sweeps, {"rows": 20000, "repeat": max(args.repeat, 5)}),
        ("threads", bench_threads, {"frames": 3000, "repeat": max(args.repeat, 15)}),
        ("start-up", bench_startup, {"repeat": max(args.repeat, 7)}),
        ("vs numpy", bench_numpy, {"frames": 1000}),
    ):
        sub = type(args)(**{**vars(args), "trace_frames": args.frames, **extra})
        sys.stderr.write(f"running {bench.__name__} ...\n")
        got = bench.run(sub)
        rows.append(Row(f"[{title}]", ""))
        rows.extend(got)
    print_table(f"resweep re-solve benchmarks ({time.perf_counter() - t0:.0f} s)", rows)
    return 0


if __name__ == "__main__":
    sys.exit(main())
