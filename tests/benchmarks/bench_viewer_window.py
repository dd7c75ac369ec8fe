"""The real viewer window on a long trace: re-solve after a settings change, and scrubbing.

    xvfb-run -a python tests/benchmarks/bench_viewer_window.py [--frames 30000] [--repeat 2]

Opens the yardstick trace (200 entities x ``--frames``) in ``MainWindow`` with its 3-D view,
waits for the first whole-trace re-solve, then changes a solver setting (passes 3 -> 2 -> 3) and
times each re-solve until the last mark is in (the event loop running, strip and counts
painting as in use), against the headless ``check_trace`` of the same trace in this process.
Scrubbing: the median time of moving the frame 17 frames on, from the move until the 3-D view has
rendered that frame and the event loop has painted the rest (Frame panel, entities, strip), once
the re-solve is done; also its CPU time (every thread: the software-GL renderer's too) and the
full-quality paint that follows when scrubbing stops. Needs a display (Xvfb).
"""
from __future__ import annotations

import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

from _bench import Row, common_args, print_table, yardstick_trace


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def run(args) -> list[Row]:
    from PyQt6.QtCore import QEventLoop, QSettings, QTimer
    from PyQt6.QtWidgets import QApplication

    from resweep.core.check.stream import check_trace
    from resweep.core.format.reader import open_trace
    from resweep.core.solve.settings import SolverSettings

    from resweep.app.viewer.window import MainWindow
    trace = yardstick_trace(args, args.frames)
    app = QApplication.instance() or QApplication(sys.argv[:1])
    with tempfile.TemporaryDirectory() as tmp:
        win = MainWindow(QSettings(str(Path(tmp) / "v.ini"), QSettings.Format.IniFormat))
        win.show()

        # The event loop sleeps until something happens, as under app.exec() (a polling loop
        # here would take CPU from the solver); the heartbeat bounds the sleep.
        heartbeat = QTimer()
        heartbeat.start(5)

        def wait(cond, timeout=900.0):
            t0 = time.perf_counter()
            while not cond():
                app.processEvents(QEventLoop.ProcessEventsFlag.WaitForMoreEvents)
                if time.perf_counter() - t0 > timeout:
                    raise TimeoutError("the window did not finish")
        win.open_path(str(trace))
        wait(lambda: win.session is not None and win.flags is not None and win.flags.complete
             and not win.worker.is_busy())
        resolves, headless, resolve_cpu, headless_cpu = [], [], [], []
        for i in range(args.repeat):
            for passes in (2, 3):
                t0, c0 = time.perf_counter(), _cpu()
                win.pb.update_settings(passes=passes)
                wait(lambda: win.flags.complete and not win.worker.is_busy())
                resolves.append(time.perf_counter() - t0)
                resolve_cpu.append(_cpu() - c0)
                with open_trace(trace) as tr:
                    t0, c0 = time.perf_counter(), _cpu()
                    check_trace(tr, SolverSettings(passes=passes))
                    headless.append(time.perf_counter() - t0)
                    headless_cpu.append(_cpu() - c0)
        renders = [0]
        win.plotter.render_window.AddObserver("EndEvent", lambda *_: renders.__setitem__(0, renders[0] + 1))

        def painted():
            """Run the event loop until the 3-D view has rendered the current frame, then once more
            for the other widgets' paints (all on screen)."""
            seen = renders[0]
            wait(lambda: renders[0] > seen and win.state is not None and win.state.frame == win.pb.frame, 60)
            app.processEvents()
        for _ in range(3):
            app.processEvents()
        steps, cpus = [], []
        f = win.pb.frame
        for _ in range(60):
            f += 17
            t0, c0 = time.perf_counter(), _cpu()
            win.pb.set_frame(f)
            painted()
            steps.append(time.perf_counter() - t0)
            cpus.append(_cpu() - c0)
        # the full-quality paint that follows once scrubbing stops (view_paint.py)
        drafts = win.view_paint.drafts
        t0, seen = time.perf_counter(), renders[0]
        if win.view_paint.draft:
            wait(lambda: renders[0] > seen, 60)
            app.processEvents()
        settle = time.perf_counter() - t0
        heartbeat.stop()
        win.close()
    rows = []
    if resolves:  # --repeat 0: scrubbing only
        rw, hw = statistics.median(resolves), statistics.median(headless)
        rc, hc = statistics.median(resolve_cpu), statistics.median(headless_cpu)
        rows = [Row(f"window: re-solve after a settings change ({args.frames * 200 / 1e6:.0f} M entity-frames)",
                    f"{rw:.2f} s, {rc:.1f} CPU-s (medians of {len(resolves)})"),
                Row("headless check_trace, same process and settings", f"{hw:.2f} s, {hc:.1f} CPU-s"),
                Row("ratio window re-solve / headless", f"{rw / hw:.2f}", "<= 1.3"),
                Row("  same, CPU seconds", f"{rc / hc:.2f}")]
    return rows + [
        Row("window scrub step, 17 frames on, until shown and painted (median, ms)",
            f"{statistics.median(steps) * 1000:.1f}", "< 20"),
        Row("  CPU per scrub step, all threads (median, ms)", f"{statistics.median(cpus) * 1000:.1f}"),
        Row("  draft paints among the steps", f"{drafts} of {len(steps)}"),
        Row("  full-quality paint after the scrub settles (ms, incl. the settle delay)", f"{settle * 1000:.0f}"),
    ]


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.set_defaults(repeat=2)
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000)
    args = ap.parse_args(argv)
    print_table("viewer window on a long trace", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
