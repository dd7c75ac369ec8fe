"""Reading every frame block of a trace: h5py's decoding against the parallel chunk kernels (run on demand).

    python tests/benchmarks/bench_decode.py [--frames 30000] [--repeat 5]

Reads all frames of the yardstick trace (200 entities x ``--frames``, lzf + shuffle chunks) in the
blocks a check reads (``Trace.iter_frames``, limits checked), in one process, four ways in turn:
h5py decoding (``decode_with_kernels(False)``, what readers that do not solve use) and the chunk
kernels (``format/chunk_read.py``), each on one and on two numba threads. Reported: wall and CPU
seconds (medians of ``--repeat`` interleaved runs), and the ratios kernels / h5py and two threads
over one. No prefetch thread: this times the decoding itself.
"""
from __future__ import annotations

import statistics
import time

import numba
import numpy as np

from _bench import Row, common_args, print_table, yardstick_trace

from resweep.core import open_trace
from resweep.core.codec.nb_decode import warm_up


def read_all(path, kernels: bool) -> tuple[float, float]:
    """(wall s, CPU s) of reading every frame block of ``path``."""
    w, c = time.perf_counter(), time.process_time()
    with open_trace(path) as tr:
        tr.decode_with_kernels(kernels)
        n = 0
        for blk in tr.iter_frames():
            n += blk.start.shape[0]
    assert n == tr.frame_count
    return time.perf_counter() - w, time.process_time() - c


def run(args) -> list[Row]:
    warm_up()
    trace = yardstick_trace(args, args.frames)
    before = numba.get_num_threads()
    ways = [(k, t) for k in (False, True) for t in (1, 2)]
    times = {w: [] for w in ways}
    try:
        for kernels, threads in ways:  # first touch of the file and buffers, outside the timing
            numba.set_num_threads(threads)
            read_all(trace, kernels)
        for _ in range(args.repeat):
            for kernels, threads in ways:
                numba.set_num_threads(threads)
                times[(kernels, threads)].append(read_all(trace, kernels))
    finally:
        numba.set_num_threads(before)
    med = {w: (statistics.median(t[0] for t in v), statistics.median(t[1] for t in v)) for w, v in times.items()}
    rows = []
    for (kernels, threads), (wall, cpu) in med.items():
        rows.append(Row(f"{'chunk kernels' if kernels else 'h5py'}, {threads} thread{'s' if threads > 1 else ''}",
                        f"{wall:.3f} s wall, {cpu:.3f} CPU-s"))
    h1, k1, k2 = med[(False, 1)], med[(True, 1)], med[(True, 2)]
    rows += [Row("kernels / h5py, one thread (CPU)", f"{k1[1] / h1[1]:.2f}"),
             Row("kernels, 2 threads over 1 (wall)", f"{k1[0] / k2[0]:.2f}x"),
             Row("kernels on 2 threads / h5py (wall)", f"{k2[0] / h1[0]:.2f}")]
    return rows


def parser():
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000)
    ap.set_defaults(repeat=5)
    return ap


if __name__ == "__main__":
    ARGS = parser().parse_args()
    np.seterr(all="ignore")
    print_table(f"reading every frame block ({ARGS.entities} entities x {ARGS.frames} frames)", run(ARGS))
