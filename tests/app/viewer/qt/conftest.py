"""Fixtures for the viewer tests: a window on a private settings file, the demo, a long trace.

pytest-xvfb starts a virtual X server for the session; VTK draws into it through Mesa.
"""
from __future__ import annotations


import numpy as np
import pytest
from PyQt6.QtCore import QSettings
from PyQt6.QtWidgets import QApplication

from resweep.core.format.reader import open_trace
from resweep.core.format.writer import write_trace

from paths import ROOT
DEMO = ROOT / "sample_traces" / "quarry.h5"
LOAD_TIMEOUT = 120_000  # ms; first use compiles (or loads) the numba kernels on a busy 2-core box


@pytest.fixture
def store(tmp_path):
    s = QSettings(str(tmp_path / "viewer.ini"), QSettings.Format.IniFormat)
    yield s
    s.sync()


def make_window(qtbot, store, **kw):
    from resweep.app.viewer.window import MainWindow
    win = MainWindow(store, **kw)
    qtbot.addWidget(win)  # closed (closeEvent: threads joined) at teardown
    win.show()
    qtbot.waitExposed(win)
    # Window shortcuts need the window active; with no window manager on Xvfb, ask for it.
    win.activateWindow()
    win.raise_()
    qtbot.waitUntil(lambda: QApplication.activeWindow() is win, timeout=10_000)
    return win


def open_and_wait(qtbot, win, path, frame=None, entity=None, solved=True):
    """Open ``path`` and wait until it is on screen (and, with ``solved``, fully re-solved)."""
    with qtbot.waitSignal(win.worker.loaded, timeout=LOAD_TIMEOUT):
        win.open_path(path, frame, entity)
    if solved:
        qtbot.waitUntil(lambda: win.flags.complete and not win.worker.is_busy(), timeout=LOAD_TIMEOUT)
    return win


@pytest.fixture
def window(qtbot, store):
    return make_window(qtbot, store)


@pytest.fixture
def demo_window(qtbot, window):
    return open_and_wait(qtbot, window, DEMO)


@pytest.fixture(scope="session")
def long_trace(tmp_path_factory):
    """The demo's frames repeated 200 times (48000 frames, 240000 entity-frames): several streamed
    blocks, so results arrive over time."""
    path = tmp_path_factory.mktemp("long") / "quarry_x200.h5"
    with open_trace(DEMO) as tr:
        blk = tr.frames(0, tr.frame_count)
        k = 200
        rep = lambda a: np.concatenate([np.asarray(a)] * k)
        dt = float(tr.time[1] - tr.time[0])
        write_trace(path, chunk_size=tr.chunk_size, chunk_origin=tr.chunk_origin, chunk_blocks=tr.chunk_blocks,
                    shapes=tr.shapes, entity_ids=tr.ids, entity_names=tr.names, half_extents=tr.half_extents,
                    time=np.arange(tr.frame_count * k) * dt, start=rep(blk.start), motion=rep(blk.motion),
                    end=rep(blk.end), active=rep(blk.active), frame_half_extents=rep(blk.half),
                    title="demo repeated", compression=None)
    return path
