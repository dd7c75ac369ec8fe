"""Following a trace a recorder is still writing: reload it when new frames are committed.

A timer polls the open trace's commit record (one small read, HDF5 SWMR). When more frames are
committed than are shown, or the writer closed the file, the trace is reopened in the
background; the view stays on the current frame and entity, or moves to the newest frame when
"stay on the newest frame" is checked. Each reload re-solves the whole trace in the background.
"""
from __future__ import annotations

from PyQt6.QtCore import QObject, QTimer

POLL_MS = 1000


class RecordingFollower(QObject):
    """Polls ``window.session`` for committed frames while enabled."""

    def __init__(self, window, interval_ms: int = POLL_MS):
        super().__init__(window)
        self.win = window
        self.newest = False
        self.timer = QTimer(self)
        self.timer.setInterval(interval_ms)
        self.timer.timeout.connect(self.poll)

    @property
    def enabled(self) -> bool:
        return self.timer.isActive()

    def set_enabled(self, on: bool):
        if on:
            self.timer.start()
        else:
            self.timer.stop()

    def set_newest(self, on: bool):
        self.newest = bool(on)

    def poll(self):
        """Reload the trace when the recorder committed frames that are not shown yet."""
        w = self.win
        s = w.session
        if s is None or w.worker.loading():
            return  # nothing open, or a (re)load is under way (a new one would cancel it)
        try:
            state = s.trace.poll_committed()
        except Exception as exc:  # the GUI boundary: a broken file stops following, with a line
            w.status(f"stopped following: {exc}")
            self.set_enabled(False)
            return
        if state is None:
            return  # not a file being recorded
        frames, closed = state
        if frames > s.trace.frame_count or (closed and s.trace.ended_early):
            frame = max(0, frames - 1) if self.newest else w.pb.frame
            w.open_path(s.path, frame, w._focus_id())
