"""The viewer window driven as a user would: keys, clicks, panels, settings, pictures, bad files.

Every number the window shows is compared with the core computed here, in the test, from the
trace file (``core.solve_rows`` / ``core.check_trace``), never with values copied from the app.
"""
from __future__ import annotations

import re
import shlex
import threading

import numpy as np
import pytest
from PyQt6.QtCore import QMimeData, QPoint, QPointF, Qt, QTimer, QUrl
from PyQt6.QtGui import QDropEvent, QGuiApplication
from PyQt6.QtWidgets import QApplication, QMessageBox

from conftest import DEMO, LOAD_TIMEOUT, make_window, open_and_wait
from resweep.app.cli.main import build_parser
from resweep.app.viewer import worker as worker_module
from resweep.core.check.kinds import KINDS
from resweep.core.check.stream import check_trace
from resweep.core.errors import TraceFormatError
from resweep.core.check.rows import solve_rows
from resweep.core.solve.settings import SolverSettings
from resweep.core.format.reader import open_trace

pytestmark = pytest.mark.gui
DASHER_COL = 1  # column of entity 102 in the demo
LABELS = ("start", "motion", "recorded end", "reference end", "difference", "half extents")


def core_row(path, frame, col, settings=SolverSettings()):
    """The core's re-solve of one entity-frame, as RowResults of one row."""
    with open_trace(path) as tr:
        world = tr.world()
        world.advance_to(frame)
        b = tr.frames(frame, frame + 1)
        return solve_rows(world, b.start[0, [col]], b.motion[0, [col]], b.end[0, [col]], b.half[0, [col]], settings)


def core_flags(path, settings=SolverSettings()):
    """int32 (F, N) flags of the whole trace from core.check_trace."""
    with open_trace(path) as tr:
        out = np.zeros((tr.frame_count, tr.entity_count), np.int32)

        def keep(b):
            out[b.frame, b.column] = b.rows.flags
        check_trace(tr, settings, limit=0, on_block=keep)
    return out


def panel_numbers(text: str) -> dict[str, list[float]]:
    """The rows of the Frame panel's plain text: label -> the numbers on that line."""
    out = {}
    for line in text.splitlines():
        for label in LABELS:
            if line.startswith(label + " "):
                out[label] = [float(x) for x in line[len(label):].split()]
    return out


def press(qtbot, win, key, mod=Qt.KeyboardModifier.NoModifier):
    """A key typed by the user: it goes to whichever widget has the keyboard focus."""
    qtbot.keyClick(QApplication.focusWidget() or win, key, mod)


def test_first_frame_is_on_screen_before_any_background_result(qtbot, window, long_trace):
    seen = {}

    def on_loaded(session, path):  # runs right after the window adopted the trace
        seen["state"] = window.state is not None
        seen["text"] = window.frame_panel.toPlainText()
        seen["solved"] = int(window.flags.solved.sum())
    window.worker.loaded.connect(on_loaded)
    fractions = []
    window.worker.progress.connect(lambda d, t: fractions.append(d / t))
    open_and_wait(qtbot, window, long_trace)
    assert seen["state"] and "reference end" in seen["text"]
    assert seen["solved"] == 0  # nothing re-solved yet, the frame is already shown
    # Marks filled in over several streamed blocks, and they match the core's own check.
    assert len(fractions) >= 3 and fractions == sorted(fractions) and fractions[-1] == 1.0
    want = core_flags(long_trace)
    assert (window.flags.flags == want).all()


def test_step_and_jump_to_next_divergence_with_keys(qtbot, demo_window):
    win = demo_window
    flags = core_flags(DEMO)
    win.pb.set_focus(DASHER_COL)  # jumps follow the focused entity (the dasher, id 102)
    own = np.flatnonzero(flags[:, DASHER_COL] != 0)
    press(qtbot, win, Qt.Key.Key_Home)
    assert win.pb.frame == 0
    press(qtbot, win, Qt.Key.Key_Right)
    press(qtbot, win, Qt.Key.Key_Right)
    assert win.pb.frame == 2
    press(qtbot, win, Qt.Key.Key_Left)
    assert win.pb.frame == 1
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == own[own > 1][0]
    press(qtbot, win, Qt.Key.Key_End)
    press(qtbot, win, Qt.Key.Key_Left, Qt.KeyboardModifier.ShiftModifier)
    assert win.pb.frame == own[own < win.pb.frame_count - 1][-1]
    # Filtered to one kind: the dasher's tunneling at frame 40 is its first tunneling.
    tun = np.flatnonzero(flags[:, DASHER_COL] & (1 << KINDS.index("tunneling")))
    win.timeline.kind_box.setCurrentIndex(win.timeline.kind_box.findData("tunneling"))
    press(qtbot, win, Qt.Key.Key_Home)
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == tun[0] == 40
    # It is the only tunneling of the trace: the next key press stays there.
    assert len(tun) == 1
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == 40
    assert win.pb.focus == DASHER_COL
    # Another kind, with the focus cleared (U): the next penetration of any entity after frame 40.
    pen = np.flatnonzero((flags & (1 << KINDS.index("penetration"))).any(axis=1))
    win.timeline.kind_box.setCurrentIndex(win.timeline.kind_box.findData("penetration"))
    press(qtbot, win, Qt.Key.Key_U)
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == pen[pen > 40][0]


def test_frame_panel_shows_the_core_numbers(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    col = 1
    assert window.pb.frame == 40 and window.pb.focus == col
    row = core_row(DEMO, 40, col)
    with open_trace(DEMO) as tr:
        b = tr.frames(40, 41)
        start, motion, rec = (np.asarray(a[0, col], np.float64) for a in (b.start, b.motion, b.end))
    got = panel_numbers(window.frame_panel.toPlainText())
    ref = row.ref_end[0]
    expect = {"start": start, "motion": list(motion) + [np.linalg.norm(motion)], "recorded end": rec,
              "reference end": ref, "difference": list(rec - ref) + [np.linalg.norm(rec - ref)]}
    for label, want in expect.items():
        assert np.allclose(got[label], want, atol=5e-7, rtol=0), label  # six decimals shown
    text = window.frame_panel.toPlainText()
    assert "tunneling" in text
    # Per pass: time of impact, normal, hit voxel, block name and candidates tested.
    lines = [ln for ln in text.splitlines() if re.match(r"^\d\s", ln)]
    assert len(lines) == int(row.npass[0])
    first = lines[0].split()
    assert float(first[1]) == pytest.approx(float(row.toi[0, 0]), abs=5e-7)
    assert [int(x) for x in first[2:5]] == row.normal[0, 0].tolist()
    assert [int(x) for x in first[5:8]] == row.voxel[0, 0].tolist()
    with open_trace(DEMO) as tr:
        assert tr.shapes.name(int(row.block[0, 0])) in lines[0]
    assert int(first[-1]) == int(row.candidates[0, 0])


def test_frame_panel_after_many_steps_holds_what_a_fresh_panel_shows(qtbot, window):
    """The panel replaces its text in place on each step (no emptying in between); after frames
    of every sort (a divergence, an agreeing row, an inactive one, nothing focused) its document is
    the one a newly made panel shows for the same facts."""
    from resweep.app.viewer.panels import FramePanel, facts_html, legend_html
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    panel = window.frame_panel
    for frame in (41, 42, 5, 77, 200, 40):
        window.pb.set_frame(frame)
        qtbot.waitUntil(lambda: window.state is not None and window.state.frame == frame, timeout=LOAD_TIMEOUT)
        qtbot.wait(10)
        assert panel.facts is not None and panel.facts.frame == frame
        fresh = FramePanel()
        fresh.setHtml(facts_html(panel.facts) + legend_html(list(window.viewport.legend) + list(window.viewport.block_legend)))
        assert panel.toHtml() == fresh.toHtml(), frame
    panel.show_facts(None, "nothing focused")
    fresh = FramePanel()
    fresh.setHtml(facts_html(None, "nothing focused"))
    assert panel.toHtml() == fresh.toHtml()


def test_frame_panel_scroll_bar_stays_up_while_stepping(qtbot, window):
    """A panel too narrow for its numbers keeps its scroll bar while the frames change: it neither
    hides nor shows again on each step (which made the whole window lay itself out anew)."""
    from PyQt6.QtCore import QEvent, QObject

    from resweep.app.viewer.panels import FramePanel
    from resweep.app.viewer.report_md import frame_facts
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    panel = FramePanel()
    qtbot.addWidget(panel)
    panel.resize(160, 200)
    panel.show()
    qtbot.waitExposed(panel)
    s = window.session
    steps = [frame_facts(s, s.frame_state(f), 1) for f in (40, 41, 42, 43, 44, 45)]
    panel.show_facts(steps[0])
    qtbot.wait(10)
    assert panel.horizontalScrollBar().isVisible()
    flips = []

    class Flips(QObject):
        def eventFilter(self, obj, ev):
            if ev.type() in (QEvent.Type.Show, QEvent.Type.Hide):
                flips.append(ev.type())
            return False
    watch = Flips()
    panel.horizontalScrollBar().installEventFilter(watch)
    for facts in steps[1:]:
        panel.show_facts(facts)
        qtbot.wait(5)
    assert flips == []
    assert panel.horizontalScrollBar().isVisible()


def _passes_sensitive_row():
    """First (frame, col) of the demo whose reference end moves when passes go 3 -> 1 (core)."""
    ends = {}
    for p in (3, 1):
        with open_trace(DEMO) as tr:
            out = np.full((tr.frame_count, tr.entity_count, 3), np.nan)

            def keep(b):
                out[b.frame, b.column] = b.rows.ref_end
            check_trace(tr, SolverSettings(passes=p), limit=0, on_block=keep)
            ends[p] = out
    moved = np.abs(ends[3] - ends[1]).max(axis=-1) > 1e-3
    f, c = np.argwhere(np.nan_to_num(moved))[0]
    return int(f), int(c)


def test_changing_passes_changes_the_reference_end_and_resolves_the_trace(qtbot, demo_window):
    win = demo_window
    frame, col = _passes_sensitive_row()
    win.pb.set_focus(col)
    win.pb.set_frame(frame)
    before = panel_numbers(win.frame_panel.toPlainText())["reference end"]
    assert np.allclose(before, core_row(DEMO, frame, col).ref_end[0], atol=5e-7)
    win.settings_panel.passes.setFocus()
    win.settings_panel.passes.setValue(1)  # what the arrows / Enter in the spin box do
    assert win.pb.settings.passes == 1
    after = panel_numbers(win.frame_panel.toPlainText())["reference end"]  # the current frame: at once
    want = core_row(DEMO, frame, col, SolverSettings(passes=1)).ref_end[0]
    assert np.allclose(after, want, atol=5e-7) and not np.allclose(after, before, atol=1e-3)
    # ... and the whole trace in the background.
    qtbot.waitUntil(lambda: win.flags.complete and not win.worker.is_busy(), timeout=LOAD_TIMEOUT)
    assert (win.flags.flags == core_flags(DEMO, SolverSettings(passes=1))).all()


def test_skin_change_moves_the_reference_end_by_the_skin(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    before = panel_numbers(window.frame_panel.toPlainText())["reference end"]
    window.settings_panel.skin.setValue(0.25)
    after = panel_numbers(window.frame_panel.toPlainText())["reference end"]
    want = core_row(DEMO, 40, 1, SolverSettings(skin=0.25)).ref_end[0]
    assert np.allclose(after, want, atol=5e-7)
    # Worked by hand: the dasher stops against the wall's -x face, so the skin shifts x only.
    assert before[0] - after[0] == pytest.approx(0.25 - 0.001, abs=1e-6)


def grab(win):
    """The view's full-quality picture now (a step paints a draft first: view_paint.py)."""
    win.view_paint.full()
    win.plotter.render()
    return np.asarray(win.plotter.screenshot(return_img=True), np.int16)


def test_viewport_picture_changes_between_frames_without_rebuilding_voxels(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=39, entity=102)
    a = grab(window)
    press(qtbot, window, Qt.Key.Key_Right)
    assert window.pb.frame == 40
    b = grab(window)
    diff = np.abs(a - b).max(axis=-1)
    assert (diff > 30).mean() > 0.01  # the dash's swept volume and hit face appear
    for _ in range(5):  # frames 41..45: chunks met for the first time are meshed once
        press(qtbot, window, Qt.Key.Key_Right)
    builds = window.viewport.chunk_builds
    for key in [Qt.Key.Key_Left] * 6 + [Qt.Key.Key_Right] * 6:  # 45 -> 39 -> 45, no world edit between
        press(qtbot, window, key)
    assert window.pb.frame == 45 and window.viewport.chunk_builds == builds
    assert a.shape[2] == 3 and a.std() > 5  # a real picture, not a blank


def test_stepping_into_a_long_story_backs_the_camera_off_to_show_it(qtbot, window):
    """Stepping keeps the camera's direction and follows the focus; when a frame's story does not
    fit (the dash at frame 40 ends 50 voxels on, through the plank wall), the camera backs off
    along its direction until the start box and the recorded end are both in the view. The
    positions come from the trace file read here, projected by the view's camera."""
    open_and_wait(qtbot, window, DEMO, frame=38, entity=102)
    cam = window.plotter.camera
    before = np.asarray(cam.position) - np.asarray(cam.focal_point)
    for _ in range(2):
        press(qtbot, window, Qt.Key.Key_Right)
    assert window.pb.frame == 40
    with open_trace(DEMO) as tr:
        b = tr.frames(40, 41)
        start, rec = np.asarray(b.start[0, DASHER_COL], float), np.asarray(b.end[0, DASHER_COL], float)
    assert np.linalg.norm(rec - start) > 40  # the long story
    after = np.asarray(cam.position) - np.asarray(cam.focal_point)
    assert np.allclose(after / np.linalg.norm(after), before / np.linalg.norm(before))  # same direction
    assert np.linalg.norm(after) > np.linalg.norm(before)  # further back
    w, h = window.plotter.width(), window.plotter.height()
    for point in (start, rec):
        x, y = window.viewport.project(point)
        assert 0 <= x < w and 0 <= y < h, (point, x, y)


def expected_caption(frame: int, eid: int) -> list[str]:
    """The caption of the dasher's picture written out from the core's check (not from caption.py):
    file and frame; entity, name and the first reference hit; the kind in words (label and meaning
    from the kinds table, its one definition) with its error and axis; the settings."""
    import textwrap
    from resweep.core.check.kinds import BY_NAME
    with open_trace(DEMO) as tr:
        rep = check_trace(tr, SolverSettings(), limit=10 ** 6)
        name, last, t = tr.names[tr.entity_index(eid)], tr.frame_count - 1, float(tr.time[frame])
    d = [d for d in rep.divergences if d.frame == frame and d.entity == eid][0]
    who = f"entity {eid} {name}"
    hits = [p["voxel"] for p in d.passes if p["voxel"] is not None]
    if hits:  # the dasher's dash stops at the demo's plank wall (core/demo/quarry.py)
        who += f"   reference stops at plank wall ({hits[0][0]}, {hits[0][1]}, {hits[0][2]})"
    axis = "xyz"[int(np.argmax(np.abs(np.subtract(d.recorded_end, d.reference_end))))]
    k = BY_NAME[d.kind]
    kind = f"{k.label.upper()} ({d.kind}, {d.severity}): {d.error:.4g} world units = {d.error:.4g} voxels along {axis}"
    settings = "reference: sweep and slide, 3 passes, skin 0.001, tolerance 0.01 voxels, float64"  # the defaults
    return ([f"quarry.h5   frame {frame} of 0..{last}   t = {t:.3f} s", who, kind]
            + textwrap.wrap("what it means: " + k.meaning, 96) + [settings])


def test_saved_picture_has_the_caption_band_that_says_what_is_shown(qtbot, window, tmp_path):
    from PIL import Image, ImageDraw, ImageFont
    from resweep.app.scene.caption import BAND_RGB, TEXT_RGB
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    view = grab(window)[..., :3].astype(np.uint8)
    (tmp_path / "pics").mkdir()
    out = tmp_path / "pics" / "pic.png"
    assert window.save_picture(str(out))
    saved = np.asarray(Image.open(out).convert("RGB"))
    H, W = view.shape[:2]
    assert saved.shape[1] == W and np.array_equal(saved[:H], view)  # the view, then the band below it
    band = saved[H:]
    # The text drawn here from the layout documented in app/scene/caption.py (not its code), for a
    # picture a third taller than the view (picture.compose), with the core's text.
    lines = expected_caption(40, 102)
    fs = int(np.clip(round(min(0.03 * (H + H // 3), 0.018 * W)), 10, 30))
    pad, line_h = max(3, fs // 2), int(round(1.3 * fs))
    font = ImageFont.load_default(size=fs)
    want = Image.new("RGB", (W, band.shape[0]), BAND_RGB)
    draw = ImageDraw.Draw(want)
    for i, text in enumerate(lines):
        draw.text((pad, pad + i * line_h), text, font=font, fill=TEXT_RGB)
    text_h = min(band.shape[0], pad + len(lines) * line_h)
    text_w = pad + max(int(np.ceil(font.getlength(t))) for t in lines)  # the legend starts beyond this
    want = np.asarray(want)[:text_h, :text_w]
    assert np.array_equal(band[:text_h, :text_w], want)
    assert (want != np.array(BAND_RGB, np.uint8)).any(axis=2).sum() > 500  # real text pixels compared
    # The comparison can fail: the next frame's saved band does not match this frame's text.
    window.pb.set_frame(41)
    assert window.save_picture(str(out))
    assert not np.array_equal(np.asarray(Image.open(out).convert("RGB"))[H:][:text_h, :text_w], want)
    assert [p.name for p in (tmp_path / "pics").iterdir()] == ["pic.png"]  # written whole, no temporary file left


def test_broken_file_shows_the_core_message_and_keeps_the_window(qtbot, demo_window, tmp_path, monkeypatch):
    win = demo_window
    bad = tmp_path / "garbage.h5"
    bad.write_bytes(b"\x89HDF\r\n\x1a\nthis is not really a trace" * 50)
    with pytest.raises(TraceFormatError) as info:
        open_trace(bad)
    shown = []
    monkeypatch.setattr(QMessageBox, "warning", lambda parent, title, text, *a, **k: shown.append(text))
    old = win.session
    win.pb.set_frame(40)
    win.open_path(bad)
    qtbot.waitUntil(lambda: bool(shown), timeout=LOAD_TIMEOUT)
    assert shown == [info.value.one_line()]
    assert "\n" not in shown[0] and str(bad) in shown[0]
    assert win.session is old and win.pb.frame == 40
    press(qtbot, win, Qt.Key.Key_Right)
    assert win.pb.frame == 41 and win.state.frame == 41


def test_copy_report_holds_the_numbers_and_commands_that_reproduce_the_view(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    press(qtbot, window, Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.ShiftModifier)
    md = QGuiApplication.clipboard().text()
    row = core_row(DEMO, 40, 1)
    assert "tunneling" in md and f"{row.ref_end[0, 0]:.6f}" in md
    assert f"{float(row.error[0, KINDS.index('tunneling')]):.6f}" in md
    cmds = [ln for ln in md.splitlines() if ln.startswith("resweep ")]
    assert shlex.split(cmds[0])[1:] == ["view", str(DEMO), "--frame", "40", "--entity", "102", "--tolerance", "0.01",
                                        "--skin", "0.001", "--passes", "3", "--precision", "float64",
                                        "--model", "slide", "--substep", "0.0", "--iterations", "4",
                                        "--step-height", "0.0"]
    parser = build_parser()
    for c in cmds:  # both commands parse with the real command line
        args = parser.parse_args(shlex.split(c)[1:])
        assert args.frame == 40 and args.entity == 102


def test_reproduce_lines_carry_the_solver_settings_in_use(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=40, entity=102)
    window.pb.update_settings(tolerance=0.05, skin=0.002, passes=2, precision="float32")
    md = window.report()
    cmds = [ln for ln in md.splitlines() if ln.startswith("resweep ")]
    assert [shlex.split(c)[1] for c in cmds] == ["view", "snapshot"]
    parser = build_parser()
    for c in cmds:  # each command, parsed by the real command line, asks for the same settings
        args = parser.parse_args(shlex.split(c)[1:])
        got = SolverSettings(args.tolerance, args.skin, args.passes, args.precision)
        assert got == window.pb.settings == SolverSettings(0.05, 0.002, 2, "float32")
        assert args.frame == 40 and args.entity == 102


def test_invalid_row_says_what_is_invalid_in_panel_and_report(qtbot, window):
    # Demo frame 77: the hopper (entity 105) records a NaN motion.x (core/demo/quarry.py).
    open_and_wait(qtbot, window, DEMO, frame=77, entity=105)
    with open_trace(DEMO) as tr:
        b = tr.frames(77, 78)
        assert np.isnan(b.motion[0, tr.entity_index(105), 0])
    text = window.frame_panel.toPlainText()
    assert "motion.x is NaN" in text and "reference: clear" not in text
    assert "reference: not solved (invalid row)" in text
    (motion_line,) = [ln for ln in text.splitlines() if ln.startswith("motion ")]
    assert motion_line.split()[1] == "NaN"
    md = window.report()
    assert "- `invalid` (error): motion.x is NaN" in md and "n/a" not in md.split("| quantity")[0]
    assert "Reference result: not solved (invalid row)" in md


def test_play_pause_advances_at_the_chosen_rate(qtbot, demo_window):
    win = demo_window
    press(qtbot, win, Qt.Key.Key_Home)
    press(qtbot, win, Qt.Key.Key_BracketRight)
    press(qtbot, win, Qt.Key.Key_BracketRight)
    assert win.pb.rate == 4.0
    press(qtbot, win, Qt.Key.Key_Space)
    assert win.pb.playing
    qtbot.waitUntil(lambda: win.pb.frame >= 20, timeout=20_000)
    press(qtbot, win, Qt.Key.Key_Space)
    assert not win.pb.playing
    f = win.pb.frame
    qtbot.wait(100)
    assert win.pb.frame == f


def test_timeline_click_zoom_and_strip(qtbot, demo_window):
    win = demo_window
    strip = win.timeline.strip
    x = int(strip.x_of(100) + 1)
    qtbot.mouseClick(strip, Qt.MouseButton.LeftButton, pos=QPoint(x, strip.height() // 2))
    assert win.pb.frame == 100
    # The pixel column holding frame 40 shows an error (the dasher's tunneling).
    px = int(strip.width() - 12)
    vals = strip.strip_values(px)
    k = int(40 * px // 240)
    assert 3 in vals[max(0, k - 1):k + 2]  # the column of frame 40, give or take a rounding
    # Right-drag over frames 30..60 zooms to them.
    a, b = int(strip.x_of(30) + 1), int(strip.x_of(60) + 1)
    y = strip.height() // 2
    qtbot.mousePress(strip, Qt.MouseButton.RightButton, pos=QPoint(a, y))
    from PyQt6.QtGui import QMouseEvent
    move = QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(b, y), QPointF(b, y), Qt.MouseButton.NoButton,
                       Qt.MouseButton.RightButton, Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(strip, move)
    qtbot.mouseRelease(strip, Qt.MouseButton.RightButton, pos=QPoint(b, y))
    assert (strip.view0, strip.view1) == (30, 61)
    strip.zoom(0.5, 45)
    assert 15 <= strip.view1 - strip.view0 <= 16 and strip.view0 <= 45 < strip.view1
    strip.reset_zoom()
    assert (strip.view0, strip.view1) == (0, 240)


def test_drop_a_trace_onto_the_window(qtbot, window):
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(DEMO))])
    ev = QDropEvent(QPointF(50, 50), Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton,
                    Qt.KeyboardModifier.NoModifier)
    with qtbot.waitSignal(window.worker.loaded, timeout=LOAD_TIMEOUT):
        window.dropEvent(ev)
    assert window.session.path == str(DEMO)


def test_shortcuts_dialog_lists_every_shortcut(qtbot, demo_window):
    win = demo_window
    seen = {}

    def inspect():
        dlg = QApplication.activeModalWidget()
        seen["rows"] = dlg.table.rowCount()
        seen["keys"] = {dlg.table.item(r, 2).text() for r in range(dlg.table.rowCount())}
        dlg.accept()
    QTimer.singleShot(200, inspect)
    press(qtbot, win, Qt.Key.Key_F1)
    with_keys = [a for a in win.actions_list if a.shortcuts()]
    assert seen["rows"] == len(with_keys) >= 20
    joined = " ".join(seen["keys"])
    for k in ("Space", "Home", "End", "Ctrl+S", "F1"):
        assert k in joined


def test_settings_layout_and_recent_files_are_remembered(qtbot, store):
    win = make_window(qtbot, store)
    open_and_wait(qtbot, win, DEMO)
    win.settings_panel.passes.setValue(2)
    win.close()
    again = make_window(qtbot, store)
    assert again.pb.settings.passes == 2
    assert again.recent()[0] == str(DEMO.resolve())
    assert again.recent_menu.actions()[0].text().endswith(str(DEMO.resolve()))


def test_cancel_and_close_stop_the_background_solve(qtbot, window, long_trace, monkeypatch):
    # The solve waits after its first block until Escape has been pressed: on a quiet machine the
    # whole trace can otherwise be solved before the key press arrives, and nothing is left to cancel.
    pressed = threading.Event()
    real = worker_module.resolve_trace
    reports = []

    def held(path, settings, on_rows, on_progress=None, should_stop=None, **kw):
        def progress(done, total):
            on_progress(done, total)
            pressed.wait(30)
        reports.append(real(path, settings, on_rows, progress, should_stop=should_stop, **kw))
        return reports[-1]

    monkeypatch.setattr(worker_module, "resolve_trace", held)
    with qtbot.waitSignal(window.worker.loaded, timeout=LOAD_TIMEOUT):
        window.open_path(long_trace)
    job = window.worker._solve
    assert job is not None
    with qtbot.waitSignal(window.worker.progress, timeout=LOAD_TIMEOUT):
        pass
    press(qtbot, window, Qt.Key.Key_Escape)
    pressed.set()
    assert not window.worker.is_busy()
    solved = int(window.flags.solved.sum())
    qtbot.wait(300)
    assert int(window.flags.solved.sum()) == solved < window.flags.frame_count  # late blocks dropped
    job.thread.join(30)
    assert not job.thread.is_alive()
    assert len(reports) == 1 and reports[0].cancelled  # the solve itself stopped, not only its signals
    # Closing while a solve runs joins its thread.
    window.settings_panel.passes.setValue(2)
    job = window.worker._solve
    window.close()
    assert not job.thread.is_alive()


def test_selecting_an_entity_focuses_it_and_diverging_only_hides_the_clean_ones(qtbot, window):
    open_and_wait(qtbot, window, DEMO, frame=60, entity=102)
    flags = core_flags(DEMO)
    before = grab(window)
    table = window.entities.table
    rect = table.visualItemRect(table.item(2, 1))  # climber
    qtbot.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert window.pb.focus == 2
    assert window.frame_panel.toPlainText().startswith("103 climber")
    assert np.abs(grab(window) - before).max(axis=-1).mean() > 5  # the camera moved to the climber
    window.entities.only_diverging.setChecked(True)
    hidden = [r for r in range(table.rowCount()) if table.isRowHidden(r)]
    assert hidden == [c for c in range(flags.shape[1]) if not flags[:, c].any()] == [3]  # the crate
    # Counts per kind are the core's.
    for c in range(flags.shape[1]):
        for k, kind in enumerate(KINDS):
            n = int(np.count_nonzero(flags[:, c] & (1 << k)))
            assert table.item(c, 2 + k).text() == (str(n) if n else "·")


def test_letter_keys_in_the_viewport_are_the_windows_not_vtks(qtbot, demo_window):
    win = demo_window
    win.plotter.setFocus()
    qtbot.waitUntil(lambda: QApplication.focusWidget() is win.plotter, timeout=5000)
    before = grab(win)
    for key in (Qt.Key.Key_Q, Qt.Key.Key_S, Qt.Key.Key_R):  # VTK would quit / restyle / reset here
        qtbot.keyClick(win.plotter, key)
    assert win.isVisible() and np.array_equal(grab(win), before)
    qtbot.keyClick(win.plotter, Qt.Key.Key_Right)  # window shortcuts still work from the viewport
    assert win.pb.frame == 1
