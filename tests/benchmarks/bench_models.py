"""Solver models and ``explain`` on a yardstick trace (run on demand).

    python tests/benchmarks/bench_models.py [--entities 200] [--frames 10000] [--repeat 3]

In one process, on the same trace (2 M entity-frames by default):
- kernel CPU time per entity-frame of each model (slide, axis, pushout with 0.5 substeps, slide
  and axis with a 0.6 step) on the first ``--rows`` rows of the trace, one thread, median of
  ``--repeat`` interleaved rounds, as a ratio to slide (target: <= 1.5x);
- ``explain_trace`` against ``check_trace`` of the whole trace, medians (target: explain <= 4x).
Kernels are compiled (or loaded) before any timing.
"""
from __future__ import annotations

import statistics
import sys
import time

import numpy as np

from _bench import Row, common_args, median_call, print_table, yardstick_trace


def _rows(trace, n):
    """The first ``n`` active rows: start, motion, end, half float64 (n, 3)."""
    out = [[], [], [], []]
    got = 0
    for blk in trace.iter_frames(1 << 17):
        fr, col = np.nonzero(blk.active)
        for k, a in enumerate((blk.start, blk.motion, blk.end, blk.half)):
            out[k].append(np.asarray(a[fr, col], np.float64))
        got += len(fr)
        if got >= n:
            break
    return [np.concatenate(a)[:n] for a in out]


MODELS = {"slide": {}, "axis": {"model": "axis"}, "pushout 0.5": {"model": "pushout", "substep": 0.5},
          "slide step 0.6": {"step_height": 0.6}, "axis step 0.6": {"model": "axis", "step_height": 0.6}}


def _kernel_cpu(world, rows, up, repeat: int) -> dict[str, float]:
    """Median CPU seconds per model of one ``solve_rows`` call over ``rows`` on one thread.

    The models are timed in interleaved rounds (slide, axis, ..., then again), so load from other
    processes on a shared machine falls on all of them alike; CPU time rather than wall time for
    the same reason.
    """
    import numba

    from resweep.core import SolverSettings, solve_rows
    s, m, e, h = rows
    settings = {name: SolverSettings(**kw) for name, kw in MODELS.items()}
    for st in settings.values():
        solve_rows(world, s[:10], m[:10], e[:10], h[:10], st, up=up)  # compile / load
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    times = {name: [] for name in MODELS}
    try:
        for _ in range(repeat):
            for name, st in settings.items():
                t0 = time.process_time()
                solve_rows(world, s, m, e, h, st, up=up)
                times[name].append(time.process_time() - t0)
    finally:
        numba.set_num_threads(threads)
    return {name: statistics.median(t) for name, t in times.items()}


def run(args) -> list[Row]:
    from resweep.core import SolverSettings, check_trace, open_trace, solve_rows
    from resweep.core.analysis.explain import explain_trace
    path = yardstick_trace(args, args.frames)
    out = []
    with open_trace(path) as tr:
        world = tr.world()
        s, m, e, h = _rows(tr, args.rows)
        per = _kernel_cpu(world, (s, m, e, h), tr.up_axis, args.repeat)
        for name, t in per.items():
            out.append(Row(f"kernel {name}", f"{t / len(s) * 1e9:.0f} CPU-ns/row ({t / per['slide']:.2f}x slide)",
                           "<= 1.5x" if name != "slide" else ""))
        t_check = median_call(lambda: check_trace(tr, SolverSettings()), args.repeat)
        t0 = time.process_time()
        t_explain = median_call(lambda: explain_trace(tr), args.repeat)
        cpu = (time.process_time() - t0) / args.repeat
    n = tr.entity_count * tr.frame_count
    out += [Row("check_trace (whole trace)", f"{t_check:.2f} s ({n / 1e6:.1f} M entity-frames)"),
            Row("explain_trace (whole trace)", f"{t_explain:.2f} s ({cpu:.2f} CPU s)"),
            Row("ratio explain / check", f"{t_explain / t_check:.2f}", "<= 4")]
    return out


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=10000)
    ap.add_argument("--rows", type=int, default=200000, help="rows of the per-model kernel timing")
    args = ap.parse_args(argv)
    print_table(f"solver models and explain ({args.entities} entities x {args.frames} frames)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
