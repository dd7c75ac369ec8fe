"""The real viewer window on a long trace: re-solve after a settings change, and scrubbing.

    xvfb-run -a python tests/benchmarks/bench_viewer_window.py [--frames 30000] [--repeat 2]

Opens the yardstick trace (200 entities x ``--frames``) in ``MainWindow`` with its 3-D view,
waits for the first whole-trace re-solve, then changes a solver setting (passes 3 -> 2 -> 3) and
times each re-solve until the last mark is in (the event loop running, strip and counts
painting as in use), against the headless ``check_trace`` of the same trace in this process.
Scrubbing: the median time of moving the frame 17 frames on (frame solved off the GUI thread,
3-D view, Frame panel and strip redrawn) once the re-solve is done. Needs a display (Xvfb).
"""
from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

from _bench import Row, common_args, print_table, yardstick_trace


def run(args) -> list[Row]:
    from PyQt6.QtCore import QSettings
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

        def wait(cond, timeout=900.0):
            t0 = time.perf_counter()
            while not cond():
                app.processEvents()
                time.sleep(0.001)
                if time.perf_counter() - t0 > timeout:
                    raise TimeoutError("the window did not finish")
        win.open_path(str(trace))
        wait(lambda: win.session is not None and win.flags is not None and win.flags.complete
             and not win.worker.is_busy())
        resolves, headless = [], []
        for i in range(args.repeat):
            for passes in (2, 3):
                t0 = time.perf_counter()
                win.pb.update_settings(passes=passes)
                wait(lambda: win.flags.complete and not win.worker.is_busy())
                resolves.append(time.perf_counter() - t0)
                with open_trace(trace) as tr:
                    t0 = time.perf_counter()
                    check_trace(tr, SolverSettings(passes=passes))
                    headless.append(time.perf_counter() - t0)
        steps = []
        f = win.pb.frame
        for _ in range(60):
            f += 17
            t0 = time.perf_counter()
            win.pb.set_frame(f)
            app.processEvents()  # paint
            steps.append(time.perf_counter() - t0)
        win.close()
    rw, hw = statistics.median(resolves), statistics.median(headless)
    return [
        Row(f"window: re-solve after a settings change ({args.frames * 200 / 1e6:.0f} M entity-frames)",
            f"{rw:.2f} s (median of {len(resolves)})"),
        Row("headless check_trace, same process and settings", f"{hw:.2f} s"),
        Row("ratio window re-solve / headless", f"{rw / hw:.2f}", "<= 1.3"),
        Row("window scrub step, 17 frames on (median, ms)", f"{statistics.median(steps) * 1000:.1f}", "< 20"),
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
