"""The viewer on long traces: whole-trace re-solve after a settings change, and scrubbing.

    python tests/benchmarks/bench_viewer.py [--entities 200] [--frames 30000] [--repeat 3]

The viewer's re-solve is driven through its Qt-free halves (``app/viewer/resolve.py``): the
solve streams on a worker thread into a queue, and this thread does what the window's GUI thread
does per signal (``ResolveFeed`` into ``TraceFlags``, the strip's pixels refreshed at most 60
times a second, the entity counts compared 5 times a second). Each trace is measured in a child
process of its own, after one untimed check has loaded the kernels: the headless ``check_trace``
of the same trace in that process, then the viewer's re-solve, alternating, medians of
``--repeat``. ``resweep check TRACE --quiet`` as a whole process is timed too.

Printed ratios: viewer re-solve / headless check (target <= 1.3), viewer re-solve at 2x and 4x
the frames / 1x (linear: about 2 and 4), and the median scrub step on the 1x trace (a frame 17
frames on, read, re-solved and its facts gathered, as the window does before drawing; target
< 20 ms; the 3-D view's redraw is not included here).
"""
from __future__ import annotations

import json
import queue
import resource
import statistics
import subprocess
import sys
import threading
import time

from _bench import PYTHON, Row, common_args, median_timed, print_table, rate, resweep_cmd, yardstick_trace


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def _timed(fn) -> tuple[float, float]:
    c0, t0 = _cpu(), time.perf_counter()
    fn()
    return time.perf_counter() - t0, _cpu() - c0


def viewer_resolve(path, settings, frame_count: int, entity_count: int, pixels: int = 1500) -> None:
    """One whole-trace re-solve as the viewer runs it, up to the last block taken in."""
    from resweep.app.viewer.flags import TraceFlags
    from resweep.app.viewer.resolve import ResolveFeed, resolve_trace
    from resweep.app.viewer.strip_model import StripBins

    flags = TraceFlags(frame_count, entity_count)
    feed = ResolveFeed(flags)
    bins = StripBins(flags)
    bins.layout(pixels, 0, frame_count)
    feed.restart()
    q: queue.Queue = queue.Queue()

    def work():
        try:
            resolve_trace(path, settings, lambda rows: q.put((feed.rows, (rows,))),
                          lambda done, total: q.put((feed.progress, (done, total))))
        finally:
            q.put(None)
    th = threading.Thread(target=work)
    th.start()
    shown = flags.count_table().copy()
    last_paint = last_counts = 0.0
    while (item := q.get()) is not None:
        fn, fargs = item
        fn(*fargs)
        now = time.perf_counter()
        if now - last_paint >= 1 / 60:
            bins.refresh()
            last_paint = now
        if now - last_counts >= 0.2:
            changed = (flags.count_table() != shown).any(axis=1)
            shown[changed] = flags.count_table()[changed]
            last_counts = now
    th.join()
    bins.refresh()
    if not flags.complete:
        raise RuntimeError("the re-solve did not cover every frame")


def scrub_ms(path, settings, steps: int = 120, stride: int = 17) -> float:
    """Median ms per scrub step: frame_state of an uncached frame ``stride`` frames on, plus its facts."""
    from resweep.core.analysis.frames import TraceSession

    from resweep.app.viewer.report_md import frame_facts
    times = []
    with TraceSession(path, settings) as session:
        F = session.trace.frame_count
        f = F // 3
        for _ in range(steps):
            f = (f + stride) % F
            t0 = time.perf_counter()
            state = session.frame_state(f)
            frame_facts(session, state, session.default_column(f))
            times.append(time.perf_counter() - t0)
    return statistics.median(times) * 1000


def child(path: str, repeat: int, scrub: bool) -> dict:
    """Runs in a fresh process: headless check and viewer re-solve of ``path``, alternating."""
    from resweep.core.check.stream import check_trace
    from resweep.core.format.reader import open_trace
    from resweep.core.solve.settings import SolverSettings
    settings = SolverSettings()
    with open_trace(path) as tr:
        F, N = tr.frame_count, tr.entity_count
        check_trace(tr, settings, frames=(0, min(F, 50)))  # kernels loaded outside the timing

    def headless():
        with open_trace(path) as trace:
            check_trace(trace, settings)
    out = {"headless": [], "viewer": []}
    for _ in range(repeat):
        out["headless"].append(_timed(headless))
        out["viewer"].append(_timed(lambda: viewer_resolve(path, settings, F, N)))
    res = {k: [statistics.median(r[0] for r in v), statistics.median(r[1] for r in v)] for k, v in out.items()}
    res["rows"] = F * N
    if scrub:
        res["scrub_ms"] = scrub_ms(path, settings)
    return res


def run(args) -> list[Row]:
    got, rows = {}, []
    for k in (1, 2, 4):
        trace = yardstick_trace(args, args.frames * k)
        cmd = [PYTHON, __file__, "--child", str(trace), "--repeat", str(args.repeat)] + (["--scrub"] if k == 1 else [])
        got[k] = json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True).stdout)
        if k == 1:
            whole, _, _ = median_timed(resweep_cmd(trace, "--quiet"), args.repeat)
    one = got[1]
    for k, g in got.items():
        (vw, vc), (hw, hc) = g["viewer"], g["headless"]
        rows.append(Row(f"{k}x ({g['rows'] / 1e6:.0f} M entity-frames): viewer re-solve / headless check",
                        f"{vw:.2f} s ({vc:.1f} CPU-s) / {hw:.2f} s ({hc:.1f} CPU-s) = {vw / hw:.2f}",
                        "<= 1.3" if k == 1 else ""))
    rows.append(Row("1x: viewer re-solve / whole-process `resweep check --quiet`",
                    f"{one['viewer'][0]:.2f} s / {whole:.2f} s = {one['viewer'][0] / whole:.2f}  "
                    f"({rate(one['rows'], one['viewer'][0])})", "<= 1.3"))
    for k in (2, 4):
        rows.append(Row(f"viewer re-solve {k}x / 1x: wall, CPU",
                        f"{got[k]['viewer'][0] / one['viewer'][0]:.2f}, {got[k]['viewer'][1] / one['viewer'][1]:.2f}",
                        f"about {k} (linear)"))
    rows.append(Row("scrub step on the 1x trace (median, ms)", f"{one['scrub_ms']:.1f}", "< 20"))
    return rows


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000)
    ap.add_argument("--child", help="internal: measure this trace in this process")
    ap.add_argument("--scrub", action="store_true", help="internal: also time scrubbing (with --child)")
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child, args.repeat, args.scrub)))
        return 0
    print_table(f"viewer on long traces ({args.entities} entities)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
