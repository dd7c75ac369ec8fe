"""The re-solve kernel per core against the tight C loop of the yardstick (run on demand).

    python tests/benchmarks/bench_kernel.py [--frames 5000] [--repeat 5]

Both solve every active entity-frame of the same yardstick trace (200 entities, ``--frames``
frames) with the rows already in memory, on one thread: the C loop is the yardstick built with no
scan margin (``yardstick.py solve --tight``; it reports its own CPU seconds), the kernel is the
check's (``nb_rows.check_rows``, one numba thread), timed in CPU seconds of this process, in the
two ways it runs: flags of every row (``flag_rows``, what ``resweep check`` asks of every row; the
ratio) and every output (``solve_rows`` into preallocated results, as the viewer asks). CPU seconds, not wall time: the machine is shared. Runs
alternate C and kernel ``--repeat`` times; the medians are compared (target: kernel >= 0.8x the C
loop's entity-frames per CPU second). The kernel also re-solves and classifies (start overlap,
back-off, divergence tests), which the C loop does not.
"""
from __future__ import annotations

import statistics
import subprocess
import time

import numba
import numpy as np

from _bench import PYTHON, Row, common_args, print_table, yardstick_trace

from resweep.core import SolverSettings, open_trace
from resweep.core.check.rows import RowResults, flag_rows, solve_rows, warm_up


def tight_c(args, trace) -> tuple[float, int]:
    """(CPU seconds of the C loop alone, rows) of one ``yardstick.py solve --tight`` run."""
    out = subprocess.run([PYTHON, str(args.yardstick / "yardstick.py"), "solve", "--tight", str(trace)],
                         check=True, capture_output=True, text=True).stdout
    fields = dict(f.split("=", 1) for f in out.split() if "=" in f)
    return float(fields["cpu"]), int(fields["entity_frames"])


def trace_rows(trace):
    """World and the float64 rows (start, motion, recorded end, half) of every active entity-frame."""
    with open_trace(trace) as tr:
        blk = tr.frames(0, tr.frame_count)
        world = tr.world()
    fr, col = np.nonzero(blk.active)
    return world, [np.ascontiguousarray(a[fr, col], np.float64) for a in (blk.start, blk.motion, blk.end, blk.half)]


def kernel_cpu(world, rows, out, settings, **kw) -> float:
    """CPU seconds of one solve of ``rows`` on one numba thread: the check's path (flags of every
    row) when ``out`` is an int32 flags array, else every output (``solve_rows``)."""
    c0 = time.process_time()
    if isinstance(out, np.ndarray):
        flag_rows(world, *rows, settings, out, **kw)
    else:
        solve_rows(world, *rows, settings, out=out, **kw)
    return time.process_time() - c0


def run(args) -> list[Row]:
    warm_up("float64")
    trace = yardstick_trace(args, args.frames)
    world, rows = trace_rows(trace)
    n = len(rows[0])
    st = SolverSettings()
    out = RowResults.alloc(n, st.passes, np.float64)
    before = numba.get_num_threads()
    flags = np.zeros(n, np.int32)
    c_times, k_times, a_times = [], [], []
    try:
        numba.set_num_threads(1)
        kernel_cpu(world, rows, out, st)  # first touch of the outputs, outside the timing
        kernel_cpu(world, rows, flags, st)
        for _ in range(args.repeat):
            c, n_c = tight_c(args, trace)
            c_times.append(c)
            k_times.append(kernel_cpu(world, rows, flags, st))
            a_times.append(kernel_cpu(world, rows, out, st))
    finally:
        numba.set_num_threads(before)
    c_rate = n_c / statistics.median(c_times)
    k_rate = n / statistics.median(k_times)
    a_rate = n / statistics.median(a_times)
    cmd = f"{PYTHON} {args.yardstick / 'yardstick.py'} solve --tight {trace}"
    return [Row("tight C loop, 1 thread (median CPU-s)", f"{statistics.median(c_times):.3f} CPU-s  "
                f"({c_rate / 1e6:.2f} M entity-frames per CPU-s)", "", cmd),
            Row("check kernel, flags of every row, 1 thread", f"{statistics.median(k_times):.3f} CPU-s  "
                f"({k_rate / 1e6:.2f} M entity-frames per CPU-s)"),
            Row("check kernel, every output, 1 thread", f"{statistics.median(a_times):.3f} CPU-s  "
                f"({a_rate / 1e6:.2f} M entity-frames per CPU-s)"),
            Row("ratio kernel (flags) / tight C per core", f"{k_rate / c_rate:.2f}", ">= 0.8"),
            Row("ratio kernel (every output) / tight C per core", f"{a_rate / c_rate:.2f}")]


def parser(description: str = __doc__.splitlines()[0]):
    ap = common_args(description)
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=5000)
    ap.set_defaults(repeat=5)
    return ap


if __name__ == "__main__":
    ARGS = parser().parse_args()
    print_table(f"kernel per core vs tight C ({ARGS.entities} entities x {ARGS.frames} frames)", run(ARGS))
