"""Bug-hunt navigation in the real window: jumps per focused entity and kind, the Entities
table's counts, go to frame or time, bookmarks in a sidecar, measuring, turntable, Frame panel
columns, animated export.

Expected frames come from ``core.check_trace`` run here on the trace file, never from the app.
"""
from __future__ import annotations

import hashlib
import json
import os
import shutil

import numpy as np
import pytest
from PIL import Image
from PyQt6.QtCore import QPoint, Qt
from PyQt6.QtWidgets import QApplication

from conftest import DEMO, make_window, open_and_wait
from test_window import core_flags, panel_numbers, press
from resweep.core.check.kinds import KINDS
from resweep.core.format.writer import write_trace
from resweep.app.viewer.bookmarks import Bookmarks, sidecar_path

pytestmark = pytest.mark.gui
HOPPER, DASHER = 4, 1  # columns of entities 105 and 102 in the demo
BIT = {k: 1 << i for i, k in enumerate(KINDS)}


@pytest.fixture(scope="module")
def flags():
    return core_flags(DEMO)


def test_next_divergence_stays_on_the_focused_entity_and_kind(qtbot, demo_window, flags):
    win = demo_window
    win.pb.set_focus(HOPPER)
    win.timeline.kind_box.setCurrentIndex(win.timeline.kind_box.findData("penetration"))
    want = np.flatnonzero(flags[:, HOPPER] & BIT["penetration"])
    others = np.flatnonzero((flags[:, [c for c in range(flags.shape[1]) if c != HOPPER]]
                             & BIT["penetration"]).any(axis=1))
    assert len(want) >= 2 and (others < want[0]).any()  # another entity's penetration comes first
    win.pb.set_frame(0)
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == want[0] and win.pb.focus == HOPPER
    assert "penetration" in win.frame_panel.toPlainText()
    assert "agrees" not in win.frame_panel.toPlainText()
    press(qtbot, win, Qt.Key.Key_N)
    assert win.pb.frame == want[1]
    press(qtbot, win, Qt.Key.Key_P)
    assert win.pb.frame == want[0] and win.pb.focus == HOPPER


def test_focus_follows_the_jump_when_none_is_focused(qtbot, demo_window, flags):
    win = demo_window
    win.pb.set_frame(0)
    press(qtbot, win, Qt.Key.Key_U)  # clear the focus
    assert win.pb.focus is None
    press(qtbot, win, Qt.Key.Key_N)
    f = np.flatnonzero((flags != 0).any(axis=1))
    f = f[f > 0][0]
    assert win.pb.frame == f
    assert win.pb.focus == np.flatnonzero(flags[f] != 0)[0]


def test_clicking_a_count_jumps_to_that_entitys_first_divergence_of_that_kind(qtbot, demo_window, flags):
    win = demo_window
    table = win.entities.table
    col = 2 + KINDS.index("snag")
    row = 4  # the hopper
    want = np.flatnonzero(flags[:, row] & BIT["snag"])[0]
    assert table.item(row, col).text() == str(np.count_nonzero(flags[:, row] & BIT["snag"]))
    rect = table.visualItemRect(table.item(row, col))
    qtbot.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert win.pb.frame == want and win.pb.focus == row and win.pb.kind == "snag"


def test_go_to_frame_and_time_from_the_field(qtbot, demo_window):
    win = demo_window
    press(qtbot, win, Qt.Key.Key_G, Qt.KeyboardModifier.ControlModifier)
    field = win.hunt.goto_field
    assert QApplication.focusWidget() is field
    qtbot.keyClicks(field, "123")
    qtbot.keyClick(field, Qt.Key.Key_Return)
    assert win.pb.frame == 123
    field.clear()
    qtbot.keyClicks(field, "2.5s")  # the demo runs at 60 frames a second: frame 150 is at 2.5 s
    qtbot.keyClick(field, Qt.Key.Key_Return)
    assert win.pb.frame == 150
    field.clear()
    qtbot.keyClicks(field, "9999")
    qtbot.keyClick(field, Qt.Key.Key_Return)
    assert win.pb.frame == 150 and "out of range" in win.status_label.text()


def test_bookmarks_are_saved_beside_the_trace_and_read_back(qtbot, store, tmp_path):
    trace = tmp_path / "hunt.h5"
    shutil.copy(DEMO, trace)
    before = hashlib.sha256(trace.read_bytes()).digest()
    win = make_window(qtbot, store)
    open_and_wait(qtbot, win, trace, frame=40, entity=102, solved=False)
    panel = win.hunt.panel
    qtbot.keyClicks(panel.note, "dash goes through the plank wall")
    qtbot.mouseClick(panel.add, Qt.MouseButton.LeftButton)
    win.pb.set_frame(77)
    win.pb.set_focus(HOPPER)
    assert win.hunt.bookmark("NaN end | check recorder")
    side = sidecar_path(trace)
    data = json.loads(side.read_text(encoding="utf-8"))
    assert data["bookmarks"] == [{"frame": 40, "entity": 102, "note": "dash goes through the plank wall"},
                                 {"frame": 77, "entity": 105, "note": "NaN end | check recorder"}]
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []
    assert hashlib.sha256(trace.read_bytes()).digest() == before  # the trace is never written
    report = win.report()
    assert "| 40 | 0.666667 | 102 | dash goes through the plank wall |" in report
    assert "| 77 | 1.283333 | 105 | NaN end \\| check recorder |" in report
    # A second window reads them back, and double-clicking one goes there.
    win2 = make_window(qtbot, store)
    open_and_wait(qtbot, win2, trace, solved=False)
    items = [win2.hunt.panel.list.item(i).text() for i in range(win2.hunt.panel.list.count())]
    assert items == ["frame 40 · entity 102 — dash goes through the plank wall",
                     "frame 77 · entity 105 — NaN end | check recorder"]
    lst = win2.hunt.panel.list
    at = lst.visualItemRect(lst.item(1)).center()
    qtbot.mouseClick(lst.viewport(), Qt.MouseButton.LeftButton, pos=at)  # a double click starts with a press
    qtbot.mouseDClick(lst.viewport(), Qt.MouseButton.LeftButton, pos=at)
    assert win2.pb.frame == 77 and win2.pb.focus == HOPPER


def test_sidecar_write_is_atomic(tmp_path, monkeypatch):
    trace = tmp_path / "t.h5"
    trace.write_bytes(b"not read here")
    bm = Bookmarks(trace)
    bm.set(3, 7, "first")
    old = sidecar_path(trace).read_bytes()

    def broken(src, dst):
        raise OSError(28, "No space left on device")
    monkeypatch.setattr(os, "replace", broken)
    from resweep.app.viewer.bookmarks import BookmarkError
    with pytest.raises(BookmarkError, match="No space left on device"):
        bm.set(4, 7, "second")
    assert sidecar_path(trace).read_bytes() == old  # the old file is whole
    assert sorted(p.name for p in tmp_path.iterdir()) == ["t.h5", "t.h5.bookmarks.json"]  # no temp left
    monkeypatch.undo()
    sidecar_path(trace).write_text("{not json", encoding="utf-8")
    with pytest.raises(BookmarkError, match="cannot read bookmarks"):
        Bookmarks(trace).load()


def test_measuring_two_picked_points(qtbot, window):
    win = open_and_wait(qtbot, window, DEMO, frame=40, entity=102, solved=False)
    vp = win.viewport
    win.plotter.render()
    # Two points on the top of the floor (y = 4, the dasher's feet), two voxels apart along x.
    a, b = np.array([16.5, 4.0, 12.5]), np.array([18.5, 4.0, 12.5])
    pa, pb_ = (vp.project(p) for p in (a, b))
    press(qtbot, win, Qt.Key.Key_M)
    assert win.hunt.measuring
    for x, y in (pa, pb_):
        qtbot.mouseClick(win.plotter, Qt.MouseButton.LeftButton, pos=QPoint(int(round(x)), int(round(y))))
    got = np.array(win.hunt.picked)
    assert got.shape == (2, 3)
    # The picks land on the floor's top plane, within a pixel's worth of the aimed points.
    assert np.allclose(got[:, 1], 4.0, atol=1e-4)
    assert np.allclose(got, [a, b], atol=0.15)
    d = float(np.linalg.norm(got[1] - got[0]))
    assert f"distance {d:.6g} world units = {d:.6g} voxels" in win.hunt.last_measure
    assert "measure: distance" in win.status_label.text()


def test_turntable_keeps_the_horizon_level(qtbot, window):
    win = open_and_wait(qtbot, window, DEMO, frame=40, entity=102, solved=False)
    cam = win.plotter.camera
    p0, f0 = np.array(cam.position), np.array(cam.focal_point)
    press(qtbot, win, Qt.Key.Key_L)
    p1, f1 = np.array(cam.position), np.array(cam.focal_point)
    assert np.allclose(cam.up, [0, 1, 0])  # y up trace: the view up stays the up axis
    assert p1[1] == pytest.approx(p0[1]) and f1[1] == pytest.approx(f0[1])  # heights unchanged
    lo, hi = win.viewport._interest
    c = (lo + hi) / 2
    r0, r1 = np.hypot(*(p0 - c)[[0, 2]]), np.hypot(*(p1 - c)[[0, 2]])
    assert r1 == pytest.approx(r0)  # orbit about the story's centre
    ang = np.degrees(np.arctan2((p1 - c)[2], (p1 - c)[0]) - np.arctan2((p0 - c)[2], (p0 - c)[0]))
    assert abs((abs(ang) + 180) % 360 - 180) == pytest.approx(15.0, abs=1e-6)
    d0 = np.linalg.norm(p1 - f1)
    press(qtbot, win, Qt.Key.Key_Plus)
    assert np.linalg.norm(np.array(cam.position) - np.array(cam.focal_point)) == pytest.approx(d0 / 1.25)


def test_world_radius_around_the_story_can_be_changed(qtbot, window):
    win = open_and_wait(qtbot, window, DEMO, frame=40, entity=102, solved=False)
    vox = win.viewport._meshes["voxels"]
    n0 = vox.n_cells
    press(qtbot, win, Qt.Key.Key_Up, Qt.KeyboardModifier.ControlModifier)
    assert win.view_options.cutaway_radius == 12.0
    assert vox.n_cells > n0  # more floor drawn around the dash
    press(qtbot, win, Qt.Key.Key_Down, Qt.KeyboardModifier.ControlModifier)
    press(qtbot, win, Qt.Key.Key_Down, Qt.KeyboardModifier.ControlModifier)
    assert win.view_options.cutaway_radius == 4.0 and vox.n_cells < n0


@pytest.fixture
def far_trace(tmp_path):
    """float32 trace 65,536 voxels from the origin; entity 20's recorded end is NaN at frame 1."""
    from trace_factory import floor_world
    origin, blocks = floor_world()
    F, N = 2, 2
    start = np.zeros((F, N, 3), np.float32)
    start[:, 0] = [65536.25, 65536.5, 65536.75]
    start[:, 1] = [65530.125, 65536.5, 65536.0]
    motion = np.full((F, N, 3), 0.125, np.float32)
    end = start + motion
    end[1, 1] = np.nan
    path = tmp_path / "far.h5"
    write_trace(path, chunk_size=8, chunk_origin=origin, chunk_blocks=blocks, entity_ids=np.array([10, 20]),
                half_extents=np.full((N, 3), 0.5), time=np.arange(F) / 60.0, start=start, motion=motion, end=end)
    return path


def test_frame_panel_columns_stay_apart_far_from_the_origin_and_name_nan(qtbot, window, far_trace):
    win = open_and_wait(qtbot, window, far_trace, frame=0, entity=10, solved=False)
    text = win.frame_panel.toPlainText()
    nums = panel_numbers(text)
    assert nums["start"] == pytest.approx([65536.25, 65536.5, 65536.75])
    head = next(ln for ln in text.splitlines() if ln.rstrip().endswith("|v|"))
    row = next(ln for ln in text.splitlines() if ln.startswith("start "))
    assert head.index("x") + 1 == row.index("65536.250000") + len("65536.250000")  # right-aligned under x
    win.pb.set_focus(1)
    win.pb.set_frame(1)
    text = win.frame_panel.toPlainText()
    rec = next(ln for ln in text.splitlines() if ln.startswith("recorded end"))
    assert rec.split()[2:] == ["NaN", "NaN", "NaN"]
    assert "NaN in: recorded end x, y, z" in text


def test_export_animation_writes_a_gif_of_the_range(qtbot, window, tmp_path):
    win = open_and_wait(qtbot, window, DEMO, frame=40, entity=102, solved=False)
    out = tmp_path / "dash.gif"
    assert win.hunt.export(38, 41, out, size=(320, 200))
    im = Image.open(out)
    assert im.n_frames == 4 and im.size == (320, 200)
    assert win.hunt.progress.maximum() == 4
    assert f"saved {out} (4 frames)" in win.status_label.text()
    # Frames differ (the entity moves), and the file replaced nothing but itself.
    im.seek(0)
    a = np.asarray(im.convert("RGB"))
    im.seek(3)
    b = np.asarray(im.convert("RGB"))
    assert (a != b).any(axis=2).mean() > 0.01
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith("dash")] == ["dash.gif"]  # no temp file left
