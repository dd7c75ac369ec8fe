"""Both cores: the re-solve kernel with 2 threads against 1 (run on demand).

    python tests/benchmarks/bench_threads.py [--frames 3000] [--repeat 7]

Rows are the first ``--frames`` frames of the yardstick trace (200 entities), gathered once. The
kernel (``nb_check.check_rows`` writing into preallocated outputs, as a check reuses them) runs
alternately with ``numba.set_num_threads`` 1 and 2, ``--repeat`` times (target: 2 threads >= 1.7x
faster). On a shared 2-core virtual machine the speed of both cores drifts by up to ~1.7x within
seconds, so three figures are shown: the median of the ratios of back-to-back 1- and 2-thread
runs (least sensitive to drift), the ratio of the medians and the ratio of the best runs; its outputs for both thread counts are compared by sha256 digest. For context,
a whole in-process ``check_trace`` of the trace (reading, gathering and bookkeeping included).
"""
from __future__ import annotations

import hashlib
import statistics
import sys
import time

import numba
import numpy as np

from _bench import Row, common_args, print_table, rate, yardstick_trace

from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.check import nb_rows as nb_check
from resweep.core.check.rows import RowResults, model_params, warm_up
from resweep.core.world.kernel import kernel_world

FIELDS = ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "candidates", "points", "flags", "error")


def digest(res) -> str:
    h = hashlib.sha256()
    for f in FIELDS:
        h.update(np.ascontiguousarray(getattr(res, f)).tobytes())
    return h.hexdigest()


def run(args) -> list[Row]:
    warm_up("float64", "float32")
    path = yardstick_trace(args)
    with open_trace(path) as tr:
        blk = tr.frames(0, args.frames)
        world = tr.world()
    fr, col = np.nonzero(blk.active)
    s, m, e, h = (np.ascontiguousarray(a[fr, col], np.float64) for a in (blk.start, blk.motion, blk.end, blk.half))
    st = SolverSettings()
    out = RowResults.empty(len(s), st.passes, np.float64)
    kw = kernel_world(world, np.float64)
    mp = model_params(st, tr.up_axis, world.voxel_size, np.float64)
    ground = np.full(len(s), -1, np.int8)

    def kernel():
        nb_check.check_rows(s, m, e, h, kw, np.float64(st.skin), np.int64(st.passes), np.float64(st.tolerance),
                            np.int64(2), mp, ground, out.ref_end, out.npass, out.state, out.toi, out.normal,
                            out.voxel, out.block, out.candidates, out.points, out.raised, out.climb, out.flags,
                            out.error, False)

    def whole_check():
        with open_trace(path) as tr:
            return check_trace(tr, st)

    times = {(w, t): [] for w in ("kernel", "check_trace") for t in (1, 2)}
    digests = {}
    before = numba.get_num_threads()
    try:
        for rep in range(args.repeat):
            for t in (1, 2):
                numba.set_num_threads(t)
                t0 = time.perf_counter()
                kernel()
                times["kernel", t].append(time.perf_counter() - t0)
                digests.setdefault(t, digest(out))
        for rep in range(max(1, args.repeat // 3)):
            for t in (1, 2):
                numba.set_num_threads(t)
                t0 = time.perf_counter()
                whole_check()
                times["check_trace", t].append(time.perf_counter() - t0)
    finally:
        numba.set_num_threads(before)
    med = {k: statistics.median(v) for k, v in times.items()}
    rows = []
    for w, n, label in (("kernel", len(s), f"kernel ({args.frames} frames, outputs reused)"),
                        ("check_trace", None, "check_trace, whole trace in process")):
        if n is None:
            with open_trace(path) as tr:
                n = int(tr.frame_count * tr.entity_count)
        rows.append(Row(f"{label}: 1 / 2 threads", f"{med[w, 1]:.3f} s / {med[w, 2]:.3f} s  "
                        f"({rate(n, med[w, 1])} / {rate(n, med[w, 2])})"))
        paired = statistics.median(a / b for a, b in zip(times[w, 1], times[w, 2]))
        best = min(times[w, 1]) / min(times[w, 2])
        rows.append(Row(f"{label}: speed-up (paired runs; medians; best runs)",
                        f"{paired:.2f}x; {med[w, 1] / med[w, 2]:.2f}x; {best:.2f}x", ">= 1.7x" if w == "kernel" else ""))
    rows.append(Row("kernel results 1 vs 2 threads (sha256)", "identical" if digests[1] == digests[2] else "DIFFER"))
    return rows


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=3000)
    ap.set_defaults(repeat=15)
    args = ap.parse_args(argv)
    print_table(f"threads ({numba.config.NUMBA_NUM_THREADS} available, {args.frames} frames x 200 entities)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
