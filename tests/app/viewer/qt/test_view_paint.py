"""Scrubbing: the 3-D view paints drafts while the frame changes and leaves the full picture.

The picture on screen is read back from the render window without rendering again (the front
buffer, what the widget shows); the reference is a full-quality render of the same frame made
here. The Entities panel's per-frame marks are checked against the core's flags of that frame.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core.check.kinds import kinds_of

from test_window import core_flags
from conftest import DEMO

pytestmark = pytest.mark.gui


def _counter(win):
    n = [0]
    win.plotter.render_window.AddObserver("EndEvent", lambda *_: n.__setitem__(0, n[0] + 1))
    return n


def _on_screen(win) -> np.ndarray:
    """uint8 (H, W, 3): the view's last rendered picture, not rendered again."""
    return np.array(win.plotter.image)[..., :3]


def test_scrub_paints_drafts_then_the_full_picture_of_the_last_frame(qtbot, demo_window):
    win = demo_window
    vp, rw = win.view_paint, win.plotter.render_window
    qtbot.waitUntil(lambda: not vp.draft, timeout=5000)
    samples = rw.GetMultiSamples()
    assert samples > 0  # the full picture is multisampled
    main = win.plotter.renderer
    bottom, top = main.GetBackground(), main.GetBackground2()
    assert main.GetGradientBackground() and bottom != top  # the full picture's background is a gradient
    renders = _counter(win)
    for f in (10, 20, 30, 45):
        seen = renders[0]
        win.pb.set_frame(f)
        qtbot.waitUntil(lambda: renders[0] > seen, timeout=10_000)  # each step is painted
        assert vp.draft and rw.GetMultiSamples() == 0
        # drafts: one colour, the gradient's middle
        assert not main.GetGradientBackground()
        assert np.allclose(main.GetBackground(), (np.array(bottom) + np.array(top)) / 2)
    draft = _on_screen(win)
    mid = (np.array(bottom) + np.array(top)) / 2 * 255
    assert np.abs(draft[2, 2] - mid).max() <= 2  # the top-left corner (sky) in the draft's one colour
    seen = renders[0]
    qtbot.waitUntil(lambda: not vp.draft and renders[0] > seen, timeout=10_000)  # the settle paint
    shown = _on_screen(win)
    assert win.state.frame == 45 and rw.GetMultiSamples() == samples
    assert main.GetGradientBackground() and main.GetBackground() == bottom and main.GetBackground2() == top
    assert np.abs(shown[2, 2] - np.array(top) * 255).max() <= 3  # the gradient is back: its top colour there
    vp.full()
    win.plotter.render()
    full = _on_screen(win)
    assert shown.shape == full.shape and shown.std() > 5
    assert np.array_equal(shown, full)
    # the drafts really are drawn another way, so the equality above could have failed
    assert not np.array_equal(draft, full)


def test_saved_picture_during_a_scrub_is_full_quality(qtbot, demo_window):
    win = demo_window
    win.pb.set_frame(30)
    win.pb.set_frame(31)
    assert win.view_paint.draft
    pic = win.picture_array()
    assert not win.view_paint.draft and win.plotter.render_window.GetMultiSamples() == win.view_paint.full_samples
    win.plotter.render()
    again = win.picture_array()
    assert np.array_equal(pic, again)


def test_entities_panel_marks_follow_the_frame_when_only_changed_rows_are_restyled(qtbot, demo_window):
    win = demo_window
    flags = core_flags(DEMO)
    table = win.entities.table
    for f in (5, 6, 60, 61, 120, 3):
        win.pb.set_frame(f)
        qtbot.waitUntil(lambda: win.state is not None and win.state.frame == f, timeout=10_000)
        active = win.state.active
        for r in range(table.rowCount()):
            it = table.item(r, win.entities.NAME)
            kinds = kinds_of(int(flags[f, r])) if active[r] else []
            assert it.font().bold() == bool(kinds), (f, r)
            assert it.font().italic() == (not active[r]), (f, r)
            want = ", ".join(kinds) if kinds else "agrees" if active[r] else "inactive"
            assert it.toolTip() == "this frame: " + want, (f, r)


def test_entities_panel_counts_and_colours_after_the_cell_by_cell_refresh(qtbot, demo_window):
    from resweep.core.check.kinds import KINDS, SEVERITY, SEVERITY_RANK, kind_mask
    from resweep.app.viewer.timeline import SEVERITY_COLOURS
    win = demo_window
    flags = core_flags(DEMO)
    table = win.entities.table
    for r in range(table.rowCount()):
        worst = 0
        for k, kind in enumerate(KINDS):
            n = int(np.count_nonzero(flags[:, r] & kind_mask(kind)))
            cell = table.item(r, 2 + k)
            assert cell.text() == (str(n) if n else "·"), (r, kind)
            rank = SEVERITY_RANK[SEVERITY[kind]]
            want = SEVERITY_COLOURS[rank].name() if n else "#5d6a74"
            assert cell.foreground().color().name() == want, (r, kind)
            if n:
                worst = max(worst, rank)
        want_id = SEVERITY_COLOURS[worst].name() if worst else "#d9e2e8"
        assert table.item(r, win.entities.ID).foreground().color().name() == want_id, r
