"""Frames solved off the GUI thread: a quick result is taken without running the event loop, a
slow one keeps the loop running and says so once."""
from __future__ import annotations

import time

import pytest
from PyQt6.QtCore import QTimer

from resweep.app.viewer.worker import off_thread

pytestmark = pytest.mark.gui


def _ticks(qtbot):
    n = [0]
    t = QTimer()
    t.setInterval(1)
    t.timeout.connect(lambda: n.__setitem__(0, n[0] + 1))
    t.start()
    qtbot.wait(20)  # the timer is due: only a running event loop fires it
    return t, n


def test_quick_result_does_not_run_the_event_loop(qtbot):
    timer, ticks = _ticks(qtbot)
    before = ticks[0]
    slow = []
    _, value = off_thread(lambda: 7, lambda: False, quick_s=1.0, on_slow=lambda: slow.append(1))
    assert value == 7 and not slow and ticks[0] == before
    timer.stop()


def test_slow_result_keeps_the_loop_running_and_says_so_once(qtbot):
    timer, ticks = _ticks(qtbot)
    before = ticks[0]
    slow = []

    def work():
        time.sleep(0.3)
        return "done"
    _, value = off_thread(work, lambda: False, quick_s=0.01, on_slow=lambda: slow.append(1))
    assert value == "done" and slow == [1] and ticks[0] > before
    timer.stop()


def test_cancelled_wait_returns_none(qtbot):
    t0 = time.perf_counter()
    thread, value = off_thread(lambda: time.sleep(1.0), lambda: time.perf_counter() - t0 > 0.1, quick_s=0.01)
    assert value is None and thread.is_alive()
    thread.join()
