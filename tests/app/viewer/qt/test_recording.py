"""The viewer on traces written by the recorder."""
from __future__ import annotations

import numpy as np
import pytest

import recording_helpers as rh
from resweep.core.check.kinds import KINDS, kind_mask
from resweep.core.check.stream import check_trace
from conftest import open_and_wait
from resweep.core.format.reader import open_trace

pytestmark = pytest.mark.gui


def test_killed_recording_opens_and_says_it_ended_early(qtbot, window, tmp_path):
    path, _ = rh.record_and_kill(tmp_path, "after_frame", 40)
    with open_trace(path) as t:
        frames, last = t.frame_count, t.last_time
    assert frames == 32  # flushes every 16 frames: frames 32..40 were never committed
    open_and_wait(qtbot, window, path, solved=False)
    assert "(ended early)" in window.windowTitle()
    assert f"32 frames read, last flushed at {last:.3f} s" in window.status_label.text()
    assert window.pb.frame_count == frames


def test_window_follows_a_recording_in_another_process(qtbot, window, tmp_path):
    from resweep.core.check.rows import warm_up
    warm_up()
    path = tmp_path / "live.h5"
    proc = rh.start_slow_recorder(path, 300)
    failures = []
    window.worker.solve_failed.connect(failures.append)
    try:
        qtbot.waitUntil(lambda: _committed(path) >= rh.FLUSH, timeout=30_000)
        open_and_wait(qtbot, window, path, frame=3, solved=False)
        first = window.pb.frame_count
        assert first < 300 and "(ended early)" in window.windowTitle()
        window.follower.timer.setInterval(200)
        window.act_follow.trigger()
        assert window.act_follow.isChecked() and window.follower.enabled
        qtbot.waitUntil(lambda: window.pb.frame_count > first, timeout=60_000)  # the timeline grew
        qtbot.waitUntil(lambda: window.pb.frame_count == 300 and "(ended early)" not in window.windowTitle(),
                        timeout=120_000)
        assert window.pb.frame == 3  # the view stayed on the frame the user was looking at
        assert window.flags.frame_count == 300
        # Every reload re-solved in the background while the session, the follower and the solve
        # had the file open at once: no solve stopped on a read error, and the strip of the
        # finished recording holds what a plain check of it finds.
        qtbot.waitUntil(lambda: failures or (window.flags.complete and not window.worker.is_busy()),
                        timeout=120_000)
        assert failures == []
        with open_trace(path) as done:
            whole = check_trace(done)
        flags = window.flags.flags
        assert {k: int(np.count_nonzero(flags & kind_mask(k))) for k in KINDS} == whole.counts
        assert sum(whole.counts.values()) > 0
    finally:
        assert proc.wait(timeout=60) == 0


def _committed(path) -> int:
    try:
        with open_trace(path) as t:
            return t.frame_count
    except Exception:
        return 0
