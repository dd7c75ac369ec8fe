"""The viewer on traces written by the recorder."""
from __future__ import annotations

import pytest

import recording_helpers as rh
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
