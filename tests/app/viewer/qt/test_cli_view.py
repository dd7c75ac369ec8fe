"""``resweep view`` from the command line: the demo by default, one-line refusals without a display."""
from __future__ import annotations

import os
import subprocess
import sys

import pytest
from PyQt6.QtCore import QSettings, QTimer
from PyQt6.QtWidgets import QApplication

from conftest import DEMO

pytestmark = pytest.mark.gui


def view(*args, env):
    return subprocess.run([sys.executable, "-m", "resweep.app.cli", "view", *map(str, args)],
                          capture_output=True, text=True, timeout=300, env=env)


def bare_env(**extra):
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")}
    env.update(extra)
    return env


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="display variables are a Linux matter")
def test_no_display_prints_one_line_pointing_to_snapshot():
    r = view(env=bare_env())
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "no display" in lines[0] and "resweep snapshot" in lines[0]
    assert "Traceback" not in r.stderr and r.stdout == ""


def test_unreachable_display_is_refused_without_a_qt_traceback():
    r = view(DEMO, env=bare_env(DISPLAY=":7391"))  # no X server listens there
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "no display" in lines[0] and "resweep snapshot" in lines[0]


def test_missing_trace_is_one_line_naming_the_file(tmp_path):
    missing = tmp_path / "nope.h5"
    r = view(missing, env=dict(os.environ))
    assert r.returncode == 2
    assert r.stderr.strip().splitlines() == [f"resweep view: {missing}: no such file"]


def test_view_without_a_trace_opens_the_bundled_demo(qtbot, tmp_path):
    from resweep.app.viewer.window import run_window
    QSettings.setPath(QSettings.Format.NativeFormat, QSettings.Scope.UserScope, str(tmp_path))
    seen = {}

    def poll():
        wins = [w for w in QApplication.topLevelWidgets() if w.__class__.__name__ == "MainWindow" and w.isVisible()]
        if wins and wins[0].state is not None:
            w = wins[0]
            seen.update(path=w.session.path, frame=w.pb.frame, focus=w.pb.focus)
            w.close()
        else:
            QTimer.singleShot(50, poll)
    QTimer.singleShot(50, poll)
    run_window(None, 40, 102)
    assert os.path.samefile(seen["path"], DEMO)
    assert seen["frame"] == 40 and seen["focus"] == 1
