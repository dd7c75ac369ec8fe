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


def run_window_and_look(tmp_path, *args) -> dict:
    """``run_window(*args)`` until its first frame is on screen; what the window then holds."""
    from resweep.app.viewer.window import run_window
    QSettings.setPath(QSettings.Format.NativeFormat, QSettings.Scope.UserScope, str(tmp_path))
    seen = {}

    def poll():
        wins = [w for w in QApplication.topLevelWidgets() if w.__class__.__name__ == "MainWindow" and w.isVisible()]
        if wins and wins[0].state is not None:
            w = wins[0]
            seen.update(path=w.session.path, frame=w.pb.frame, focus=w.pb.focus, settings=w.pb.settings,
                        session_settings=w.session.settings)
            w.close()
        else:
            QTimer.singleShot(50, poll)
    QTimer.singleShot(50, poll)
    run_window(*args)
    return seen


def test_view_without_a_trace_opens_the_bundled_demo(qtbot, tmp_path):
    seen = run_window_and_look(tmp_path, None, 40, 102)
    assert os.path.samefile(seen["path"], DEMO)
    assert seen["frame"] == 40 and seen["focus"] == 1


@pytest.mark.parametrize("argv, message", [
    (["{demo}", "--frame", "240"], "resweep view: {demo}: frame 240 is out of range (valid frames are 0..239)"),
    (["{demo}", "--entity", "999"], "resweep view: {demo}: entity id 999 is not in the trace (ids: 101, 102, 103, "
                                    "104, 105)"),
    (["{demo}", "--passes", "0"], "resweep view: passes=0: must be an integer in 1..8"),
    (["{bad}"], "resweep view: {bad}: "),
])
def test_view_checks_trace_frame_entity_and_settings_before_any_window(tmp_path, argv, message):
    bad = tmp_path / "bad.h5"
    bad.write_bytes(b"\x89HDF\r\n\x1a\nnot really a trace" * 20)
    subst = {"{demo}": str(DEMO), "{bad}": str(bad)}
    argv = [subst.get(a, a) for a in argv]
    for k, v in subst.items():
        message = message.replace(k, v)
    # No display at all: the refusal comes from the checks, before the display is even looked at.
    r = view(*argv, env=bare_env())
    assert r.returncode == 2 and r.stdout == ""
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(message), lines
    assert "no display" not in lines[0]


def test_view_solver_options_reach_the_window(qtbot, tmp_path):
    from resweep.core.solve.settings import SolverSettings
    seen = run_window_and_look(tmp_path, str(DEMO), 40, 102, {"passes": 2, "precision": "float32"})
    assert seen["settings"] == seen["session_settings"] == SolverSettings(passes=2, precision="float32")
